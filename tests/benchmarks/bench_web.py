"""Benchmark: the web app under 20 concurrent clients on loopback, over a season of demo data.

The demo season (``bloomline demo``: the invented Corrisdale Reservoir and
Sorrel Lake, every feed ingested and a daily cycle for each day of the
season) is built in a working folder (or reused with ``--reuse``). The app
is served by waitress (as ``bloomline serve`` does) in a subprocess, its
clock at the end of the season. ``--clients`` threads, each with its own
keep-alive connection, then repeat a round of: the overview page, a full
basin page view (the HTML and every chart it links, fetched as a browser
with an empty cache would) and the forecast API. The first round per client
meets cold caches (each chart and page is rendered once and then served
from memory until the store changes) and is timed apart; then
``--rounds`` rounds are timed, bounded by ``--seconds``.

The reference is the stylesheet, a static file served by the same server
under the same load, timed within the same rounds: the ratios say how much
slower each view is than the server's floor.

Prints one JSON line: clients, rounds, requests, seconds, p50 and p95 [ms]
of the overview, the full basin page view and the forecast API, the
static reference, the ratios and the goals (p95: page view 300 ms,
overview 150 ms, API 50 ms) with whether each is met; and apart, the same
figures of the first round, when every client asks at once for pages and
charts not yet rendered.

    python tests/benchmarks/bench_web.py [--workdir DIR] [--reuse] [--clients 20] [--rounds 20] [--seconds 120]
"""

from __future__ import annotations

import argparse
import http.client
import json
import re
import subprocess
import sys
import tempfile
import threading
import time
from html import unescape
from pathlib import Path

import numpy as np

ROOT = Path(__file__).resolve().parents[2]
sys.path.insert(0, str(ROOT))

GOALS_P95_MS = {"basin_page_view": 300.0, "overview": 150.0, "forecast_api": 50.0}


def serve(config_path: str, now_iso: str) -> None:
    """Subprocess mode: serve the app on a free loopback port, print the port, serve until killed."""
    import datetime as dt

    from monitor.config import load_config
    from web import create_app
    from web.serving import make_server

    now = dt.datetime.fromisoformat(now_iso)
    app = create_app(load_config(config_path), clock=lambda: now, settings={"RATELIMIT_ENABLED": False})
    server = make_server(app)
    print(server.effective_port, flush=True)
    server.run()


def build(workdir: Path, reuse: bool) -> tuple[Path, str]:
    """The demo season's config path and the time just after its last analysis (ISO 8601)."""
    import datetime as dt

    from sqlalchemy import func, select

    from monitor.config import load_config
    from monitor.store.db import open_store
    from monitor.store.schema import forecast_runs

    config_path = workdir / "bloomline.toml"
    if not (reuse and (workdir / "bloomline.sqlite").exists()):
        from monitor.app.demo import run_demo

        run_demo(workdir, quiet=True)
    engine = open_store(load_config(config_path).service.database_url)
    with engine.connect() as conn:
        last = conn.execute(select(func.max(forecast_runs.c.analysis_utc))).scalar_one()
    engine.dispose()
    return config_path, (last + dt.timedelta(hours=1)).isoformat()


class Client:
    """One keep-alive HTTP client that times what it fetches."""

    def __init__(self, port: int):
        self.conn = http.client.HTTPConnection("127.0.0.1", port, timeout=60)

    def get(self, path: str) -> bytes:
        self.conn.request("GET", path)
        response = self.conn.getresponse()
        body = response.read()
        if response.status != 200:
            raise RuntimeError(f"GET {path}: {response.status}")
        return body

    def page_view(self, path: str) -> None:
        html = unescape(self.get(path).decode("utf-8"))
        for src in re.findall(r'<img src="([^"]+)"', html):
            self.get(src)


def run_clients(port: int, clients: int, rounds: int, seconds: float, basins: list[str]) -> dict[str, list[float]]:
    times: dict[str, list[float]] = {"overview": [], "basin_page_view": [], "forecast_api": [], "static": []}
    first = {name: [] for name in times}
    lock = threading.Lock()
    deadline = time.perf_counter() + seconds
    start = threading.Barrier(clients)

    def one(k: int) -> None:
        client = Client(port)
        basin = basins[k % len(basins)]
        wb = basin.split("/")[2]
        steps = {"overview": lambda: client.get("/"), "basin_page_view": lambda: client.page_view(basin),
                 "forecast_api": lambda: client.get(f"/api/v1/water-bodies/{wb}/forecast"),
                 "static": lambda: client.get("/static/bloomline.css")}
        start.wait()
        for name, step in steps.items():  # the first round, on cold caches: reported apart
            t = time.perf_counter()
            step()
            with lock:
                first[name].append(1000 * (time.perf_counter() - t))
        for _ in range(rounds):
            if time.perf_counter() > deadline:
                break
            for name, step in steps.items():
                t = time.perf_counter()
                step()
                with lock:
                    times[name].append(1000 * (time.perf_counter() - t))

    threads = [threading.Thread(target=one, args=(k,)) for k in range(clients)]
    for t in threads:
        t.start()
    for t in threads:
        t.join()
    return times, first


def main() -> None:
    parser = argparse.ArgumentParser(description=__doc__.split("\n")[0])
    parser.add_argument("--workdir", type=Path, default=None, help="demo folder (default: a temporary one)")
    parser.add_argument("--reuse", action="store_true", help="reuse the demo already in --workdir")
    parser.add_argument("--clients", type=int, default=20)
    parser.add_argument("--rounds", type=int, default=20, help="timed rounds per client")
    parser.add_argument("--seconds", type=float, default=120.0, help="bound on the timed part [s]")
    parser.add_argument("--serve", nargs=2, metavar=("CONFIG", "NOW"), help=argparse.SUPPRESS)
    args = parser.parse_args()
    if args.serve:
        serve(*args.serve)
        return
    with tempfile.TemporaryDirectory() as tmp:
        workdir = (args.workdir or Path(tmp) / "demo").resolve()
        config_path, now = build(workdir, args.reuse)
        from monitor.config import load_config

        cfg = load_config(config_path)
        basins = [f"/water-bodies/{wb.id}/basins/{b.id}" for wb in cfg.water_bodies for b in wb.basins]
        server = subprocess.Popen([sys.executable, __file__, "--serve", str(config_path), now],
                                  stdout=subprocess.PIPE, cwd=ROOT, text=True)
        try:
            port = int(server.stdout.readline())
            t0 = time.perf_counter()
            times, first = run_clients(port, args.clients, args.rounds, args.seconds, basins)
            elapsed = time.perf_counter() - t0
        finally:
            server.terminate()
            server.wait(timeout=30)

    def stats(xs: list[float]) -> dict:
        return {"p50": round(float(np.percentile(xs, 50)), 1), "p95": round(float(np.percentile(xs, 95)), 1),
                "n": len(xs)}

    out = {"benchmark": "web", "clients": args.clients, "rounds": args.rounds, "seconds": round(elapsed, 1),
           "requests": sum(len(v) for v in times.values()),
           **{f"{k}_ms": stats(v) for k, v in times.items()},
           "first_round_ms": {k: stats(v) for k, v in first.items() if k != "static"}}
    floor = out["static_ms"]["p50"] or 0.1
    out["ratio_p50_to_static"] = {k: round(out[f"{k}_ms"]["p50"] / floor, 1) for k in GOALS_P95_MS}
    out["goals_p95_ms"] = GOALS_P95_MS
    out["goals_met"] = {k: out[f"{k}_ms"]["p95"] <= goal for k, goal in GOALS_P95_MS.items()}
    print(json.dumps(out))


if __name__ == "__main__":
    main()
