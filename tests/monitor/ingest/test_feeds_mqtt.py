"""MQTT subscription against the local Mosquitto broker."""

from __future__ import annotations

import json
import threading
import time
import uuid

import paho.mqtt.client as mqtt
import pytest

from monitor.ingest.feeds.mqtt import MqttFeed
from monitor.store.readings import readings_frame
from tests.monitor.conftest import fernwater

pytestmark = pytest.mark.mqtt


def publish(host, port, topic, payloads):
    client = mqtt.Client(mqtt.CallbackAPIVersion.VERSION2, client_id=f"bl-test-pub-{uuid.uuid4().hex[:8]}")
    client.connect(host, port)
    client.loop_start()
    try:
        for p in payloads:
            client.publish(topic, p, qos=1).wait_for_publish(5)
    finally:
        client.disconnect()
        client.loop_stop()


def wait_for(predicate, timeout=10.0):
    end = time.monotonic() + timeout
    while time.monotonic() < end:
        if predicate():
            return True
        time.sleep(0.05)
    return False


def test_buoy_messages_become_batches(tmp_path, sqlite_engine, mqtt_address):
    host, port = mqtt_address
    prefix = f"bloomline-test/{uuid.uuid4().hex[:8]}"
    feed = {"name": "buoy-mqtt", "kind": "mqtt", "host": host, "port": port, "topic": f"{prefix}/+/readings",
            "format": "json", "layout": "wide", "time_column": "time", "station_from_folder": True,
            "columns": {"chl": {"variable": "chlorophyll_fluorescence", "unit": "ug/L"},
                        "temp_f": {"variable": "water_temperature", "unit": "degF"}}}
    config = fernwater(tmp_path, feeds=[feed])
    done = threading.Event()
    batches = []

    def on_batch(result):
        batches.append(result)
        if len(batches) == 3:
            done.set()

    messages = [json.dumps({"time": "2026-07-01T00:00:00Z", "chl": 4.2, "temp_f": 68.0}),
                json.dumps([{"time": "2026-07-01T00:15:00Z", "chl": 4.3, "temp_f": 68.1},
                            {"time": "2026-07-01T00:30:00Z", "chl": "oops", "temp_f": 68.2}]),
                json.dumps({"time": "2026-07-01T00:00:00Z", "chl": 4.2, "temp_f": 68.0})]  # a redelivery
    with MqttFeed(sqlite_engine, config, config.feed("buoy-mqtt"), on_batch=on_batch,
                  client_id=f"bl-test-{uuid.uuid4().hex[:8]}"):
        publish(host, port, f"{prefix}/FW-1/readings", messages)
        assert done.wait(10), f"only {len(batches)} batches arrived"
    assert [(b.accepted, b.rejected, b.duplicate) for b in batches] == [(2, 0, 0), (3, 1, 0), (0, 0, 2)]
    assert batches[0].origin == f"mqtt://{host}:{port}/{prefix}/FW-1/readings"
    frame = readings_frame(sqlite_engine, max_flag=9)
    assert set(frame["station_id"]) == {"FW-1"} and len(frame) == 5
    temps = frame[frame["variable"] == "water_temperature"]["value"].round(4).tolist()
    assert temps == [20.0, 20.0556, 20.1111]


def test_start_raises_when_no_broker_listens(tmp_path, sqlite_engine):
    feed = {"name": "nowhere", "kind": "mqtt", "host": "127.0.0.1", "port": 1, "topic": "x/#"}
    config = fernwater(tmp_path, feeds=[feed])
    with pytest.raises(ConnectionRefusedError, match="Connection refused"):
        MqttFeed(sqlite_engine, config, config.feed("nowhere")).start(timeout_s=1.0)


def test_start_mqtt_feeds_subscribes_every_mqtt_feed(tmp_path, sqlite_engine, mqtt_address):
    from monitor.ingest.feeds import start_mqtt_feeds

    host, port = mqtt_address
    prefix = f"bloomline-test/{uuid.uuid4().hex[:8]}"
    feeds = [{"name": f"m{k}", "kind": "mqtt", "host": host, "port": port, "topic": f"{prefix}/{k}",
              "format": "json", "layout": "long", "station": "FW-1"} for k in range(2)]
    config = fernwater(tmp_path, feeds=feeds)
    subs = start_mqtt_feeds(sqlite_engine, config)
    try:
        assert [s.feed.name for s in subs] == ["m0", "m1"] and all(s.subscribed.is_set() for s in subs)
        record = {"time": "2026-07-01T00:00:00Z", "variable": "water_temperature", "value": 19.0, "unit": "degC"}
        publish(host, port, f"{prefix}/1", [json.dumps(record)])
        assert wait_for(lambda: len(subs[1].results) == 1)
        assert subs[1].results[0].accepted == 1 and subs[0].results == []
    finally:
        for s in subs:
            s.stop()
