"""``bloomline ingest PATH|URL --feed NAME``."""

from __future__ import annotations

import threading
from http.server import BaseHTTPRequestHandler, ThreadingHTTPServer

from click.testing import CliRunner

from monitor.app.ingest_cli import ingest
from tests.monitor.conftest import buoy_csv, quarter_hours

TOML = """
[service]
database = "sqlite:///store.sqlite"
archive_dir = "archive"

[[water_bodies]]
id = "fernwater"
use = "recreation"
[[water_bodies.basins]]
id = "north"
volume_m3 = 2e6
mean_depth_m = 4.0
area_m2 = 5e5

[[stations]]
id = "FW-1"
kind = "buoy"
water_body = "fernwater"
basin = "north"
variables = ["chlorophyll_fluorescence", "phycocyanin", "water_temperature"]

[[feeds]]
name = "buoys"
kind = "csv-folder"
path = "drop"
pattern = "*.csv"
station = "FW-1"
layout = "wide"
time_column = "timestamp"
time_format = "%Y-%m-%d %H:%M"
columns.chl = { variable = "chlorophyll_fluorescence", unit = "ug/L" }
columns.pc = { variable = "phycocyanin", unit = "ug/L" }
columns.temp = { variable = "water_temperature", unit = "degC" }
"""


def setup(tmp_path):
    (tmp_path / "bloomline.toml").write_text(TOML)
    drop = tmp_path / "drop"
    drop.mkdir()
    for _k, day in enumerate(("01", "02")):
        rows = [(t, 5.0 + 0.01 * i, 1.0, 18.0) for i, t in enumerate(quarter_hours(f"2026-07-{day} 00:00", 4))]
        (drop / f"2026-07-{day}.csv").write_bytes(buoy_csv(rows))
    return tmp_path / "bloomline.toml", drop


def test_ingest_a_folder_prints_each_batch_and_the_totals(tmp_path):
    config, drop = setup(tmp_path)
    result = CliRunner().invoke(ingest, [str(drop), "--feed", "buoys", "--config", str(config)])
    assert result.exit_code == 0, result.output
    assert result.output.count("ok       ") == 2
    assert "2 batch(es): received 24, accepted 24, flagged 0, rejected 0, duplicate 0" in result.output
    again = CliRunner().invoke(ingest, [str(drop / "2026-07-01.csv"), "--feed", "buoys", "--config", str(config)])
    assert "duplicate 12" in again.output


def test_a_file_whose_every_row_is_rejected_exits_1(tmp_path):
    config, drop = setup(tmp_path)
    bad = drop / "bad.csv"
    bad.write_bytes(b"timestamp,chl,pc,temp\nyesterday,1,1,1\n")
    result = CliRunner().invoke(ingest, [str(bad), "--feed", "buoys", "--config", str(config)])
    assert result.exit_code == 1
    assert "rejected" in result.output and "does not match the time format" in result.output


def test_unknown_feed_and_missing_path_are_clear_errors(tmp_path):
    config, drop = setup(tmp_path)
    r = CliRunner().invoke(ingest, [str(drop), "--feed", "nope", "--config", str(config)])
    assert r.exit_code != 0 and "no feed named 'nope'" in r.output
    r = CliRunner().invoke(ingest, [str(tmp_path / "absent.csv"), "--feed", "buoys", "--config", str(config)])
    assert r.exit_code != 0 and "no file at" in r.output


def test_ingest_a_url(tmp_path):
    config, drop = setup(tmp_path)
    body = (drop / "2026-07-01.csv").read_bytes()

    class Handler(BaseHTTPRequestHandler):
        def log_message(self, *args):
            pass

        def do_GET(self):
            self.send_response(200)
            self.send_header("Content-Length", str(len(body)))
            self.end_headers()
            self.wfile.write(body)

    httpd = ThreadingHTTPServer(("127.0.0.1", 0), Handler)
    thread = threading.Thread(target=httpd.serve_forever, daemon=True)
    thread.start()
    try:
        url = f"http://127.0.0.1:{httpd.server_address[1]}/buoy.csv"
        result = CliRunner().invoke(ingest, [url, "--feed", "buoys", "--config", str(config)])
    finally:
        httpd.shutdown()
        httpd.server_close()
    assert result.exit_code == 0, result.output
    assert "accepted 12" in result.output
