"""Benchmark: the daily cycle of N synthetic water bodies on PostgreSQL, in-process and on a Dask cluster.

For each N (``--sizes``, default 100,1000): a fresh database on the local
PostgreSQL server (created by the script and dropped after), N synthetic water
bodies (:mod:`monitor.app.synthetic`, 1–5 basins, hourly buoys, 30 days), a
cold-start cycle, then timed:

* ``inprocess_s``: one daily cycle in this process (numpy on one thread:
  one core), batched (:mod:`monitor.forecasting.many`);
* ``cluster_s``: the next daily cycle on a ``dask scheduler`` with two
  ``dask worker`` processes (one thread each), started by the script;
* the driver's gather seconds per water body, per-water-body
  (``cycle.gather`` on a sample) and batched (``batch_gather.fetch_many`` on
  all, the driver's share; assembly runs on the workers), and record seconds
  per water body (``cycle.record`` vs ``batch_record.record_many`` on two halves
  of a sample of fresh outputs), with their ratios;
* ``parallel_efficiency`` = inprocess_s / (2 · cluster_s);
* ``extrapolated_10000_on_16_s``: 10,000 water bodies on 16 workers from the
  measured per-body costs, the driver (fetch, record, verification and job
  records: ``driver_s_per_body``) overlapping the workers (``worker_s_per_body``
  / 16): max of the two, and ``..._serial_s`` their sum (no overlap).

Prints one JSON line. ``python tests/benchmarks/bench_scale.py [--sizes 100,1000] [--url URL]``
"""

from __future__ import annotations

import os

os.environ.setdefault("OMP_NUM_THREADS", "1")
os.environ.setdefault("OPENBLAS_NUM_THREADS", "1")

import argparse  # noqa: E402
import datetime as dt  # noqa: E402
import json  # noqa: E402
import sys  # noqa: E402
import tempfile  # noqa: E402
import time  # noqa: E402
from pathlib import Path  # noqa: E402

from sqlalchemy import create_engine, text  # noqa: E402
from sqlalchemy.engine import make_url  # noqa: E402

ROOT = Path(__file__).resolve().parents[2]
sys.path.insert(0, str(ROOT))

from monitor.app import synthetic  # noqa: E402
from monitor.app.service import Service  # noqa: E402
from monitor.config import parse_config  # noqa: E402
from monitor.forecasting import batch_gather, batch_record, cycle, many  # noqa: E402
from monitor.store.db import open_store  # noqa: E402
from tests.monitor.forecasting.dask_processes import DaskProcesses  # noqa: E402

START = dt.datetime(2026, 6, 1, tzinfo=dt.UTC)
DAY = dt.timedelta(days=1)
SAMPLE = 20


def measure(n: int, base_url: str, folder: Path) -> dict:
    name = f"bl_bench_scale_{os.getpid()}_{n}"
    admin = create_engine(base_url, isolation_level="AUTOCOMMIT")
    with admin.connect() as conn:
        conn.execute(text(f'CREATE DATABASE "{name}"'))
    url = make_url(base_url).set(database=name).render_as_string(hide_password=False)
    cluster = None
    try:
        config = parse_config(synthetic.config_data(n, database_url=url))
        engine = open_store(url)
        t = time.perf_counter()
        readings = synthetic.write_readings(engine, config, start=START, days=30)
        write_s = time.perf_counter() - t
        service = Service(config, engine=engine, clock=lambda: START)
        service.batch_from = 1
        first = START + 14 * DAY
        service.run_cycles(first, season_start=first - DAY)  # cold start, not timed
        t = time.perf_counter()
        summaries = service.run_cycles(first + DAY)
        inprocess_s = time.perf_counter() - t
        failed = sum(s["status"] == "failed" for s in summaries)

        # the driver's gather: per water body (sample) vs batched (all)
        analysis = first + 2 * DAY
        sample = list(config.water_bodies[:SAMPLE])
        t = time.perf_counter()
        inputs = [cycle.gather(engine, config, wb, analysis) for wb in sample]
        gather_per_body = (time.perf_counter() - t) / len(sample)
        t = time.perf_counter()
        list(batch_gather.fetch_many(engine, config, config.water_bodies, analysis))
        fetch_batched = (time.perf_counter() - t) / n
        # record: one by one vs batched, on two halves of fresh outputs
        outputs = [many.compute_guarded(i) for i in inputs]
        half = len(outputs) // 2
        t = time.perf_counter()
        for out in outputs[:half]:
            cycle.record(engine, config, out, now=START)
        record_per_body = (time.perf_counter() - t) / half
        t = time.perf_counter()
        batch_record.record_many(engine, config, outputs[half:], now=START)
        record_batched = (time.perf_counter() - t) / (len(outputs) - half)

        # the driver's whole share in the batched in-process cycle: everything but assembly and compute
        t = time.perf_counter()
        raws = [r for _, r in batch_gather.fetch_many(engine, config, sample, analysis)]
        fetch_sample = time.perf_counter() - t
        t = time.perf_counter()
        for raw in raws:
            many.cycle_task(config, raw)
        worker_s_per_body = (time.perf_counter() - t) / len(sample)
        driver_s_per_body = max(inprocess_s / n - worker_s_per_body, fetch_sample / len(sample))

        cluster = DaskProcesses(2, folder)
        remote = Service(parse_config(synthetic.config_data(n, database_url=url, dask_scheduler=cluster.address)),
                         engine=engine, clock=lambda: START)
        remote.batch_from = 1
        cluster.wait_for_workers(remote._dask_client(), 2)
        t = time.perf_counter()
        remote_summaries = remote.run_cycles(first + 3 * DAY)
        cluster_s = time.perf_counter() - t
        remote.close(dispose_engine=False)
        service.close()
        return {
            "water_bodies": n, "readings": readings, "write_s": round(write_s, 2),
            "inprocess_s": round(inprocess_s, 2), "cluster_s": round(cluster_s, 2), "workers": 2,
            "failed": failed + sum(s["status"] == "failed" for s in remote_summaries),
            "parallel_efficiency": round(inprocess_s / (2 * cluster_s), 3),
            "gather_s_per_body": {"per_body": round(gather_per_body, 4), "batched_driver": round(fetch_batched, 4),
                                  "ratio": round(gather_per_body / fetch_batched, 2)},
            "record_s_per_body": {"per_body": round(record_per_body, 4), "batched": round(record_batched, 4),
                                  "ratio": round(record_per_body / record_batched, 2)},
            "driver_s_per_body": round(driver_s_per_body, 4), "worker_s_per_body": round(worker_s_per_body, 4),
            "extrapolated_10000_on_16_s": round(max(driver_s_per_body * 10_000, worker_s_per_body * 10_000 / 16), 1),
            "extrapolated_10000_on_16_serial_s": round(driver_s_per_body * 10_000 + worker_s_per_body * 10_000 / 16, 1),
        }
    finally:
        if cluster is not None:
            cluster.stop()
        with admin.connect() as conn:
            conn.execute(text(f'DROP DATABASE IF EXISTS "{name}" WITH (FORCE)'))
        admin.dispose()


def main() -> None:
    parser = argparse.ArgumentParser(description=__doc__.splitlines()[0])
    parser.add_argument("--sizes", default="100,1000", help="comma-separated numbers of water bodies")
    parser.add_argument("--url", default=os.environ.get("BLOOMLINE_TEST_POSTGRES_URL",
                                                        "postgresql+psycopg://postgres@127.0.0.1:5432/test"))
    args = parser.parse_args()
    with tempfile.TemporaryDirectory() as folder:
        results = [measure(int(n), args.url, Path(folder)) for n in args.sizes.split(",")]
    print(json.dumps({"benchmark": "scale", "cpu_count": os.cpu_count(), "results": results}))


if __name__ == "__main__":
    main()
