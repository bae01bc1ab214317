"""Drift of in-situ chlorophyll fluorescence against extracted (lab) chlorophyll-a.

At two successive lab samples the sensor departs the same way, by more
than ``drift_suspect_fraction``, from what its own recent sensor/lab ratio
predicts → suspect (3). The check is one of the QC tests of
:func:`monitor.ingest.qc.run_qc` (its last digit); the ingest
(:mod:`monitor.ingest.qc_storage`) uses the constants here to know which
stored readings a new lab sample or sensor reading can bear on.

Pure: numpy arrays in, flag arrays out.
"""

from __future__ import annotations

import numpy as np

from monitor.ingest.qc_flags import NOT_EVALUATED, PASS, SUSPECT

DRIFT_MATCH_WINDOW_H = 1.0  # [h] sensor readings within ± this of a lab sample are compared with it
DRIFT_HOLD_DAYS = 14.0  # [d] a comparison applies to sensor readings up to this long after it
DRIFT_FLOOR_UGL = 4.0  # [µg/L] below this, a deviation is judged against this level (noise at low chl)
DRIFT_BASELINE_DAYS = 56.0  # [d] earlier comparisons within this time form the sensor's reference ratio


def drift(sensor_times_h: np.ndarray, sensor_values: np.ndarray, lab_times_h: np.ndarray,
          lab_values: np.ndarray, suspect_fraction=None, at_times_h: np.ndarray | None = None,
          match_window_h: float = DRIFT_MATCH_WINDOW_H, hold_days: float = DRIFT_HOLD_DAYS,
          baseline_days: float = DRIFT_BASELINE_DAYS, floor: float = DRIFT_FLOOR_UGL) -> np.ndarray:
    """Drift of a chlorophyll fluorometer against extracted chlorophyll-a. [flags at ``at_times_h``]

    For each lab sample at t_k [h] with value L_k [µg/L], S_k is the median
    of the sensor readings within ± ``match_window_h`` and r_k = S_k / L_k.
    The sensor's reference ratio R_k is the median of the ratios of the
    preceding ``baseline_days`` (1, with twice the tolerance, while there
    are fewer than two), so a sensor whose gain differs from 1 is judged
    against its own history. The
    comparison deviates when ``|S_k − R_k·L_k| > suspect_fraction ·
    max(R_k·L_k, floor)`` (the floor [µg/L] keeps lab and sensor noise at
    low concentrations from counting as drift), and it is *drifting* when the
    previous or the next comparison (within ``hold_days``) deviates the same
    way: one odd sample is not drift. Each reading at ``at_times_h``
    (default: the sensor times) takes the result of the latest comparison at
    or before it (from ``t_k − match_window_h`` on) at most ``hold_days``
    old: 3 if drifting, else 1; none → 2.

    The field practice of checking in-situ fluorescence against extracted
    chlorophyll-a from discrete samples, as the QARTOD manuals advise for
    in-situ sensors (from memory); the reference-ratio and persistence rules
    are Bloomline's.
    """
    st = np.asarray(sensor_times_h, dtype=float)
    sv = np.asarray(sensor_values, dtype=float)
    lt = np.asarray(lab_times_h, dtype=float)
    lv = np.asarray(lab_values, dtype=float)
    at = st if at_times_h is None else np.asarray(at_times_h, dtype=float)
    flags = np.full(at.shape, NOT_EVALUATED, dtype=np.uint8)
    if suspect_fraction is None or lt.size == 0 or st.size == 0:
        return flags
    order = np.argsort(lt, kind="stable")
    lt, lv = lt[order], lv[order]
    so = np.argsort(st, kind="stable")
    st, sv = st[so], sv[so]
    lo = np.searchsorted(st, lt - match_window_h, side="left")
    hi = np.searchsorted(st, lt + match_window_h, side="right")
    comp_t, comp_s, comp_l = [], [], []
    for k in range(lt.size):  # one iteration per lab sample (weekly): small
        window = sv[lo[k]:hi[k]]
        window = window[np.isfinite(window)]
        if window.size and np.isfinite(lv[k]) and lv[k] > 0:
            comp_t.append(lt[k])
            comp_s.append(float(np.median(window)))
            comp_l.append(float(lv[k]))
    if not comp_t:
        return flags
    ct, cs, cl = np.asarray(comp_t), np.asarray(comp_s), np.asarray(comp_l)
    ratio = cs / cl
    side = np.zeros(ct.size, dtype=int)  # +1 reads high, -1 low, 0 within tolerance
    for k in range(ct.size):
        earlier = ratio[(ct < ct[k]) & (ct >= ct[k] - baseline_days * 24.0)]
        has_baseline = earlier.size >= 2
        expected = (np.median(earlier) if has_baseline else 1.0) * cl[k]
        tolerance = suspect_fraction if has_baseline else 2.0 * suspect_fraction
        excess = cs[k] - expected
        if abs(excess) > tolerance * max(expected, floor):
            side[k] = 1 if excess > 0 else -1
    hold_h = hold_days * 24.0
    prev_same = np.zeros(ct.size, dtype=bool)
    prev_same[1:] = (side[1:] != 0) & (side[1:] == side[:-1]) & (np.diff(ct) <= hold_h)
    next_same = np.zeros(ct.size, dtype=bool)
    next_same[:-1] = prev_same[1:]
    drifting = prev_same | next_same
    start = ct - match_window_h
    k = np.searchsorted(start, at, side="right") - 1
    kk = np.clip(k, 0, None)
    fresh = (k >= 0) & (at - start[kk] <= hold_h + match_window_h)
    flags[fresh] = np.where(drifting[kk[fresh]], SUSPECT, PASS)
    return flags
