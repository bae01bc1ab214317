"""Benchmark: a what-if scenario of the demo reservoir, 7 and 14 days, 60 members, paired, on one core.

The demo's invented Corrisdale Reservoir is ingested from ``sample_feeds/`` into a temporary store
and run for a handful of daily cycles (to 2026-08-20, when the Fennick Arm nears Alert Level 2).
Then a three-day release of 5 m³/s through the Fennick Arm is asked as the service answers it
(:func:`monitor.scenarios.run.run_what_if`: read the newest analysis and the outlook drivers,
run the members with and without the release, summarise) for a 7-day and a 14-day horizon.
The reference in the same process is the cycle's own forecast from the same analysis (one
unpaired run of the same members and drivers, :func:`monitor.forecasting.cycle._forecast`).

Prints one JSON line: ``whatif_7d_s`` and ``whatif_14d_s`` (median wall time of ``--repeat``
runs), their CPU times, ``forecast_7d_s`` and ``forecast_14d_s`` (the reference),
``ratio_7d`` and ``ratio_14d`` (what-if / forecast; a paired run costs about two forecasts),
the goals (1 s and 2 s) and whether they are met.

Run from the checkout: ``python tests/benchmarks/bench_whatif.py [--repeat 5] [--cycles 7]``
"""
from __future__ import annotations

import os

for _var in ("OMP_NUM_THREADS", "OPENBLAS_NUM_THREADS", "MKL_NUM_THREADS"):
    os.environ[_var] = "1"   # one core: before numpy is imported

import argparse  # noqa: E402
import dataclasses  # noqa: E402
import datetime as dt  # noqa: E402
import json  # noqa: E402
import statistics  # noqa: E402
import sys  # noqa: E402
import tempfile  # noqa: E402
import time  # noqa: E402
from pathlib import Path  # noqa: E402

ROOT = Path(__file__).resolve().parents[2]
sys.path.insert(0, str(ROOT))  # this checkout's code, not an installed copy

from assimilation.augmentation import split  # noqa: E402
from assimilation.checkpoint import Checkpoint  # noqa: E402
from monitor.forecasting import cycle  # noqa: E402
from monitor.scenarios.request import parse_request  # noqa: E402
from monitor.scenarios.run import run_what_if  # noqa: E402
from monitor.store.runs import latest_checkpoint  # noqa: E402
from tests.monitor.scenarios.demo_state import LAST_ANALYSIS, demo_state  # noqa: E402

RELEASE = {"kind": "release", "basin": "fennick-arm", "flow_m3s": 5, "from_day": 1, "days": 3}
GOALS_S = {7: 1.0, 14: 2.0}


def timed(fn, repeat: int) -> tuple[float, float]:
    wall, cpu = [], []
    for _ in range(repeat):
        w, c = time.perf_counter(), time.process_time()
        fn()
        wall.append(time.perf_counter() - w)
        cpu.append(time.process_time() - c)
    return statistics.median(wall), statistics.median(cpu)


def main() -> None:
    parser = argparse.ArgumentParser(description=__doc__.splitlines()[0])
    parser.add_argument("--repeat", type=int, default=5)
    parser.add_argument("--cycles", type=int, default=7)
    args = parser.parse_args()
    if hasattr(os, "sched_setaffinity"):
        os.sched_setaffinity(0, {min(os.sched_getaffinity(0))})
    with tempfile.TemporaryDirectory() as tmp:
        service = demo_state(Path(tmp), args.cycles)
        config, engine = service.config, service.engine
        wb = config.water_body("corrisdale")
        now = LAST_ANALYSIS + dt.timedelta(hours=1)
        out = {"members": config.filter.members, "action": RELEASE}
        for days in (7, 14):
            request = parse_request({"actions": [RELEASE], "horizon_days": days}, wb)
            run_what_if(engine, config, wb, request, now=now)   # warm caches and imports
            out[f"whatif_{days}d_s"], out[f"whatif_{days}d_cpu_s"] = timed(
                lambda request=request: run_what_if(engine, config, wb, request, now=now), args.repeat)
            inputs = dataclasses.replace(cycle.gather(engine, config, wb, LAST_ANALYSIS), horizon_days=days)
            inputs.forecast_drivers = cycle.outlook_drivers(
                engine, config, wb, cycle.StationSeries(cycle.station_readings(
                    engine, config, wb, LAST_ANALYSIS - dt.timedelta(days=14), LAST_ANALYSIS)), LAST_ANALYSIS, days)
            states, params, _ = split(Checkpoint.from_bytes(latest_checkpoint(engine, wb.id)[1]), inputs.spec)
            out[f"forecast_{days}d_s"], _cpu = timed(
                lambda inputs=inputs, states=states, params=params: cycle._forecast(states, params, inputs.spec, inputs),
                args.repeat)
            out[f"ratio_{days}d"] = out[f"whatif_{days}d_s"] / out[f"forecast_{days}d_s"]
            out[f"goal_{days}d_s"] = GOALS_S[days]
            out[f"goal_{days}d_met"] = out[f"whatif_{days}d_s"] < GOALS_S[days]
        service.close()
    out["load_average"] = os.getloadavg()[0] if hasattr(os, "getloadavg") else None
    print(json.dumps({k: (round(v, 4) if isinstance(v, float) else v) for k, v in out.items()}))


if __name__ == "__main__":
    main()
