"""Default groups in a shallow eutrophic arm: who wins in which summer.

The default parameters (assimilation.parameters) give cyanobacteria a
steeper temperature response, buoyancy, a low nitrogen half-saturation and
nitrogen fixation; green algae grow faster at 20 °C and below. Expected outcomes
(common practice in limnology: warm, calm, N-poor water favours
cyanobacteria; Paerl & Huisman 2008, Science 320:57) are checked against
the WHO (2003) recreational guidance levels of 10 and 50 µg/L
chlorophyll-a with cyanobacterial dominance (docs/references.md [verified]).
"""
from dataclasses import replace

import numpy as np
from model_scenarios import JUNE_FIRST_2026

from assimilation import integrate
from assimilation.parameters import default_spec
from assimilation.spec import Basin, Drivers, Network, StateLayout

DAYS = 122            # June to September
WHO_RECREATIONAL_LOW_UGL = 10.0
WHO_RECREATIONAL_MODERATE_UGL = 50.0


def shallow_arm_summer(mean_temperature_C, amplitude_C, nitrogen_in_ugL, phosphorus_in_ugL, fixation=True):
    spec = default_spec([Basin("shallow_arm", volume_m3=5.0e6, mean_depth_m=2.5, area_m2=2.0e6)],
                        Network(downstream=(-1,), inflow_basin=(0,)))
    if not fixation:
        spec = replace(spec, groups=tuple(replace(g, nitrogen_fixing=False) for g in spec.groups))
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


def test_nitrogen_fixing_cyanobacteria_bloom_on_din_poor_inflow_where_non_fixers_stall():
    # inflow DIN 20 µg/L, SRP 150 µg/L (N:P 0.13 by mass): without fixation the N supply carries at most
    # 20 / 8.8 ≈ 2 µg/L chlorophyll-a; fixers take N from N2 and bloom past the WHO moderate level
    green, cyano = shallow_arm_summer(21.0, 6.0, nitrogen_in_ugL=20.0, phosphorus_in_ugL=150.0)
    _, cyano_plain = shallow_arm_summer(21.0, 6.0, nitrogen_in_ugL=20.0, phosphorus_in_ugL=150.0, fixation=False)
    late = slice(60, None)
    assert cyano.max() > WHO_RECREATIONAL_MODERATE_UGL
    assert np.all(cyano[late] > 2.5 * WHO_RECREATIONAL_LOW_UGL)
    assert np.all(cyano[late] > 100.0 * green[late])
    assert np.all(cyano_plain < 0.2 * WHO_RECREATIONAL_LOW_UGL)
