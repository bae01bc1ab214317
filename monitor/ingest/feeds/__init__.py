"""Feed readers: where payloads come from. Each hands bytes to :func:`monitor.ingest.batches.ingest_bytes`.

* :mod:`monitor.ingest.feeds.csv_folder` — a drop folder: each new file once, then archived;
* :mod:`monitor.ingest.feeds.http_pull` — CSV or JSON from a URL on a schedule, with
  conditional requests (ETag / Last-Modified), timeouts and back-off;
* :mod:`monitor.ingest.feeds.mqtt` — an MQTT subscription (paho-mqtt), one batch per message;
* the HTTP push endpoint lives in :mod:`web.push`.

:func:`poll_due` runs every pull-type feed that is due (the scheduler calls it
every few minutes); :func:`start_mqtt_feeds` starts the subscriptions once.
"""

from __future__ import annotations

import datetime as dt

from monitor.ingest.feeds.csv_folder import poll_folder
from monitor.ingest.feeds.http_pull import PullState, pull_feed
from monitor.ingest.feeds.mqtt import MqttFeed


def poll_due(engine, config, *, states: dict[str, PullState], now: dt.datetime | None = None,
             session=None, progress=None) -> list:
    """One round over the csv-folder and http-pull feeds; ``states`` keeps each pull feed's state between rounds."""
    results = []
    for feed in config.feeds:
        if feed.kind == "csv-folder":
            results.extend(poll_folder(engine, config, feed, progress=progress, now=now))
        elif feed.kind == "http-pull":
            state = states.setdefault(feed.name, PullState())
            result = pull_feed(engine, config, feed, state, now=now, session=session)
            if result is not None:
                results.append(result)
    return results


def start_mqtt_feeds(engine, config, *, on_batch=None, timeout_s: float = 10.0) -> list[MqttFeed]:
    """Start a subscription for every mqtt feed; stop each with ``.stop()`` at shutdown."""
    started = []
    try:
        for feed in config.feeds:
            if feed.kind == "mqtt":
                started.append(MqttFeed(engine, config, feed, on_batch=on_batch).start(timeout_s))
    except Exception:
        for sub in started:
            sub.stop()
        raise
    return started


__all__ = ["MqttFeed", "PullState", "poll_due", "poll_folder", "pull_feed", "start_mqtt_feeds"]
