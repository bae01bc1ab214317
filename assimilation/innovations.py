"""Innovation statistics of a filter cycle, as plain JSON-ready values.

An innovation is d = y − mean(HE), a reading minus the ensemble's
prediction of it. For a filter whose spread is right, the expected square
innovation is the predicted spread plus the observation error variance,
E[d²] = var(HE) + R (Desroziers et al. 2005, Q. J. R. Meteorol. Soc.
131:3385), so the normalised innovations have an rms near 1 and
``spread_error_ratio`` is near 1.
"""
from __future__ import annotations

import math
from dataclasses import dataclass, field

import numpy as np

from assimilation.observe import OBSERVABLE_KINDS, Observations


def json_float(x) -> float | None:
    """``float(x)``, or None when it is not finite (JSON has no NaN or infinity)."""
    x = float(x)
    return x if math.isfinite(x) else None


def innovation_statistics(d: np.ndarray, var_he: np.ndarray, R: np.ndarray) -> dict:
    """Summary of innovations d = y − mean(HE) against their expected variance.

    d, var_he (the ensemble variance of each prediction) and R (observation
    error variances) (p,) in observation units. Keys: ``n``,
    ``innovation_mean``, ``innovation_sd``, ``normalised_innovation_mean``,
    ``normalised_innovation_rms``, ``prior_spread``, ``observation_error``,
    ``innovation_rms`` and ``spread_error_ratio`` = sqrt(mean(var_he + R)) /
    rms(d).
    """
    if d.size == 0:
        return {"n": 0}
    expected = var_he + R
    rms = np.sqrt(np.mean(d**2))
    return {
        "n": int(d.size),
        "innovation_mean": json_float(d.mean()),
        "innovation_sd": json_float(d.std()),
        "normalised_innovation_mean": json_float(np.mean(d / np.sqrt(expected))),
        "normalised_innovation_rms": json_float(np.sqrt(np.mean(d**2 / expected))),
        "prior_spread": json_float(np.sqrt(np.mean(var_he))),
        "observation_error": json_float(np.sqrt(np.mean(R))),
        "innovation_rms": json_float(rms),
        "spread_error_ratio": json_float(np.sqrt(np.mean(expected)) / rms) if rms > 0 else None,
    }


@dataclass
class InnovationLog:
    """The innovations of the windows analysed in one cycle, in analysis order."""

    innovations: list = field(default_factory=list)
    predicted_variances: list = field(default_factory=list)
    error_variances: list = field(default_factory=list)
    kinds: list = field(default_factory=list)
    times_d: list = field(default_factory=list)

    def add(self, batch: Observations, HE: np.ndarray, R: np.ndarray, time_d: float) -> None:
        """Record one analysed window: its observations, the predicted
        observations HE (M, p) and error variances R (p,), at time_d [epoch days]."""
        self.innovations.append(batch.value - HE.mean(axis=0))
        self.predicted_variances.append(HE.var(axis=0, ddof=1))
        self.error_variances.append(R)
        self.kinds.append(batch.kind)
        self.times_d.append(float(time_d))

    @property
    def n_windows(self) -> int:
        return len(self.times_d)

    @property
    def n_obs(self) -> int:
        return int(sum(a.size for a in self.innovations))

    def summary(self) -> dict:
        """Statistics over all recorded innovations (see :func:`innovation_statistics`,
        without ``n``) and the same per kind under ``by_kind``; empty when nothing was recorded."""
        if not self.innovations:
            return {}
        d, v, R, kinds = (np.concatenate(a) for a in (self.innovations, self.predicted_variances,
                                                       self.error_variances, self.kinds))
        out = innovation_statistics(d, v, R)
        out.pop("n")
        out["by_kind"] = {k: innovation_statistics(d[kinds == k], v[kinds == k], R[kinds == k])
                          for k in OBSERVABLE_KINDS if np.any(kinds == k)}
        return out
