"""Benchmark: Bloomline's filter against filterpy's EnsembleKalmanFilter on one problem.

The problem: the invented three-basin reservoir of
``tests/assimilation/filter_twin.py`` (identical twin, truth from Bloomline's
model with a cyanobacteria growth rate 25 % above the prior), 100 members,
120 daily analysis cycles, hourly model steps. Readings: hourly chlorophyll
fluorescence in every basin and phycocyanin in the arm (gains 1, not
estimated), aggregated into daily windows with the same errors for both
filters. Both filters estimate the growth and mortality rates of both groups
by state augmentation in log space, start from the same prior distribution
and analyse each day's windows at the same time.

Bloomline: :func:`assimilation.filter_cycle.assimilate` with its defaults except the
perfect-model settings of the twin (``TWIN_SETTINGS``: no inflation of the
model state, as filterpy has none); observation errors are the
defaults' (representativeness 10 %) for both filters.
Reference: filterpy's ``EnsembleKalmanFilter`` (perturbed observations, no
localization or inflation), whose ``fx`` advances one member at a time with
the same integrator.

Each filter is run ``--replicates`` times (default 3) with different random
seeds on the same truth and readings, because one run's RMSE varies by about
±10 % with the seed. Prints one JSON line: ``bloomline_s``, ``filterpy_s``
(mean wall time of one 120-day run), ``ratio`` (filterpy_s / bloomline_s),
``rmse`` and ``rmse_filterpy`` (total chlorophyll-a, µg/L, daily ensemble
mean at midnight against the truth after a 20-day spin-up, averaged over the
replicates), ``rmse_ratio`` (rmse / rmse_filterpy), the per-run RMSEs and
the final growth-rate estimates.

Run: ``python tests/benchmarks/bench_filter.py [--days 120] [--members 100] [--replicates 3]``
"""
from __future__ import annotations

import argparse
import json
import os
import sys
import time

import numpy as np

sys.path.insert(0, os.path.join(os.path.dirname(__file__), "..", "assimilation"))

from filter_twin import CYANO, FIRST_GUESS, T0_D, TRUE_GROWTH_FACTOR, TWIN_SETTINGS, truth_run  # noqa: E402
from filterpy.kalman import EnsembleKalmanFilter  # noqa: E402

from assimilation import integrate, observe  # noqa: E402
from assimilation.augmentation import split  # noqa: E402
from assimilation.filter_config import FilterConfig  # noqa: E402
from assimilation.filter_cycle import assimilate, initial_checkpoint  # noqa: E402
from assimilation.model import PARAMETER_KEYS  # noqa: E402
from assimilation.spec import StateLayout  # noqa: E402

SPIN_UP_DAYS = 20


def make_problem(days, seed=1):
    s, drv, layout, hours, truth = truth_run(days)
    rng = np.random.default_rng(seed)
    chl = layout.total_chlorophyll(truth)
    parts = []
    for b in range(3):
        sd = 0.1 * chl[:, b] + 0.3
        parts.append((hours, "chlorophyll_fluorescence", b, chl[:, b] + sd * rng.standard_normal(sd.shape), sd))
    cy = layout.chlorophyll(truth)[:, 0, CYANO]
    sd = 0.15 * cy + 0.3
    parts.append((hours, "phycocyanin", 0, cy + sd * rng.standard_normal(sd.shape), sd))
    obs = observe.Observations(
        np.concatenate([p[0] for p in parts]), np.concatenate([np.full(hours.size, p[1]) for p in parts]),
        np.concatenate([np.full(hours.size, p[2]) for p in parts]), np.full(4 * hours.size, -1),
        np.concatenate([p[3] for p in parts]), np.concatenate([p[4] for p in parts]))
    daily_truth = layout.total_chlorophyll(truth[23::24])  # (days, B) at each midnight
    return s, drv, obs, daily_truth


def run_bloomline(s, drv, obs, days, members, seed):
    cfg = FilterConfig(members=members, **TWIN_SETTINGS)
    ckpt = initial_checkpoint(s, cfg, T0_D, np.random.default_rng(seed), initial_state=FIRST_GUESS)
    layout = StateLayout(s)
    chl, statuses = [], set()
    for day in range(1, days + 1):
        result = assimilate(ckpt, obs, s, drv, cfg, T0_D + day)
        statuses.add(result.status)
        ckpt = result.checkpoint
        states, params, _ = split(ckpt, s)
        chl.append(layout.total_chlorophyll(states).mean(axis=0))
    return np.array(chl), float(params["mu_max_20_per_d"][:, CYANO].mean()), sorted(statuses)


def run_filterpy(s, drv, obs, days, members, seed):
    cfg = FilterConfig(members=members)
    layout = StateLayout(s)
    n_state, G = layout.n_state, s.n_groups
    theta0 = np.array([getattr(g, k) for k in PARAMETER_KEYS for g in s.groups])
    x0 = np.r_[np.log(FIRST_GUESS), np.log(theta0)]
    P0 = np.diag(np.r_[np.full(n_state, cfg.initial_state_log_sd**2), np.full(theta0.size, cfg.parameter_log_sd**2)])
    clock = {"t": T0_D, "to": T0_D}
    cyano = [g.is_cyanobacteria for g in s.groups]
    floor = cfg.state_floor_ugL

    def fx(x, dt):
        theta = np.exp(x[n_state:])
        params = {k: theta[None, i * G:(i + 1) * G] for i, k in enumerate(PARAMETER_KEYS)}
        state = integrate.advance(np.exp(x[None, :n_state]), s, drv, clock["t"], clock["to"], params=params)
        return np.r_[np.log(np.maximum(state[0], floor)), x[n_state:]]

    holder = {}

    def hx(x):
        return observe.predict(np.exp(x[None, :n_state]), np.ones((1, 0)), holder["obs"], holder["H"])[0]

    np.random.seed(seed)  # filterpy draws from numpy's global generator
    kf = EnsembleKalmanFilter(x=x0, P=P0, dim_z=4, dt=1.0, N=members, hx=hx, fx=fx)
    kf.Q = np.zeros((x0.size, x0.size))
    chl = []
    for day in range(1, days + 1):
        t0, t1 = T0_D + day - 1, T0_D + day
        keep = (obs.time_d > t0) & (obs.time_d <= t1)
        windows = observe.aggregate_windows(obs.select(keep), cfg.window_d,
                                            representativeness_fraction=cfg.representativeness_fraction)
        t_analysis = min(max(float(windows.time_d.mean()), t0), t1)
        holder["obs"] = windows
        holder["H"] = observe.operator_matrix(windows, s.n_basins, G, cyano)
        clock["t"], clock["to"] = t0, t_analysis
        kf.predict()
        kf.update(windows.value, R=np.diag(windows.error_sd**2))
        clock["t"], clock["to"] = t_analysis, t1
        kf.predict()
        chl.append(layout.total_chlorophyll(np.exp(kf.sigmas[:, :n_state])).mean(axis=0))
        clock["t"] = t1
    mu = float(np.exp(kf.sigmas[:, n_state + CYANO]).mean())
    return np.array(chl), mu


def main():
    ap = argparse.ArgumentParser()
    ap.add_argument("--days", type=int, default=120)
    ap.add_argument("--members", type=int, default=100)
    ap.add_argument("--replicates", type=int, default=3,
                    help="independent filter runs of each kind on the same truth and readings")
    ap.add_argument("--seed", type=int, default=1)
    args = ap.parse_args()
    if args.days <= SPIN_UP_DAYS:
        ap.error(f"--days must exceed the {SPIN_UP_DAYS}-day spin-up")
    s, drv, obs, truth = make_problem(args.days, args.seed)

    def rmse(chl):
        return float(np.sqrt(np.mean((chl[SPIN_UP_DAYS:] - truth[SPIN_UP_DAYS:]) ** 2)))

    seeds = [args.seed + 1000 * r for r in range(args.replicates)]
    times_b, times_f, rmse_b, rmse_f, mu_b, mu_f, statuses = [], [], [], [], [], [], set()
    global_state = np.random.get_state()
    for seed in seeds:
        t = time.perf_counter()
        chl, mu, st = run_bloomline(s, drv, obs, args.days, args.members, seed)
        times_b.append(time.perf_counter() - t)
        rmse_b.append(rmse(chl))
        mu_b.append(mu)
        statuses.update(st)
        t = time.perf_counter()
        chl, mu = run_filterpy(s, drv, obs, args.days, args.members, seed)
        times_f.append(time.perf_counter() - t)
        rmse_f.append(rmse(chl))
        mu_f.append(mu)
    np.random.set_state(global_state)

    bloomline_s, filterpy_s = float(np.mean(times_b)), float(np.mean(times_f))
    true_mu = s.groups[CYANO].mu_max_20_per_d * TRUE_GROWTH_FACTOR
    out = {
        "bloomline_s": round(bloomline_s, 3), "filterpy_s": round(filterpy_s, 3),
        "ratio": round(filterpy_s / bloomline_s, 2),
        "rmse": round(float(np.mean(rmse_b)), 4), "rmse_filterpy": round(float(np.mean(rmse_f)), 4),
        "rmse_ratio": round(float(np.mean(rmse_b) / np.mean(rmse_f)), 3),
        "rmse_runs": [round(x, 4) for x in rmse_b], "rmse_filterpy_runs": [round(x, 4) for x in rmse_f],
        "mu_max_cyano_true": round(true_mu, 4), "mu_max_cyano": round(float(np.mean(mu_b)), 4),
        "mu_max_cyano_filterpy": round(float(np.mean(mu_f)), 4),
        "members": args.members, "days": args.days, "replicates": args.replicates, "statuses": sorted(statuses),
    }
    print(json.dumps(out))


if __name__ == "__main__":
    main()
