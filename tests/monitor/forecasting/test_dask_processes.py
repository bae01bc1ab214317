"""Cycles on a real Dask scheduler and two worker processes equal the in-process cycles, even when a worker dies."""

from __future__ import annotations

import datetime as dt
import threading

import pytest

from tests.monitor.forecasting.dask_processes import DaskProcesses
from tests.monitor.forecasting.synthetic_store import SEASON_START, synthetic_service
from tests.monitor.forecasting.test_batched_cycle import store_contents

DAY = dt.timedelta(days=1)
N = 12


def _cycles(service) -> list[dict]:
    service.batch_from = 1
    first = SEASON_START + 14 * DAY
    return [s for day in (first, first + DAY) for s in service.run_cycles(day, season_start=first - DAY)]


@pytest.mark.slow
def test_cycles_on_a_scheduler_and_two_worker_processes_equal_in_process_and_survive_a_lost_worker(tmp_path):
    for name in ("local", "cluster", "killed"):
        (tmp_path / name).mkdir()
    cluster = DaskProcesses(2, tmp_path)
    services = []
    try:
        local = synthetic_service(tmp_path / "local", N)
        remote = synthetic_service(tmp_path / "cluster", N, dask_scheduler=cluster.address)
        killed = synthetic_service(tmp_path / "killed", N, dask_scheduler=cluster.address)
        services = [local, remote, killed]
        cluster.wait_for_workers(remote._dask_client(), 2)
        expected = _cycles(local)
        got = _cycles(remote)
        assert [s["status"] for s in got] == [s["status"] for s in expected]
        assert all(s["run_id"] is not None for s in got)
        want = store_contents(local.engine)
        assert store_contents(remote.engine) == want  # byte-identical checkpoints, forecasts and members

        # one worker is killed while the first cycle's tasks run: the scheduler reruns its tasks on the other
        client = killed._dask_client()
        victim = cluster.workers[0]

        def kill_when_busy():
            while not any(client.processing().values()):
                threading.Event().wait(0.02)
            victim.kill()

        killer = threading.Thread(target=kill_when_busy, daemon=True)
        killer.start()
        after_kill = _cycles(killed)
        killer.join(timeout=30)
        assert victim.poll() is not None  # it really died
        assert [s["water_body"] for s in after_kill] == [s["water_body"] for s in expected]
        assert all(s["run_id"] is not None and s["status"] != "failed" for s in after_kill)
        assert store_contents(killed.engine) == want
    finally:
        for service in services:
            service.close()
        cluster.stop()
