"""Real-time quality control of readings after the US IOOS QARTOD manuals.

Flags follow the *Manual for Real-Time Oceanographic Data Quality Control
Flags* (U.S. IOOS, 2020): 1 pass, 2 not evaluated, 3 suspect, 4 fail,
9 missing. The tests are those of the QARTOD parameter manuals (e.g.
*Manual for Real-Time Quality Control of Dissolved Oxygen Observations*,
U.S. IOOS 2018; *… of Dissolved Nutrients Observations*, 2015):

* gross range: outside the sensor span → 4, outside the user span → 3;
* climatology: outside the expected (seasonal) span → 3;
* spike: reference = mean of the two neighbouring points,
  ``|V − ref| > spike_fail`` → 4, ``> spike_suspect`` → 3; the first and
  last points are not evaluated (2);
* rate of change: ``|ΔV| / Δt > rate_of_change_per_h`` → 3 (first point 2);
* (Bloomline's extension) with ``threshold_scale_level`` L the spike and
  rate-of-change thresholds are multiplied by ``max(1, level / L)``: a
  fluorometer's noise grows with the signal, so fixed thresholds that fit
  clear water would flag ordinary bloom-time noise as suspect;
* flat line: every value in the trailing ``flat_line_suspect_h`` (resp.
  ``flat_line_fail_h``) hours within ``flat_line_tolerance`` of the present
  one → 3 (resp. 4);

plus a drift check of in-situ chlorophyll fluorescence against extracted
(lab) chlorophyll-a: at two successive lab samples the sensor departs the
same way, by more than ``drift_suspect_fraction``, from what its own recent
sensor/lab ratio predicts → 3 (:func:`monitor.ingest.qc_drift.drift`).

Each reading keeps one digit per test in :data:`TESTS` order (its
``qc_tests`` string) and an aggregate flag: 4 if any test failed, else 3 if
any was suspect, else 1 if any passed, else 2. Missing values get 9.

Neighbours farther apart than :data:`MAX_NEIGHBOUR_GAP_H` are not compared
(spike and rate of change give 2 across a gap), so the result for a reading
depends only on readings within a bounded time window — which lets the
ingest re-evaluate a stored neighbourhood incrementally and get the same
flags as a run over the whole series.

The functions here are pure: numpy arrays in, flag arrays out.
"""

from __future__ import annotations

from collections.abc import Mapping

import numpy as np

from monitor.ingest.qc_drift import drift
from monitor.ingest.qc_flags import FAIL, MISSING, NOT_EVALUATED, PASS, SUSPECT
from monitor.timeutil import hours_from_ns

TESTS = ("gross_range", "climatology", "spike", "rate_of_change", "flat_line", "drift")
MAX_NEIGHBOUR_GAP_H = 6.0  # [h] spike and rate of change compare only neighbours this close

# Defaults per variable in canonical units. Sensor spans are typical
# manufacturer ranges of field fluorometers, thermistors and gauges
# (from memory); user spans, spike, rate and flat-line settings are common
# practice for 15-minute lake buoy data and hourly weather. ``None`` = the
# test is not run (digit 2). Every key can be overridden in the config's
# [qc.<variable>] table and per station in [stations.qc.<variable>].
_NONE = dict.fromkeys(
    ("sensor_min", "sensor_max", "user_min", "user_max", "climatology_min", "climatology_max",
     "spike_suspect", "spike_fail", "rate_of_change_per_h", "flat_line_tolerance",
     "flat_line_suspect_h", "flat_line_fail_h", "drift_suspect_fraction", "threshold_scale_level"))


def _d(**kw) -> dict:
    return {**_NONE, **kw}


DEFAULTS: dict[str, dict[str, float | None]] = {
    # Fluorometers report small negative values near zero (offset noise): below zero is suspect,
    # below -5 µg/L a failure (common practice).
    "chlorophyll_fluorescence": _d(sensor_min=-5.0, sensor_max=400.0, user_min=0.0, user_max=300.0,
                                   spike_suspect=10.0, spike_fail=25.0, rate_of_change_per_h=40.0,
                                   flat_line_tolerance=1e-3, flat_line_suspect_h=6.0, flat_line_fail_h=12.0,
                                   drift_suspect_fraction=0.3, threshold_scale_level=20.0),
    "phycocyanin": _d(sensor_min=-5.0, sensor_max=300.0, user_min=0.0, user_max=200.0,
                      spike_suspect=8.0, spike_fail=20.0, rate_of_change_per_h=30.0,
                      flat_line_tolerance=1e-3, flat_line_suspect_h=6.0, flat_line_fail_h=12.0,
                      threshold_scale_level=15.0),
    "water_temperature": _d(sensor_min=-5.0, sensor_max=50.0, user_min=-1.0, user_max=35.0,
                            spike_suspect=1.5, spike_fail=4.0, rate_of_change_per_h=2.0,
                            flat_line_tolerance=1e-3, flat_line_suspect_h=6.0, flat_line_fail_h=12.0),
    "chlorophyll_a": _d(sensor_min=0.0, sensor_max=5000.0, user_min=0.0, user_max=1000.0),
    "nitrate": _d(sensor_min=0.0, sensor_max=100_000.0, user_min=0.0, user_max=20_000.0),
    "srp": _d(sensor_min=0.0, sensor_max=10_000.0, user_min=0.0, user_max=1000.0),
    "total_phosphorus": _d(sensor_min=0.0, sensor_max=20_000.0, user_min=0.0, user_max=3000.0),
    "microcystin": _d(sensor_min=0.0, sensor_max=50_000.0, user_min=0.0, user_max=2000.0),
    "ammonium": _d(sensor_min=0.0, sensor_max=100_000.0, user_min=0.0, user_max=20_000.0),
    "total_nitrogen": _d(sensor_min=0.0, sensor_max=200_000.0, user_min=0.0, user_max=30_000.0),
    # Sonde variables (DO, saturation, pH, turbidity, conductance): sensor spans are typical optical
    # DO, glass pH, nephelometer and conductivity cell ranges (from memory); user spans, spike,
    # rate and flat-line settings common practice for 15-minute lake data. Turbidity and
    # conductance step legitimately (storm inflow, sensor resolution): gross range and flat line
    # (turbidity) only.
    "dissolved_oxygen": _d(sensor_min=0.0, sensor_max=50.0, user_min=0.0, user_max=25.0,
                           spike_suspect=2.0, spike_fail=5.0, rate_of_change_per_h=3.0,
                           flat_line_tolerance=1e-3, flat_line_suspect_h=6.0, flat_line_fail_h=12.0),
    "oxygen_saturation": _d(sensor_min=0.0, sensor_max=500.0, user_min=0.0, user_max=250.0,
                            spike_suspect=20.0, spike_fail=50.0, rate_of_change_per_h=30.0,
                            flat_line_tolerance=1e-3, flat_line_suspect_h=6.0, flat_line_fail_h=12.0),
    "ph": _d(sensor_min=0.0, sensor_max=14.0, user_min=4.0, user_max=11.0,
             spike_suspect=0.5, spike_fail=1.0, rate_of_change_per_h=1.0,
             flat_line_tolerance=1e-4, flat_line_suspect_h=6.0, flat_line_fail_h=12.0),
    "turbidity": _d(sensor_min=0.0, sensor_max=4000.0, user_min=0.0, user_max=1000.0,
                    flat_line_tolerance=1e-4, flat_line_suspect_h=12.0, flat_line_fail_h=24.0),
    "specific_conductance": _d(sensor_min=0.0, sensor_max=200_000.0, user_min=1.0, user_max=10_000.0),
    "secchi_depth": _d(sensor_min=0.0, sensor_max=50.0, user_min=0.0, user_max=20.0),
    "discharge": _d(sensor_min=0.0, sensor_max=100_000.0, user_min=0.0, user_max=5000.0),
    "air_temperature": _d(sensor_min=-60.0, sensor_max=60.0, user_min=-40.0, user_max=45.0,
                          spike_suspect=5.0, spike_fail=10.0, rate_of_change_per_h=8.0,
                          flat_line_tolerance=1e-6, flat_line_suspect_h=12.0, flat_line_fail_h=24.0),
    # Shortwave is legitimately flat (zero) all night: no flat-line or spike test.
    "shortwave_radiation": _d(sensor_min=0.0, sensor_max=1500.0, user_min=0.0, user_max=1400.0),
    "wind_speed": _d(sensor_min=0.0, sensor_max=75.0, user_min=0.0, user_max=40.0,
                     flat_line_tolerance=1e-6, flat_line_suspect_h=24.0, flat_line_fail_h=48.0),
}


def thresholds(variable: str, *overrides: Mapping[str, float] | None) -> dict[str, float | None]:
    """The QC settings for ``variable``: defaults, then each override table in turn."""
    out = dict(DEFAULTS.get(variable, _NONE))
    for table in overrides:
        if table:
            out.update({k: float(v) for k, v in table.items()})
    return out


def settings_for(config, station_id: str, variable: str) -> dict:
    """Defaults ⊕ ``config.qc[variable]`` ⊕ the station's ``qc[variable]``.

    A station's seasonal climatology (twelve monthly spans) comes along as
    ``climatology_months`` and takes precedence over the scalar span.
    """
    station_qc, months = {}, None
    for st in getattr(config, "stations", ()):
        if st.id == station_id:
            station_qc = st.qc.get(variable, {})
            months = getattr(st, "climatology", {}).get(variable)
    out = thresholds(variable, getattr(config, "qc", {}).get(variable), station_qc)
    out["climatology_months"] = months
    return out


def context_hours(settings: Mapping[str, float | None]) -> float:
    """[h] how far a reading's QC result depends on its neighbours (flat line + neighbour gap)."""
    fail_h = settings.get("flat_line_fail_h") or 0.0
    suspect_h = settings.get("flat_line_suspect_h") or 0.0
    return max(fail_h, suspect_h) + MAX_NEIGHBOUR_GAP_H


# --------------------------------------------------------------------------
# The tests (values without missing points, in time order)


def gross_range(values: np.ndarray, sensor_min=None, sensor_max=None, user_min=None, user_max=None) -> np.ndarray:
    """QARTOD gross range test (U.S. IOOS 2018, DO manual test 6): 4 outside the sensor span, 3 outside the user span."""
    v = np.asarray(values, dtype=float)
    if all(x is None for x in (sensor_min, sensor_max, user_min, user_max)):
        return np.full(v.shape, NOT_EVALUATED, dtype=np.uint8)
    flags = np.full(v.shape, PASS, dtype=np.uint8)
    lo_u = -np.inf if user_min is None else user_min
    hi_u = np.inf if user_max is None else user_max
    flags[(v < lo_u) | (v > hi_u)] = SUSPECT
    lo_s = -np.inf if sensor_min is None else sensor_min
    hi_s = np.inf if sensor_max is None else sensor_max
    flags[(v < lo_s) | (v > hi_s)] = FAIL
    return flags


def climatology(values: np.ndarray, low=None, high=None) -> np.ndarray:
    """QARTOD climatology test (U.S. IOOS 2018, DO manual test 7): 3 outside the expected span.

    ``low``/``high`` are scalars or arrays of the same length as ``values``
    (a seasonal span evaluated at each reading's time).
    """
    v = np.asarray(values, dtype=float)
    if low is None and high is None:
        return np.full(v.shape, NOT_EVALUATED, dtype=np.uint8)
    lo = -np.inf if low is None else np.asarray(low, dtype=float)
    hi = np.inf if high is None else np.asarray(high, dtype=float)
    return np.where((v < lo) | (v > hi), SUSPECT, PASS).astype(np.uint8)


def _neighbours_close(times_h: np.ndarray, max_gap_h: float) -> tuple[np.ndarray, np.ndarray]:
    gaps = np.diff(times_h)
    ok = gaps <= max_gap_h
    before = np.concatenate([[False], ok])  # point i has a close neighbour at i-1
    after = np.concatenate([ok, [False]])  # point i has a close neighbour at i+1
    return before, after


def _scale(level: np.ndarray, scale_level) -> np.ndarray | float:
    """Threshold multiplier max(1, |level| / scale_level); 1 when no scale level is set."""
    if scale_level is None:
        return 1.0
    return np.maximum(1.0, np.abs(level) / float(scale_level))


def spike(values: np.ndarray, suspect=None, fail=None, times_h: np.ndarray | None = None,
          max_gap_h: float = MAX_NEIGHBOUR_GAP_H, scale_level=None) -> np.ndarray:
    """QARTOD spike test (U.S. IOOS 2018, DO manual test 8).

    Reference = mean of the previous and the next value; ``|V − ref| >
    fail`` → 4, ``> suspect`` → 3, else 1; points without both neighbours
    (first, last, or next to a gap longer than ``max_gap_h`` [h]) → 2.

    With ``scale_level`` [unit] (Bloomline's extension for fluorometers,
    whose noise grows with the signal) both thresholds are multiplied by
    ``max(1, |ref| / scale_level)``.
    """
    v = np.asarray(values, dtype=float)
    flags = np.full(v.shape, NOT_EVALUATED, dtype=np.uint8)
    if v.size < 3 or (suspect is None and fail is None):
        return flags
    ref = 0.5 * (v[:-2] + v[2:])
    factor = _scale(ref, scale_level)
    dev = np.abs(v[1:-1] - ref) / factor
    inner = np.full(dev.shape, PASS, dtype=np.uint8)
    if suspect is not None:
        inner[dev > suspect] = SUSPECT
    if fail is not None:
        inner[dev > fail] = FAIL
    flags[1:-1] = inner
    if times_h is not None:
        before, after = _neighbours_close(np.asarray(times_h, dtype=float), max_gap_h)
        flags[~(before & after)] = NOT_EVALUATED
    return flags


def rate_of_change(values: np.ndarray, times_h: np.ndarray, threshold_per_h=None,
                   max_gap_h: float = MAX_NEIGHBOUR_GAP_H, scale_level=None) -> np.ndarray:
    """QARTOD rate of change test (U.S. IOOS 2018, DO manual test 9): ``|ΔV|/Δt`` [unit/h] above the threshold → 3.

    The first point, and a point after a gap longer than ``max_gap_h`` [h],
    → 2. With ``scale_level`` the threshold is multiplied by ``max(1,
    mean(|V_n|, |V_n-1|) / scale_level)``.
    """
    v = np.asarray(values, dtype=float)
    t = np.asarray(times_h, dtype=float)
    flags = np.full(v.shape, NOT_EVALUATED, dtype=np.uint8)
    if v.size < 2 or threshold_per_h is None:
        return flags
    dt_h = np.diff(t)
    rate = np.abs(np.diff(v)) / np.where(dt_h > 0, dt_h, np.nan)
    rate = rate / _scale(0.5 * (np.abs(v[1:]) + np.abs(v[:-1])), scale_level)
    inner = np.where(rate > threshold_per_h, SUSPECT, PASS).astype(np.uint8)
    inner[~(dt_h <= max_gap_h)] = NOT_EVALUATED
    flags[1:] = inner
    return flags


def flat_line(values: np.ndarray, times_h: np.ndarray, tolerance=None, suspect_h=None, fail_h=None,
              max_gap_h: float = MAX_NEIGHBOUR_GAP_H) -> np.ndarray:
    """QARTOD flat line test (U.S. IOOS 2018, DO manual test 10).

    A point is suspect (3) if every value in the trailing ``suspect_h``
    hours (including the point at exactly ``t − suspect_h``) lies within
    ``tolerance`` of it, and fails (4) likewise over ``fail_h``. A point
    whose series does not reach back the whole duration, whose window holds
    fewer than three values, or whose window has a gap longer than
    ``max_gap_h`` [h] (an outage is not a flat line), is not evaluated for
    that level; with neither level evaluable it gets 2.
    """
    v = np.asarray(values, dtype=float)
    t = np.asarray(times_h, dtype=float)
    flags = np.full(v.shape, NOT_EVALUATED, dtype=np.uint8)
    if v.size == 0 or tolerance is None or (suspect_h is None and fail_h is None):
        return flags
    evaluated = np.zeros(v.shape, dtype=bool)
    result = np.full(v.shape, PASS, dtype=np.uint8)
    gaps = np.diff(t)
    idx = np.arange(v.size)
    for duration, level in ((suspect_h, SUSPECT), (fail_h, FAIL)):
        if duration is None:
            continue
        start = np.searchsorted(t, t - duration - 1e-9, side="left")
        count = idx - start + 1
        has_history = t[0] <= t - duration + 1e-9
        ok = has_history & (count >= 3)
        # the window must be covered by data: no gap longer than max_gap_h from the last point
        # at or before t - duration up to the present point (an outage is not a flat line)
        if gaps.size:
            first = np.where(t[start] > t - duration + 1e-9, start - 1, start).clip(0)
            g_start = np.minimum(first, np.maximum(idx - 1, 0))[1:]
            g_max, _ = _window_max_min(gaps, g_start)
            covered = np.concatenate([[False], g_max <= max_gap_h])
            ok &= covered
        hi, lo = _window_max_min(v, start)
        flat = ok & (hi - v < tolerance) & (v - lo < tolerance)
        evaluated |= ok
        result[flat] = level
    flags[evaluated] = result[evaluated]
    return flags


def _window_max_min(v: np.ndarray, start: np.ndarray) -> tuple[np.ndarray, np.ndarray]:
    """max and min of ``v[start[i]:i+1]`` for every i: a sparse-table range query, O(n log n)."""
    n = v.size
    if n == 0:
        return v.copy(), v.copy()
    widths = np.arange(n) - start + 1
    levels_hi, levels_lo = [v], [v]
    span = 1
    while span * 2 <= widths.max():
        prev_hi, prev_lo = levels_hi[-1], levels_lo[-1]
        levels_hi.append(np.maximum(prev_hi[:-span], prev_hi[span:]))
        levels_lo.append(np.minimum(prev_lo[:-span], prev_lo[span:]))
        span *= 2
    j = np.floor(np.log2(widths)).astype(int)
    hi = np.empty(n)
    lo = np.empty(n)
    for level in np.unique(j):
        sel = np.nonzero(j == level)[0]
        width = 1 << int(level)
        a = start[sel]  # first block [a, a + width)
        b = sel - width + 1  # second block [b, b + width) ending at i
        hi[sel] = np.maximum(levels_hi[level][a], levels_hi[level][b])
        lo[sel] = np.minimum(levels_lo[level][a], levels_lo[level][b])
    return hi, lo


def aggregate(digits: np.ndarray) -> np.ndarray:
    """QARTOD aggregate flag per row of ``digits`` (n, tests): 4 > 3 > 1 > 2."""
    d = np.asarray(digits)
    out = np.full(d.shape[0], NOT_EVALUATED, dtype=np.uint8)
    out[(d == PASS).any(axis=1)] = PASS
    out[(d == SUSPECT).any(axis=1)] = SUSPECT
    out[(d == FAIL).any(axis=1)] = FAIL
    return out


def run_qc(times_ns: np.ndarray, values: np.ndarray, settings: Mapping[str, float | None],
           lab_times_ns: np.ndarray | None = None, lab_values: np.ndarray | None = None,
           drift_times_ns: np.ndarray | None = None, drift_values: np.ndarray | None = None
           ) -> tuple[np.ndarray, np.ndarray]:
    """All tests on one station's series of one variable.

    times_ns: int64 nanoseconds since 1970 UTC, strictly increasing;
    values [canonical unit], NaN = missing; settings from :func:`thresholds` or
    :func:`settings_for` (``climatology_months``: twelve (min, max) spans by UTC month);
    lab_times_ns / lab_values: extracted chlorophyll-a for the drift check;
    drift_times_ns / drift_values: the sensor readings around those lab
    samples (default: this series).
    Returns (flag (n,) uint8, digits (n, len(TESTS)) uint8).
    """
    t_ns = np.asarray(times_ns, dtype=np.int64)
    v = np.asarray(values, dtype=float)
    n = v.size
    digits = np.full((n, len(TESTS)), MISSING, dtype=np.uint8)
    present = np.isfinite(v)
    vp = v[present]
    th = hours_from_ns(t_ns[present] - (t_ns[0] if n else 0))
    s = settings
    cols = [
        gross_range(vp, s.get("sensor_min"), s.get("sensor_max"), s.get("user_min"), s.get("user_max")),
        climatology(vp, *_climatology_span(t_ns[present], s)),
        spike(vp, s.get("spike_suspect"), s.get("spike_fail"), th, scale_level=s.get("threshold_scale_level")),
        rate_of_change(vp, th, s.get("rate_of_change_per_h"), scale_level=s.get("threshold_scale_level")),
        flat_line(vp, th, s.get("flat_line_tolerance"), s.get("flat_line_suspect_h"), s.get("flat_line_fail_h")),
    ]
    if lab_times_ns is not None and len(lab_times_ns):
        t0 = t_ns[0] if n else 0
        lth = hours_from_ns(np.asarray(lab_times_ns, dtype=np.int64) - t0)
        if drift_times_ns is None:
            dth, dv = th, vp
        else:
            dth = hours_from_ns(np.asarray(drift_times_ns, dtype=np.int64) - t0)
            dv = np.asarray(drift_values, dtype=float)
        cols.append(drift(dth, dv, lth, np.asarray(lab_values, dtype=float), s.get("drift_suspect_fraction"),
                          at_times_h=th))
    else:
        cols.append(np.full(vp.shape, NOT_EVALUATED, dtype=np.uint8))
    digits[present] = np.stack(cols, axis=1) if n else digits[present]
    flag = np.full(n, MISSING, dtype=np.uint8)
    flag[present] = aggregate(digits[present])
    return flag, digits


def _climatology_span(t_ns: np.ndarray, s: Mapping) -> tuple:
    """(low, high) for each reading: the month's span of a seasonal climatology, else the scalar span."""
    months = s.get("climatology_months")
    if months is None:
        return s.get("climatology_min"), s.get("climatology_max")
    spans = np.asarray(months, dtype=float).reshape(12, 2)
    month = np.asarray(t_ns, dtype=np.int64).astype("datetime64[ns]").astype("datetime64[M]").astype(np.int64) % 12
    return spans[month, 0], spans[month, 1]


def digits_to_strings(digits: np.ndarray) -> np.ndarray:
    """(n, k) uint8 digits → array of n strings such as ``"112122"``."""
    d = np.ascontiguousarray(np.asarray(digits, dtype=np.uint8) + ord("0"))
    if d.shape[0] == 0:
        return np.array([], dtype=object)
    return d.view(f"S{d.shape[1]}").ravel().astype(str)
