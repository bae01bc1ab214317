"""The default first guess of a basin's state, for a cold start without recent samples.

One source for the concentrations a new ensemble is spread about when
nothing better is known: the service starts from them (replacing each with
the median of recent samples where there are some), and
:func:`assimilation.filter_cycle.initial_checkpoint` uses them when it is
given no initial state. The values are mid-range for a mesotrophic lake
early in the season (common practice); the filter corrects them within
days of data.
"""
from __future__ import annotations

from dataclasses import dataclass

import numpy as np

from assimilation.spec import ModelSpec, StateLayout


@dataclass(frozen=True)
class FirstGuess:
    """First-guess concentrations of one basin [µg/L].

    nitrogen_ugL: dissolved inorganic nitrogen as N; phosphorus_ugL: soluble
    reactive phosphorus as P; other_chlorophyll_ugL: chlorophyll-a of all
    groups that are not cyanobacteria together; cyanobacteria_chlorophyll_ugL:
    chlorophyll-a of the cyanobacteria; detrital_phosphorus_ugL: detrital
    (organic, non-living) P, of the order of a mesotrophic lake's total P
    less its SRP and algal P (common practice); detrital_nitrogen_ugL:
    detrital N, the same at the Redfield N:P of the algae it came from
    (:func:`detrital_nitrogen_from_phosphorus`).
    """

    nitrogen_ugL: float = 300.0
    phosphorus_ugL: float = 8.0
    other_chlorophyll_ugL: float = 2.0
    cyanobacteria_chlorophyll_ugL: float = 0.3
    detrital_phosphorus_ugL: float = 5.0
    detrital_nitrogen_ugL: float = 36.0

    def __post_init__(self):
        for key in ("nitrogen_ugL", "phosphorus_ugL", "other_chlorophyll_ugL", "cyanobacteria_chlorophyll_ugL",
                    "detrital_phosphorus_ugL", "detrital_nitrogen_ugL"):
            value = getattr(self, key)
            if not (np.isfinite(value) and value >= 0):
                raise ValueError(f"FirstGuess.{key} must be a finite concentration >= 0 µg/L, got {value!r}")

    def state(self, spec: ModelSpec) -> np.ndarray:
        """The same first guess in every basin of ``spec``, (n_state,) [µg/L].

        The cyanobacteria chlorophyll is shared equally among the groups
        flagged ``is_cyanobacteria``, the other chlorophyll among the rest;
        when the spec has no group of one kind, its share goes to the other
        kind, so the total chlorophyll-a is kept.
        """
        cyano = np.array([g.is_cyanobacteria for g in spec.groups])
        total = self.other_chlorophyll_ugL + self.cyanobacteria_chlorophyll_ugL
        if cyano.all() or not cyano.any():
            per_group = np.full(spec.n_groups, total / spec.n_groups)
        else:
            per_group = np.where(cyano, self.cyanobacteria_chlorophyll_ugL / cyano.sum(),
                                 self.other_chlorophyll_ugL / (~cyano).sum())
        B = spec.n_basins
        return StateLayout(spec).pack(np.full(B, self.nitrogen_ugL), np.full(B, self.phosphorus_ugL),
                                      np.broadcast_to(per_group, (B, spec.n_groups)),
                                      np.full(B, self.detrital_nitrogen_ugL), np.full(B, self.detrital_phosphorus_ugL))


def detrital_phosphorus_from_total(total_phosphorus_ugL, srp_ugL, chlorophyll_ugL, spec: ModelSpec,
                                   floor_ugL: float = 0.1):
    """Detrital P implied by a total-P sample: TP − SRP − a_P·chlorophyll-a [µg P/L].

    total_phosphorus_ugL, srp_ugL, chlorophyll_ugL [µg/L] (arrays
    broadcast); a_P the spec's phosphorus_to_chlorophyll. The sum of the
    pools is what a TP sample sees (:mod:`assimilation.observe`), so this is
    the detrital P that makes the first guess agree with it; at least
    ``floor_ugL`` when SRP and algal P already account for the sample.
    """
    rest = (np.asarray(total_phosphorus_ugL, dtype=float) - np.asarray(srp_ugL, dtype=float)
            - spec.phosphorus_to_chlorophyll * np.asarray(chlorophyll_ugL, dtype=float))
    return np.maximum(rest, floor_ugL)


def detrital_nitrogen_from_phosphorus(detrital_phosphorus_ugL, spec: ModelSpec):
    """Detrital N at the N:P of the algae (the spec's nitrogen_to_chlorophyll /
    phosphorus_to_chlorophyll, Redfield by default) [µg N/L]."""
    return np.asarray(detrital_phosphorus_ugL, dtype=float) * (spec.nitrogen_to_chlorophyll
                                                                / spec.phosphorus_to_chlorophyll)


#: The first guess the service and the filter use unless told otherwise.
DEFAULT_FIRST_GUESS = FirstGuess()
