"""MQTT subscription for buoys that publish their readings (paho-mqtt ≥ 2).

Each message on the feed's topic (wildcards allowed) is one ingest batch,
parsed as the feed's format says (JSON by default for buoys: one object or
a list of objects with the feed's columns). The origin recorded is
``mqtt://host:port/<message topic>``; with ``station_from_folder`` the
station is the topic level before the last one (``lake/<STATION>/readings``),
the way a folder names it for CSV files.

Subscriptions use QoS 1 with a persistent session (``clean_start`` off and a
fixed client id), so messages published while the service was down are
delivered on reconnect; ingest is idempotent, so a redelivered message is
counted as duplicates, never stored twice.
"""

from __future__ import annotations

import threading
from collections.abc import Callable

import paho.mqtt.client as mqtt

from monitor.ingest.batches import BatchResult, ingest_bytes


class MqttFeed:
    """A running subscription of one mqtt feed: ``start()``, then ``stop()``.

    on_batch: called with each :class:`BatchResult` (from paho's network
    thread). The engine must be safe to use from that thread (SQLAlchemy
    engines are).
    """

    def __init__(self, engine, config, feed, *, on_batch: Callable[[BatchResult], None] | None = None,
                 client_id: str | None = None, keepalive: int = 60):
        if feed.kind != "mqtt":
            raise ValueError(f"feed {feed.name!r} is a {feed.kind} feed, not mqtt")
        self.engine, self.config, self.feed = engine, config, feed
        self.on_batch = on_batch
        self.results: list[BatchResult] = []
        self.errors: list[str] = []
        self.subscribed = threading.Event()
        self._lock = threading.Lock()
        self.client = mqtt.Client(mqtt.CallbackAPIVersion.VERSION2,
                                  client_id=client_id or f"bloomline-{feed.name}",
                                  clean_session=False)
        self.keepalive = keepalive
        self.client.on_connect = self._on_connect
        self.client.on_subscribe = self._on_subscribe
        self.client.on_message = self._on_message
        self.client.reconnect_delay_set(min_delay=1, max_delay=120)  # back-off between reconnects [s]

    # paho callbacks ---------------------------------------------------
    def _on_connect(self, client, userdata, flags, reason_code, properties):
        if reason_code.is_failure:
            self.errors.append(f"connect refused: {reason_code}")
            return
        client.subscribe(self.feed.topic, qos=1)

    def _on_subscribe(self, client, userdata, mid, reason_codes, properties):
        self.subscribed.set()

    def _on_message(self, client, userdata, message):
        origin = f"mqtt://{self.feed.host}:{self.feed.port}/{message.topic}"
        try:  # the origin's path is the topic, so station_from_folder finds the station level
            result = ingest_bytes(self.engine, self.config, self.feed, bytes(message.payload), origin)
        except Exception as exc:  # never let one message kill the network thread
            self.errors.append(f"{type(exc).__name__}: {exc}")
            return
        with self._lock:
            self.results.append(result)
        if self.on_batch is not None:
            self.on_batch(result)

    # control ----------------------------------------------------------
    def start(self, timeout_s: float = 10.0) -> MqttFeed:
        """Connect, subscribe and run the network loop in a background thread; wait for the subscription."""
        self.client.connect(self.feed.host, self.feed.port, keepalive=self.keepalive)
        self.client.loop_start()
        if not self.subscribed.wait(timeout_s):
            self.stop()
            raise TimeoutError(f"no subscription to {self.feed.topic!r} on {self.feed.host}:{self.feed.port} "
                               f"within {timeout_s} s" + (f" ({self.errors[-1]})" if self.errors else ""))
        return self

    def stop(self) -> None:
        self.client.disconnect()
        self.client.loop_stop()

    def __enter__(self) -> MqttFeed:
        return self.start()

    def __exit__(self, *exc) -> None:
        self.stop()
