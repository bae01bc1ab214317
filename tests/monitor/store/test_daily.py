"""Daily means aggregated in SQL agree with the same aggregation done in pandas, on both databases."""

from __future__ import annotations

import datetime as dt

import numpy as np
import pandas as pd
from sqlalchemy import insert

from monitor.store import schema
from monitor.store.daily import daily_means

UTC = dt.UTC
ANCHOR = dt.datetime(2026, 6, 10, 6, 0, tzinfo=UTC)


def _store(engine, times, values, flags):
    with engine.begin() as conn:
        batch = conn.execute(insert(schema.ingest_batches).values(
            feed="t", origin="t", sha256="0" * 64, received_at=ANCHOR, status="ok")).inserted_primary_key[0]
        conn.execute(insert(schema.readings), [
            dict(station_id="S1", variable="chlorophyll_a", time_utc=t, value=v, qc_flag=f, source="t",
                 batch_id=batch) for t, v, f in zip(times, values, flags)])


def test_daily_means_match_pandas_windows_including_times_on_a_window_end(engine):
    rng = np.random.default_rng(5)
    # random minutes over three weeks either side of the anchor, plus readings exactly on window ends
    minutes = np.unique(rng.integers(-21 * 1440, 21 * 1440, 400))
    times = [ANCHOR + dt.timedelta(minutes=int(m)) for m in minutes]
    times += [ANCHOR + dt.timedelta(days=k) for k in (-3, 0, 2) if ANCHOR + dt.timedelta(days=k) not in times]
    values = rng.lognormal(1.0, 0.5, len(times)).tolist()
    flags = rng.choice([1, 1, 1, 3], len(times)).tolist()
    values[5] = None
    _store(engine, times, values, flags)
    start, end = ANCHOR - dt.timedelta(days=15), ANCHOR + dt.timedelta(days=12)
    got = daily_means(engine, stations=["S1"], variables=["chlorophyll_a"], anchor=ANCHOR, start=start, end=end)

    # reference: the window (end - 1 d, end] by ceiling division, done in pandas (common practice)
    frame = pd.DataFrame({"t": pd.to_datetime(times, utc=True), "v": values, "f": flags}).dropna()
    frame = frame[(frame.f <= 1) & (frame.t > start) & (frame.t <= end)]
    seconds = (frame.t - pd.Timestamp(ANCHOR)).dt.total_seconds().to_numpy()
    frame["end"] = pd.Timestamp(ANCHOR) + pd.to_timedelta(np.ceil(seconds / 86400.0), unit="D")
    want = frame.groupby("end").v.agg(["mean", "size"])
    assert got.day_end_utc.tolist() == list(want.index)
    assert np.allclose(got.value.to_numpy(), want["mean"].to_numpy(), rtol=1e-12)
    assert got.n.tolist() == want["size"].tolist()


def test_censored_readings_never_enter_a_mean_and_are_counted_on_request(engine):
    rows = [  # (hours after the anchor, value, censored, detection limit, flag)
        (1, 4.0, 0, None, 1), (2, None, 1, 0.5, 9), (3, 6.0, 0, None, 1),  # window 1: mean 5, one censored
        (25, None, 1, 0.5, 9), (26, None, 1, 2.0, 9), (27, None, 1, None, 9),  # window 2: censored only
    ]
    with engine.begin() as conn:
        batch = conn.execute(insert(schema.ingest_batches).values(
            feed="t", origin="t", sha256="0" * 64, received_at=ANCHOR, status="ok")).inserted_primary_key[0]
        conn.execute(insert(schema.readings), [
            dict(station_id="S1", variable="nitrate", time_utc=ANCHOR + dt.timedelta(hours=h), value=v, censored=c,
                 detection_limit=dl, qc_flag=f, source="t", batch_id=batch) for h, v, c, dl, f in rows])
    args = dict(stations=["S1"], variables=["nitrate"], anchor=ANCHOR, start=ANCHOR, end=ANCHOR + dt.timedelta(days=3))
    plain = daily_means(engine, max_flag=9, **args)
    assert plain[["value", "n"]].values.tolist() == [[5.0, 2]]
    both = daily_means(engine, with_censored=True, **args)
    assert both["day_end_utc"].tolist() == [pd.Timestamp(ANCHOR + dt.timedelta(days=k)) for k in (1, 2)]
    assert both["n"].tolist() == [2, 0] and both["n_censored"].tolist() == [1, 3]
    assert both["value"].iloc[0] == 5.0 and np.isnan(both["value"].iloc[1])
    assert both["detection_limit"].tolist() == [0.5, 2.0]  # the largest known limit of the window
