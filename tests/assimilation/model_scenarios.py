"""Invented water bodies and seeded drivers for the model checks and benchmark.

Everything here is fictional: the "Hollow Reach" reservoir with a shallow
north arm, a central basin and a dam basin, fed by two invented creeks.
"""
from __future__ import annotations

import numpy as np

from assimilation.parameters import default_spec
from assimilation.spec import Basin, Drivers, Network, StateLayout

#: 2026-06-01T00:00Z in epoch days (days since 1970-01-01Z)
JUNE_FIRST_2026 = 20605.0


def three_basin_spec(**overrides):
    basins = (
        Basin("north_arm", volume_m3=6.0e6, mean_depth_m=3.0, area_m2=2.0e6),
        Basin("central_basin", volume_m3=4.0e7, mean_depth_m=8.0, area_m2=5.0e6),
        Basin("dam_basin", volume_m3=6.0e7, mean_depth_m=15.0, area_m2=4.0e6),
    )
    network = Network(downstream=(1, 2, -1), inflow_basin=(0, 1))
    spec = default_spec(basins, network)
    if overrides:
        from dataclasses import replace
        spec = replace(spec, **overrides)
    return spec


def summer_drivers(t0_d=JUNE_FIRST_2026, days=60, seed=7, step_d=1.0 / 24.0, n_basins=3):
    """Hourly summer drivers: warming water, clear/cloudy days, storm inflows."""
    rng = np.random.default_rng(seed)
    t = t0_d + np.arange(0.0, days + 1e-9, step_d)
    day = t - t0_d
    n_days = int(np.ceil(days)) + 1
    warming = 19.0 + 6.0 * np.sin(np.pi * np.clip(day / 75.0, 0, 1)) + 0.8 * np.sin(2 * np.pi * (day - 0.375))
    depth_offset = np.array([0.8, 0.0, -1.2])[:n_basins]
    temperature = warming[:, None] + depth_offset
    cloud = np.clip(rng.normal(0.8, 0.2, n_days), 0.2, 1.0)[np.floor(day).astype(int)]
    sun = np.clip(np.sin(2 * np.pi * (day % 1.0 - 0.25)), 0.0, None)
    shortwave = 900.0 * cloud * sun
    storms = np.zeros_like(day)
    for start in rng.uniform(0, days, 3):
        storms += 6.0 * np.exp(-np.clip(day - start, 0, None) / 2.0) * (day >= start)
    inflow = np.stack([1.2 + storms, 3.0 + 2.0 * storms], axis=1)
    nitrogen = np.stack([150.0 + 40.0 * storms, 250.0 + 20.0 * storms], axis=1)
    phosphorus = np.stack([45.0 + 10.0 * storms, 30.0 + 5.0 * storms], axis=1)
    return Drivers(time_d=t, water_temperature_C=temperature, shortwave_W_m2=shortwave,
                   inflow_m3_s=inflow, inflow_nitrogen_ugL=nitrogen, inflow_phosphorus_ugL=phosphorus)


def initial_ensemble(spec, n_members, seed=11):
    """Early-summer state with log-normal spread between members [µg/L]."""
    rng = np.random.default_rng(seed)
    layout = StateLayout(spec)
    B, G = spec.n_basins, spec.n_groups
    N = 120.0 * np.exp(rng.normal(0, 0.2, (n_members, B)))
    P = 15.0 * np.exp(rng.normal(0, 0.2, (n_members, B)))
    A = np.array([4.0, 1.0] + [1.0] * (G - 2))[:G] * np.exp(rng.normal(0, 0.3, (n_members, B, G)))
    return layout.pack(N, P, A)


def member_params(spec, n_members, seed=13):
    """Per-member growth and mortality rates around the spec's values [1/d]."""
    rng = np.random.default_rng(seed)
    mu = np.array([g.mu_max_20_per_d for g in spec.groups])
    m = np.array([g.mortality_20_per_d for g in spec.groups])
    G = spec.n_groups
    return {"mu_max_20_per_d": mu * np.exp(rng.normal(0, 0.1, (n_members, G))),
            "mortality_20_per_d": m * np.exp(rng.normal(0, 0.1, (n_members, G)))}
