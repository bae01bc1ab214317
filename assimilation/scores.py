"""Scores of ensemble and point forecasts of one quantity against observations.

Every function is vectorised over forecast *cases* (one issue time, lead and
place each). Ensembles follow the package convention (DEVELOPERS.md): ``E``
of shape (M, N), one member per row, one case per column; ``y`` (N,) the
observations in the same unit as the members (e.g. chlorophyll-a [µg/L]).
A point forecast is an ensemble of one member, ``E`` of shape (1, N).

A case whose observation is NaN verifies nothing: per-case scores are NaN
there and the summary scores (MAE, bias, coverage, spread–error ratio, rank
histogram) leave it out. Forecasts must be finite.

Methods
-------
* CRPS of an ensemble, standard form: the CRPS of the ensemble's empirical
  distribution (Hersbach 2000, Wea. Forecasting 15:559; Gneiting and
  Raftery 2007, J. Am. Stat. Assoc. 102:359, kernel form)
  ``(1/M) Σ|x_i − y| − (1/(2M²)) ΣΣ|x_i − x_j|``;
  fair form (Ferro 2014, Q. J. R. Meteorol. Soc. 140:1917) with the second
  term divided by ``2M(M − 1)`` instead, an unbiased estimate of the CRPS of
  the distribution the members are drawn from. The double sum is computed
  in O(M log M) from the sorted members:
  ``ΣΣ|x_i − x_j| = 2 Σ_i (2i − M − 1) x_(i)`` (i = 1..M).
* CRPS of a Gaussian predictive distribution in closed form (Gneiting,
  Raftery, Westveld and Goldman 2005, Mon. Wea. Rev. 133:1098).
* Spread–error ratio with the finite-ensemble correction ``(M + 1)/M``
  (Fortin, Abaza, Anctil and Turcotte 2014, J. Hydrometeor. 15:1708;
  citation from memory).
* Rank histogram (Hamill 2001, Mon. Wea. Rev. 129:550), ties broken at
  random.
"""
from __future__ import annotations

import numpy as np
from scipy import stats

from assimilation import transform

LOG_FLOOR_UGL = 0.1
"""Floor [µg/L] applied before taking logs of chlorophyll-a in the log scores:
values below it (zeros included) count as the floor. 0.1 µg/L is of the order
of the detection limit of in-situ chlorophyll-a fluorometers (common practice)."""


def _cases(E, y):
    E = np.asarray(E, dtype=float)
    y = np.asarray(y, dtype=float)
    if E.ndim != 2 or y.ndim != 1 or E.shape[1] != y.shape[0]:
        raise ValueError(f"expected an ensemble E (members, cases) and observations y (cases,), got {E.shape} and {y.shape}")
    if E.shape[0] < 1 or E.shape[1] < 1:
        raise ValueError(f"the ensemble needs at least one member and one case, got {E.shape}")
    if not np.all(np.isfinite(E)):
        raise ValueError("ensemble members must be finite (leave out cases without a forecast)")
    return E, y


def _pair(forecast, observed):
    f = np.asarray(forecast, dtype=float)
    o = np.asarray(observed, dtype=float)
    if f.ndim != 1 or f.shape != o.shape or f.size == 0:
        raise ValueError(f"expected forecast and observed of one shape (cases,), got {f.shape} and {o.shape}")
    if not np.all(np.isfinite(f)):
        raise ValueError("forecasts must be finite (leave out cases without a forecast)")
    keep = np.isfinite(o)
    return f[keep], o[keep]


def _mean_or_nan(values: np.ndarray) -> float:
    return float(values.mean()) if values.size else float("nan")


def crps_ensemble(E, y, *, fair: bool = False) -> np.ndarray:
    """CRPS of each case [unit of ``y``], shape (N,); NaN where ``y`` is NaN.

    E (M, N) members; y (N,) observations. ``fair=False``: standard form
    (Hersbach 2000); ``fair=True``: fair form (Ferro 2014). With one member
    both reduce to the absolute error ``|x − y|``.
    """
    E, y = _cases(E, y)
    M = E.shape[0]
    mean_abs = np.abs(E - y).mean(axis=0)
    if M == 1:
        return mean_abs
    xs = np.sort(E, axis=0)
    weights = 2.0 * np.arange(1, M + 1) - M - 1            # 2i − M − 1, i = 1..M
    pair_sum = 2.0 * (weights @ xs)                         # ΣΣ|x_i − x_j| per case
    denominator = 2.0 * M * (M - 1) if fair else 2.0 * M * M
    return mean_abs - pair_sum / denominator


def crps_gaussian(mean, sd, y) -> np.ndarray:
    """CRPS of the normal predictive distribution N(mean, sd²) [unit of ``y``].

    Gneiting et al. (2005): with ``z = (y − mean)/sd``,
    ``CRPS = sd·[z(2Φ(z) − 1) + 2φ(z) − 1/√π]``. Arrays broadcast; ``sd`` ≥ 0
    in the unit of ``y`` (``sd = 0`` gives the absolute error).
    """
    mean = np.asarray(mean, dtype=float)
    sd = np.asarray(sd, dtype=float)
    y = np.asarray(y, dtype=float)
    if np.any(~(sd >= 0)):
        raise ValueError("sd must be >= 0 (and not NaN)")
    mean, sd, y = np.broadcast_arrays(mean, sd, y)
    out = np.abs(y - mean)
    spread = sd > 0
    z = (y[spread] - mean[spread]) / sd[spread]
    out[spread] = sd[spread] * (z * (2.0 * stats.norm.cdf(z) - 1.0) + 2.0 * stats.norm.pdf(z) - 1.0 / np.sqrt(np.pi))
    return out


def mean_absolute_error(forecast, observed) -> float:
    """Mean of ``|forecast − observed|`` over cases with an observation [unit of the data]."""
    f, o = _pair(forecast, observed)
    return _mean_or_nan(np.abs(f - o))


def _log_errors(forecast_ugL, observed_ugL, floor_ugL):
    f, o = _pair(forecast_ugL, observed_ugL)
    if np.any(f < 0) or np.any(o < 0):
        raise ValueError("concentrations must be >= 0 for the log scores")
    return transform.to_log(f, floor_ugL) - transform.to_log(o, floor_ugL)


def mean_absolute_log_error(forecast_ugL, observed_ugL, floor_ugL: float = LOG_FLOOR_UGL) -> float:
    """Mean of ``|ln f − ln o|`` [natural-log units]; values below ``floor_ugL``
    [µg/L] (zeros included) count as the floor (see ``LOG_FLOOR_UGL``).
    0.1 means a typical factor of e^0.1 ≈ 1.105 between forecast and observation."""
    return _mean_or_nan(np.abs(_log_errors(forecast_ugL, observed_ugL, floor_ugL)))


def mean_log_bias(forecast_ugL, observed_ugL, floor_ugL: float = LOG_FLOOR_UGL) -> float:
    """Mean of ``ln f − ln o`` [natural-log units], floored as in
    :func:`mean_absolute_log_error`. Positive: forecasts too high; exp(bias)
    is the geometric-mean ratio forecast/observation."""
    return _mean_or_nan(_log_errors(forecast_ugL, observed_ugL, floor_ugL))


def interval_coverage(lower, upper, observed) -> float:
    """Fraction [-] of observations inside ``[lower, upper]`` (bounds included),
    over cases with an observation. lower, upper, observed (N,) in one unit,
    e.g. the 0.05 and 0.95 forecast quantiles for the central 90 % interval."""
    lo, o = _pair(lower, observed)
    hi, _ = _pair(upper, observed)
    if np.any(lo > hi):
        raise ValueError("every lower bound must be <= its upper bound")
    return _mean_or_nan((o >= lo) & (o <= hi))


def central_interval(E, level: float) -> tuple[np.ndarray, np.ndarray]:
    """Bounds (N,), (N,) of the central ``level`` interval of each case's members:
    the ``(1 − level)/2`` and ``(1 + level)/2`` sample quantiles (numpy's
    default linear interpolation between order statistics). level in (0, 1)."""
    E = np.asarray(E, dtype=float)
    if E.ndim != 2 or E.shape[0] < 2:
        raise ValueError(f"expected an ensemble E (members >= 2, cases), got {E.shape}")
    if not 0.0 < level < 1.0:
        raise ValueError(f"level must be in (0, 1), got {level!r}")
    lo, hi = np.quantile(E, [(1.0 - level) / 2.0, (1.0 + level) / 2.0], axis=0)
    return lo, hi


def ensemble_interval_coverage(E, y, level: float) -> float:
    """Fraction [-] of observations inside the central ``level`` interval of
    the members (:func:`central_interval`); level 0.5 or 0.9 for the usual
    50 % and 90 % intervals. A calibrated forecast covers about ``level``."""
    E, y = _cases(E, y)
    lo, hi = central_interval(E, level)
    return interval_coverage(lo, hi, y)


def spread_error_ratio(E, y, *, finite_ensemble_correction: bool = True) -> float:
    """Ensemble spread over the RMSE of the ensemble mean [-], about 1 when calibrated.

    spread = sqrt(mean over cases of the members' variance with ddof = 1);
    RMSE = sqrt(mean over cases of (ensemble mean − y)²). When the
    observation is one more draw from the members' distribution, the
    expected squared error of the mean of M members is ``(M + 1)/M`` times
    the variance, so with ``finite_ensemble_correction`` the spread is
    multiplied by ``sqrt((M + 1)/M)`` (Fortin et al. 2014) and the ratio is
    1 for a calibrated ensemble of any size. Needs M >= 2.
    """
    E, y = _cases(E, y)
    M = E.shape[0]
    if M < 2:
        raise ValueError("the spread-error ratio needs an ensemble of at least 2 members")
    keep = np.isfinite(y)
    if not keep.any():
        return float("nan")
    E, y = E[:, keep], y[keep]
    spread = np.sqrt(E.var(axis=0, ddof=1).mean())
    if finite_ensemble_correction:
        spread *= np.sqrt((M + 1.0) / M)
    rmse = np.sqrt(((E.mean(axis=0) - y) ** 2).mean())
    return float(spread / rmse) if rmse > 0 else float("inf")


def rank_histogram(E, y, rng: np.random.Generator) -> np.ndarray:
    """Counts (M + 1,) of the observation's rank among the members (Hamill 2001).

    Rank r (0..M) is the number of members below the observation; when k
    members equal it, r is the number below plus a uniform draw from
    0..k (from ``rng``), so ties do not pile up in one bin. Cases without an
    observation are left out. A flat histogram is necessary (not sufficient)
    for calibration; a U shape means too little spread, a dome too much.
    """
    E, y = _cases(E, y)
    keep = np.isfinite(y)
    E, y = E[:, keep], y[keep]
    below = (E < y).sum(axis=0)
    equal = (E == y).sum(axis=0)
    ranks = below + rng.integers(0, equal + 1)
    return np.bincount(ranks, minlength=E.shape[0] + 1)
