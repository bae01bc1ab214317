"""Time conversions: aware UTC datetimes, int64 ns, epoch days and the store's naive UTC."""

from __future__ import annotations

import datetime as dt

import numpy as np
import pandas as pd
import pytest
from sqlalchemy import Column, Integer, MetaData, Table, create_engine, insert, select

from monitor import timeutil as tu
from monitor.store.schema import UTCDateTime

UTC = dt.UTC
PLUS2 = dt.timezone(dt.timedelta(hours=2))


def test_unix_time_of_the_year_2000_in_ns_and_epoch_days():
    # 2000-01-01T00:00Z is Unix time 946684800 s, 10957 days after 1970-01-01 (from memory)
    t = dt.datetime(2000, 1, 1, tzinfo=UTC)
    assert tu.ns_from_datetime(t) == 946_684_800 * 10**9
    assert tu.to_epoch_days(t) == 10957.0
    assert tu.datetime_from_ns(946_684_800 * 10**9) == t
    assert tu.from_epoch_days(10957.0) == t


def test_ns_and_aware_datetime_round_trip_to_the_microsecond():
    rng = np.random.default_rng(7)
    # microsecond multiples between 1900 and 2199, the span the ingest accepts
    us = rng.integers(-2_208_988_800 * 10**6, 7_258_118_400 * 10**6, size=200)
    for ns in (us * 1000).tolist():
        t = tu.datetime_from_ns(ns)
        assert t.tzinfo is not None and t.utcoffset() == dt.timedelta(0)
        assert tu.ns_from_datetime(t) == ns
        # the same instant by the standard library's own arithmetic
        assert (t - tu.EPOCH) == dt.timedelta(microseconds=ns // 1000)


def test_ns_from_datetime_converts_offsets_to_utc_and_refuses_naive_times():
    assert tu.ns_from_datetime(dt.datetime(2026, 9, 1, 14, 0, tzinfo=PLUS2)) == \
        tu.ns_from_datetime(dt.datetime(2026, 9, 1, 12, 0, tzinfo=UTC))
    with pytest.raises(ValueError, match="naive datetime .* expected an aware UTC time"):
        tu.ns_from_datetime(dt.datetime(2026, 9, 1, 12, 0))


def test_durations_in_hours_and_days_to_ns_and_back():
    assert tu.NS_PER_HOUR == 3600 * 10**9 and tu.NS_PER_DAY == 86400 * 10**9
    assert tu.ns_from_hours(1.5) == 5400 * 10**9
    assert tu.ns_from_days(14.0) == 14 * 86400 * 10**9
    assert tu.ns_from_days(2 * 14.0 + 56.0) == 84 * 86400 * 10**9
    np.testing.assert_array_equal(tu.hours_from_ns(np.array([0, 900, 5400], dtype=np.int64) * 10**9),
                                  [0.0, 0.25, 1.5])


def test_db_times_write_what_sqlalchemy_stores_in_sqlite_and_ns_from_db_reads_it_back():
    # the reference is SQLAlchemy's own SQLite DateTime storage, through Bloomline's UTCDateTime column
    engine = create_engine("sqlite://")
    table = Table("times", MetaData(), Column("id", Integer, primary_key=True), Column("t", UTCDateTime()))
    table.metadata.create_all(engine)
    ns = np.array([0, 1_788_264_000_123_456_000, -2_208_988_800 * 10**9, 7_258_118_399_999_999_000],
                  dtype=np.int64)
    with engine.begin() as conn:
        conn.execute(insert(table), [{"id": i, "t": tu.datetime_from_ns(int(x))} for i, x in enumerate(ns)])
        raw = [r[0] for r in conn.exec_driver_sql("SELECT t FROM times ORDER BY id")]
        typed = [r[0] for r in conn.execute(select(table.c.t).order_by(table.c.id))]
    assert raw == tu.db_times(ns, "sqlite")
    assert raw[1] == "2026-09-01 12:00:00.123456"
    np.testing.assert_array_equal(tu.ns_from_db(raw, "sqlite"), ns)
    np.testing.assert_array_equal(tu.ns_from_db(typed, "sqlite"), ns)  # aware datetimes too


def test_sqlite_text_time_to_ns():
    got = tu.ns_from_db(["2026-09-01 12:00:00.000000", "2026-09-01 12:15:00"], "sqlite")
    assert got.dtype == np.int64
    assert got.tolist() == [tu.ns_from_datetime(tu.utc(2026, 9, 1, 12)), tu.ns_from_datetime(tu.utc(2026, 9, 1, 12, 15))]
    assert tu.ns_from_db([], "sqlite").dtype == np.int64 and tu.db_times(np.array([], dtype=np.int64), "sqlite") == []


def test_db_times_for_other_dialects_are_naive_utc_datetimes_and_read_back():
    ns = np.array([1_788_264_000_000_000_000, 1_788_264_000_000_000_000, 0], dtype=np.int64)
    values = tu.db_times(ns, "postgresql")
    assert values == [dt.datetime(2026, 9, 1, 12, 0), dt.datetime(2026, 9, 1, 12, 0), dt.datetime(1970, 1, 1)]
    np.testing.assert_array_equal(tu.ns_from_db(values, "postgresql"), ns)
    aware = [dt.datetime(2026, 9, 1, 14, 0, tzinfo=PLUS2)]
    assert tu.ns_from_db(aware, "postgresql").tolist() == [1_788_264_000_000_000_000]


def test_the_edge_converters_keep_aware_utc_and_take_the_store_naive_values_as_utc():
    naive = dt.datetime(2026, 9, 1, 12, 0)
    aware = dt.datetime(2026, 9, 1, 12, 0, tzinfo=UTC)
    assert tu.as_utc(naive) == aware and tu.as_utc(naive).tzinfo is UTC
    assert tu.as_utc(dt.datetime(2026, 9, 1, 14, 0, tzinfo=PLUS2)).tzinfo is UTC
    assert tu.naive_utc(dt.datetime(2026, 9, 1, 14, 0, tzinfo=PLUS2)) == naive
    with pytest.raises(ValueError, match="expected an aware UTC time"):
        tu.naive_utc(naive)
    assert tu.parse_utc("2026-09-01T12:00") == aware
    assert tu.parse_utc("2026-09-01T14:00+02:00") == aware and tu.parse_utc("2026-09-01T14:00+02:00").tzinfo is UTC
    assert tu.utc_from_db("2026-09-01 12:00:00.000000") == aware
    assert tu.utc_from_db(naive) == aware
    assert tu.aware_utc(None) is None
    assert tu.aware_utc("2026-09-01T14:00+02:00") == aware
    with pytest.raises(ValueError, match="start must be an aware datetime"):
        tu.aware_utc(naive, "start")


def test_utc_series_from_db_reads_text_and_datetimes_as_aware_utc():
    from_text = tu.utc_series_from_db(["2026-09-01 12:00:00.000000"])
    from_dt = tu.utc_series_from_db([dt.datetime(2026, 9, 1, 14, 0, tzinfo=PLUS2)])
    expected = pd.Timestamp("2026-09-01T12:00Z")
    assert from_text.dtype == "datetime64[ns, UTC]" and from_text.iloc[0] == expected
    assert from_dt.iloc[0] == expected
    assert tu.utc_series_from_db([]).dtype == "datetime64[ns, UTC]"


def test_epoch_days_round_trip_and_refuse_naive_times():
    t = tu.utc(2026, 9, 1, 6)
    assert tu.to_epoch_days(t) == pytest.approx(20697.25)  # 2026-09-01 is day 20697 (datetime arithmetic)
    assert (tu.utc(2026, 9, 1) - tu.EPOCH).days == 20697
    assert tu.from_epoch_days(tu.to_epoch_days(t)) == t
    with pytest.raises(ValueError, match="naive datetime"):
        tu.to_epoch_days(dt.datetime(2026, 9, 1))
