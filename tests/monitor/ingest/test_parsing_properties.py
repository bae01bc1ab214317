"""Property-based checks of the parser and the ingest with random and adversarial payloads.

Whatever the bytes — wrong encodings, BOMs, huge fields, odd time formats,
duplicate headers, injection strings — the parser does not raise, every
value it yields is a number that was written as a plain decimal in the
payload (or a missing reading), and every record is accounted for: it
yields readings, or a rejection with its line, or both. (The stored values'
guarantees — nothing non-finite, no sentinel, no unmarked censored value —
are checked in ``test_value_properties.py``.)
"""

from __future__ import annotations

import codecs
import io
import json
import re
import tempfile
from pathlib import Path

import numpy as np
from hypothesis import HealthCheck, given, settings
from hypothesis import strategies as st

from monitor.ingest.batches import ingest_bytes
from monitor.ingest.parsing import parse_payload
from monitor.store.db import connect, upgrade
from monitor.store.readings import readings_frame
from tests.monitor.conftest import NOW, fernwater

_CONFIG_DIR = Path(tempfile.mkdtemp(prefix="bloomline-prop-"))
CONFIG = fernwater(_CONFIG_DIR)
BUOYS = CONFIG.feed("buoys")
PUSH = CONFIG.feed("utility")
NUMBER = re.compile(r"[+-]?(?:\d+(?:\.\d*)?|\.\d+)(?:[eE][+-]?\d{1,4})?")

INJECTIONS = ["'; DROP TABLE readings; --", "\" OR 1=1 --", "<script>alert(1)</script>", "${jndi:ldap://x}",
              "=cmd|' /C calc'!A0", "\x00", "../../etc/passwd", "%s%s%n", "Robert'); DELETE FROM rejected_rows;--"]
ODD_TIMES = ["2026-07-01 00:00", "2026-07-01T00:00:00Z", "01/07/2026 00:00", "2026-07-01 24:00", "2026-02-30 10:00",
             "1e9", "", "   ", "2026-07-01 00:00:00.123456789", "9999-12-31 23:59", "0001-01-01 00:00",
             "2026-07-01 00:00 +25:00", "２０２６-07-01 00:00", "2026-07-01\t00:00"]
cell = st.one_of(
    st.floats(allow_nan=True, allow_infinity=True).map(repr),
    st.integers(min_value=-10**30, max_value=10**30).map(str),
    st.sampled_from(["", "NA", "nan", "<0.1", "< 2", "1,5", "1_000", "0x1F", "+.5", "-0", "1e-400", "١٢٣", " 3 "]),
    st.sampled_from(INJECTIONS),
    st.text(max_size=30),
    st.integers(1, 3).map(lambda k: "9" * (70_000 * k)),  # fields up to past csv's 131,072-character limit
)
time_cell = st.one_of(st.sampled_from(ODD_TIMES), st.text(max_size=25))
header_name = st.sampled_from(["timestamp", "chl", "pc", "temp", "pc_rfu", "extra", "", "chl "])


@st.composite
def csv_payloads(draw):
    header = draw(st.one_of(st.just(["timestamp", "chl", "pc", "temp"]),
                            st.lists(header_name, min_size=1, max_size=6)))
    rows = draw(st.lists(st.lists(st.one_of(cell, time_cell), min_size=0, max_size=len(header) + 2),
                         max_size=12))
    good_rows = draw(st.lists(st.tuples(time_cell, cell, cell, cell).map(list), max_size=6))
    all_rows = rows + good_rows
    draw(st.randoms()).shuffle(all_rows)
    sep = draw(st.sampled_from(["\n", "\r\n", "\r"]))
    quote = draw(st.booleans())

    def fmt(value: str) -> str:
        if quote or any(c in value for c in ',"\n\r'):
            return '"' + value.replace('"', '""') + '"'
        return value

    text = sep.join(",".join(fmt(c) for c in row) for row in [header] + all_rows)
    encoding = draw(st.sampled_from(["utf-8", "utf-8-sig", "utf-16", "latin-1", "cp1252"]))
    data = text.encode(encoding, errors="replace")
    if draw(st.booleans()):
        data = codecs.BOM_UTF8 + data
    return data


json_value = st.recursive(
    st.one_of(st.none(), st.booleans(), st.integers(), st.floats(), st.text(max_size=20), st.sampled_from(INJECTIONS)),
    lambda children: st.lists(children, max_size=3) | st.dictionaries(st.text(max_size=8), children, max_size=3),
    max_leaves=8)
json_record = st.fixed_dictionaries(
    {"time": time_cell, "station": st.sampled_from(["FW-1", "FW-LAB", "nope", ""]),
     "variable": st.sampled_from(["water_temperature", "nitrate", "phycocyanin", "bogus"]),
     "value": st.one_of(json_value, cell), "unit": st.sampled_from(["degC", "mg/L", "RFU", "ug/L", "?"])},
    optional={"extra": json_value})


@st.composite
def json_payloads(draw):
    shape = draw(st.sampled_from(["list", "wrapped", "single", "garbage"]))
    records = draw(st.lists(st.one_of(json_record, json_value), max_size=10))
    if shape == "list":
        doc = records
    elif shape == "wrapped":
        doc = {"readings": records}
    elif shape == "single":
        doc = records[0] if records else {}
    else:
        return draw(st.binary(max_size=200))
    return json.dumps(doc, allow_nan=True).encode(draw(st.sampled_from(["utf-8", "utf-16", "utf-32"])))


def check_accounting(parsed) -> None:
    produced = set(parsed.line.tolist()) | {r.line for r in parsed.rejected}
    assert set(parsed.record_lines) == produced, "a record produced neither a reading nor a rejection"
    assert parsed.value.size == parsed.time_ns.size == parsed.station.size == parsed.variable.size
    finite = np.isfinite(parsed.value)
    assert (finite | np.isnan(parsed.value)).all()
    for r in parsed.rejected:
        assert r.reason and isinstance(r.raw, str) and "\x00" not in r.raw and len(r.raw) < 5000


@settings(max_examples=150, deadline=None, suppress_health_check=[HealthCheck.too_slow, HealthCheck.data_too_large])
@given(csv_payloads())
def test_adversarial_csv_never_crashes_and_every_record_is_accounted_for(payload):
    parsed = parse_payload(payload, BUOYS, CONFIG, origin="drop/FW-1/x.csv", now=NOW)
    check_accounting(parsed)


@settings(max_examples=150, deadline=None)
@given(st.binary(max_size=400))
def test_random_bytes_never_crash_the_csv_or_json_parser(payload):
    check_accounting(parse_payload(payload, BUOYS, CONFIG, origin="drop/FW-1/x.csv", now=NOW))
    check_accounting(parse_payload(payload, PUSH, CONFIG, origin="push", now=NOW))


@settings(max_examples=150, deadline=None, suppress_health_check=[HealthCheck.too_slow])
@given(json_payloads())
def test_adversarial_json_never_crashes_and_every_record_is_accounted_for(payload):
    check_accounting(parse_payload(payload, PUSH, CONFIG, origin="push", now=NOW))


@settings(max_examples=100, deadline=None)
@given(st.lists(st.tuples(st.integers(0, 95), cell, cell, cell), min_size=1, max_size=15))
def test_accepted_values_are_exactly_the_plain_numbers_written(rows):
    lines = ["timestamp,chl,pc,temp"]
    row_at_line = {}  # physical line where each record starts (quoted cells may hold line breaks)
    next_line = 2
    for k, (minute, *cells) in enumerate(rows):
        record = f"2026-07-01 {minute // 4:02d}:{15 * (minute % 4):02d}," + ",".join(
            '"' + c.replace('"', '""') + '"' for c in cells)
        lines.append(record)
        row_at_line[next_line] = k
        next_line += len(list(io.StringIO(record + "\n", newline="")))
    parsed = parse_payload("\n".join(lines).encode(), BUOYS, CONFIG, origin="drop/FW-1/x.csv", now=NOW)
    check_accounting(parsed)
    columns = {"chlorophyll_fluorescence": 1, "phycocyanin": 2, "water_temperature": 3}
    for var, value, censored, line in zip(parsed.variable, parsed.value, parsed.censored, parsed.line):
        written = rows[row_at_line[int(line)]][columns[var]].strip()
        if censored:  # the feed's below_detection is "censored" (the default): "<x" keeps its limit x
            assert written.startswith("<") and value == float(written[1:].strip())
        elif np.isnan(value):
            assert written.lower() in {"", "na", "n/a", "nan", "null", "none"}
        else:
            assert NUMBER.fullmatch(written), f"stored {value!r} from {written!r}"
            assert value == float(written)


@settings(max_examples=25, deadline=None, suppress_health_check=[HealthCheck.too_slow, HealthCheck.data_too_large])
@given(st.lists(csv_payloads(), min_size=1, max_size=3))
def test_ingest_counts_add_up_and_reingest_changes_nothing(payloads):
    with tempfile.TemporaryDirectory() as td:
        engine = connect(f"sqlite:///{Path(td) / 's.sqlite'}")
        upgrade(engine)
        try:
            for payload in payloads:
                r = ingest_bytes(engine, CONFIG, BUOYS, payload, "drop/FW-1/x.csv", now=NOW)
                assert r.status != "failed", r.message
                assert r.received == r.accepted + r.rejected + r.duplicate
            before = readings_frame(engine, max_flag=9)
            for payload in payloads:
                r = ingest_bytes(engine, CONFIG, BUOYS, payload, "drop/FW-1/x.csv", now=NOW)
                assert r.accepted == 0
            after = readings_frame(engine, max_flag=9)
            assert before.equals(after)
        finally:
            engine.dispose()


@settings(max_examples=200, deadline=None)
@given(st.lists(st.lists(st.text(alphabet=st.characters(blacklist_characters='"\r\x00'), max_size=8),
                         min_size=1, max_size=5), min_size=1, max_size=8))
def test_the_plain_csv_fast_path_reads_like_the_csv_module(rows):
    from monitor.ingest.tables import csv_table

    text = "\n".join(",".join(r) for r in rows) + "\n"
    fast_lines: list[int] = []
    slow_lines: list[int] = []
    fast = csv_table(text, [], fast_lines)
    slow = csv_table(text, [], slow_lines, fast=False)
    assert (fast is None) == (slow is None)
    if fast is not None:
        assert (fast.header, fast.rows, fast.lines, fast.raws) == (slow.header, slow.rows, slow.lines, slow.raws)
        assert fast_lines == slow_lines
