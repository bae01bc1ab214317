"""Default groups in a shallow eutrophic arm: who wins in which summer.

The default parameters (assimilation.parameters) give cyanobacteria a
steeper temperature response, buoyancy and a low nitrogen half-saturation;
green algae grow faster at 20 °C and below. Expected outcomes
(common practice in limnology: warm, calm, N-poor water favours
cyanobacteria; Paerl & Huisman 2008, Science 320:57) are checked against
the WHO (2003) recreational guidance level of 10 µg/L chlorophyll-a with
cyanobacterial dominance (REFERENCES.md [verified]).
"""
import numpy as np
import pytest

from assimilation import integrate
from assimilation.parameters import default_spec
from assimilation.spec import Basin, Drivers, Network, StateLayout
from model_scenarios import JUNE_FIRST_2026

DAYS = 122            # June to September
WHO_RECREATIONAL_LOW_UGL = 10.0


def shallow_arm_summer(mean_temperature_C, amplitude_C, nitrogen_in_ugL, phosphorus_in_ugL):
    spec = default_spec([Basin("shallow_arm", volume_m3=5.0e6, mean_depth_m=2.5, area_m2=2.0e6)],
                        Network(downstream=(-1,), inflow_basin=(0,)))
    t = JUNE_FIRST_2026 + np.arange(0.0, DAYS + 1e-9, 1.0 / 24.0)
    day = t - t[0]
    temperature = (mean_temperature_C + amplitude_C * np.sin(np.pi * day / DAYS))[:, None]
    shortwave = 800.0 * np.clip(np.sin(2 * np.pi * (day % 1.0 - 0.25)), 0.0, None)
    q = np.full((t.size, 1), 5.0e6 / 40.0 / 86400.0)                       # 40-day residence time
    drivers = Drivers(t, temperature, shortwave, q, np.full_like(q, nitrogen_in_ugL),
                      np.full_like(q, phosphorus_in_ugL))
    layout = StateLayout(spec)
    E = layout.pack([[nitrogen_in_ugL / 2]], [[phosphorus_in_ugL / 3]], [[[5.0, 1.0]]])
    X = integrate.simulate(E, spec, drivers, t[0], t[0] + np.arange(0.0, DAYS, 1.0))
    green, cyano = (layout.chlorophyll(X)[:, 0, 0, g] for g in range(2))
    assert spec.groups[1].is_cyanobacteria
    return green, cyano


def test_warm_nitrogen_poor_summer_lets_cyanobacteria_bloom_past_the_who_level():
    # 21 → 27 °C, inflow N:P = 4 by mass (below Redfield 7.2): nitrogen-limited
    green, cyano = shallow_arm_summer(21.0, 6.0, nitrogen_in_ugL=600.0, phosphorus_in_ugL=150.0)
    late = slice(60, None)
    assert np.all(cyano[late] > WHO_RECREATIONAL_LOW_UGL)
    assert np.all(cyano[late] > 5.0 * green[late])


def test_cool_nitrogen_rich_summer_keeps_green_algae_dominant():
    # 12 → 15 °C, inflow N:P = 33 by mass: phosphorus-limited; the green algae's faster growth in cool
    # water keeps them ahead, the cyanobacteria persist well below the WHO level
    green, cyano = shallow_arm_summer(12.0, 3.0, nitrogen_in_ugL=2000.0, phosphorus_in_ugL=60.0)
    late = slice(60, None)
    assert np.all(green[late] > 2.5 * cyano[late])
    assert np.all(cyano < 0.5 * WHO_RECREATIONAL_LOW_UGL)
