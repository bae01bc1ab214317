"""The nutrient–phytoplankton model specification, drivers and state layout.

Frozen dataclasses built once (by ``monitor`` from the configuration) and
passed to every numerical function. Units are in the field names or in
brackets; defaults come from :mod:`assimilation.parameters`.

State layout (one member, ``B`` basins, ``G`` groups), basin-major::

    [N_0, P_0, DN_0, DP_0, A_0,0 … A_0,G-1, N_1, P_1, DN_1, DP_1, A_1,0 … A_B-1,G-1]   [µg/L]

N is dissolved inorganic nitrogen as N, P soluble reactive phosphorus as P,
DN and DP detrital (organic, non-living) nitrogen and phosphorus, A_b,g
chlorophyll-a of group g in basin b. An ensemble is ``(M, n_state)``, one
member per row; :class:`StateLayout` gives every index.
"""
from __future__ import annotations

from dataclasses import dataclass, field

import numpy as np

from assimilation import parameters as _p

#: Nutrient pools of each basin, in state order before the chlorophyll of the
#: groups: DIN, SRP, detrital N, detrital P.
NUTRIENT_POOLS = ("nitrogen", "phosphorus", "detrital_nitrogen", "detrital_phosphorus")
#: Number of nutrient pools per basin (the chlorophyll of group g is at NUTRIENT_SLOTS + g).
NUTRIENT_SLOTS = len(NUTRIENT_POOLS)


@dataclass(frozen=True)
class Basin:
    """A well-mixed basin (box) of constant volume.

    volume_m3 [m³], mean_depth_m [m] (also the mixed depth for light and the
    settling/sediment exchange depth), area_m2 [m²] surface area.
    sediment_phosphorus_release_20_mg_m2_d [mg P/m²/d] at 20 °C: this
    basin's internal loading (the prior of its estimate when the filter
    estimates parameters); None takes the water body's value
    (:attr:`ModelSpec.sediment_phosphorus_release_20_mg_m2_d`).
    """

    name: str
    volume_m3: float
    mean_depth_m: float
    area_m2: float
    sediment_phosphorus_release_20_mg_m2_d: float | None = None

    def __post_init__(self):
        for key in ("volume_m3", "mean_depth_m", "area_m2"):
            value = getattr(self, key)
            if not (np.isfinite(value) and value > 0):
                raise ValueError(f"Basin {self.name!r}: {key} must be a positive number, got {value!r}")
        release = self.sediment_phosphorus_release_20_mg_m2_d
        if release is not None and not (np.isfinite(release) and release >= 0):
            raise ValueError(f"Basin {self.name!r}: sediment_phosphorus_release_20_mg_m2_d must be a non-negative "
                             f"number or None, got {release!r}")


@dataclass(frozen=True)
class Group:
    """One phytoplankton group; all rates at 20 °C.

    mu_max_20_per_d [1/d] maximum growth rate, theta_growth [-] Arrhenius
    coefficient, k_n_ugL and k_p_ugL [µg/L] half-saturation for DIN and SRP,
    light_saturation_W_m2 [W/m² PAR] Steele's optimum irradiance,
    mortality_20_per_d [1/d] mortality + respiration, theta_mortality [-],
    settling_m_per_d [m/d] (zero for buoyant cyanobacteria),
    is_cyanobacteria: the group a phycocyanin sensor sees.
    nitrogen_fixing: the group fixes N2 when dissolved inorganic N is short;
    fixation_growth_fraction [-] in (0, 1] is then its growth rate without
    DIN as a fraction of the maximum (the cost of fixation; see
    :func:`assimilation.kinetics.nitrogen_limitation_with_fixation`).
    """

    name: str
    mu_max_20_per_d: float
    theta_growth: float
    k_n_ugL: float
    k_p_ugL: float
    light_saturation_W_m2: float
    mortality_20_per_d: float
    theta_mortality: float
    settling_m_per_d: float
    is_cyanobacteria: bool = False
    nitrogen_fixing: bool = False
    fixation_growth_fraction: float = _p.FIXATION_GROWTH_FRACTION

    def __post_init__(self):
        f = self.fixation_growth_fraction
        if not (np.isfinite(f) and 0.0 < f <= 1.0):
            raise ValueError(f"Group {self.name!r}: fixation_growth_fraction must be in (0, 1], got {f!r}")
        positive = ("theta_growth", "k_n_ugL", "k_p_ugL", "light_saturation_W_m2", "theta_mortality")
        non_negative = ("mu_max_20_per_d", "mortality_20_per_d", "settling_m_per_d")
        for key in positive:
            value = getattr(self, key)
            if not (np.isfinite(value) and value > 0):
                raise ValueError(f"Group {self.name!r}: {key} must be a positive number, got {value!r}")
        for key in non_negative:
            value = getattr(self, key)
            if not (np.isfinite(value) and value >= 0):
                raise ValueError(f"Group {self.name!r}: {key} must be a non-negative number, got {value!r}")


@dataclass(frozen=True)
class Network:
    """Directed flow network between basins.

    downstream: per basin, index of the basin its outflow enters, -1 when it
    leaves the system. inflow_basin: per external inflow, index of the basin
    it enters. Volumes are constant, so the outflow of each basin equals the
    sum of what enters it. The network must be acyclic.
    """

    downstream: tuple[int, ...]
    inflow_basin: tuple[int, ...] = ()

    def __post_init__(self):
        object.__setattr__(self, "downstream", tuple(int(d) for d in self.downstream))
        object.__setattr__(self, "inflow_basin", tuple(int(b) for b in self.inflow_basin))
        n = len(self.downstream)
        for i, d in enumerate(self.downstream):
            if d == i or d < -1 or d >= n:
                raise ValueError(f"Network.downstream[{i}] must be -1 or another basin index in 0..{n - 1}, got {d}")
        for i, b in enumerate(self.inflow_basin):
            if not 0 <= b < n:
                raise ValueError(f"Network.inflow_basin[{i}] must be a basin index in 0..{n - 1}, got {b}")
        for start in range(n):
            node, seen = start, 0
            while node != -1:
                node = self.downstream[node]
                seen += 1
                if seen > n:
                    raise ValueError(f"Network.downstream has a loop through basin {start}")

    @property
    def n_basins(self) -> int:
        return len(self.downstream)

    @property
    def n_inflows(self) -> int:
        return len(self.inflow_basin)


@dataclass(frozen=True)
class ModelSpec:
    """Everything the model needs besides state and drivers.

    Light: par_fraction [-] of shortwave, background_attenuation_per_m [1/m],
    chlorophyll_attenuation_m2_mg [m²/mg]. Stoichiometry (Redfield by mass and
    a carbon:chlorophyll ratio): nitrogen_to_chlorophyll [µg N/µg chl],
    phosphorus_to_chlorophyll [µg P/µg chl]. recycled_fraction [-] of
    mortality returned at once to N and P. Detritus: detrital_fraction [-]
    of the rest that becomes detrital N and P (the remainder leaves the
    water column at once; 0 means no detritus is formed, the chemostat
    case), remineralised to DIN and SRP at nitrogen_remineralisation_20_per_d
    and phosphorus_remineralisation_20_per_d [1/d] at 20 °C with
    theta_remineralisation [-], settling at detritus_settling_m_per_d [m/d].
    Internal loading: sediment_phosphorus_release_20_mg_m2_d [mg P/m²/d] at
    20 °C, the water body's value for every basin that does not set its own
    (:meth:`sediment_release_by_basin`), with theta_sediment_release [-].
    Nitrogen loss: denitrification_20_per_d [1/d] at 20 °C with
    theta_denitrification [-]. Defaults and sources in
    :mod:`assimilation.parameters`.
    """

    basins: tuple[Basin, ...]
    groups: tuple[Group, ...]
    network: Network
    par_fraction: float = _p.PAR_FRACTION
    background_attenuation_per_m: float = _p.BACKGROUND_ATTENUATION_PER_M
    chlorophyll_attenuation_m2_mg: float = _p.CHLOROPHYLL_ATTENUATION_M2_MG
    nitrogen_to_chlorophyll: float = _p.NITROGEN_TO_CHLOROPHYLL
    phosphorus_to_chlorophyll: float = _p.PHOSPHORUS_TO_CHLOROPHYLL
    recycled_fraction: float = _p.RECYCLED_FRACTION
    detrital_fraction: float = _p.DETRITAL_FRACTION
    nitrogen_remineralisation_20_per_d: float = _p.NITROGEN_REMINERALISATION_20_PER_D
    phosphorus_remineralisation_20_per_d: float = _p.PHOSPHORUS_REMINERALISATION_20_PER_D
    theta_remineralisation: float = _p.THETA_REMINERALISATION
    detritus_settling_m_per_d: float = _p.DETRITUS_SETTLING_M_PER_D
    sediment_phosphorus_release_20_mg_m2_d: float = _p.SEDIMENT_PHOSPHORUS_RELEASE_20_MG_M2_D
    theta_sediment_release: float = _p.THETA_SEDIMENT_RELEASE
    denitrification_20_per_d: float = _p.DENITRIFICATION_20_PER_D
    theta_denitrification: float = _p.THETA_DENITRIFICATION

    def __post_init__(self):
        object.__setattr__(self, "basins", tuple(self.basins))
        object.__setattr__(self, "groups", tuple(self.groups))
        if not self.basins:
            raise ValueError("ModelSpec needs at least one basin")
        if not self.groups:
            raise ValueError("ModelSpec needs at least one phytoplankton group")
        if self.network.n_basins != len(self.basins):
            raise ValueError(
                f"Network.downstream has {self.network.n_basins} entries but the spec has {len(self.basins)} basins")
        for kind, items in (("basin", self.basins), ("group", self.groups)):
            names = [x.name for x in items]
            if len(set(names)) != len(names):
                raise ValueError(f"{kind} names must be unique, got {names}")
        for key in ("recycled_fraction", "detrital_fraction"):
            if not 0.0 <= getattr(self, key) <= 1.0:
                raise ValueError(f"{key} must be in [0, 1], got {getattr(self, key)}")
        for key in ("par_fraction", "nitrogen_to_chlorophyll", "phosphorus_to_chlorophyll", "theta_sediment_release",
                    "theta_denitrification", "theta_remineralisation"):
            if not getattr(self, key) > 0:
                raise ValueError(f"{key} must be positive, got {getattr(self, key)}")
        for key in ("background_attenuation_per_m", "chlorophyll_attenuation_m2_mg",
                    "sediment_phosphorus_release_20_mg_m2_d", "denitrification_20_per_d",
                    "nitrogen_remineralisation_20_per_d", "phosphorus_remineralisation_20_per_d",
                    "detritus_settling_m_per_d"):
            if not getattr(self, key) >= 0:
                raise ValueError(f"{key} must be non-negative, got {getattr(self, key)}")

    @property
    def n_basins(self) -> int:
        return len(self.basins)

    @property
    def n_groups(self) -> int:
        return len(self.groups)

    @property
    def n_inflows(self) -> int:
        return self.network.n_inflows

    def sediment_release_by_basin(self) -> np.ndarray:
        """Internal phosphorus loading at 20 °C of each basin, (B,) [mg P/m²/d]: the
        basin's own value, else the water body's."""
        water_body = self.sediment_phosphorus_release_20_mg_m2_d
        return np.array([water_body if b.sediment_phosphorus_release_20_mg_m2_d is None
                         else b.sediment_phosphorus_release_20_mg_m2_d for b in self.basins], dtype=float)

    @property
    def cyanobacteria_index(self) -> int | None:
        """Index of the first cyanobacteria group, or None."""
        for g, group in enumerate(self.groups):
            if group.is_cyanobacteria:
                return g
        return None


def _as_float_array(name: str, value) -> np.ndarray:
    array = np.array(value, dtype=float)
    if not np.all(np.isfinite(array)):
        raise ValueError(f"Drivers.{name} must be finite (no NaN or inf); fill gaps before building drivers")
    return array


@dataclass(frozen=True, eq=False)
class Drivers:
    """Driver time series, interpolated linearly in time by the integrator.

    time_d (T,) [epoch days], strictly increasing; water_temperature_C (T, B)
    [°C], or (T, M, B) for one temperature series per ensemble member (e.g.
    weather scenarios run in one call; M must then be the number of members
    passed to the integrator); shortwave_W_m2 (T,) or (T, B) [W/m²] incident at the surface;
    inflow_m3_s (T, I) [m³/s]; inflow_nitrogen_ugL (T, I) [µg N/L] DIN;
    inflow_phosphorus_ugL (T, I) [µg P/L] SRP; inflow_chlorophyll_ugL
    (T, I, G) [µg/L] per group, zero when None.
    """

    time_d: np.ndarray
    water_temperature_C: np.ndarray
    shortwave_W_m2: np.ndarray
    inflow_m3_s: np.ndarray
    inflow_nitrogen_ugL: np.ndarray
    inflow_phosphorus_ugL: np.ndarray
    inflow_chlorophyll_ugL: np.ndarray | None = field(default=None)

    def __post_init__(self):
        for name in ("time_d", "water_temperature_C", "shortwave_W_m2", "inflow_m3_s",
                     "inflow_nitrogen_ugL", "inflow_phosphorus_ugL", "inflow_chlorophyll_ugL"):
            value = getattr(self, name)
            if value is not None:
                object.__setattr__(self, name, _as_float_array(name, value))
        t = self.time_d
        if t.ndim != 1 or t.size < 1:
            raise ValueError(f"Drivers.time_d must be a 1-D array with at least one time, got shape {t.shape}")
        if t.size > 1 and not np.all(np.diff(t) > 0):
            raise ValueError("Drivers.time_d must be strictly increasing")
        T = t.size
        if self.water_temperature_C.ndim not in (2, 3) or self.water_temperature_C.shape[0] != T:
            raise ValueError(f"Drivers.water_temperature_C must have shape (T={T}, B) or (T={T}, M, B), "
                             f"got {self.water_temperature_C.shape}")
        if self.shortwave_W_m2.ndim not in (1, 2) or self.shortwave_W_m2.shape[0] != T:
            raise ValueError(f"Drivers.shortwave_W_m2 must have shape (T={T},) or (T, B), got {self.shortwave_W_m2.shape}")
        if np.any(self.shortwave_W_m2 < 0):
            raise ValueError("Drivers.shortwave_W_m2 must be non-negative")
        for name in ("inflow_m3_s", "inflow_nitrogen_ugL", "inflow_phosphorus_ugL"):
            value = getattr(self, name)
            if value.ndim != 2 or value.shape[0] != T or value.shape[1] != self.inflow_m3_s.shape[1]:
                raise ValueError(f"Drivers.{name} must have shape (T={T}, I), got {value.shape}")
            if np.any(value < 0):
                raise ValueError(f"Drivers.{name} must be non-negative")
        c = self.inflow_chlorophyll_ugL
        if c is not None:
            if c.ndim != 3 or c.shape[:2] != self.inflow_m3_s.shape:
                raise ValueError(f"Drivers.inflow_chlorophyll_ugL must have shape (T, I, G), got {c.shape}")
            if np.any(c < 0):
                raise ValueError("Drivers.inflow_chlorophyll_ugL must be non-negative")

    @property
    def n_members(self) -> int | None:
        """Members of a per-member water temperature (T, M, B), else None."""
        return self.water_temperature_C.shape[1] if self.water_temperature_C.ndim == 3 else None

    def check_against(self, spec: ModelSpec, n_members: int | None = None) -> None:
        """Raise ValueError unless the driver shapes fit ``spec`` and, when
        given, an ensemble of ``n_members`` members."""
        B, I, G = spec.n_basins, spec.n_inflows, spec.n_groups
        if self.water_temperature_C.shape[-1] != B:
            raise ValueError(f"Drivers.water_temperature_C has {self.water_temperature_C.shape[-1]} basins, "
                             f"spec has {B}")
        if n_members is not None and self.n_members is not None and self.n_members != n_members:
            raise ValueError(f"Drivers.water_temperature_C has one series for each of {self.n_members} members "
                             f"(shape (T, M, B)), but the ensemble has {n_members} members")
        if self.shortwave_W_m2.ndim == 2 and self.shortwave_W_m2.shape[1] != B:
            raise ValueError(f"Drivers.shortwave_W_m2 has {self.shortwave_W_m2.shape[1]} basins, spec has {B}")
        if self.inflow_m3_s.shape[1] != I:
            raise ValueError(f"Drivers have {self.inflow_m3_s.shape[1]} inflows, the network has {I}")
        if self.inflow_chlorophyll_ugL is not None and self.inflow_chlorophyll_ugL.shape[2] != G:
            raise ValueError(f"Drivers.inflow_chlorophyll_ugL has {self.inflow_chlorophyll_ugL.shape[2]} groups, "
                             f"spec has {G}")


class StateLayout:
    """Indices into the basin-major model state of ``spec`` (see module doc).

    Accessors take an array whose last axis holds at least ``n_state``
    numbers (extra columns, e.g. augmented parameters, are ignored) and
    return the selected quantities with the leading axes kept:
    ``nitrogen(E)`` of an ``(M, n)`` ensemble is ``(M, B)``.
    """

    def __init__(self, spec: ModelSpec):
        self.n_basins = spec.n_basins
        self.n_groups = spec.n_groups
        self.n_per_basin = NUTRIENT_SLOTS + spec.n_groups
        self.n_state = self.n_basins * self.n_per_basin
        self._basin_names = [b.name for b in spec.basins]
        self._group_names = [g.name for g in spec.groups]

    def index_nitrogen(self, b: int) -> int:
        return self._basin(b) * self.n_per_basin

    def index_phosphorus(self, b: int) -> int:
        return self._basin(b) * self.n_per_basin + 1

    def index_detrital_nitrogen(self, b: int) -> int:
        return self._basin(b) * self.n_per_basin + 2

    def index_detrital_phosphorus(self, b: int) -> int:
        return self._basin(b) * self.n_per_basin + 3

    def index_chlorophyll(self, b: int, g: int) -> int:
        if not 0 <= g < self.n_groups:
            raise IndexError(f"group index must be in 0..{self.n_groups - 1}, got {g}")
        return self._basin(b) * self.n_per_basin + NUTRIENT_SLOTS + g

    def _basin(self, b: int) -> int:
        if not 0 <= b < self.n_basins:
            raise IndexError(f"basin index must be in 0..{self.n_basins - 1}, got {b}")
        return b

    def blocks(self, E: np.ndarray) -> np.ndarray:
        """``(..., n_state)`` → ``(..., B, 4 + G)`` (a view where possible)."""
        E = np.asarray(E)
        if E.shape[-1] < self.n_state:
            raise ValueError(f"state has {E.shape[-1]} columns, expected at least {self.n_state}")
        return E[..., : self.n_state].reshape(E.shape[:-1] + (self.n_basins, self.n_per_basin))

    def nitrogen(self, E: np.ndarray) -> np.ndarray:
        """Dissolved inorganic nitrogen [µg N/L], ``(..., B)``."""
        return self.blocks(E)[..., 0]

    def phosphorus(self, E: np.ndarray) -> np.ndarray:
        """Soluble reactive phosphorus [µg P/L], ``(..., B)``."""
        return self.blocks(E)[..., 1]

    def detrital_nitrogen(self, E: np.ndarray) -> np.ndarray:
        """Detrital (organic, non-living) nitrogen [µg N/L], ``(..., B)``."""
        return self.blocks(E)[..., 2]

    def detrital_phosphorus(self, E: np.ndarray) -> np.ndarray:
        """Detrital (organic, non-living) phosphorus [µg P/L], ``(..., B)``."""
        return self.blocks(E)[..., 3]

    def chlorophyll(self, E: np.ndarray) -> np.ndarray:
        """Chlorophyll-a per group [µg/L], ``(..., B, G)``."""
        return self.blocks(E)[..., NUTRIENT_SLOTS:]

    def total_chlorophyll(self, E: np.ndarray) -> np.ndarray:
        """Sum of chlorophyll-a over the groups [µg/L], ``(..., B)``."""
        return self.chlorophyll(E).sum(axis=-1)

    def names(self) -> list[str]:
        out = []
        for b in self._basin_names:
            out += [f"{b}:{pool}" for pool in NUTRIENT_POOLS] + [f"{b}:chl:{g}" for g in self._group_names]
        return out

    def pack(self, nitrogen, phosphorus, chlorophyll, detrital_nitrogen=0.0, detrital_phosphorus=0.0) -> np.ndarray:
        """Build ``(M, n_state)`` from nitrogen (M, B), phosphorus (M, B),
        chlorophyll (M, B, G) and detrital nitrogen and phosphorus (M, B)
        (zero when left out) [µg/L]; arrays broadcast."""
        N = np.asarray(nitrogen, dtype=float)
        P = np.asarray(phosphorus, dtype=float)
        A = np.asarray(chlorophyll, dtype=float)
        DN = np.asarray(detrital_nitrogen, dtype=float)
        DP = np.asarray(detrital_phosphorus, dtype=float)
        lead = np.broadcast_shapes(N.shape[:-1], P.shape[:-1], A.shape[:-2],
                                   DN.shape[:-1] if DN.ndim else (), DP.shape[:-1] if DP.ndim else ())
        blocks = np.empty(lead + (self.n_basins, self.n_per_basin))
        blocks[..., 0] = N
        blocks[..., 1] = P
        blocks[..., 2] = DN
        blocks[..., 3] = DP
        blocks[..., NUTRIENT_SLOTS:] = A
        return blocks.reshape(lead + (self.n_state,))
