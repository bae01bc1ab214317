"""QARTOD tests, worked from the manuals' definitions.

Source for the definitions and the flag scheme: U.S. IOOS (2020) *Manual for
Real-Time Oceanographic Data Quality Control Flags*, and U.S. IOOS (2018)
*Manual for Real-Time Quality Control of Dissolved Oxygen Observations*
(tests 6 gross range, 7 climatology, 8 spike, 9 rate of change, 10 flat line).
"""

from __future__ import annotations

import numpy as np
import pytest

from monitor.ingest import qc
from monitor.ingest.qc_drift import drift
from monitor.timeutil import NS_PER_HOUR


def test_spike_worked_case_from_the_dissolved_oxygen_manual_definition():
    # Spike reference = mean of the two neighbours (QARTOD DO manual 2018, test 8);
    # worked case in docs/references.md: the spike's neighbours are suspect too.
    values = np.array([1, 1, 5, 1, 1, 1, 1.2, 1])
    assert qc.spike(values, suspect=1.5, fail=3.0).tolist() == [2, 3, 4, 3, 1, 1, 1, 2]


def test_spike_is_not_evaluated_across_a_long_gap():
    values = np.array([1.0, 1.0, 5.0, 1.0, 1.0])
    hours = np.array([0.0, 0.25, 0.5, 12.0, 12.25])  # 11.5 h gap after the spike
    flags = qc.spike(values, 1.5, 3.0, hours)
    assert flags.tolist() == [2, 3, 2, 2, 2]


def test_rate_of_change_flags_the_later_point_of_a_steep_step():
    # QARTOD DO manual 2018, test 9: |V_n - V_n-1| / Δt above the threshold → suspect (3); first point 2.
    values = np.array([10.0, 10.2, 11.5, 11.6])
    hours = np.array([0.0, 0.25, 0.5, 0.75])  # rates 0.8, 5.2, 0.4 per hour
    assert qc.rate_of_change(values, hours, threshold_per_h=2.0).tolist() == [2, 1, 3, 1]


def test_flat_line_suspect_then_fail_with_duration():
    # QARTOD DO manual 2018, test 10: the present value and the previous ones over the
    # suspect (fail) duration all within the tolerance → 3 (4). Hourly values:
    values = np.array([1, 2, 3, 3, 3, 3, 3, 3], dtype=float)
    hours = np.arange(8, dtype=float)
    flags = qc.flat_line(values, hours, tolerance=0.01, suspect_h=3.0, fail_h=5.0)
    # t=0..2: the series does not reach back 3 h → 2; t=3,4 windows include 1 or 2 → pass;
    # t=5,6: [t-3, t] all 3 → suspect; t=7: [2, 7] all 3 → fail.
    assert flags.tolist() == [2, 2, 2, 1, 1, 3, 3, 4]


def test_flat_line_tolerance_is_strict():
    values = np.array([5.0, 5.005, 4.995, 5.0, 5.002])
    hours = np.arange(5, dtype=float)
    assert qc.flat_line(values, hours, 0.01, 3.0, None).tolist() == [2, 2, 2, 3, 3]
    assert qc.flat_line(values, hours, 0.004, 3.0, None).tolist() == [2, 2, 2, 1, 1]


def test_gross_range_sensor_span_fails_user_span_suspect():
    # QARTOD DO manual 2018, test 6
    values = np.array([-1.0, 10.0, 60.0, 120.0])
    assert qc.gross_range(values, 0, 100, 0, 50).tolist() == [4, 1, 3, 4]


def test_climatology_with_a_seasonal_span():
    values = np.array([20.0, 20.0])
    low = np.array([0.0, 22.0])  # e.g. a winter and a summer span
    high = np.array([15.0, 30.0])
    assert qc.climatology(values, low, high).tolist() == [3, 3]
    assert qc.climatology(values, None, None).tolist() == [2, 2]


def test_aggregate_follows_the_flag_precedence():
    # QARTOD flags manual 2020: fail over suspect over pass; all not evaluated → 2
    digits = np.array([[1, 2, 2], [1, 3, 1], [3, 4, 1], [2, 2, 2]])
    assert qc.aggregate(digits).tolist() == [1, 3, 4, 2]


def test_run_qc_marks_missing_values_9_and_skips_them_as_neighbours():
    t = np.arange(6) * NS_PER_HOUR // 4
    values = np.array([1.0, 1.0, np.nan, 1.0, 1.0, 1.0])
    settings = {**qc.thresholds("phycocyanin"), "flat_line_suspect_h": None, "flat_line_fail_h": None}
    flag, digits = qc.run_qc(t, values, settings)
    assert flag[2] == 9 and set(digits[2].tolist()) == {9}
    assert flag.tolist() == [1, 1, 9, 1, 1, 1]
    strings = qc.digits_to_strings(digits)
    # first point: gross range 1, climatology 2 (no span), spike 2, rate 2, flat line 2 (off), drift 2
    assert strings[0] == "122222"
    # the point after the gap compares with its nearest present neighbours: spike and rate evaluated
    assert strings[3] == "121122"


def test_drift_needs_two_successive_deviating_lab_comparisons():
    hours = np.arange(0, 24 * 30, 0.25)
    sensor = np.full(hours.size, 10.0)
    lab_t = np.array([1, 8, 15, 22]) * 24.0
    one_odd = drift(hours, sensor, lab_t, np.array([10.0, 5.0, 10.0, 10.0]), suspect_fraction=0.3)
    assert set(one_odd[hours >= 23].tolist()) == {1}  # a single odd sample is not drift
    two = drift(hours, sensor, lab_t, np.array([10.0, 5.0, 5.0, 10.0]), suspect_fraction=0.3)
    assert (two[hours < 23] == 2).all()  # before the first comparison
    assert (two[(hours >= 24) & (hours < 24 * 8 - 1)] == 1).all()
    assert (two[(hours >= 24 * 8) & (hours < 24 * 22 - 1)] == 3).all()  # both deviating samples' weeks
    assert (two[hours >= 24 * 22] == 1).all()


def test_drift_check_ignores_lab_samples_far_from_any_sensor_reading():
    hours = np.arange(0, 10, 0.25)
    flags = drift(hours, np.full(hours.size, 10.0), np.array([100.0]), np.array([1.0]), 0.5)
    assert (flags == 2).all()


def test_thresholds_merge_defaults_config_and_station():
    s = qc.thresholds("water_temperature", {"user_max": 30.0}, {"user_max": 28.0, "spike_fail": 3.0})
    assert s["user_max"] == 28.0 and s["spike_fail"] == 3.0
    assert s["sensor_max"] == qc.DEFAULTS["water_temperature"]["sensor_max"]


@pytest.mark.parametrize("variable", sorted(qc.DEFAULTS))
def test_defaults_are_consistent(variable):
    s = qc.DEFAULTS[variable]
    assert s["sensor_min"] <= s["user_min"] < s["user_max"] <= s["sensor_max"]
    if s["spike_suspect"] is not None:
        assert s["spike_suspect"] < s["spike_fail"]
    if s["flat_line_suspect_h"] is not None:
        assert s["flat_line_suspect_h"] < s["flat_line_fail_h"]


def test_qc_of_a_split_series_with_context_equals_qc_of_the_whole():
    """The bounded dependence the ingest relies on: flags of the second half computed from
    the second half plus ``context_hours`` of history equal those from the whole series."""
    rng = np.random.default_rng(7)
    n = 960
    t = np.arange(n, dtype=np.int64) * (NS_PER_HOUR // 4)
    v = 5 + np.cumsum(rng.normal(0, 0.3, n))
    v[300:340] = v[300]  # a flat stretch
    v[500] += 40  # a spike
    v[700:705] = np.nan  # a short outage
    settings = qc.thresholds("chlorophyll_fluorescence")
    whole_flag, whole_digits = qc.run_qc(t, v, settings)
    ctx = int(qc.context_hours(settings) * NS_PER_HOUR)
    for cut in (320, 501, 702):
        start = np.searchsorted(t, t[cut] - 2 * ctx)
        part_flag, part_digits = qc.run_qc(t[start:], v[start:], settings)
        keep = t[start:] >= t[cut] - ctx
        np.testing.assert_array_equal(part_flag[keep], whole_flag[start:][keep])
        np.testing.assert_array_equal(part_digits[keep], whole_digits[start:][keep])


def test_flat_line_is_not_evaluated_across_an_outage():
    # three equal values right after a 20 h outage are not a 12 h flat line
    hours = np.array([0.0, 0.25, 0.5, 20.0, 20.25, 20.5])
    values = np.array([1.0, 2.0, 3.0, 5.0, 5.0, 5.0])
    assert qc.flat_line(values, hours, 0.01, 6.0, 12.0).tolist() == [2, 2, 2, 2, 2, 2]


def test_seasonal_climatology_uses_the_month_of_each_reading():
    # QARTOD DO manual 2018, test 7: the expected span depends on the season
    months = [(0.0, 8.0)] * 5 + [(15.0, 30.0)] * 3 + [(0.0, 8.0)] * 4  # June–August warm
    t = np.array(["2026-05-31T23:00", "2026-06-01T01:00", "2026-09-01T00:00"], dtype="datetime64[ns]").astype(np.int64)
    values = np.array([20.0, 20.0, 20.0])
    settings = {**qc.thresholds("water_temperature"), "climatology_months": months}
    _, digits = qc.run_qc(t, values, settings)
    assert digits[:, qc.TESTS.index("climatology")].tolist() == [3, 1, 3]


def test_threshold_scale_level_widens_spike_and_rate_thresholds_at_high_levels():
    # at 60 µg/L with scale level 20 the thresholds are three times wider
    values = np.array([60.0, 60.0, 75.0, 60.0, 60.0])
    hours = np.arange(5) * 0.25
    assert qc.spike(values, 10.0, 25.0, hours).tolist() == [2, 1, 3, 1, 2]  # neighbours' dev 7.5 < 10
    assert qc.spike(values, 10.0, 25.0, hours, scale_level=20.0).tolist() == [2, 1, 1, 1, 2]
    assert qc.rate_of_change(values, hours, 40.0).tolist() == [2, 1, 3, 3, 1]  # 15 in 15 min = 60/h
    assert qc.rate_of_change(values, hours, 40.0, scale_level=20.0).tolist() == [2, 1, 1, 1, 1]
    # below the scale level nothing changes: the QARTOD worked case stands
    low = np.array([1, 1, 5, 1, 1, 1, 1.2, 1])
    assert qc.spike(low, 1.5, 3.0, scale_level=20.0).tolist() == [2, 3, 4, 3, 1, 1, 1, 2]


def test_drift_is_judged_against_the_sensors_own_ratio_to_the_lab():
    # a fluorometer reading 1.3 × the lab value throughout is not drifting (its own baseline);
    # a rise to 1.69 × (+30 % on that baseline, e.g. fouling) at two samples is
    hours = np.arange(0, 24 * 50, 0.25)
    lab_t = np.arange(1, 7) * 24.0 * 7  # weekly samples
    lab_v = np.full(6, 10.0)
    sensor = np.full(hours.size, 13.0)
    sensor[hours >= lab_t[3] - 2] = 16.9
    flags = drift(hours, sensor, lab_t, lab_v, suspect_fraction=0.25)
    assert (flags[(hours >= lab_t[0]) & (hours < lab_t[3] - 2)] == 1).all()
    assert (flags[hours >= lab_t[3]] == 3).all()
