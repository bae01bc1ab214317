"""A calibrated blend of the process-model ensemble and statistical forecasts.

For each lead day the blend's predictive distribution is built in three steps:

1. **Linear pool** (a weighted mixture of the components' distributions, as
   in Bayesian model averaging; Raftery, Gneiting, Balabdaoui & Polakowski
   2005, Mon. Wea. Rev. 133:1155): the blend's distribution function is the
   weighted sum of the components' empirical distribution functions, with
   weights from each component's verified record (the caller's choice;
   :func:`inverse_crps_weights` gives the default), read at the members'
   plotting positions. A mixture keeps each component's tails, so an event
   one component foresees keeps its share of probability.
2. **Calibration** in log space, after the moment form of non-homogeneous
   Gaussian regression (EMOS; Gneiting, Raftery, Westveld & Goldman 2005,
   Mon. Wea. Rev. 133:1098): the blend's mean log error on its record is
   removed and its spread about the mean is scaled so that its spread matches
   its root-mean-square error on the record (a spread-to-error ratio of one).
3. **Ensemble copula coupling** (ECC; Schefzik, Thorarinsdottir & Gneiting
   2013, Stat. Sci. 28:616): the calibrated members of each lead are put in
   the rank order of the process-model members at that lead, so that each
   blended member is a trajectory over the horizon and the probability of
   reaching a level on any day is the fraction of members that do.

Inputs are arrays of member daily means [µg/L], one member per column, row k
the forecast day k (row 0 the analysis). Everything is deterministic.
"""

from __future__ import annotations

from dataclasses import dataclass

import numpy as np

from assimilation.scores import LOG_FLOOR_UGL

#: Bounds of the spread factor [-] (a record of a few weeks cannot justify more).
SPREAD_FACTOR_BOUNDS = (0.5, 4.0)


@dataclass(frozen=True)
class LeadSettings:
    """The blend of one lead day: component weights (sum to 1), the mean log error to remove
    [log units] and the factor on the spread in log space [-]."""

    weights: dict[str, float]
    bias_ln: float = 0.0
    spread_factor: float = 1.0


def plotting_positions(m: int) -> np.ndarray:
    """(j − 0.5)/m, j = 1..m (Hazen 1914)."""
    return (np.arange(1, m + 1) - 0.5) / m


def linear_pool(log_members: dict[str, np.ndarray], weights: dict[str, float], m: int) -> np.ndarray:
    """The weighted mixture of the components' members (log) read at the ``m`` plotting positions (m,).

    Each member of component c carries weight w_c / M_c; the mixture's quantile
    at p is read from the weighted empirical distribution function (members at
    their Hazen positions within their component, so one component of m
    members gives back exactly its order statistics).
    """
    total = sum(weights.get(c, 0.0) for c in log_members)
    if total <= 0:
        raise ValueError("the blend needs a positive weight on at least one component it is given")
    values, cdf_weights = [], []
    for name, z in log_members.items():
        w = weights.get(name, 0.0) / total
        if w > 0:
            z = np.sort(np.asarray(z, dtype=float))
            values.append(z)
            cdf_weights.append(np.full(z.size, w / z.size))
    v = np.concatenate(values)
    w = np.concatenate(cdf_weights)
    order = np.argsort(v, kind="stable")
    v, w = v[order], w[order]
    positions = np.cumsum(w) - 0.5 * w          # Hazen positions of the weighted members
    return np.interp(plotting_positions(m), positions, v)


def calibrate(z: np.ndarray, bias_ln: float, spread_factor: float) -> np.ndarray:
    """Members ``z`` (log) shifted by −``bias_ln`` and spread about their mean by ``spread_factor``."""
    lo, hi = SPREAD_FACTOR_BOUNDS
    s = float(np.clip(spread_factor, lo, hi))
    mean = z.mean()
    return mean - bias_ln + s * (z - mean)


def ecc_order(values: np.ndarray, template: np.ndarray) -> np.ndarray:
    """``values`` rearranged to the rank order of ``template`` (both (m,)): the smallest value goes
    where the template is smallest (ties in the template keep their order)."""
    out = np.empty_like(values)
    out[np.argsort(template, kind="stable")] = np.sort(values)
    return out


def blend(components: dict[str, np.ndarray], process: str, settings: list[LeadSettings],
          floor_ugL: float = LOG_FLOOR_UGL) -> tuple[np.ndarray, np.ndarray]:
    """The blended members and the uncalibrated pool, both (K + 1, M) [µg/L].

    ``components`` maps a forecaster to its member daily means (K + 1, M_c);
    ``process`` names the process-model ensemble, whose members give the
    blend its member count, its day 0 (the analysis) and its rank order
    (ECC). ``settings[k − 1]`` is the blend of lead k. A component whose
    row k holds a non-finite value takes no part in lead k.
    """
    base = np.asarray(components[process], dtype=float)
    K1, M = base.shape
    if len(settings) < K1 - 1:
        raise ValueError(f"settings for {K1 - 1} leads needed, got {len(settings)}")
    raw = np.empty((K1, M))
    out = np.empty((K1, M))
    raw[0] = out[0] = base[0]
    for k in range(1, K1):
        logs = {name: np.log(np.maximum(np.asarray(a, dtype=float)[k], floor_ugL)) for name, a in components.items()
                if np.all(np.isfinite(np.asarray(a, dtype=float)[k]))}
        s = settings[k - 1]
        if process not in logs:
            raise ValueError(f"the process ensemble {process!r} has no finite members at lead {k}")
        weights = {c: w for c, w in s.weights.items() if c in logs} or {process: 1.0}
        z = linear_pool(logs, weights, M)
        raw[k] = np.exp(ecc_order(z, logs[process]))
        out[k] = np.exp(ecc_order(calibrate(z, s.bias_ln, s.spread_factor), logs[process]))
    return out, raw


def inverse_crps_weights(mean_crps: dict[str, float], counts: dict[str, int], prior: dict[str, float],
                         prior_weight: float) -> dict[str, float]:
    """Weights ∝ 1/CRPS² from each component's record, shrunk towards ``prior`` [-].

    With n verified days in common the record's weights count n/(n + prior_weight);
    components without a record keep their prior share. Weights sum to one.
    """
    names = sorted(set(prior) | set(mean_crps))
    record = {c: 1.0 / mean_crps[c] ** 2 for c in names if mean_crps.get(c, 0) > 0 and np.isfinite(mean_crps[c])}
    n = min((counts.get(c, 0) for c in record), default=0)
    total = sum(record.values())
    w_rec = {c: record.get(c, 0.0) / total for c in names} if total > 0 else dict.fromkeys(names, 0.0)
    p_total = sum(prior.get(c, 0.0) for c in names)
    w_prior = {c: prior.get(c, 0.0) / p_total for c in names} if p_total > 0 else dict.fromkeys(names, 0.0)
    a = n / (n + prior_weight) if total > 0 else 0.0
    w = {c: a * w_rec[c] + (1 - a) * w_prior[c] for c in names}
    s = sum(w.values())
    return {c: v / s for c, v in w.items() if v > 0}
