"""Scores of probability forecasts of one event, e.g. "the alert level is reached".

Inputs are ``p`` (N,) forecast probabilities in [0, 1] and ``o`` (N,) the
outcomes (True/1 when the event happened, False/0 otherwise), one per
forecast case. Terms follow Jolliffe and Stephenson (2012, *Forecast
Verification*, 2nd ed., Wiley).

Methods
-------
* Brier score (Brier 1950, Mon. Wea. Rev. 78:1) and its decomposition
  ``BS = REL − RES + UNC`` over probability bins (Murphy 1973, J. Appl.
  Meteor. 12:595).
* Brier skill score ``1 − BS/BS_ref`` against a reference forecast.
* ROC area by the trapezoid rule over all probability thresholds; it equals
  the Mann–Whitney statistic ``U/(n₁n₀)`` with ties counted one half
  (Mason and Graham 2002, Q. J. R. Meteorol. Soc. 128:2145).
* Contingency counts of a warning issued when ``p`` reaches a warning
  probability (the alert rule's "at least ``warn_probability``").
"""
from __future__ import annotations

from dataclasses import dataclass

import numpy as np


def _check(p, o):
    p = np.asarray(p, dtype=float)
    o = np.asarray(o)
    if p.ndim != 1 or p.shape != o.shape or p.size == 0:
        raise ValueError(f"expected probabilities p and outcomes o of one shape (cases,), got {p.shape} and {o.shape}")
    if np.any(~((p >= 0) & (p <= 1))):
        raise ValueError("probabilities must lie in [0, 1] (and not be NaN)")
    if o.dtype != bool:
        if np.any(~np.isin(o, (0, 1))):
            raise ValueError("outcomes must be booleans or 0/1")
        o = o.astype(bool)
    return p, o


def brier_score(p, o) -> float:
    """Mean of ``(p − o)²`` over cases [-], 0 for a perfect forecast (Brier 1950)."""
    p, o = _check(p, o)
    return float(np.mean((p - o) ** 2))


@dataclass(frozen=True)
class BrierDecomposition:
    """Murphy (1973) decomposition of the Brier score [-].

    ``brier`` is the score computed directly; ``reliability − resolution +
    uncertainty`` equals it exactly when every bin holds one forecast value
    (``within_bin_spread`` = 0), and otherwise differs by terms of the
    within-bin spread (Stephenson, Coelho and Jolliffe 2008, Wea.
    Forecasting 23:752). ``bin_forecast`` (K,) mean forecast per non-empty
    bin, ``bin_frequency`` (K,) observed event frequency, ``bin_count`` (K,).
    """

    brier: float
    reliability: float
    resolution: float
    uncertainty: float
    base_rate: float
    within_bin_spread: float
    bin_forecast: np.ndarray
    bin_frequency: np.ndarray
    bin_count: np.ndarray


def brier_decomposition(p, o, bins: int | None = None) -> BrierDecomposition:
    """Reliability, resolution and uncertainty of the Brier score (Murphy 1973).

    Binning: ``bins=None`` puts each distinct forecast value in its own bin
    (an ensemble of M members gives at most M + 1 values k/M), so the
    identity ``BS = REL − RES + UNC`` is exact. ``bins=K`` uses K equal-width
    bins on [0, 1], closed on the left, the last one also on the right; each
    bin is represented by the mean forecast inside it. With N cases, bin k
    holding n_k cases of mean forecast p̄_k and event frequency ō_k, and
    base rate ō: ``REL = Σ n_k (p̄_k − ō_k)²/N``, ``RES = Σ n_k (ō_k − ō)²/N``,
    ``UNC = ō(1 − ō)``.
    """
    p, o = _check(p, o)
    if bins is None:
        p_bar, label = np.unique(p, return_inverse=True)
        count = np.bincount(label).astype(float)
    else:
        if int(bins) != bins or bins < 1:
            raise ValueError(f"bins must be a positive whole number or None, got {bins!r}")
        label = np.minimum((p * int(bins)).astype(int), int(bins) - 1)
        _, label = np.unique(label, return_inverse=True)
        count = np.bincount(label).astype(float)
        p_bar = np.bincount(label, weights=p) / count
    o_bar = np.bincount(label, weights=o.astype(float)) / count
    n = p.size
    base = float(o.mean())
    return BrierDecomposition(
        brier=brier_score(p, o),
        reliability=float(np.sum(count * (p_bar - o_bar) ** 2) / n),
        resolution=float(np.sum(count * (o_bar - base) ** 2) / n),
        uncertainty=base * (1.0 - base),
        base_rate=base,
        within_bin_spread=float(np.mean((p - p_bar[label]) ** 2)),
        bin_forecast=p_bar,
        bin_frequency=o_bar,
        bin_count=count.astype(int),
    )


def brier_skill_score(p, o, reference=None) -> float:
    """``1 − BS/BS_ref`` [-]: 1 perfect, 0 no better than the reference, < 0 worse.

    reference: None for the sample climatology (the base rate of ``o`` as a
    constant forecast, ``BS_ref = ō(1 − ō)``; note it uses the verifying
    sample itself), a number in [0, 1] for a constant reference probability,
    or an array (N,) of reference probabilities (e.g. a baseline
    forecaster's). Raises when the reference is perfect (``BS_ref = 0``).
    """
    p, o = _check(p, o)
    if reference is None:
        base = o.mean()
        bs_ref = float(base * (1.0 - base))
    else:
        ref = np.broadcast_to(np.asarray(reference, dtype=float), p.shape)
        bs_ref = brier_score(ref, o)
    if bs_ref == 0:
        raise ValueError("the reference forecast is perfect on this sample (BS_ref = 0); the skill score is undefined")
    return 1.0 - brier_score(p, o) / bs_ref


def roc_points(p, o) -> tuple[np.ndarray, np.ndarray]:
    """False-alarm rates and hit rates (K + 1,), (K + 1,) [-] of the ROC curve.

    (0, 0) for "never warn", then one point per distinct forecast value t
    (warning when ``p >= t``) from the highest down; the lowest value warns
    every case, so the curve ends at (1, 1). Needs both events and
    non-events.
    """
    p, o = _check(p, o)
    n_events = int(o.sum())
    n_non_events = o.size - n_events
    if n_events == 0 or n_non_events == 0:
        raise ValueError("the ROC needs at least one event and one non-event")
    values, label = np.unique(p, return_inverse=True)
    events_at = np.bincount(label, weights=o.astype(float), minlength=values.size)[::-1]
    non_events_at = np.bincount(label, weights=(~o).astype(float), minlength=values.size)[::-1]
    hit_rate = np.concatenate(([0.0], np.cumsum(events_at) / n_events))
    false_alarm_rate = np.concatenate(([0.0], np.cumsum(non_events_at) / n_non_events))
    return false_alarm_rate, hit_rate


def roc_area(p, o) -> float:
    """Area under the ROC curve [-] by the trapezoid rule over :func:`roc_points`;
    0.5 for no discrimination, 1 for perfect (Mason and Graham 2002)."""
    false_alarm_rate, hit_rate = roc_points(p, o)
    return float(np.trapezoid(hit_rate, false_alarm_rate))


@dataclass(frozen=True)
class ContingencyCounts:
    """2×2 table of a yes/no warning against the event (counts of cases)."""

    hits: int
    misses: int
    false_alarms: int
    correct_negatives: int

    @property
    def hit_rate(self) -> float:
        """hits / (hits + misses) [-] (probability of detection); NaN without events."""
        n = self.hits + self.misses
        return self.hits / n if n else float("nan")

    @property
    def false_alarm_ratio(self) -> float:
        """false alarms / (hits + false alarms) [-]; NaN without warnings."""
        n = self.hits + self.false_alarms
        return self.false_alarms / n if n else float("nan")

    @property
    def false_alarm_rate(self) -> float:
        """false alarms / (false alarms + correct negatives) [-]; NaN without non-events."""
        n = self.false_alarms + self.correct_negatives
        return self.false_alarms / n if n else float("nan")


def contingency_counts(p, o, warn_probability: float) -> ContingencyCounts:
    """Counts of a warning issued when ``p >= warn_probability`` [-] against the outcomes."""
    p, o = _check(p, o)
    if not 0.0 <= warn_probability <= 1.0:
        raise ValueError(f"warn_probability must lie in [0, 1], got {warn_probability!r}")
    warn = p >= warn_probability
    return ContingencyCounts(
        hits=int(np.sum(warn & o)),
        misses=int(np.sum(~warn & o)),
        false_alarms=int(np.sum(warn & ~o)),
        correct_negatives=int(np.sum(~warn & ~o)),
    )
