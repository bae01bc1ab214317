"""Benchmark: advance a 100-member ensemble of the model by a year in hourly steps.

The invented 3-basin, 2-group reservoir of tests/assimilation/model_scenarios.py
(hourly light with clouds, storms, seasonal water temperature), 100 members
with their own initial states and growth/mortality rates, advanced 365 days
with ``assimilation.integrate.advance`` (dt = 1 h, all members in one call).

The reference is scipy's ``solve_ivp`` (LSODA) on the same equations
(``assimilation.model.rhs``), one member at a time, in the same process, at
a tolerance (rtol = atol = 3e-4 by default) whose own error against a
tight solve (LSODA, rtol 1e-8) is no larger than Bloomline's hourly error:
measured on member 0 over the 365 days with the metric below, LSODA at
3e-4 is off by 0.8 %, Bloomline at dt = 1 h by 1.7 %, LSODA at 1e-3 by
2.3 % (at about 80 % of the cost of 3e-4). Those figures predate nitrogen
fixation; with the default (fixing) cyanobacteria the north arm's DIN and
SRP swing within hours at bloom peaks and ``max_rel_diff`` against LSODA
at 3e-4 is 0.28 (ratio 231 with 5 reference members, against 229 before
fixation on the same machine).

``max_rel_diff`` is max |X − X_ref| / (|X_ref| + 0.1 µg/L) over the daily
states of the members solved by the reference. Timing the reference for all
100 members takes about 17 CPU minutes; ``--reference-members K`` times K
members and scales the time by 100 / K (then ``reference_members`` says K
and ``reference_extrapolated`` is true). Times are process CPU seconds, so a
busy shared machine disturbs the ratio less.

Prints one JSON line: bloomline_s, reference_s, ratio (reference_s /
bloomline_s), max_rel_diff, plus the settings.

    python tests/benchmarks/bench_model.py [--members 100] [--days 365] [--reference-members 100]
"""
from __future__ import annotations

import argparse
import json
import sys
import time
from pathlib import Path

import numpy as np
from scipy.integrate import solve_ivp

ROOT = Path(__file__).resolve().parents[2]
sys.path.insert(0, str(ROOT))
sys.path.insert(0, str(ROOT / "tests" / "assimilation"))

from model_scenarios import JUNE_FIRST_2026, initial_ensemble, member_params, summer_drivers, three_basin_spec  # noqa: E402

from assimilation import integrate, model  # noqa: E402

FLOOR_UGL = 0.1


def main(argv=None) -> dict:
    parser = argparse.ArgumentParser(description=__doc__.splitlines()[0])
    parser.add_argument("--members", type=int, default=100)
    parser.add_argument("--days", type=float, default=365.0)
    parser.add_argument("--reference-members", type=int, default=None,
                        help="members solved by solve_ivp (default: all); the time is scaled to all members")
    parser.add_argument("--rtol", type=float, default=3e-4, help="solve_ivp rtol = atol [µg/L]")
    args = parser.parse_args(argv)
    n_ref = args.members if args.reference_members is None else min(args.reference_members, args.members)

    spec = three_basin_spec()
    drivers = summer_drivers(days=args.days)
    E = initial_ensemble(spec, args.members)
    params = member_params(spec, args.members)
    t0, t1 = JUNE_FIRST_2026, JUNE_FIRST_2026 + args.days
    save = t0 + np.arange(0.0, args.days + 1e-9, 1.0)

    integrate.advance(E[:2], spec, drivers, t0, t0 + 1.0, params={k: v[:2] for k, v in params.items()})  # warm-up
    start = time.process_time()
    final = integrate.advance(E, spec, drivers, t0, t1, dt_d=1.0 / 24.0, params=params)
    bloomline_s = time.process_time() - start

    # daily states for the accuracy comparison (not timed)
    daily = integrate.simulate(E[:n_ref], spec, drivers, t0, save, dt_d=1.0 / 24.0,
                               params={k: v[:n_ref] for k, v in params.items()})
    assert np.allclose(daily[-1], final[:n_ref], rtol=1e-12), "advance and simulate disagree"

    worst = 0.0
    start = time.process_time()
    for m in range(n_ref):
        member_params_m = {k: v[m:m + 1] for k, v in params.items()}
        sol = solve_ivp(model.rhs, (t0, t1), E[m], method="LSODA", rtol=args.rtol, atol=args.rtol,
                        t_eval=save, args=(spec, drivers, member_params_m))
        if sol.status != 0:
            raise RuntimeError(f"solve_ivp failed for member {m}: {sol.message}")
        ref = sol.y.T
        worst = max(worst, float(np.max(np.abs(daily[:, m] - ref) / (np.abs(ref) + FLOOR_UGL))))
    reference_s = (time.process_time() - start) * args.members / n_ref

    result = {
        "bloomline_s": round(bloomline_s, 3),
        "reference_s": round(reference_s, 3),
        "ratio": round(reference_s / bloomline_s, 1),
        "max_rel_diff": round(worst, 5),
        "members": args.members,
        "days": args.days,
        "basins": spec.n_basins,
        "groups": spec.n_groups,
        "dt_h": 1.0,
        "reference": f"scipy.integrate.solve_ivp LSODA rtol=atol={args.rtol:g}, member by member",
        "reference_members": n_ref,
        "reference_extrapolated": n_ref != args.members,
        "clock": "process CPU time",
    }
    print(json.dumps(result))
    return result


if __name__ == "__main__":
    main()
