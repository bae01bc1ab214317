"""Observations and observation operators for Bloomline's filter.

Kinds of reading (canonical variable names, DEVELOPERS.md) and what each sees
of one basin's state (µg/L):

=========================== =================================================
``chlorophyll_fluorescence`` gain · sum over groups of chlorophyll-a
``phycocyanin``              gain · chlorophyll-a of the cyanobacteria groups
``chlorophyll_a``            sum over groups of chlorophyll-a (lab, extracted)
``nitrate``                  dissolved inorganic nitrogen N (lab; nitrate +
                             ammonium where both were sampled, see
                             ``monitor.forecasting.observations``)
``srp``                      soluble reactive phosphorus P (lab)
``total_phosphorus``         SRP + detrital P + a_P · sum of chlorophyll-a (lab)
``total_nitrogen``           DIN + detrital N + a_N · sum of chlorophyll-a (lab)
=========================== =================================================

a_N and a_P are the spec's nutrient-to-chlorophyll ratios (algal N and P by
stoichiometry), so a total is the sum of the pools, as
:func:`assimilation.budget.total_phosphorus` counts it.

The gain is that of the in-situ sensor named by ``sensor`` (estimated by the
filter, index into the sensor gains), or 1 when ``sensor`` is -1.
High-frequency sensor readings are aggregated into windows
(:func:`aggregate_windows`) before they are assimilated. Missing or
QC-failed readings are never passed in; non-finite values are rejected.

Two kinds of reading are passed through the windows unaggregated:

* **time means** (``span_d`` > 0): the reading is the mean over
  (time_d − span_d, time_d] (a whole-day value); the filter compares it with
  the members' mean over that span, the time-averaged observation of
  Dirren and Hakim (2005, Geophys. Res. Lett. 32:L04804), analysed at the
  span's end (see :mod:`assimilation.filter_cycle`);
* **censored** readings (``censored``): below the detection limit held in
  ``value``; the filter uses one as "below this" information
  (:func:`censored_as_observations`).
"""
from __future__ import annotations

from dataclasses import dataclass

import numpy as np

from assimilation.parameters import NITROGEN_TO_CHLOROPHYLL, PHOSPHORUS_TO_CHLOROPHYLL
from assimilation.spec import NUTRIENT_SLOTS

OBSERVABLE_KINDS = ("chlorophyll_fluorescence", "phycocyanin", "chlorophyll_a", "nitrate", "srp",
                    "total_phosphorus", "total_nitrogen")

#: Default fraction of the window mean taken as representativeness error
#: (the window mean stands for the basin at one instant). [-] A choice of
#: Bloomline's; 10 % is of the order used for in-situ chlorophyll
#: fluorescence (common practice).
REPRESENTATIVENESS_FRACTION = 0.1


@dataclass(frozen=True)
class Observations:
    """Readings to assimilate, arrays of equal length p.

    time_d [epoch days]; kind [str, one of OBSERVABLE_KINDS]; basin [index];
    sensor [index of the sensor whose gain is estimated, -1 none]; value
    [µg/L, N as N and P as P]; error_sd [µg/L, > 0]; span_d [d, >= 0]: a
    time mean over (time_d − span_d, time_d], 0 for an instant (default);
    censored [bool]: below the detection limit held in ``value`` (default
    False).
    """

    time_d: np.ndarray
    kind: np.ndarray
    basin: np.ndarray
    sensor: np.ndarray
    value: np.ndarray
    error_sd: np.ndarray
    span_d: np.ndarray | None = None
    censored: np.ndarray | None = None

    def __post_init__(self):
        n = np.asarray(self.time_d).size
        fields = {
            "time_d": np.asarray(self.time_d, dtype=float).ravel(),
            "kind": np.asarray(self.kind, dtype=str).ravel(),
            "basin": np.asarray(self.basin, dtype=int).ravel(),
            "sensor": np.asarray(self.sensor, dtype=int).ravel(),
            "value": np.asarray(self.value, dtype=float).ravel(),
            "error_sd": np.asarray(self.error_sd, dtype=float).ravel(),
            "span_d": np.zeros(n) if self.span_d is None else np.asarray(self.span_d, dtype=float).ravel(),
            "censored": (np.zeros(n, dtype=bool) if self.censored is None
                         else np.asarray(self.censored, dtype=bool).ravel()),
        }
        p = fields["time_d"].size
        for name, arr in fields.items():
            if arr.size != p:
                raise ValueError(f"Observations.{name} has {arr.size} entries, expected {p} like time_d")
            object.__setattr__(self, name, arr)
        unknown = sorted(set(fields["kind"].tolist()) - set(OBSERVABLE_KINDS))
        if unknown:
            raise ValueError(f"unknown observation kind(s) {unknown}; expected one of {OBSERVABLE_KINDS}")
        if not np.all(np.isfinite(fields["value"])) or not np.all(np.isfinite(fields["time_d"])):
            raise ValueError("Observations.value and time_d must be finite (pass only QC-passed readings)")
        if np.any(~(fields["error_sd"] > 0)):
            raise ValueError("Observations.error_sd must be > 0 [µg/L]")
        if np.any(fields["basin"] < 0) or np.any(fields["sensor"] < -1):
            raise ValueError("Observations.basin must be >= 0 and sensor >= -1")
        if np.any(~(fields["span_d"] >= 0)) or not np.all(np.isfinite(fields["span_d"])):
            raise ValueError("Observations.span_d must be finite and >= 0 [d]")
        if np.any(fields["censored"] & ~(fields["value"] > 0)):
            raise ValueError("a censored observation's value (its detection limit) must be > 0")

    @staticmethod
    def empty() -> Observations:
        """No readings."""
        return Observations(np.zeros(0), np.zeros(0, dtype=str), np.zeros(0, dtype=int),
                            np.zeros(0, dtype=int), np.zeros(0), np.zeros(0))

    def __len__(self) -> int:
        return int(self.time_d.size)

    def select(self, mask) -> Observations:
        """The readings where ``mask`` (boolean or index array) holds."""
        return Observations(self.time_d[mask], self.kind[mask], self.basin[mask],
                            self.sensor[mask], self.value[mask], self.error_sd[mask], self.span_d[mask],
                            self.censored[mask])

    @staticmethod
    def concatenate(parts) -> Observations:
        """The readings of several :class:`Observations` in order."""
        parts = [p for p in parts if len(p)]
        if not parts:
            return Observations.empty()
        cat = {name: np.concatenate([getattr(p, name) for p in parts])
               for name in ("time_d", "kind", "basin", "sensor", "value", "error_sd", "span_d", "censored")}
        return Observations(**cat)

    @property
    def passed_through(self) -> np.ndarray:
        """Readings that :func:`aggregate_windows` keeps as they are: time means and censored ones."""
        return (self.span_d > 0) | self.censored


def aggregate_windows(obs: Observations, window_d: float = 1.0, *,
                      representativeness_fraction: float = REPRESENTATIVENESS_FRACTION) -> Observations:
    """Aggregate readings into one value per (kind, basin, sensor, window).

    Windows are (k·window_d, (k+1)·window_d] in epoch days [d], closed at the
    end like a filter cycle (t0, t_end], so a reading stamped exactly at
    midnight belongs to the day that ends then. Each result is
    stamped at the mean time of its readings, where the window mean best
    stands for the state under a linear trend. Value: the mean of the n readings. Error
    variance: instrument part mean(sd_i²)/n (independent errors average
    down) plus a representativeness part, the larger of
    (representativeness_fraction · |mean|)² and the variability within the
    window beyond instrument noise, max(s² − mean(sd_i²), 0), where s² is the
    sample variance of the readings. The window mean stands for the basin at
    one instant, so its real variability is not divided by n (representativeness
    error in the sense of Janjić et al. 2018, Q. J. R. Meteorol. Soc.
    144:1257). Time means and censored readings (:attr:`Observations.passed_through`)
    are kept as they are. Sorted by time, kind, basin, sensor.
    """
    if not window_d > 0:
        raise ValueError(f"window_d must be > 0 [d], got {window_d!r}")
    if not representativeness_fraction >= 0:
        raise ValueError(f"representativeness_fraction must be >= 0, got {representativeness_fraction!r}")
    if len(obs) == 0:
        return Observations.empty()
    through = obs.passed_through
    if through.any():
        both = Observations.concatenate([
            aggregate_windows(obs.select(~through), window_d, representativeness_fraction=representativeness_fraction),
            obs.select(through)])
        return both.select(np.lexsort((both.sensor, both.basin, both.kind, both.time_d)))
    window = (np.ceil(obs.time_d / window_d) - 1).astype(np.int64)
    kind_code = np.searchsorted(np.array(sorted(OBSERVABLE_KINDS)), obs.kind)
    keys = np.stack([window, kind_code, obs.basin, obs.sensor], axis=1)
    uniq, group = np.unique(keys, axis=0, return_inverse=True)
    group = group.ravel()
    g = uniq.shape[0]
    n = np.bincount(group, minlength=g).astype(float)
    mean = np.bincount(group, weights=obs.value, minlength=g) / n
    dev2 = (obs.value - mean[group]) ** 2
    sample_var = np.where(n > 1, np.bincount(group, weights=dev2, minlength=g) / np.maximum(n - 1, 1), 0.0)
    mean_time = np.bincount(group, weights=obs.time_d, minlength=g) / n
    instr_var = np.bincount(group, weights=obs.error_sd**2, minlength=g) / n
    repr_var = np.maximum((representativeness_fraction * np.abs(mean)) ** 2,
                          np.maximum(sample_var - instr_var, 0.0))
    error_sd = np.sqrt(instr_var / n + repr_var)
    kinds = np.array(sorted(OBSERVABLE_KINDS))[uniq[:, 1]]
    order = np.lexsort((uniq[:, 3], uniq[:, 2], kinds, uniq[:, 0]))
    return Observations(
        time_d=np.clip(mean_time, uniq[:, 0] * window_d, (uniq[:, 0] + 1) * window_d)[order],
        kind=kinds[order],
        basin=uniq[order, 2],
        sensor=uniq[order, 3],
        value=mean[order],
        error_sd=error_sd[order],
    )


def operator_matrix(obs: Observations, n_basins: int, n_groups: int, cyanobacteria, *,
                    nitrogen_to_chlorophyll: float = NITROGEN_TO_CHLOROPHYLL,
                    phosphorus_to_chlorophyll: float = PHOSPHORUS_TO_CHLOROPHYLL) -> np.ndarray:
    """Linear part H (p, n_state) of the observation operators [-].

    The state of one member is basin-major ``[N_b, P_b, DN_b, DP_b, A_b,0 …
    A_b,G-1]`` (DEVELOPERS.md, "The model state layout"). cyanobacteria:
    (G,) booleans marking the groups a phycocyanin sensor sees.
    nitrogen_to_chlorophyll [µg N/µg chl] and phosphorus_to_chlorophyll
    [µg P/µg chl]: the spec's stoichiometry, for total N and total P
    (default: Bloomline's default spec). The sensor gain is applied by
    :func:`predict`.
    """
    cyano = np.asarray(cyanobacteria, dtype=bool).ravel()
    if cyano.size != n_groups:
        raise ValueError(f"cyanobacteria mask has {cyano.size} entries, expected {n_groups} groups")
    if np.any(obs.basin >= n_basins):
        raise ValueError(f"observation basin index out of range (model has {n_basins} basins)")
    stride = NUTRIENT_SLOTS + n_groups
    p = len(obs)
    H = np.zeros((p, n_basins * stride))
    rows = np.arange(p)
    base = obs.basin * stride
    is_n = obs.kind == "nitrate"
    is_p = obs.kind == "srp"
    is_tn = obs.kind == "total_nitrogen"
    is_tp = obs.kind == "total_phosphorus"
    H[rows[is_n], base[is_n]] = 1.0
    H[rows[is_p], base[is_p] + 1] = 1.0
    H[rows[is_tn], base[is_tn]] = 1.0
    H[rows[is_tn], base[is_tn] + 2] = 1.0
    H[rows[is_tp], base[is_tp] + 1] = 1.0
    H[rows[is_tp], base[is_tp] + 3] = 1.0
    all_chl = (obs.kind == "chlorophyll_fluorescence") | (obs.kind == "chlorophyll_a")
    is_pc = obs.kind == "phycocyanin"
    for g in range(n_groups):  # loop over phytoplankton groups (a few), not members
        column = NUTRIENT_SLOTS + g
        H[rows[all_chl], base[all_chl] + column] = 1.0
        H[rows[is_tn], base[is_tn] + column] = nitrogen_to_chlorophyll
        H[rows[is_tp], base[is_tp] + column] = phosphorus_to_chlorophyll
        if cyano[g]:
            H[rows[is_pc], base[is_pc] + column] = 1.0
    return H


def predict(states: np.ndarray, gains: np.ndarray, obs: Observations, H: np.ndarray) -> np.ndarray:
    """Predicted observations HE (M, p) [µg/L].

    states (M, n_state) [µg/L]; gains (M, n_sensors) [-]; H from
    :func:`operator_matrix`. Readings with sensor >= 0 are multiplied by
    that member's sensor gain.
    """
    HE = states @ H.T
    has_gain = obs.sensor >= 0
    if np.any(has_gain):
        if gains.shape[1] <= obs.sensor.max():
            raise ValueError(f"observation sensor index {obs.sensor.max()} but only {gains.shape[1]} sensor gains")
        HE[:, has_gain] *= gains[:, obs.sensor[has_gain]]
    return HE


def censored_as_observations(batch: Observations, HE: np.ndarray) -> np.ndarray:
    """Which censored readings to assimilate, changing their value and error in place of the limit.

    batch: readings, some censored (``value`` = detection limit L [µg/L]);
    HE (M, p): their predicted values. Bloomline's rule for a reading "below
    L": when the prior mean already lies below L the reading agrees with the
    prior and adds nothing that a Gaussian update could use, so it is
    skipped; when the prior mean exceeds L it is assimilated as an
    observation of L/2 with error sd L/2, so that one standard deviation
    spans [0, L] (a Gaussian stand-in for "somewhere below L", as the
    half-limit substitution of common practice, with the error widened to
    cover the whole censored interval). Returns a mask of the readings to
    keep (every uncensored one) and writes the stand-in values and errors
    into ``batch.value`` and ``batch.error_sd`` (the arrays of ``batch``,
    a selection made for this analysis).
    """
    keep = ~batch.censored
    above = batch.censored & (HE.mean(axis=0) > batch.value)
    batch.value[above] = 0.5 * batch.value[above]
    batch.error_sd[above] = batch.value[above]
    return keep | above
