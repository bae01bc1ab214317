"""The JSON health endpoints: /api/v1/health (200 or 503 with the problems) and /api/v1/jobs."""

from __future__ import annotations

import pytest
from sqlalchemy import insert

from monitor.store import jobs
from monitor.store.db import open_store
from monitor.store.schema import ingest_batches
from tests.monitor.conftest import NOW, fernwater
from web import create_app


@pytest.fixture
def app(tmp_path):
    config = fernwater(tmp_path)
    app = create_app(config, clock=lambda: NOW)
    yield app, config
    app.extensions["bloomline"]["engine"].dispose()


def test_health_is_503_with_the_problems_then_200_when_fixed(app):
    app, config = app
    client = app.test_client()
    answer = client.get("/api/v1/health")
    assert answer.status_code == 503 and answer.headers["Cache-Control"] == "no-store"
    assert "feed buoys is stale: no data received yet" in answer.get_json()["problems"]
    engine = open_store(config.service.database_url)
    with engine.begin() as conn:
        for feed in ("buoys", "lab", "forecasts", "utility"):
            conn.execute(insert(ingest_batches).values(feed=feed, origin="x", sha256=feed, received_at=NOW,
                                                       status="ok", message=""))
    engine.dispose()
    answer = client.get("/api/v1/health")
    assert answer.status_code == 200 and answer.get_json()["ok"] is True


def test_jobs_lists_recorded_runs_newest_first_with_paging(app):
    app, config = app
    engine = open_store(config.service.database_url)
    ids = []
    for k in range(3):
        run_id = jobs.start_job(engine, "cycle", now=NOW, owner="h:1", water_body_id="fernwater")
        jobs.finish_job(engine, run_id, now=NOW, outcome="ok" if k else "failed", duration_s=2.5,
                        error=None if k else "compute failed: boom")
        ids.append(run_id)
    engine.dispose()
    client = app.test_client()
    page = client.get("/api/v1/jobs?job=cycle&water_body=fernwater&limit=2").get_json()
    assert [r["id"] for r in page["job_runs"]] == [ids[2], ids[1]] and page["next_before"] == ids[1]
    rest = client.get(f"/api/v1/jobs?before={page['next_before']}").get_json()
    assert [(r["id"], r["outcome"], r["error"]) for r in rest["job_runs"]] == [(ids[0], "failed",
                                                                                 "compute failed: boom")]


@pytest.mark.parametrize(("query", "status"), [("limit=0", 400), ("limit=abc", 400), ("limit=99999999999999999999", 400),
                                               ("job=dance", 400), ("water_body=none-such", 404),
                                               ("before=99999999999999999999999", 400)])
def test_jobs_refuses_bad_parameters_as_json(app, query, status):
    app, _ = app
    answer = app.test_client().get(f"/api/v1/jobs?{query}")
    assert answer.status_code == status and answer.get_json()["error"]["status"] == status
