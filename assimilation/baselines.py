"""Statistical baseline forecasters of a daily chlorophyll-a series, for verification.

Each forecaster sees a daily series ``chl_ugL`` (T,) [µg/L] on ``days_d``
(T,) [epoch days, whole days apart; missing days either absent or NaN] and
a forecast ``origin_d`` [epoch day]: the last day whose value it may use.
Values on days after the origin are dropped before anything else, so a
forecast never depends on them. Lead h = 1..H verifies on day
``origin_d + h``. Each returns a :class:`BaselineForecast` whose members
(M, H) [µg/L] are per-lead quantiles of the forecast distribution, sorted
within each lead: they describe each lead's marginal distribution, not
trajectories across leads.

Chlorophyll-a is modelled in natural-log space (multiplicative changes),
values below ``LOG_FLOOR_UGL`` counting as the floor (``assimilation.scores``).
Members sit at the fixed plotting positions ``(j − 0.5)/M``, j = 1..M
(Hazen 1914), so every forecaster is deterministic.

Forecasters
-----------
* :func:`persistence`: the last observed value, one member.
* :func:`persistence_ensemble`: the last observed value times
  ``exp(Δ)``, Δ the series' own log changes over the same lag before the
  origin; with fewer than ``MIN_PAIRS`` pairs, a normal prior of log change
  with sd ``PRIOR_LOG_SD_PER_DAY·sqrt(lag)`` is mixed in.
* :func:`climatology`: values within ±``CLIMATOLOGY_HALF_WINDOW_D`` days of
  the valid day's calendar date in previous years (a day-of-year window).
* :func:`ar_forecast` (:func:`ar1_forecast` for order 1): an autoregression
  of log chlorophyll-a, with water temperature as regressor when given,
  fitted by conditional least squares (statsmodels ``OLS``) on the runs of
  consecutive observed days (Box, Jenkins, Reinsel and Ljung 2015, *Time
  Series Analysis*, 5th ed., Wiley, ch. 7; Hamilton 1994, *Time Series
  Analysis*, Princeton, ch. 8).
* :func:`ar_average_forecast`: the equal-weight quantile average of the
  autoregressions of orders 1–3 (Bloomline's "statistical" forecaster).
"""
from __future__ import annotations

from dataclasses import dataclass

import numpy as np
from scipy import stats
from statsmodels.regression.linear_model import OLS

from assimilation import transform
from assimilation.scores import LOG_FLOOR_UGL

MEMBERS = 60
MIN_PAIRS = 30
"""Pairs of values at a lag needed to use their log changes alone (Bloomline's choice)."""
PRIOR_LOG_SD_PER_DAY = 0.15
"""sd [log units per sqrt(day)] of the prior log change, growing as sqrt(lag): a
random walk with about 15 % day-to-day change of chlorophyll-a, a round figure
of the order seen in lake monitoring (common practice, not from a published source)."""
CLIMATOLOGY_HALF_WINDOW_D = 15
MIN_CLIMATOLOGY_VALUES = 10
"""Values needed in the day-of-year window for a climatological forecast (Bloomline's choice)."""
MIN_AR_OBSERVATIONS = 30
"""Pairs of consecutive observed days needed to fit the autoregression (two or three
coefficients and the residual variance); with fewer it falls back to the persistence
ensemble (Bloomline's choice)."""


@dataclass(frozen=True)
class BaselineForecast:
    """Forecast of one baseline: ``members_ugL`` (M, H) [µg/L] for leads 1..H
    on ``valid_day_d`` (H,) [epoch days]; a lead without a forecast is NaN.
    ``method`` names the forecaster that produced the members (it differs from
    the one called after a fallback); ``note`` says why, or is empty."""

    method: str
    valid_day_d: np.ndarray
    members_ugL: np.ndarray
    note: str = ""


def _positions(m: int) -> np.ndarray:
    return (np.arange(1, m + 1) - 0.5) / m


def _history(days_d, chl_ugL, origin_d, horizon_days, extra=None):
    """The series on a contiguous daily grid ending at the origin (days after it dropped)."""
    days_d = np.asarray(days_d, dtype=float)
    chl = np.asarray(chl_ugL, dtype=float)
    if days_d.ndim != 1 or chl.shape != days_d.shape:
        raise ValueError(f"expected days_d and chl_ugL of one shape (T,), got {days_d.shape} and {chl.shape}")
    if extra is not None and np.shape(extra) != days_d.shape:
        raise ValueError(f"temperature_C must match days_d {days_d.shape}, got {np.shape(extra)}")
    if not np.isfinite(origin_d):
        raise ValueError(f"origin_d must be a finite epoch day, got {origin_d!r}")
    if int(horizon_days) != horizon_days or horizon_days < 1:
        raise ValueError(f"horizon_days must be a whole number >= 1, got {horizon_days!r}")
    keep = days_d <= origin_d + 1e-9
    days_d, chl = days_d[keep], chl[keep]
    offset = origin_d - days_d
    if not np.all(np.isfinite(days_d)) or np.any(np.abs(offset - np.round(offset)) > 1e-6):
        raise ValueError("days_d must be finite and a whole number of days from origin_d")
    if days_d.size > 1 and np.any(np.diff(days_d) <= 0):
        raise ValueError("days_d must be strictly increasing")
    if np.any(chl < 0):
        raise ValueError("chl_ugL must be >= 0 (NaN where missing)")
    if not np.any(np.isfinite(chl)):
        raise ValueError(f"no observed chlorophyll-a at or before the origin {origin_d}")
    lag = np.round(offset).astype(int)                 # days before the origin
    size = int(lag.max()) + 1
    grid = np.full(size, np.nan)
    grid[size - 1 - lag] = chl
    extra_grid = None
    if extra is not None:
        extra_grid = np.full(size, np.nan)
        extra_grid[size - 1 - lag] = np.asarray(extra, dtype=float)[keep]
    valid = origin_d + np.arange(1, int(horizon_days) + 1, dtype=float)
    return grid, extra_grid, valid


def persistence(days_d, chl_ugL, origin_d: float, horizon_days: int) -> BaselineForecast:
    """The last observed value at or before the origin [µg/L] at every lead (one member)."""
    grid, _, valid = _history(days_d, chl_ugL, origin_d, horizon_days)
    last = grid[np.flatnonzero(np.isfinite(grid))[-1]]
    return BaselineForecast("persistence", valid, np.full((1, valid.size), last))


def _log_change_members(z, lag, members, min_pairs, prior_log_sd_per_day):
    """Members (M,) of the log change over ``lag`` days, and whether the prior was mixed in."""
    changes = z[lag:] - z[:-lag] if lag < z.size else np.empty(0)
    changes = changes[np.isfinite(changes)]
    n = changes.size
    n_empirical = members if n >= min_pairs else round(members * n / min_pairs)
    parts = []
    if n_empirical:
        parts.append(np.quantile(changes, _positions(n_empirical)))
    if n_empirical < members:
        sd = prior_log_sd_per_day * np.sqrt(lag)
        parts.append(sd * stats.norm.ppf(_positions(members - n_empirical)))
    return np.sort(np.concatenate(parts)), n < min_pairs


def persistence_ensemble(days_d, chl_ugL, origin_d: float, horizon_days: int, *, members: int = MEMBERS,
                         min_pairs: int = MIN_PAIRS, prior_log_sd_per_day: float = PRIOR_LOG_SD_PER_DAY,
                         floor_ugL: float = LOG_FLOOR_UGL) -> BaselineForecast:
    """Last observed value times exp of the series' own log changes [µg/L].

    For lead h the lag is ``h + g`` days, g the days from the last observed
    value to the origin. The log changes over that lag between observed
    pairs before the origin give the members, as quantiles at ``(j − 0.5)/M``.
    With n < ``min_pairs`` pairs, ``round(M·n/min_pairs)`` members come from
    their quantiles and the rest from the prior N(0, (sd·sqrt(lag))²) with
    sd = ``prior_log_sd_per_day`` [log units/sqrt(day)]: a mixture weighting
    the data by n/min_pairs. members >= 1; min_pairs >= 1.
    """
    grid, _, valid = _history(days_d, chl_ugL, origin_d, horizon_days)
    _check_members(members)
    if int(min_pairs) != min_pairs or min_pairs < 1:
        raise ValueError(f"min_pairs must be a whole number >= 1, got {min_pairs!r}")
    if not prior_log_sd_per_day > 0:
        raise ValueError(f"prior_log_sd_per_day must be > 0, got {prior_log_sd_per_day!r}")
    z = transform.to_log(grid, floor_ugL)
    last = np.flatnonzero(np.isfinite(z))[-1]
    gap = grid.size - 1 - last
    out = np.empty((members, valid.size))
    short = []
    for k in range(valid.size):
        lag = k + 1 + gap
        d, mixed = _log_change_members(z[: last + 1], lag, members, min_pairs, prior_log_sd_per_day)
        out[:, k] = transform.from_log(z[last] + d)
        if mixed:
            short.append(k + 1)
    note = f"prior mixed in at leads {short} (fewer than {min_pairs} pairs)" if short else ""
    return BaselineForecast("persistence_ensemble", valid, out, note)


def _check_members(members):
    if int(members) != members or members < 1:
        raise ValueError(f"members must be a whole number >= 1, got {members!r}")


def _anniversaries(day_d: float, years: int) -> np.ndarray:
    """Epoch days (years,) of the calendar date of ``day_d`` 1..years years earlier
    (29 February falls on 1 March in common years)."""
    date = np.datetime64(int(np.floor(day_d)), "D")
    month = date.astype("datetime64[M]")
    day_in_month = date - month.astype("datetime64[D]")
    earlier = (month - 12 * np.arange(1, years + 1)).astype("datetime64[D]") + day_in_month
    return earlier.astype("int64").astype(float)


def climatology(days_d, chl_ugL, origin_d: float, horizon_days: int, *, members: int = MEMBERS,
                half_window_d: int = CLIMATOLOGY_HALF_WINDOW_D, min_values: int = MIN_CLIMATOLOGY_VALUES,
                floor_ugL: float = LOG_FLOOR_UGL) -> BaselineForecast:
    """Day-of-year climatology [µg/L] from previous years.

    For a valid day v the sample is every observed value at or before the
    origin within ±``half_window_d`` days of v's calendar date in any earlier
    year (the same season of previous years). Members are the sample's log
    quantiles at ``(j − 0.5)/M``; a lead with fewer than ``min_values``
    values is NaN (no previous year, or too few values in it).
    """
    grid, _, valid = _history(days_d, chl_ugL, origin_d, horizon_days)
    _check_members(members)
    if int(half_window_d) != half_window_d or not 0 <= half_window_d < 183:
        raise ValueError(f"half_window_d must be a whole number of days in 0..182, got {half_window_d!r}")
    grid_days = origin_d - np.arange(grid.size)[::-1]
    seen = np.isfinite(grid)
    z, obs_days = transform.to_log(grid[seen], floor_ugL), grid_days[seen]
    out = np.full((members, valid.size), np.nan)
    short = []
    for k, v in enumerate(valid):
        years = int((v - obs_days[0]) // 365) + 1
        centres = _anniversaries(v, years)
        distance = np.abs(obs_days[:, None] - (centres[None, :] + (v - np.floor(v)))).min(axis=1)
        sample = z[distance <= half_window_d + 1e-9]
        if sample.size >= min_values:
            out[:, k] = transform.from_log(np.quantile(sample, _positions(members)))
        else:
            short.append(k + 1)
    note = f"no climatology at leads {short} (fewer than {min_values} values in previous years)" if short else ""
    return BaselineForecast("climatology", valid, out, note)


def _fill_gaps(values):
    """Linear interpolation over NaN in time, ends held at the nearest value; None if all NaN."""
    seen = np.isfinite(values)
    if not seen.any():
        return None
    t = np.arange(values.size, dtype=float)
    return np.interp(t, t[seen], values[seen])


def ar1_forecast(days_d, chl_ugL, origin_d: float, horizon_days: int, *, temperature_C=None,
                 future_temperature_C=None, members: int = MEMBERS,
                 min_observations: int = MIN_AR_OBSERVATIONS, floor_ugL: float = LOG_FLOOR_UGL) -> BaselineForecast:
    """AR(1) forecast of log chlorophyll-a: :func:`ar_forecast` of order 1."""
    return ar_forecast(days_d, chl_ugL, origin_d, horizon_days, order=1, temperature_C=temperature_C,
                       future_temperature_C=future_temperature_C, members=members,
                       min_observations=min_observations, floor_ugL=floor_ugL)


@dataclass(frozen=True)
class _ArFit:
    mean: np.ndarray   # (H,) forecast mean of z at the leads
    sd: np.ndarray     # (H,) forecast sd of z at the leads


def _ar_inputs(days_d, chl_ugL, origin_d, horizon_days, temperature_C, future_temperature_C, members, floor_ugL):
    grid, temp, valid = _history(days_d, chl_ugL, origin_d, horizon_days, extra=temperature_C)
    _check_members(members)
    if future_temperature_C is not None and temperature_C is None:
        raise ValueError("future_temperature_C needs the temperature history temperature_C")
    first = np.flatnonzero(np.isfinite(grid))[0]
    z = transform.to_log(grid[first:], floor_ugL)
    notes = []
    exog = future = None
    if temp is not None:
        exog = _fill_gaps(temp[first:])
        if exog is None:
            notes.append("no water temperature before the origin; fitted without it")
        elif future_temperature_C is not None:
            future = np.asarray(future_temperature_C, dtype=float)
            if future.shape != valid.shape or not np.all(np.isfinite(future)):
                raise ValueError(f"future_temperature_C must be finite with shape {valid.shape}, got {future.shape}")
        else:
            future = np.full(valid.size, exog[-1])
    return z, exog, future, valid, notes


def _fit_ar(z, exog, future, n_leads: int, order: int, min_observations: int) -> _ArFit | str:
    """The ARX(``order``) forecast of ``z`` (see :func:`ar_forecast`), or the reason there is none."""
    p = order
    lags = np.column_stack([z[p - i - 1: z.size - i - 1] for i in range(p)]) if z.size > p else np.empty((0, p))
    target = z[p:]
    pairs = np.isfinite(target) & np.all(np.isfinite(lags), axis=1)
    n_pairs = int(pairs.sum())
    if n_pairs < min_observations:
        return (f"{n_pairs} runs of {p + 1} consecutive observed days before the origin, "
                f"fewer than {min_observations}")
    columns = [np.ones(target.size), lags] + ([] if exog is None else [exog[p:]])
    design = np.column_stack(columns)[pairs]
    if np.linalg.matrix_rank(design) < design.shape[1]:
        return "the autoregression's design is singular (constant series or temperature)"
    fit = OLS(target[pairs], design).fit()
    c, phi = fit.params[0], fit.params[1: 1 + p]
    beta = 0.0 if exog is None else fit.params[1 + p]
    if np.any(np.abs(np.roots(np.concatenate([[1.0], -phi]))) >= 1.0):
        return f"the fitted autoregression is not stationary (phi = {np.round(phi, 3).tolist()})"
    last = int(np.flatnonzero(np.isfinite(z))[-1])
    gap = z.size - 1 - last
    filled = _fill_gaps(z[: last + 1])
    state = list(filled[max(0, last + 1 - p):][::-1])          # z_last, z_last−1, …
    state += [state[-1]] * (p - len(state))
    held = 0.0 if exog is None else exog[-1]
    drive = np.concatenate([np.full(gap, held), np.zeros(n_leads) if future is None else future])
    mean = np.empty(drive.size)
    for s, t in enumerate(drive):
        m = c + float(np.dot(phi, state)) + beta * t
        mean[s] = m
        state = [m] + state[:-1]
    psi = np.zeros(drive.size)                                   # MA(∞) weights ψ_j (Box et al. 2015, ch. 5)
    psi[0] = 1.0
    for j in range(1, drive.size):
        psi[j] = sum(phi[i] * psi[j - i - 1] for i in range(min(j, p)))
    var = fit.scale * np.cumsum(psi ** 2)                        # σ²·Σ_{j<k} ψ_j²
    mean, sd = mean[gap:], np.sqrt(var[gap:])
    if not (np.all(np.isfinite(mean)) and np.all(np.isfinite(sd))):
        return "the autoregression gave a non-finite forecast"
    return _ArFit(mean, sd)


def ar_forecast(days_d, chl_ugL, origin_d: float, horizon_days: int, *, order: int = 1, temperature_C=None,
                future_temperature_C=None, members: int = MEMBERS,
                min_observations: int = MIN_AR_OBSERVATIONS, floor_ugL: float = LOG_FLOOR_UGL) -> BaselineForecast:
    """AR(p) forecast of log chlorophyll-a, members at fixed normal quantiles [µg/L].

    The model, for z = ln chlorophyll-a (values below ``floor_ugL`` counting as
    the floor) and T the water temperature [°C] when ``temperature_C`` (T,)
    is given (else no β term)::

        z_t = c + φ_1·z_{t−1} + … + φ_p·z_{t−p} + β·T_t + ε_t,   ε_t ~ N(0, σ²)

    is fitted by conditional least squares: statsmodels ``OLS`` of z_t on
    (1, z_{t−1}, …, z_{t−p}, T_t) over the runs of p + 1 consecutive observed
    days before the origin (Box, Jenkins, Reinsel and Ljung 2015, *Time
    Series Analysis*, 5th ed., Wiley, ch. 7; Hamilton 1994, *Time Series
    Analysis*, Princeton, ch. 8); gaps in the temperature history are filled
    by linear interpolation in time (ends held). σ² is the OLS residual
    variance (``scale``, residual sum of squares over n − k).

    The forecast starts from the last observed value z_L, g days before the
    origin (earlier lags gap-filled by interpolation), and runs the recursion
    over the g gap days and the leads; the temperature is held at its last
    observed value, except at the leads when ``future_temperature_C`` (H,)
    [°C] is given. Lead h is k = g + h steps from z_L: variance
    v_h = σ²·Σ_{j=0}^{k−1} ψ_j², ψ the MA(∞) weights of the AR polynomial,
    members ``exp(m_h + sqrt(v_h)·Φ⁻¹((j − 0.5)/M))``. The variance ignores
    the uncertainty of the fitted coefficients, so the spread is somewhat too
    narrow on a short history.

    Falls back to the persistence ensemble (``method`` says which ran,
    ``note`` why) with fewer than ``min_observations`` runs of p + 1
    consecutive observed days, a singular design (e.g. a constant
    temperature), a non-stationary fit (a root of the AR polynomial on or
    inside the unit circle), or a non-finite forecast.
    """
    if int(order) != order or order < 1:
        raise ValueError(f"order must be a whole number >= 1, got {order!r}")
    z, exog, future, valid, notes = _ar_inputs(days_d, chl_ugL, origin_d, horizon_days, temperature_C,
                                               future_temperature_C, members, floor_ugL)
    fit = _fit_ar(z, exog, future, valid.size, int(order), min_observations)
    if isinstance(fit, str):
        return _fallback(days_d, chl_ugL, origin_d, horizon_days, members, floor_ugL)(fit)
    out = transform.from_log(fit.mean + fit.sd * stats.norm.ppf(_positions(members))[:, None])
    return BaselineForecast("ar1" if order == 1 else f"ar{int(order)}", valid, out, "; ".join(notes))


AVERAGED_ORDERS = (1, 2, 3)
"""Orders of the autoregressions :func:`ar_average_forecast` averages (Bloomline's choice: short
memory, a few coefficients that a season of daily values can estimate)."""


def ar_average_forecast(days_d, chl_ugL, origin_d: float, horizon_days: int, *, orders=AVERAGED_ORDERS,
                        temperature_C=None, future_temperature_C=None, members: int = MEMBERS,
                        min_observations: int = MIN_AR_OBSERVATIONS,
                        floor_ugL: float = LOG_FLOOR_UGL) -> BaselineForecast:
    """The equal-weight quantile average of the :func:`ar_forecast` of each order in ``orders`` [µg/L].

    Averaging the forecasts of several model orders with equal weights,
    rather than selecting one, hedges against choosing the wrong order on a
    short record (the "forecast combination puzzle": simple averages are hard
    to beat; Timmermann 2006, Handbook of Economic Forecasting 1:135; Claeskens
    et al. 2016, Int. J. Forecast. 32:754). Each order's forecast is normal in
    log space, so the quantile average (Vincentization) has mean and sd the
    means of theirs. Orders that cannot be fitted are left out; with none the
    persistence ensemble is returned (``method`` and ``note`` say so).
    """
    z, exog, future, valid, notes = _ar_inputs(days_d, chl_ugL, origin_d, horizon_days, temperature_C,
                                               future_temperature_C, members, floor_ugL)
    fits, reasons = [], []
    for p in orders:
        fit = _fit_ar(z, exog, future, valid.size, int(p), min_observations)
        (reasons if isinstance(fit, str) else fits).append(fit if not isinstance(fit, str) else f"AR({p}): {fit}")
    if not fits:
        return _fallback(days_d, chl_ugL, origin_d, horizon_days, members, floor_ugL)("; ".join(reasons))
    mean = np.mean([f.mean for f in fits], axis=0)
    sd = np.mean([f.sd for f in fits], axis=0)
    out = transform.from_log(mean + sd * stats.norm.ppf(_positions(members))[:, None])
    return BaselineForecast("ar_average", valid, out, "; ".join(notes + reasons))


def _fallback(days_d, chl_ugL, origin_d, horizon_days, members, floor_ugL):
    def run(reason: str) -> BaselineForecast:
        base = persistence_ensemble(days_d, chl_ugL, origin_d, horizon_days, members=members, floor_ugL=floor_ugL)
        note = f"fell back to the persistence ensemble: {reason}"
        return BaselineForecast(base.method, base.valid_day_d, base.members_ugL,
                                note + (f"; {base.note}" if base.note else ""))
    return run
