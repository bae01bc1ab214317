"""A calibrated blend of the process-model ensemble and statistical forecasts.

For each lead day the blend's predictive distribution is built in three steps:

1. **Quantile averaging** (Vincentization; Vincent 1912, Ratcliff 1979,
   Psychol. Bull. 86:446; for forecasts Lichtendahl, Grushka-Cockayne &
   Winkler 2013, Manage. Sci. 59:1594): the blend's quantile at each
   plotting position is the weighted mean of the components' quantiles there,
   in natural-log space. Unlike a linear pool (a mixture), which widens with
   every component's disagreement, a quantile average is as sharp as its
   components on average; and because the CRPS is an integral of quantile
   scores that are convex in the quantile, the average's CRPS is never larger
   than the weighted mean of the components' CRPS (Lichtendahl et al. 2013).
2. **Calibration** of the spread in log space, after non-homogeneous
   Gaussian regression (EMOS; Gneiting, Raftery, Westveld & Goldman 2005,
   Mon. Wea. Rev. 133:1098): a factor on the spread about the mean. The
   weights and the factor are fitted together by minimising the mean CRPS of
   the normal distribution N(Σ w_c μ_c, (s·Σ w_c σ_c)²) over the record
   (:func:`fit_combination`), μ_c and σ_c the components' member mean and sd
   of log chlorophyll-a — the quantile average of normals being exactly that
   normal. Where the record's errors have heavier tails than a normal, the
   factor is raised until the central 90 % interval covers 90 % of the record
   (:func:`coverage_spread_factor`). EMOS also removes a mean error learnt on
   the record; Bloomline
   does not: on both invented scenarios a mean log error learnt over the
   previous weeks did not carry over to the following days (blooms, collapses
   and storms change its sign), and removing it made the CRPS worse at every
   lead (measured with ``tests/benchmarks/bench_hindcast.py``). The weights
   correct a persistently biased component instead.
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
from scipy import optimize, special, stats

from assimilation.scores import LOG_FLOOR_UGL

#: Bounds of the spread factor [-] (a record of a few weeks cannot justify more).
SPREAD_FACTOR_BOUNDS = (0.5, 4.0)
#: Bound on the weight logits (weights down to about e^-16 of the largest; Bloomline's choice).
LOGIT_BOUND = 8.0
_SQRT_PI = np.sqrt(np.pi)


@dataclass(frozen=True)
class LeadSettings:
    """The blend of one lead day: component weights (sum to 1) and the factor on the spread in
    log space [-]."""

    weights: dict[str, float]
    spread_factor: float = 1.0


def plotting_positions(m: int) -> np.ndarray:
    """(j − 0.5)/m, j = 1..m (Hazen 1914)."""
    return (np.arange(1, m + 1) - 0.5) / m


def quantile_average(log_members: dict[str, np.ndarray], weights: dict[str, float], m: int) -> np.ndarray:
    """The weighted average of the components' quantiles (log) at the ``m`` plotting positions (m,).

    Each component's sorted members stand at their own Hazen positions; its
    quantile at p is read by linear interpolation (held at the end members
    beyond them), so one component of m members gives back exactly its order
    statistics. Weights are renormalised over the components given.
    """
    total = sum(weights.get(c, 0.0) for c in log_members)
    if total <= 0:
        raise ValueError("the blend needs a positive weight on at least one component it is given")
    p = plotting_positions(m)
    out = np.zeros(m)
    for name, z in log_members.items():
        w = weights.get(name, 0.0) / total
        if w > 0:
            z = np.sort(np.asarray(z, dtype=float))
            out += w * np.interp(p, plotting_positions(z.size), z)
    return out


def calibrate(z: np.ndarray, spread_factor: float) -> np.ndarray:
    """Members ``z`` (log) spread about their mean by ``spread_factor`` (within ``SPREAD_FACTOR_BOUNDS``)."""
    lo, hi = SPREAD_FACTOR_BOUNDS
    s = float(np.clip(spread_factor, lo, hi))
    mean = z.mean()
    return mean + s * (z - mean)


def ecc_order(values: np.ndarray, template: np.ndarray) -> np.ndarray:
    """``values`` rearranged to the rank order of ``template`` (both (m,)): the smallest value goes
    where the template is smallest (ties in the template keep their order)."""
    out = np.empty_like(values)
    out[np.argsort(template, kind="stable")] = np.sort(values)
    return out


def blend(components: dict[str, np.ndarray], process: str, settings: list[LeadSettings],
          floor_ugL: float = LOG_FLOOR_UGL) -> tuple[np.ndarray, np.ndarray]:
    """The blended members and the uncalibrated quantile average, both (K + 1, M) [µg/L].

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
        weights = {c: w for c, w in s.weights.items() if c in logs and w > 0} or {process: 1.0}
        z = quantile_average(logs, weights, M)
        raw[k] = np.exp(ecc_order(z, logs[process]))
        out[k] = np.exp(ecc_order(calibrate(z, s.spread_factor), logs[process]))
    return out, raw


def crps_normal(mu, sigma, y) -> np.ndarray:
    """CRPS of N(mu, sigma²) for observation y (Gneiting et al. 2005, eq. 5), in the units of y."""
    mu, sigma, y = np.broadcast_arrays(*(np.asarray(a, dtype=float) for a in (mu, sigma, y)))
    z = (y - mu) / sigma
    return sigma * (z * special.erf(z / np.sqrt(2.0)) + 2.0 * _pdf(z) - 1.0 / _SQRT_PI)


def _pdf(z):
    return np.exp(-0.5 * z * z) / np.sqrt(2.0 * np.pi)


def _unpack(theta: np.ndarray, c: int):
    logits, log_s = theta[:c], theta[c]
    w = np.exp(logits - logits.max())
    return w / w.sum(), np.exp(log_s)


def combination_objective(theta: np.ndarray, mu: np.ndarray, sd: np.ndarray, y: np.ndarray) -> tuple[float, np.ndarray]:
    """Mean CRPS [log units] of N(Σ w μ, (s Σ w σ)²) over the cases, and its gradient in ``theta``.

    ``theta`` = (weight logits (C,), ln s); ``mu``, ``sd`` (N, C) the
    components' log mean and sd; ``y`` (N,) the observed log values. The
    gradient uses ∂CRPS/∂μ = −erf(z/√2) and ∂CRPS/∂σ = 2φ(z) − 1/√π
    (z = (y − μ)/σ), from eq. 5 of Gneiting et al. (2005).
    """
    c = mu.shape[1]
    w, s = _unpack(theta, c)
    mbar, sbar = mu @ w, sd @ w
    m, sig = mbar, s * sbar
    z = (y - m) / sig
    erf = special.erf(z / np.sqrt(2.0))
    crps = sig * (z * erf + 2.0 * _pdf(z) - 1.0 / _SQRT_PI)
    d_m, d_sig = -erf, 2.0 * _pdf(z) - 1.0 / _SQRT_PI
    n = y.size
    grad = np.empty(c + 1)
    # softmax: ∂(Σ w x)/∂θ_k = w_k (x_k − Σ w x)
    grad[:c] = w * ((d_m[:, None] * (mu - mbar[:, None])).sum(axis=0)
                    + s * (d_sig[:, None] * (sd - sbar[:, None])).sum(axis=0)) / n
    grad[c] = (d_sig * sig).sum() / n
    return float(crps.mean()), grad


def fit_combination(mu: np.ndarray, sd: np.ndarray, y: np.ndarray, prior: np.ndarray) -> tuple[np.ndarray, float]:
    """(weights (C,), spread factor s) minimising the mean CRPS of the calibrated quantile average
    over the cases (minimum-CRPS estimation, Gneiting et al. 2005).

    ``mu``, ``sd`` (N, C) are the components' member mean and sd of log
    chlorophyll-a, ``y`` (N,) the observed log values; the search starts at
    the ``prior`` weights and no spread change (L-BFGS-B, bounded).
    """
    mu, sd, y = (np.asarray(a, dtype=float) for a in (mu, sd, y))
    c = mu.shape[1]
    prior = np.asarray(prior, dtype=float)
    start = np.concatenate([np.log(np.maximum(prior / prior.sum(), 1e-6)), [0.0]])
    lo, hi = SPREAD_FACTOR_BOUNDS
    bounds = [(-LOGIT_BOUND, LOGIT_BOUND)] * c + [(np.log(lo), np.log(hi))]
    res = optimize.minimize(combination_objective, start, args=(mu, np.maximum(sd, 1e-6), y), jac=True,
                            method="L-BFGS-B", bounds=bounds)
    w, s = _unpack(res.x, c)
    return w, float(s)


def coverage_spread_factor(mu: np.ndarray, sd: np.ndarray, y: np.ndarray, weights: np.ndarray,
                           coverage: float = 0.90) -> float:
    """The factor on the quantile average's log spread that makes its central ``coverage`` interval
    cover that share of the cases [-]: the ``coverage`` quantile of |y − Σ w μ| / Σ w σ over the
    cases, divided by the standard normal quantile of (1 + coverage)/2.

    A minimum-CRPS normal fitted to heavy-tailed errors is too narrow for its central intervals
    (the CRPS rewards sharpness near the centre); Bloomline widens the fitted spread to at least this
    factor, so that the intervals operators read cover what they say (coverage matching, the aim of
    calibration in Gneiting, Balabdaoui & Raftery 2007, J. R. Stat. Soc. B 69:243).
    """
    z = np.abs(np.asarray(y, dtype=float) - np.asarray(mu, dtype=float) @ weights) / np.maximum(
        np.asarray(sd, dtype=float) @ weights, 1e-9)
    return float(np.quantile(z, coverage) / stats.norm.ppf(0.5 + coverage / 2))


def shrink_settings(names: list[str], fitted: tuple[np.ndarray, float], prior: dict[str, float],
                    n: int, prior_cases: int) -> LeadSettings:
    """Fitted settings shrunk towards the prior (``prior`` weights, no spread change): with ``n``
    cases the fit counts n/(n + ``prior_cases``); weights are mixed linearly and the spread factor
    in its logarithm. Weights sum to one."""
    w_fit, s = fitted
    alpha = n / (n + prior_cases)
    keys = sorted(set(names) | set(prior))
    p_total = sum(prior.values())
    fit = dict(zip(names, w_fit))
    w = {k: alpha * fit.get(k, 0.0) + (1 - alpha) * prior.get(k, 0.0) / p_total for k in keys}
    total = sum(w.values())
    return LeadSettings({k: v / total for k, v in w.items() if v > 0},
                        spread_factor=float(np.exp(alpha * np.log(s))))


def pooled_probabilities(components: dict[str, np.ndarray], process: str, settings: list[LeadSettings],
                         thresholds) -> tuple[np.ndarray, np.ndarray]:
    """The blend's probabilities of reaching each threshold: per day (K + 1, L) and on any day 1..K (L,).

    A linear opinion pool (Stone 1961, Ann. Math. Stat. 32:1339; Genest & Zidek 1986, Stat. Sci.
    1:114): the weighted mean of the components' probabilities, with the blend's weights of each
    lead. Unlike the quantile average, which is sharper and scores better on the whole
    distribution, a pool keeps the share of probability of a bloom that one component foresees,
    so a warning is not held back because the statistical forecasts, which cannot foresee growth,
    do not see it. Within the horizon the process model's probability is the fraction of its
    members (trajectories) that reach the threshold on any day; a statistical forecast, whose
    members are per-day marginals, counts its largest daily probability (a lower bound); each
    component weighs with its mean weight over the leads. Day 0 is the process model's.
    """
    thr = np.asarray(thresholds, dtype=float).reshape(-1)
    base = np.asarray(components[process], dtype=float)
    K1 = base.shape[0]
    daily = np.zeros((K1, thr.size))
    daily[0] = (base[0][:, None] >= thr).mean(axis=0)
    any_day = {process: (base[1:].max(axis=0)[:, None] >= thr).mean(axis=0)}
    weight_sum: dict[str, float] = {}
    for k in range(1, K1):
        rows = {name: np.asarray(a, dtype=float)[k] for name, a in components.items()}
        rows = {name: r for name, r in rows.items() if np.all(np.isfinite(r))}
        weights = {c: w for c, w in settings[k - 1].weights.items() if c in rows and w > 0} or {process: 1.0}
        total = sum(weights.values())
        for c, w in weights.items():
            p = (rows[c][:, None] >= thr).mean(axis=0)
            daily[k] += w / total * p
            weight_sum[c] = weight_sum.get(c, 0.0) + w / total / (K1 - 1)
            if c != process:
                any_day[c] = np.maximum(any_day.get(c, 0.0), p)
    total = sum(weight_sum.values())
    horizon = sum(w / total * any_day[c] for c, w in weight_sum.items()) if total > 0 else any_day[process]
    return daily, np.asarray(horizon, dtype=float)
