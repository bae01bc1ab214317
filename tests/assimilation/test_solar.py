"""Clear-sky shortwave from astronomy, against FAO-56's published formulas and worked example."""

from __future__ import annotations

import numpy as np
import pytest

from assimilation.solar import clear_sky_shortwave_W_m2, daily_extraterrestrial_MJ_m2, extraterrestrial_W_m2

EPOCH_2026_09_03 = 20699.0  # 2026-09-03T00:00Z in days since 1970-01-01


def test_daily_extraterrestrial_radiation_matches_fao56_example_8():
    # FAO-56 (Allen et al. 1998) Example 8: 3 September (J = 246) at 20° S → Ra = 32.2 MJ m-2 d-1
    # (worked value from memory of the paper's example; see docs/references.md)
    assert daily_extraterrestrial_MJ_m2(246, -20.0) == pytest.approx(32.2, abs=0.1)


@pytest.mark.parametrize("latitude", [-35.0, 0.0, 23.0, 51.5, 60.0])
def test_hourly_irradiance_integrates_to_the_daily_formula(latitude):
    # FAO-56 eq. 21 (daily) is the integral of the instantaneous irradiance over the day
    t = EPOCH_2026_09_03 + np.arange(0, 1440) / 1440.0
    daily_MJ = extraterrestrial_W_m2(t, latitude).mean() * 86400 / 1e6
    assert daily_MJ == pytest.approx(float(daily_extraterrestrial_MJ_m2(246, latitude)), rel=0.01)


def test_clear_sky_shortwave_is_dark_at_night_and_peaks_near_solar_noon():
    t = EPOCH_2026_09_03 + np.arange(24) / 24.0
    sw = clear_sky_shortwave_W_m2(t, 52.0, longitude_deg=15.0)  # solar noon near 11:00 UTC
    assert sw[0] == 0.0 and sw[22] == 0.0
    assert abs(int(np.argmax(sw)) - 11) <= 1
    assert 300 < sw.max() < 900


def test_bad_latitude_and_sunshine_fraction_are_refused():
    with pytest.raises(ValueError, match="latitude must lie in"):
        extraterrestrial_W_m2([0.0], 95.0)
    with pytest.raises(ValueError, match="sunshine_fraction must lie in"):
        clear_sky_shortwave_W_m2([0.0], 10.0, sunshine_fraction=1.5)
