"""Property-based checks of the values Bloomline keeps, on the CSV, JSON and MQTT paths.

Whatever the cells — fill values (-9999, 1e30 and beyond), non-finite text
and JSON literals, numbers whose conversion overflows, values below
detection (``<x``), negative blank-corrected lab values, annotated units —
nothing non-finite, no sentinel and no unmarked censored value is ever
produced or stored: a value written ``<x`` (or, where the feed says so, a
negative lab value) is censored with its limit, a plain value is a plain
decimal number that was written as such, and everything else is missing or
rejected with its reason. Re-ingesting a payload counts no conflicts.

The parser checks run 2,100 examples (700 per path); the store checks run
through :func:`monitor.ingest.batches.ingest_bytes` (CSV, JSON) and the MQTT
feed's own message handler.
"""

from __future__ import annotations

import json
import math
import re
import shutil
import tempfile
from pathlib import Path
from types import SimpleNamespace

import numpy as np
from hypothesis import HealthCheck, given, settings
from hypothesis import strategies as st

from monitor.config.models import DEFAULT_SENTINEL_MAGNITUDE, DEFAULT_SENTINELS
from monitor.ingest.batches import ingest_bytes
from monitor.ingest.feeds.mqtt import MqttFeed
from monitor.ingest.parsing import parse_payload
from monitor.ingest.units import resolve
from monitor.ingest.variables import VARIABLES
from monitor.store.db import connect, upgrade
from monitor.store.readings import rejected_rows_frame
from tests.monitor.conftest import NOW, fernwater

_DIR = Path(tempfile.mkdtemp(prefix="bloomline-values-"))
UNIT_MAP = {"ug/L N (nitrate+nitrite)": "ug/L N"}
LAB = {"name": "lab", "kind": "csv-folder", "path": str(_DIR / "lab"), "layout": "long", "time_column": "sampled_at",
       "time_format": "%Y-%m-%d %H:%M", "timezone": "Etc/GMT-2", "station_column": "site",
       "negative_means_below_detection": True, "detection_limits": {"nitrate": 2.0}, "units": UNIT_MAP}
PUSH = {"name": "push", "kind": "push", "token": "t0ken-for-property-tests", "format": "json", "layout": "long",
        "station_column": "station", "negative_means_below_detection": True}
MQTT = {"name": "buoy-mqtt", "kind": "mqtt", "topic": "lake/+/readings", "format": "json", "layout": "wide",
        "time_column": "time", "station_from_folder": True,
        "columns": {"chl": {"variable": "chlorophyll_fluorescence", "unit": "ug/L"},
                    "temp_f": {"variable": "water_temperature", "unit": "degF"},
                    "no3": {"variable": "nitrate", "unit": "g/L"}}}
CONFIG = fernwater(_DIR, feeds=[LAB, PUSH, MQTT])
MQTT_ORIGIN = "mqtt://127.0.0.1:1883/lake/FW-1/readings"
MISSING = {"", "na", "n/a", "nan", "null", "none"}
NUMBER = re.compile(r"[+-]?(?:\d+(?:\.\d*)?|\.\d+)(?:[eE][+-]?\d{1,4})?")

plain = st.one_of(st.floats(allow_nan=False, allow_infinity=False).map(repr),
                  st.integers(-10**35, 10**35).map(str),
                  st.floats(-1e4, 1e4).map(lambda x: f"{x:.3f}"))
sentinel = st.sampled_from(["-9999", "-9999.0", "-9999.000", "-999", "-999.00", "1e30", "-1e30", "1E+30", "2e30",
                            "1e308", "-1.7976931348623157e308", "9.999e29", "-9999.5"])
below = st.one_of(plain, sentinel, st.sampled_from(["0", "-1", "0.0"])).map(lambda x: "<" + x) | \
    st.sampled_from(["< 2", "<0.05", "<5e-3"])
nonfinite = st.sampled_from(["inf", "-inf", "Infinity", "-Infinity", "NaN", "nan", "1e999", "-1e999", "infinity"])
missing = st.sampled_from(["", "NA", "null", "none", "N/A"])
negative = st.floats(-100.0, -1e-6).map(repr)
cell = st.one_of(plain, sentinel, below, nonfinite, missing, negative)
overflow = st.sampled_from(["1e25", "5e29", "-3e27", "9.9e29", "2e24", "1.5e27"])  # beyond 1e30 in g/L or mg/L
json_value = st.one_of(cell, overflow, st.floats(allow_nan=True, allow_infinity=True), st.integers(-10**40, 10**40),
                       st.none())
UNITS = {"nitrate": ["mg/L", "ug/L N (nitrate+nitrite)", "g/L", "mg/L (as N)"],
         "srp": ["mg/L P", "ug/L (lab)", "g/L"], "chlorophyll_a": ["ug/L (extracted; lab)", "mg/L"],
         "ammonium": ["mg/L NH4", "ug/L N"], "water_temperature": ["degF", "°C (logger)"], "ph": ["-", ""]}
WRONG_UNITS = ["m/s (assumed)", "furlongs", "degF"]
UNIT_CHOICES = {v: st.sampled_from(units * 4 + WRONG_UNITS) for v, units in UNITS.items()}
minute = st.integers(0, 47)


def local_time(q: int) -> str:
    return f"2026-07-01 {q // 4:02d}:{15 * (q % 4):02d}"


def as_text(value) -> str:
    """A JSON scalar as the ingest reads it: null → "", a number by its repr (or str when not finite)."""
    if value is None:
        return ""
    if isinstance(value, float) and not math.isfinite(value):
        return str(value)
    return value if isinstance(value, str) else repr(value)


@st.composite
def long_rows(draw):
    rows = []
    for _ in range(draw(st.integers(1, 6))):
        var = draw(st.sampled_from(sorted(UNITS)))
        rows.append((draw(minute), draw(st.sampled_from(["FW-LAB", "FW-1"])), var, draw(json_value),
                     draw(UNIT_CHOICES[var])))
    return rows


def csv_payload(rows) -> tuple[bytes, list]:
    """CSV text of long rows (cells without commas or quotes), and the cells as written per line."""
    lines = ["sampled_at,site,variable,value,unit"]
    written = [None, None]  # lines 1 (header) and the 0th
    for q, station, var, value, u in rows:
        text = as_text(value)
        lines.append(f"{local_time(q)},{station},{var},{text},{u}")
        written.append((var, text, u))
    return ("\n".join(lines) + "\n").encode(), written


def json_payload(rows) -> tuple[bytes, list]:
    records = [{"time": f"{local_time(q)}Z".replace(" ", "T"), "station": s, "variable": v, "value": x, "unit": u}
               for q, s, v, x, u in rows]
    written = [None] + [(v, as_text(x), u) for _, _, v, x, u in rows]  # JSON "lines" are 1-based positions
    return json.dumps(records, allow_nan=True).encode(), written


@st.composite
def mqtt_rows(draw):
    return draw(st.lists(st.tuples(minute, json_value, json_value, json_value), min_size=1, max_size=4))


MQTT_COLUMNS = {"chlorophyll_fluorescence": ("chl", "ug/L"), "water_temperature": ("temp_f", "degF"),
                "nitrate": ("no3", "g/L")}


def mqtt_payload(rows) -> tuple[bytes, list]:
    records = [{"time": f"{local_time(q)}Z".replace(" ", "T"), "chl": a, "temp_f": b, "no3": c} for q, a, b, c in rows]
    written = [None] + [{"chlorophyll_fluorescence": as_text(a), "water_temperature": as_text(b),
                         "nitrate": as_text(c)} for _, a, b, c in rows]
    return json.dumps(records if len(records) > 1 else records[0], allow_nan=True).encode(), written


def is_fill(x: float) -> bool:
    return x in DEFAULT_SENTINELS or abs(x) >= DEFAULT_SENTINEL_MAGNITUDE


def check_values(parsed, feed, written_of) -> None:
    """Every reading: finite or missing; censored exactly when written below detection (or negative where
    the feed says so); a plain value was written as a plain, non-sentinel number; nothing reaches 1e30."""
    assert parsed.value.size == parsed.censored.size == parsed.variable.size
    assert not np.isinf(parsed.value).any()
    for var, value, censored, line in zip(parsed.variable, parsed.value, parsed.censored, parsed.line):
        written, u = written_of(int(line), var)
        written = written.strip()
        r = resolve(var, u, CONFIG.station("FW-1").calibration, feed.units)
        if censored:
            if written.startswith("<"):
                limit = float(written[1:].strip())
                assert limit > 0 and not is_fill(limit), written
                assert value == limit * r.scale + r.offset
            else:
                raw = float(written)
                assert raw < 0 and feed.negative_means_below_detection and VARIABLES[var].detection_limited
                want = feed.detection_limits.get(var, np.nan)
                assert value == want or (np.isnan(value) and np.isnan(want))
        elif np.isnan(value):
            assert written.lower() in MISSING, written
        else:
            assert NUMBER.fullmatch(written), f"{value!r} from {written!r}"
            raw = float(written)
            assert not is_fill(raw), written
            assert not (raw < 0 and feed.negative_means_below_detection and VARIABLES[var].detection_limited)
            assert value == raw * r.scale + r.offset
        assert np.isnan(value) or abs(value) < DEFAULT_SENTINEL_MAGNITUDE
    for rej in parsed.rejected:
        assert rej.reason


def long_written(written):
    def of(line: int, var: str):
        wvar, text, u = written[line]
        assert wvar == var
        return text, u
    return of


PARSE = settings(max_examples=700, deadline=None, suppress_health_check=[HealthCheck.too_slow])


@PARSE
@given(long_rows())
def test_csv_values_are_finite_never_sentinels_and_censored_only_when_marked(rows):
    payload, written = csv_payload(rows)
    feed = CONFIG.feed("lab")
    check_values(parse_payload(payload, feed, CONFIG, origin="lab/x.csv", now=NOW), feed, long_written(written))


@PARSE
@given(long_rows())
def test_json_values_are_finite_never_sentinels_and_censored_only_when_marked(rows):
    payload, written = json_payload(rows)
    feed = CONFIG.feed("push")
    check_values(parse_payload(payload, feed, CONFIG, origin="push", now=NOW), feed, long_written(written))


@PARSE
@given(mqtt_rows())
def test_mqtt_values_are_finite_never_sentinels_and_censored_only_when_marked(rows):
    payload, written = mqtt_payload(rows)
    feed = CONFIG.feed("buoy-mqtt")

    def of(line: int, var: str):
        return written[line][var], MQTT_COLUMNS[var][1]

    check_values(parse_payload(payload, feed, CONFIG, origin=MQTT_ORIGIN, now=NOW), feed, of)


# --------------------------------------------------------------------------
# The store

_TEMPLATE = _DIR / "template.sqlite"
_engine = connect(f"sqlite:///{_TEMPLATE}")
upgrade(_engine)
_engine.dispose()


def check_store(engine) -> None:
    """Stored values are finite and below 1e30; a censored reading has no value, QC flag 9, a finite limit or none."""
    with engine.connect() as conn:
        rows = conn.exec_driver_sql("SELECT value, censored, detection_limit, qc_flag FROM readings").fetchall()
    for value, censored, limit, flag in rows:
        if censored:
            assert value is None and flag == 9
            assert limit is None or (math.isfinite(limit) and abs(limit) < DEFAULT_SENTINEL_MAGNITUDE)
        else:
            assert limit is None
            assert value is None or (math.isfinite(value) and abs(value) < DEFAULT_SENTINEL_MAGNITUDE)
            assert (value is None) == (flag == 9)


class _Message(SimpleNamespace):
    """What paho hands the MQTT feed's message handler: a topic and the payload bytes."""


@settings(max_examples=80, deadline=None, suppress_health_check=[HealthCheck.too_slow])
@given(st.sampled_from(["csv", "json", "mqtt"]), long_rows(), mqtt_rows())
def test_stored_values_hold_the_same_and_reingest_counts_no_conflicts(path, rows, buoy_rows):
    with tempfile.TemporaryDirectory() as td:
        shutil.copyfile(_TEMPLATE, Path(td) / "s.sqlite")
        engine = connect(f"sqlite:///{Path(td) / 's.sqlite'}")
        try:
            results = []
            for _ in range(2):
                if path == "mqtt":
                    payload, _w = mqtt_payload(buoy_rows)
                    feed = MqttFeed(engine, CONFIG, CONFIG.feed("buoy-mqtt"), client_id="bl-test-values")
                    feed._on_message(None, None, _Message(topic="lake/FW-1/readings", payload=payload))
                    assert not feed.errors, feed.errors
                    results.append(feed.results[-1])
                else:
                    payload, _w = csv_payload(rows) if path == "csv" else json_payload(rows)
                    feed = CONFIG.feed("lab" if path == "csv" else "push")
                    results.append(ingest_bytes(engine, CONFIG, feed, payload, f"{path}/x", now=NOW))
            first, again = results
            assert first.status != "failed" and again.status != "failed", (first.message, again.message)
            assert again.accepted == 0 and again.rejected == first.rejected
            reasons = rejected_rows_frame(engine)["reason"]
            assert not reasons.str.contains("conflicts with the stored reading").any()
            check_store(engine)
        finally:
            engine.dispose()
