"""The HTTP push endpoint: token check, JSON and CSV batches, counts in the answer."""

from __future__ import annotations

import json

import pytest
from flask import Flask

from monitor.store.db import open_store
from monitor.store.readings import readings_frame, rejected_rows_frame
from tests.monitor.conftest import NOW, fernwater
from web.push import MAX_BODY_BYTES, push_api

TOKEN = "s3cret-token-for-tests"
URL = "/api/v1/push/utility"


@pytest.fixture
def push_app(tmp_path):
    config = fernwater(tmp_path)
    app = Flask(__name__)
    engine = open_store(config.service.database_url)
    app.extensions["bloomline"] = {"config": config, "engine": engine, "clock": lambda: NOW}
    app.register_blueprint(push_api)
    yield app
    engine.dispose()


@pytest.fixture
def push_client(push_app):
    return push_app.test_client()


def auth(token=TOKEN):
    return {"Authorization": f"Bearer {token}"}


RECORDS = [
    {"time": "2026-07-01T00:00:00Z", "station": "FW-1", "variable": "water_temperature", "value": 20.5, "unit": "degC"},
    {"time": "2026-07-01T00:15:00Z", "station": "FW-1", "variable": "water_temperature", "value": 20.6, "unit": "degC"},
    {"time": "2026-07-01T00:30:00Z", "station": "FW-1", "variable": "water_temperature", "value": "hot", "unit": "degC"},
]


def test_json_batch_is_stored_and_answered_with_its_counts(push_client, push_app):
    resp = push_client.post(URL, json={"readings": RECORDS}, headers=auth())
    assert resp.status_code == 200
    body = resp.get_json()
    assert {k: body[k] for k in ("status", "received", "accepted", "rejected", "duplicate")} == {
        "status": "partial", "received": 3, "accepted": 2, "rejected": 1, "duplicate": 0}
    engine = push_app.extensions["bloomline"]["engine"]
    assert readings_frame(engine)["value"].tolist() == [20.5, 20.6]
    assert "not a finite decimal number" in rejected_rows_frame(engine)["reason"].iloc[0]
    again = push_client.post(URL, json=RECORDS, headers=auth()).get_json()
    assert (again["accepted"], again["duplicate"]) == (0, 2)


def test_csv_batch_by_content_type(push_client):
    csv = (b"time,station,variable,value,unit\n"
           b"2026-07-01T01:00:00Z,FW-1,water_temperature,70.0,degF\n")
    resp = push_client.post(URL, data=csv, content_type="text/csv", headers=auth())
    assert resp.status_code == 200 and resp.get_json()["accepted"] == 1


def test_wrong_or_missing_token_is_401(push_client):
    assert push_client.post(URL, json=RECORDS, headers=auth("wrong")).status_code == 401
    resp = push_client.post(URL, json=RECORDS)
    assert resp.status_code == 401 and resp.headers["WWW-Authenticate"].startswith("Bearer")
    assert "token" in resp.get_json()["error"]["message"]
    assert push_client.post(URL, json=RECORDS, headers={"X-Bloomline-Token": TOKEN}).status_code == 200


def test_token_is_compared_in_constant_time(monkeypatch, push_client):
    import hmac

    import web.push as push_module

    calls = []
    real = hmac.compare_digest

    def spy(a, b):
        calls.append((a, b))
        return real(a, b)

    monkeypatch.setattr(push_module.hmac, "compare_digest", spy)
    push_client.post(URL, json=RECORDS, headers=auth("nope"))
    assert calls == [(b"nope", TOKEN.encode())]


def test_unknown_feed_and_other_kinds_answer_like_a_wrong_token(push_client):
    # feed names cannot be discovered: an unknown feed, a feed of another kind and a wrong token look alike
    wrong = push_client.post(URL, json=RECORDS, headers=auth("wrong"))
    for url in ("/api/v1/push/nope", "/api/v1/push/buoys"):
        r = push_client.post(url, json=RECORDS, headers=auth())
        assert (r.status_code, r.get_json(), r.headers.get("WWW-Authenticate")) == \
            (401, wrong.get_json(), wrong.headers["WWW-Authenticate"])


def test_every_row_rejected_is_422(push_client):
    resp = push_client.post(URL, json=[{"time": "never", "station": "FW-1", "variable": "water_temperature",
                                         "value": 1, "unit": "degC"}], headers=auth())
    assert resp.status_code == 422 and resp.get_json()["status"] == "rejected"


def test_bad_requests_get_json_errors(push_client):
    assert push_client.post(URL, data=b"x", content_type="application/xml", headers=auth()).status_code == 415
    assert push_client.post(URL, data=b"  ", content_type="application/json", headers=auth()).status_code == 400
    big = b"[" + b" " * (MAX_BODY_BYTES + 1) + b"]"
    resp = push_client.post(URL, data=big, content_type="application/json", headers=auth())
    assert resp.status_code == 413 and "at most" in resp.get_json()["error"]["message"]


def test_injection_strings_are_only_data(push_client, push_app):
    hostile = [{**RECORDS[0], "station": "FW-1'; DROP TABLE readings; --"}]
    resp = push_client.post(URL, data=json.dumps(hostile), content_type="application/json", headers=auth())
    assert resp.status_code == 422
    engine = push_app.extensions["bloomline"]["engine"]
    assert readings_frame(engine).empty
    assert "unknown station" in rejected_rows_frame(engine)["reason"].iloc[0]


def test_the_app_factory_serves_the_push_endpoint(tmp_path):
    from web import create_app

    app = create_app(fernwater(tmp_path), clock=lambda: NOW)
    resp = app.test_client().post(URL, json=RECORDS[:1], headers=auth())
    assert resp.status_code == 200 and resp.get_json()["accepted"] == 1
    app.extensions["bloomline"]["engine"].dispose()


def test_pushed_payload_is_archived_as_json(push_client, push_app):
    from pathlib import Path

    from monitor.store.readings import batches_frame

    body = json.dumps(RECORDS[:1]).encode()
    push_client.post(URL, data=body, content_type="application/json", headers=auth())
    engine = push_app.extensions["bloomline"]["engine"]
    archive = Path(batches_frame(engine)["archive_path"].iloc[0])
    assert archive.suffix == ".json" and archive.read_bytes() == body


def test_the_answer_names_row_station_column_and_reason_of_each_rejection(push_client):
    csv = (b"time,station,variable,value,unit\n"
           b"2026-07-01T01:00:00Z,FW-1,water_temperature,20.0,degC\n"
           b"2026-07-01T01:15:00Z,FW-1,water_temperature,warm,degC\n"
           b"yesterday,FW-1,water_temperature,20.1,degC\n"
           b"2026-07-01T01:30:00Z,FW-9,water_temperature,20.2,degC\n"
           b"2026-07-01T01:45:00Z,FW-1,water_temperature,20.3,kelvinish\n")
    body = push_client.post(URL, data=csv, content_type="text/csv", headers=auth()).get_json()
    assert (body["accepted"], body["rejected"]) == (1, 4)
    got = {r["row"]: (r["station"], r["column"]) for r in body["rejections"]}
    # rows count the CSV's lines, the header being line 1
    assert got == {3: ("FW-1", "value"), 4: ("FW-1", "time"), 5: ("FW-9", "station"), 6: ("FW-1", "unit")}
    reasons = {r["row"]: r["reason"] for r in body["rejections"]}
    assert "'warm' is not a finite decimal number" in reasons[3] and "unknown station 'FW-9'" in reasons[5]
    assert body["caution"]


def test_json_rejections_are_numbered_by_record(push_client):
    body = push_client.post(URL, json={"readings": RECORDS}, headers=auth()).get_json()
    (r,) = body["rejections"]
    assert (r["row"], r["station"], r["column"]) == (3, "FW-1", "value")


def test_at_most_a_hundred_rejections_are_described(push_client):
    from web.push_report import MAX_REPORTED

    bad = [{**RECORDS[0], "time": f"2026-07-01T{h % 24:02d}:{m:02d}:00Z", "value": "x"}
           for h in range(3) for m in range(60)]
    body = push_client.post(URL, json=bad, headers=auth()).get_json()
    assert body["rejected"] == 180 and len(body["rejections"]) == MAX_REPORTED == 100
