"""One actor: the scheduler lease on SQLite (file lock) and PostgreSQL (advisory lock), and by expiry alone."""

from __future__ import annotations

import datetime as dt
import os
import signal
import subprocess
import sys
import time
from pathlib import Path

import pytest

from monitor.app.lease import SchedulerLease
from monitor.store import lease as rows
from monitor.store.db import open_store
from monitor.store.lease import LeaseLost

ROOT = Path(__file__).resolve().parents[3]


@pytest.fixture
def sqlite_store(tmp_path):
    engine = open_store(f"sqlite:///{tmp_path / 'lease.sqlite'}")
    yield engine
    engine.dispose()


def _takeover(engine_a, engine_b):
    a = SchedulerLease(engine_a, holder="host:1", seconds=30)
    b = SchedulerLease(engine_b, holder="host:2", seconds=30)
    assert a.acquire() and not b.acquire()
    assert rows.read(engine_a, "scheduler")["holder"] == "host:1"
    a.release()
    assert b.acquire() and b.term == a_term(engine_b) and b.term == 2
    with engine_a.begin() as conn, pytest.raises(LeaseLost, match="not held by host:1"):
        a.guard(conn)
    with engine_b.begin() as conn:
        b.guard(conn)  # the new holder's writes go through
    b.close()
    a.close()


def a_term(engine) -> int:
    return rows.read(engine, "scheduler")["term"]


def test_sqlite_only_one_holds_the_lease_and_a_release_hands_it_over(sqlite_store):
    _takeover(sqlite_store, sqlite_store)


@pytest.mark.postgres
def test_postgresql_only_one_holds_the_lease_and_a_release_hands_it_over(pg_engine):
    _takeover(pg_engine, pg_engine)


def test_a_holder_that_lost_its_term_cannot_commit(sqlite_store):
    a = SchedulerLease(sqlite_store, holder="host:1", seconds=30)
    assert a.acquire()
    a.lock.release()  # as if its lock had gone: another process takes the lease
    b = SchedulerLease(sqlite_store, holder="host:2", seconds=30)
    assert b.acquire()
    assert not a.renew()
    with sqlite_store.begin() as conn, pytest.raises(LeaseLost, match="is not held by host:1"):
        a.guard(conn)
    b.close()


def test_without_a_lock_the_lease_passes_on_only_after_it_expires(sqlite_store):
    a = SchedulerLease(sqlite_store, holder="host:1", seconds=1.0)
    b = SchedulerLease(sqlite_store, holder="host:2", seconds=1.0)
    a.lock = b.lock = None  # an in-memory database has neither a file nor a server to lock
    assert a.acquire() and not b.acquire()
    time.sleep(1.2)  # host:1 stopped renewing
    assert b.acquire() and not a.renew()


HOLDER = """
import sys, time
from monitor.app.lease import SchedulerLease
from monitor.store.db import connect
lease = SchedulerLease(connect(sys.argv[1]), holder="child", seconds=60)
assert lease.acquire()
print("held", flush=True)
time.sleep(120)
"""


def _child_holding(url: str, env: dict) -> subprocess.Popen:
    child = subprocess.Popen([sys.executable, "-c", HOLDER, url], cwd=ROOT, env=env,
                             stdout=subprocess.PIPE, text=True)
    assert child.stdout.readline().strip() == "held"
    return child


def _killed_holder_is_replaced_at_once(engine, url: str, env: dict):
    child = _child_holding(url, env)
    try:
        waiting = SchedulerLease(engine, holder="host:2", seconds=60)
        assert not waiting.acquire()
        os.kill(child.pid, signal.SIGKILL)
        child.wait(10)
        deadline = time.monotonic() + 10
        while not waiting.acquire():
            assert time.monotonic() < deadline, "the lease was not taken over within 10 s of the holder's death"
            time.sleep(0.1)
        # a 60 s lease, taken over at once: the lock, not the expiry, told that the holder died
        assert rows.read(engine, "scheduler")["holder"] == "host:2"
        assert rows.read(engine, "scheduler")["expires_utc"] > dt.datetime.now(dt.UTC) + dt.timedelta(seconds=50)
        waiting.close()
    finally:
        if child.poll() is None:
            child.kill()
            child.wait()
        child.stdout.close()


def test_sqlite_a_killed_holder_is_replaced_at_once(sqlite_store, tmp_path):
    _killed_holder_is_replaced_at_once(sqlite_store, f"sqlite:///{tmp_path / 'lease.sqlite'}", dict(os.environ))


@pytest.mark.postgres
def test_postgresql_a_killed_holder_is_replaced_at_once(pg_engine, postgres_url):
    with pg_engine.connect() as conn:
        schema_name = conn.exec_driver_sql("SELECT current_schema()").scalar()
    # the fixture's store lives in a schema of its own; the child process reaches it through PGOPTIONS
    env = dict(os.environ, PGOPTIONS=f"-csearch_path={schema_name}")
    _killed_holder_is_replaced_at_once(pg_engine, postgres_url, env)


def test_a_store_that_cannot_be_written_means_step_down_not_crash(sqlite_store, monkeypatch):
    a = SchedulerLease(sqlite_store, holder="host:1", seconds=30)
    assert a.acquire()

    def locked(*args, **kwargs):
        raise RuntimeError("database is locked")

    monkeypatch.setattr(rows, "renew", locked)
    assert a.renew() is False and not a.held
    monkeypatch.setattr(rows, "take", locked)
    assert a.acquire() is False
    monkeypatch.undo()
    assert a.acquire() and a.term == 2  # the same process takes it back once the store answers
    a.close()
