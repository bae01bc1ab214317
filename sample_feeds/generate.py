"""Write Bloomline's invented demo scenario: one season of feeds and its truth.

Two fictional water bodies near one weather station:

* Corrisdale Reservoir (``corrisdale``), three basins in a chain
  ``fennick-arm`` -> ``middle-reach`` -> ``dam-basin``, buoys CR-FA, CR-MR, CR-DB;
* Sorrel Lake (``sorrel-lake``), one basin ``main``, buoy SL-01;
* weather station MET-01.

The truth process below is a box model of its own (three phytoplankton
groups, N and P, detritus, sediment P release, N fixation, buoyancy, implicit
grazing, weather-driven heat budget) and is deliberately richer than the
model inside Bloomline, so a demo forecast is honest. Sensors, lab results
and forecasts are noisy views of that truth, with documented quirks (see
README.md next to this file).

Usage::

    python sample_feeds/generate.py --seed 20260501 [--out sample_feeds] [--plot season.png]

numpy and pandas only (matplotlib only for the optional ``--plot``).
"""
from __future__ import annotations

import argparse
from dataclasses import dataclass
from pathlib import Path

import numpy as np
import pandas as pd

# --------------------------------------------------------------------------
# Calendar: local time is fixed at UTC+2 (IANA "Etc/GMT-2"), no daylight saving.
# --------------------------------------------------------------------------
LOCAL_OFFSET = pd.Timedelta(hours=2)
SEASON_START_LOCAL = pd.Timestamp("2026-05-01 00:00")
SEASON_END_LOCAL = pd.Timestamp("2026-10-31 23:45")
STEP_MIN = 15
STEPS_PER_DAY = 96
DT_D = 1.0 / STEPS_PER_DAY              # model step [d]
FORECAST_HOURS = 168                    # 7-day forecast, hourly
LATITUDE_DEG = 51.0                     # invented site, central-European climate
LONGITUDE_DEG = 10.0

# --------------------------------------------------------------------------
# Basins (state vector order) and the hydraulic chain.
# --------------------------------------------------------------------------


@dataclass(frozen=True)
class Basin:
    water_body: str
    basin: str
    site: str
    volume_m3: float
    depth_m: float          # mean depth [m]
    area_m2: float
    mixed_layer_m: float    # surface layer exchanging heat with the air [m]
    k_background: float     # non-algal light attenuation [1/m]
    p_release_20: float     # sediment SRP release at 20 °C [mg P/m²/d]
    denitrification_20: float  # sediment nitrate loss velocity at 20 °C [m/d]


BASINS = (
    Basin("corrisdale", "fennick-arm", "CR-FA", 4.0e6, 4.0, 1.0e6, 4.0, 0.85, 14.0, 0.08),
    Basin("corrisdale", "middle-reach", "CR-MR", 12.0e6, 8.0, 1.5e6, 6.0, 0.60, 2.2, 0.04),
    Basin("corrisdale", "dam-basin", "CR-DB", 20.0e6, 15.0, 1.33e6, 7.0, 0.45, 1.0, 0.03),
    Basin("sorrel-lake", "main", "SL-01", 1.5e6, 3.0, 0.5e6, 3.0, 0.50, 0.20, 0.03),
)
NB = len(BASINS)
GAUGES = ("FB-GAUGE", "TB-GAUGE", "SC-GAUGE")   # Fennick Brook, Tarn Beck, Sorrel Creek
GAUGE_INTO = (0, 1, 3)                         # basin index each gauge enters
# downstream[i] = basin receiving basin i's outflow (-1: leaves the system)
DOWNSTREAM = (1, 2, -1, -1)
EXCHANGE_M3S = {(0, 1): 0.35, (1, 2): 0.6}     # two-way mixing between connected basins

# --------------------------------------------------------------------------
# Phytoplankton groups: diatoms, greens, cyanobacteria.
# --------------------------------------------------------------------------
GROUPS = ("diatoms", "greens", "cyanobacteria")
MU_MAX_20 = np.array([1.45, 1.25, 0.58])        # [1/d]
THETA_GROWTH = np.array([1.04, 1.06, 1.13])     # [-] Arrhenius factor below the optimum
T_OPT = np.array([16.0, 23.0, 27.0])            # [°C] temperature optimum
T_WIDTH = np.array([7.0, 6.0, 5.0])             # [°C] Gaussian fall-off above the optimum
K_N = np.array([25.0, 20.0, 30.0])              # [µg N/L]
K_P = np.array([2.5, 2.0, 3.0])                 # [µg P/L]
I_SAT = np.array([35.0, 55.0, 45.0])            # [W/m² PAR] Steele optimum light
RESP_20 = np.array([0.08, 0.08, 0.07])          # [1/d] respiration + mortality
THETA_RESP = 1.08
SETTLING = np.array([0.6, 0.15, 0.0])           # [m/d] in calm water
EDIBLE = np.array([1.0, 0.8, 0.05])             # relative edibility for zooplankton
N_FIX_FLOOR = 0.60                              # cyanobacteria N-fixation floor on f_N [-]
CHL_TO_N = 50.0 / 5.7      # µg N per µg chl (C:chl 50, Redfield C:N 41:7.2 by mass)
CHL_TO_P = 50.0 / 41.0     # µg P per µg chl (C:chl 50, Redfield C:P 41:1 by mass)
K_CHL = 0.016              # chlorophyll-specific attenuation [m²/mg]
RECYCLED_FRACTION = 0.5    # share of losses returned at once to N and P
MINERALISATION_20 = 0.06   # detritus -> dissolved [1/d]
DETRITUS_SETTLING = 0.35   # [m/d]
ENTRAINMENT_PER_D = 0.12  # wind-driven exchange with the hypolimnion at 4 m/s [1/d]
THETA_SEDIMENT = 1.10      # temperature factor of sediment P release and denitrification


def _child_rngs(seed: int, n: int) -> list[np.random.Generator]:
    """Independent generators per component, so one component's draws never shift another's."""
    return [np.random.default_rng(s) for s in np.random.SeedSequence(seed).spawn(n)]


# --------------------------------------------------------------------------
# Weather
# --------------------------------------------------------------------------

def _ar1(rng: np.random.Generator, n: int, phi: float, sigma: float) -> np.ndarray:
    """Stationary AR(1) series with marginal standard deviation sigma."""
    x = np.empty(n)
    x[0] = rng.normal(0.0, sigma)
    eps = rng.normal(0.0, sigma * np.sqrt(1.0 - phi * phi), n)
    for k in range(1, n):
        x[k] = phi * x[k - 1] + eps[k]
    return x


def clear_sky_shortwave(times_utc: pd.DatetimeIndex) -> np.ndarray:
    """Clear-sky global horizontal irradiance [W/m²].

    Haurwitz (1945), J. Meteor. 2:1: G = 1098 cos Z exp(-0.057 / cos Z), with the
    solar zenith angle from the declination of Cooper (1969), Solar Energy 12:333.
    """
    doy = times_utc.day_of_year.to_numpy(float)
    hour = (times_utc.hour + times_utc.minute / 60.0).to_numpy(float)
    decl = np.radians(23.45) * np.sin(2 * np.pi * (284 + doy) / 365.0)
    hour_angle = np.radians(15.0 * (hour + LONGITUDE_DEG / 15.0 - 12.0))
    lat = np.radians(LATITUDE_DEG)
    cos_z = np.sin(lat) * np.sin(decl) + np.cos(lat) * np.cos(decl) * np.cos(hour_angle)
    cos_z = np.clip(cos_z, 0.0, None)
    with np.errstate(divide="ignore"):
        g = np.where(cos_z > 0.01, 1098.0 * cos_z * np.exp(-0.057 / np.maximum(cos_z, 1e-3)), 0.0)
    return g


def storm_days(rng: np.random.Generator) -> list[tuple[float, float]]:
    """Storm events as (day since season start [d], magnitude [-]).

    One storm is drawn inside each window; the late-August window is kept
    free (a calm warm spell), the late-September storm is the strongest.
    """
    windows = [(6, 18, 0.8, 1.3), (27, 44, 0.6, 1.0), (52, 64, 0.5, 0.9),
               (82, 90, 0.3, 0.5), (138, 146, 1.2, 1.6), (158, 166, 0.8, 1.2),
               (172, 180, 0.6, 1.0)]
    return [(float(rng.uniform(a, b)), float(rng.uniform(m0, m1))) for a, b, m0, m1 in windows]


def make_weather(rng: np.random.Generator, storms, n_hours: int, t0_utc: pd.Timestamp) -> pd.DataFrame:
    """Hourly truth weather [°C, W/m², m/s] from t0_utc for n_hours."""
    times = pd.date_range(t0_utc, periods=n_hours, freq="h")
    day = (times - t0_utc).total_seconds().to_numpy() / 86400.0
    doy = times.day_of_year.to_numpy(float) + times.hour.to_numpy() / 24.0
    hour_local = ((times + LOCAL_OFFSET).hour).to_numpy(float)

    # storm signal: quick rise, ~2-day decay
    storm = np.zeros(n_hours)
    for d0, mag in storms:
        dt = day - d0
        storm += mag * np.where(dt >= 0, np.exp(-dt / 1.2), np.exp(dt / 0.3))
    # a warm, calm, sunny spell from mid-July to late August (smooth bump)
    warm = np.exp(-0.5 * ((day - 100.0) / 16.0) ** 2)

    t_clim = 10.0 + 8.0 * np.cos(2 * np.pi * (doy - 205.0) / 365.0)
    synoptic = _ar1(rng, n_hours, np.exp(-1.0 / 96.0), 2.4)      # ~4-day memory
    cloud = 1.0 / (1.0 + np.exp(-(_ar1(rng, n_hours, np.exp(-1.0 / 30.0), 1.4)
                                  + 2.2 * storm - 1.3 * warm + 1.1)))
    cloud = np.clip(cloud + rng.normal(0, 0.06, n_hours), 0.0, 1.0)
    clear = clear_sky_shortwave(times)
    # Kasten & Czeplak (1980), Solar Energy 24:177: G = G_clear (1 - 0.75 C^3.4)
    shortwave = clear * (1.0 - 0.75 * cloud ** 3.4)
    diurnal_amp = 3.0 + 3.0 * (1.0 - cloud)
    air = (t_clim + synoptic + 2.6 * warm - 2.5 * storm
           + diurnal_amp * np.cos(2 * np.pi * (hour_local - 15.0) / 24.0)
           + rng.normal(0, 0.3, n_hours))
    log_wind = (np.log(3.0) + _ar1(rng, n_hours, np.exp(-1.0 / 36.0), 0.38)
                + 0.6 * np.tanh(storm) - 0.45 * warm
                + 0.25 * np.cos(2 * np.pi * (hour_local - 15.0) / 24.0))
    wind = np.clip(np.exp(log_wind + rng.normal(0, 0.12, n_hours)), 0.2, 20.0)
    return pd.DataFrame({"time_utc": times, "air_temp_c": air, "shortwave_wm2": shortwave,
                         "wind_ms": wind, "cloud": cloud, "clear": clear})


def make_forecasts(rng: np.random.Generator, weather: pd.DataFrame, issues_utc: pd.DatetimeIndex) -> pd.DataFrame:
    """7-day hourly forecasts issued daily at 00:00 UTC: truth + lead-growing error.

    Air temperature: bias +0.3 °C, error sd 0.7 + 0.45·lead[d] °C (smooth in lead time).
    Shortwave: the cloud fraction relaxes towards its climatology with lead time plus noise.
    Wind: multiplicative error sd 12 % + 6 %·lead[d], and relaxes towards 3 m/s.
    """
    index = pd.Index(weather["time_utc"])
    lead_h = np.arange(1, FORECAST_HOURS + 1)
    lead_d = lead_h / 24.0
    phi = np.exp(-1.0 / 18.0)
    frames = []
    cloud_clim = float(weather["cloud"].mean())
    for issued in issues_utc:
        k0 = index.get_loc(issued)
        sl = slice(k0 + 1, k0 + 1 + FORECAST_HOURS)
        truth = weather.iloc[sl]
        z = _ar1(rng, 3 * FORECAST_HOURS, phi, 1.0).reshape(3, FORECAST_HOURS)
        air = truth["air_temp_c"].to_numpy() + 0.3 + (0.7 + 0.45 * lead_d) * z[0]
        w = np.exp(-lead_d / 3.0)
        cloud = np.clip(w * truth["cloud"].to_numpy() + (1 - w) * cloud_clim
                        + (0.05 + 0.05 * lead_d) * z[1], 0.0, 1.0)
        sw = truth["clear"].to_numpy() * (1.0 - 0.75 * cloud ** 3.4)
        wind_truth = truth["wind_ms"].to_numpy()
        wind = np.exp(w * np.log(wind_truth) + (1 - w) * np.log(3.0)
                      + (0.12 + 0.06 * lead_d) * z[2])
        frames.append(pd.DataFrame({"issued_utc": issued, "valid_utc": truth["time_utc"].to_numpy(),
                                    "air_temp_c": air, "shortwave_wm2": sw, "wind_ms": wind}))
    return pd.concat(frames, ignore_index=True)


# --------------------------------------------------------------------------
# Inflows
# --------------------------------------------------------------------------

def make_inflows(rng: np.random.Generator, storms, n_days: int, air_daily: np.ndarray) -> pd.DataFrame:
    """Daily discharge [m³/s], nitrate [mg N/L] and SRP [µg P/L] at the three gauges.

    Baseflow recession Q = Q_end + (Q_start - Q_end) exp(-t/tau), storm
    hydrographs (one-day rise, ~3-day recession) and a first-flush nutrient
    pulse with each storm; autumn recharge lifts the baseflow again.
    """
    day = np.arange(n_days, dtype=float)
    params = {   # q_start, q_end, tau, storm peak, nitrate base (May, Aug) [mg/L], SRP base [µg/L]
        "FB-GAUGE": (1.3, 0.22, 35.0, 4.5, (3.2, 0.7), 28.0),
        "TB-GAUGE": (1.6, 0.40, 40.0, 4.0, (0.9, 0.45), 7.0),
        "SC-GAUGE": (0.30, 0.07, 35.0, 0.9, (0.35, 0.15), 5.0),
    }
    storm_q = np.zeros(n_days)
    for d0, mag in storms:
        dt = day - np.floor(d0)
        storm_q += mag * np.where(dt >= 0, np.exp(-dt / 3.0), 0.0)
    autumn = 1.0 / (1.0 + np.exp(-(day - 150.0) / 8.0))
    rows = []
    for g, (q0, q1, tau, peak, (n_may, n_aug), srp0) in params.items():
        noise = np.exp(_ar1(rng, n_days, 0.8, 0.08))
        base = (q1 + (q0 - q1) * np.exp(-day / tau)) * (1.0 + 1.2 * autumn)
        q = (base + peak * storm_q * rng.uniform(0.8, 1.2)) * noise
        season = 0.5 * (1 + np.cos(2 * np.pi * (day - 105.0) / 230.0))  # 1 near Aug, 0 in spring
        nitrate = (n_may + (n_aug - n_may) * season) * (1.0 + 0.5 * np.tanh(storm_q))
        nitrate *= np.exp(rng.normal(0, 0.06, n_days))
        srp = srp0 * (1.0 + 2.5 * storm_q) * np.exp(rng.normal(0, 0.12, n_days))
        rows.append(pd.DataFrame({"day": day.astype(int), "gauge": g, "discharge_m3s": q,
                                  "nitrate_mgL": nitrate, "srp_ugL": srp,
                                  "temp_c": 2.0 + 0.8 * air_daily}))
    return pd.concat(rows, ignore_index=True)


# --------------------------------------------------------------------------
# Truth process
# --------------------------------------------------------------------------

def steele_depth_average(i0: np.ndarray, i_sat: np.ndarray, k: np.ndarray, h: np.ndarray) -> np.ndarray:
    """Steele (1962) photoinhibition averaged over depth 0..h with Beer-Lambert light. [-]

    Steele, J.H. (1962) Limnol. Oceanogr. 7:137; depth integral as in
    Chapra (1997) Surface Water-Quality Modeling, eq. 33.18.
    """
    kh = k * h
    a0 = i0 / i_sat
    return (np.e / kh) * (np.exp(-a0 * np.exp(-kh)) - np.exp(-a0))


def temperature_factor(temp: np.ndarray) -> np.ndarray:
    """Growth temperature factor per group: Arrhenius below T_opt, Gaussian above. [-]"""
    below = THETA_GROWTH ** (np.minimum(temp, T_OPT) - 20.0)
    above = np.exp(-(np.maximum(temp - T_OPT, 0.0) / T_WIDTH) ** 2)
    return below * above


def run_truth(weather15: dict, inflow15: dict, season_day: np.ndarray) -> dict:
    """Integrate the truth box model with 15-minute explicit steps.

    Per basin: water temperature, nitrate N, SRP P, detrital N and P, and
    chlorophyll-a of diatoms, greens and cyanobacteria (all µg/L).
    Returns arrays of shape (steps, basins[, groups]).
    """
    vol = np.array([b.volume_m3 for b in BASINS])
    depth = np.array([b.depth_m for b in BASINS])
    h_mix = np.array([b.mixed_layer_m for b in BASINS])
    k_bg = np.array([b.k_background for b in BASINS])
    p_rel = np.array([b.p_release_20 for b in BASINS]) / depth        # [µg/L/d] at 20 °C
    denit = np.array([b.denitrification_20 for b in BASINS]) / depth  # [1/d] at 20 °C
    n_steps = len(season_day)
    sec_per_d = 86400.0

    temp = np.array([11.0, 10.5, 9.8, 11.3])
    temp_deep = np.array([11.0, 8.5, 7.0, 11.3])
    hypo_share = (depth - h_mix) / depth
    nit = np.array([1600.0, 700.0, 560.0, 220.0])
    srp = np.array([14.0, 6.0, 4.0, 1.2])
    det_n = np.array([80.0, 50.0, 40.0, 30.0])
    det_p = np.array([8.0, 4.0, 3.0, 2.0])
    algae = np.array([[3.0, 0.8, 0.45], [2.5, 0.6, 0.25], [2.0, 0.5, 0.18], [1.5, 0.4, 0.10]])
    inflow_algae = np.array([0.3, 0.1, 0.01])

    out = {k: np.empty((n_steps, NB)) for k in ("temp", "nitrate", "srp", "det_p", "det_n")}
    out["algae"] = np.empty((n_steps, NB, len(GROUPS)))

    for step in range(n_steps):
        air = weather15["air"][step]
        sw = weather15["sw"][step]
        wind = weather15["wind"][step]
        day = season_day[step]

        # ---- heat budget of the surface mixed layer (linearised exchange coefficient)
        k_heat = 20.0 + 6.0 * wind                                     # [W/m²/K]
        q_net = 0.93 * sw - 95.0 + k_heat * (air - temp)               # [W/m²]
        q_in = inflow15["q"][step]                                      # per gauge [m³/s]
        t_in = inflow15["temp"][step]
        inflow_basin = np.zeros(NB)
        inflow_basin[list(GAUGE_INTO)] = q_in
        through = np.zeros(NB)   # total flow through each basin [m³/s]
        through[0] = q_in[0]
        through[1] = q_in[0] + q_in[1]
        through[2] = through[1]
        through[3] = q_in[2]

        def transport(c, c_in):
            """Advection along the chain + two-way exchange [µg/L/d]."""
            flux = np.zeros(NB)
            ext = np.zeros(NB)
            ext[list(GAUGE_INTO)] = q_in * c_in
            flux += ext
            flux[1] += through[0] * c[0]
            flux[2] += through[1] * c[1]
            flux -= through * c
            for (a, b), e in EXCHANGE_M3S.items():
                flux[a] += e * (c[b] - c[a])
                flux[b] += e * (c[a] - c[b])
            return flux * sec_per_d / vol

        # surface-layer heat gain (rho*c_p = 4.18e6 J/m³/K) plus heat carried by the flows
        dtemp = q_net * sec_per_d / (4.18e6 * h_mix) + transport(temp, t_in)
        # wind-driven entrainment of cooler deep water where a hypolimnion exists
        entrain = ENTRAINMENT_PER_D * (wind / 4.0) ** 2 * hypo_share
        dtemp -= entrain * (temp - temp_deep)
        dtemp_deep = entrain * (temp - temp_deep) * h_mix / np.maximum(depth - h_mix, 1e-9) + 0.002

        # ---- light and mixing
        atot = algae.sum(axis=1)
        calm = np.exp(-wind / 2.5)                   # 1 in still air, -> 0 in wind
        flushing = through * sec_per_d / vol                       # dilution rate [1/d]
        k_ext = k_bg + 1.5 * flushing + K_CHL * atot                # storm turbidity + self-shading
        # surface mixed layer: shallower in calm weather, the whole column at autumn overturn
        overturn = np.exp(-np.maximum(temp - temp_deep, 0.0) / 1.5) * hypo_share
        z_mix = np.minimum(depth, 2.0 + (h_mix - 2.0) * (1.0 - 0.6 * calm)) + overturn * depth
        par = 0.45 * sw
        # buoyant cyanobacteria gather in the top layer in calm water
        z_light = np.stack([z_mix, z_mix, z_mix * (1.0 - 0.65 * calm)], axis=1)
        f_light = steele_depth_average(par, I_SAT[None, :], k_ext[:, None], z_light)

        # ---- growth
        f_t = temperature_factor(temp[:, None])
        f_n = nit[:, None] / (K_N + nit[:, None])
        f_n[:, 2] = np.maximum(f_n[:, 2], N_FIX_FLOOR)        # N fixation
        f_p = srp[:, None] / (K_P + srp[:, None])
        mu = MU_MAX_20 * f_t * f_light * np.minimum(f_n, f_p)  # [1/d]

        # ---- losses
        resp = RESP_20 * THETA_RESP ** (temp[:, None] - 20.0)
        resp[:, 2] += 0.10 * np.clip((13.0 - temp) / 3.0, 0.0, None)   # cold die-off of cyanobacteria
        # implicit zooplankton: a spring clear-water phase and summer grazing on edible algae
        zoo = 0.04 + 0.22 * np.exp(-0.5 * ((day - 45.0) / 12.0) ** 2) + 0.10 * np.exp(
            -0.5 * ((day - 105.0) / 30.0) ** 2)
        graze = zoo * 1.06 ** (temp[:, None] - 20.0) * EDIBLE
        settle = SETTLING[None, :] * (0.35 + 0.65 * calm) / depth[:, None]
        loss = resp + graze + settle

        growth = mu * algae
        lost = (resp + graze) * algae
        # N demand: cyanobacteria take from nitrate only the non-fixed share
        din_share = np.ones_like(mu)
        din_share[:, 2] = (nit / (K_N[2] + nit)) / np.maximum(nit / (K_N[2] + nit), N_FIX_FLOOR)
        n_uptake = (growth * din_share).sum(axis=1) * CHL_TO_N
        p_uptake = growth.sum(axis=1) * CHL_TO_P

        t_sed = THETA_SEDIMENT ** (temp - 20.0)
        miner = MINERALISATION_20 * 1.08 ** (temp - 20.0)
        p_release = p_rel * t_sed * (0.5 + 0.5 * calm)       # more release in calm (low-O2) spells

        dalg = growth - loss * algae + np.stack(
            [transport(algae[:, j], inflow_algae[j] * np.ones(3)) for j in range(3)], axis=1)
        recycled_n = RECYCLED_FRACTION * lost.sum(axis=1) * CHL_TO_N
        recycled_p = RECYCLED_FRACTION * lost.sum(axis=1) * CHL_TO_P
        dn = (-n_uptake + recycled_n + miner * det_n - denit * t_sed * nit
              + transport(nit, inflow15["nitrate"][step]))
        dp = (-p_uptake + recycled_p + miner * det_p + p_release
              + transport(srp, inflow15["srp"][step]))
        ddn = ((1 - RECYCLED_FRACTION) * lost.sum(axis=1) * CHL_TO_N - miner * det_n
               - DETRITUS_SETTLING / depth * det_n + transport(det_n, np.full(3, 60.0)))
        ddp = ((1 - RECYCLED_FRACTION) * lost.sum(axis=1) * CHL_TO_P - miner * det_p
               - DETRITUS_SETTLING / depth * det_p + transport(det_p, np.full(3, 6.0)))
        # explicit step, floored at small positive values (settled algae leave to the sediment)
        temp = temp + DT_D * dtemp
        temp_deep = np.where(hypo_share > 0, temp_deep + DT_D * dtemp_deep, temp)
        algae = np.maximum(algae + DT_D * dalg, 1e-4)
        nit = np.maximum(nit + DT_D * dn, 0.5)
        srp = np.maximum(srp + DT_D * dp, 0.05)
        det_n = np.maximum(det_n + DT_D * ddn, 0.0)
        det_p = np.maximum(det_p + DT_D * ddp, 0.0)

        out["temp"][step] = temp
        out["nitrate"][step] = nit
        out["srp"][step] = srp
        out["det_p"][step] = det_p
        out["det_n"][step] = det_n
        out["algae"][step] = algae
    return out


# --------------------------------------------------------------------------
# Sensors: buoys
# --------------------------------------------------------------------------

@dataclass(frozen=True)
class BuoySensor:
    site: str
    chl_gain: float       # chl_fluor = chl_gain * total chlorophyll-a (+ noise)
    pc_gain: float        # phycocyanin = pc_gain * cyanobacteria chl-a + pc_offset (+ noise)
    pc_offset_ugL: float


SENSORS = (
    BuoySensor("CR-FA", 1.18, 0.90, 0.30),
    BuoySensor("CR-MR", 0.86, 1.12, 0.20),
    BuoySensor("CR-DB", 1.05, 1.00, 0.25),
    BuoySensor("SL-01", 0.93, 0.95, 0.15),
)
# SL-01 reports phycocyanin in RFU; its calibration is ugL = PC_RFU_A * RFU + PC_RFU_B
PC_RFU_A = 1.8      # [µg/L per RFU]
PC_RFU_B = -0.12    # [µg/L]
FOULING_SITE = "CR-MR"
FOULING_START = pd.Timestamp("2026-09-03 00:00")
FOULING_CLEANED = pd.Timestamp("2026-09-24 10:00")
FOULING_MAX = 0.40
MALFORMED_FILE = ("CR-DB", "2026-07")
MALFORMED_START = pd.Timestamp("2026-07-14 08:00")


def _events_row(kind, site, start, end, detail):
    return {"kind": kind, "site": site, "start_local": start.strftime("%Y-%m-%d %H:%M"),
            "end_local": end.strftime("%Y-%m-%d %H:%M"), "detail": detail}


def make_buoy_series(rng: np.random.Generator, sensor: BuoySensor, basin_index: int, truth: dict,
                     local: pd.DatetimeIndex, sw15: np.ndarray, wind15: np.ndarray, events: list) -> pd.DataFrame:
    """15-minute readings of one buoy, with noise, spikes, gaps and (CR-MR) fouling.

    Returns columns timestamp (local), chl_fluor, pc (µg/L) and temp; NaN marks a
    missing field; a boolean column ``present`` marks rows the logger wrote.
    """
    n = len(local)
    chl_true = truth["algae"][:, basin_index, :].sum(axis=1)
    cya_true = truth["algae"][:, basin_index, 2]
    temp_true = truth["temp"][:, basin_index]
    calm = np.exp(-wind15 / 2.5)

    patch = np.exp(_ar1(rng, n, np.exp(-1.0 / 6.0), 0.06))           # sub-hourly patchiness
    quench = 1.0 - 0.15 * np.clip(sw15 / 800.0, 0.0, 1.0)           # daytime fluorescence quenching
    chl = (sensor.chl_gain * chl_true * patch * quench * np.exp(rng.normal(0, 0.05, n))
           + rng.normal(0, 0.12, n))
    cpatch = np.exp(_ar1(rng, n, np.exp(-1.0 / 6.0), 0.08) + 0.25 * calm * np.clip(sw15 / 600, 0, 1))
    pc = (sensor.pc_gain * cya_true * cpatch * np.exp(rng.normal(0, 0.06, n))
          + sensor.pc_offset_ugL + rng.normal(0, 0.08, n))
    temp = (temp_true + 0.6 * calm * np.clip(sw15 / 800.0, 0, 1)          # near-surface warming
            + rng.normal(0, 0.03, n))

    if sensor.site == FOULING_SITE:
        ramp = np.clip((local - FOULING_START) / (FOULING_CLEANED - FOULING_START), 0.0, 1.0)
        ramp = np.where(local < FOULING_CLEANED, ramp, 0.0)
        chl = chl * (1.0 + FOULING_MAX * ramp)
        events.append(_events_row("fouling", sensor.site, FOULING_START, FOULING_CLEANED,
                                  "chl_fluor drifts linearly up to +40 %, sensor cleaned at end"))

    # spikes: bubbles/debris (high), wiper or electronics glitches (zero or negative)
    for name, arr, count, up in (("chl_fluor", chl, 40, True), ("pc", pc, 35, True), ("temp", temp, 8, False)):
        idx = rng.choice(n, size=count, replace=False)
        if up:
            high = rng.random(count) < 0.8
            arr[idx[high]] = arr[idx[high]] * rng.uniform(3.0, 8.0, high.sum()) + rng.uniform(2, 15, high.sum())
            arr[idx[~high]] = rng.uniform(-1.0, 0.0, (~high).sum())
        else:
            arr[idx] = arr[idx] + rng.choice([-1, 1], count) * rng.uniform(4.0, 9.0, count)
        for k in np.sort(idx):
            stamp = local[k].strftime("%Y-%m-%d %H:%M")
            events.append({"kind": "spike", "site": sensor.site, "start_local": stamp,
                           "end_local": stamp, "detail": name})

    # single missing values
    for arr in (chl, pc, temp):
        arr[rng.random(n) < 0.002] = np.nan

    present = np.ones(n, bool)
    # logger outages (rows absent): one of 1-2 days, two of a few hours
    lengths_h = [rng.uniform(30, 48), rng.uniform(3, 9), rng.uniform(4, 14)]
    starts = np.sort(rng.choice(np.arange(5 * 96, n - 5 * 96), size=3, replace=False))
    for s, L in zip(starts, lengths_h):
        e = min(n, s + int(L * 4))
        present[s:e] = False
        events.append(_events_row("outage", sensor.site, local[s], local[e - 1], "no rows written"))
    # one sensor-only failure: phycocyanin empty for ~10 h while the other fields continue
    s = int(rng.integers(20 * 96, n - 20 * 96))
    pc[s:s + 40] = np.nan
    events.append(_events_row("sensor_gap", sensor.site, local[s], local[s + 39], "pc field empty"))
    return pd.DataFrame({"timestamp": local, "chl_fluor": chl, "pc": pc, "temp": temp, "present": present})


def _fmt(values: np.ndarray, decimals: int) -> np.ndarray:
    out = np.char.mod(f"%.{decimals}f", np.nan_to_num(values, nan=0.0)).astype(object)
    out[np.isnan(values)] = ""
    return out


def write_buoys(out_dir: Path, series: dict, events: list) -> None:
    """Write buoys/<SITE>/<YYYY-MM>.csv with duplicates and one malformed file."""
    for site, df in series.items():
        df = df[df["present"]].copy()
        if site == "SL-01":
            header = "timestamp,chl_fluor,pc_rfu,temp"
            pc_text = _fmt((df["pc"].to_numpy() - PC_RFU_B) / PC_RFU_A, 3)
        else:
            header = "timestamp,chl_fluor,pc_fluor,temp"
            pc_text = _fmt(df["pc"].to_numpy(), 2)
        ts_text = df["timestamp"].dt.strftime("%Y-%m-%d %H:%M").to_numpy()
        lines = np.array([",".join(r) for r in zip(ts_text, _fmt(df["chl_fluor"].to_numpy(), 2),
                                                   pc_text, _fmt(df["temp"].to_numpy(), 2))], dtype=object)
        months = df["timestamp"].dt.strftime("%Y-%m").to_numpy()
        site_dir = out_dir / "buoys" / site
        site_dir.mkdir(parents=True, exist_ok=True)
        for month in np.unique(months):
            rows = list(lines[months == month])
            rows = _inject_duplicates(site, month, rows, events)
            if (site, month) == MALFORMED_FILE:
                rows = _garble(rows, header, events)
            (site_dir / f"{month}.csv").write_text(header + "\n" + "\n".join(rows) + "\n")


DUPLICATES = {  # (site, month): (first timestamp of a re-sent block, rows re-sent)
    ("CR-FA", "2026-08"): ("2026-08-12 06:00", 4),
    ("SL-01", "2026-06"): ("2026-06-20 14:15", 1),
    ("CR-MR", "2026-10"): ("2026-10-07 22:30", 2),
}


def _inject_duplicates(site, month, rows, events):
    if (site, month) not in DUPLICATES:
        return rows
    first, count = DUPLICATES[(site, month)]
    k = next(i for i, r in enumerate(rows) if r.startswith(first))
    block = rows[k:k + count]
    events.append({"kind": "duplicates", "site": site, "start_local": first,
                   "end_local": block[-1][:16], "detail": f"{count} rows written twice"})
    return rows[:k + count] + block + rows[k + count:]


def _garble(rows, header, events):
    """Damage a block of rows the way a failing logger upload does."""
    k = next(i for i, r in enumerate(rows) if r.startswith(MALFORMED_START.strftime("%Y-%m-%d %H:%M")))
    rows = list(rows)

    def fields(i):
        return rows[i].split(",")

    f = fields(k + 1); rows[k + 1] = ",".join(f + ["1"])                      # extra column
    f = fields(k + 3); rows[k + 3] = ",".join([f[0], f[1], f[3]])             # missing column
    f = fields(k + 4); rows[k + 4] = ",".join([f[0], "ERR", f[2], f[3]])      # non-numeric
    f = fields(k + 6); rows[k + 6] = ",".join([f[0], f[1], "#N/A", f[3]])     # non-numeric
    f = fields(k + 7); rows[k + 7] = ",".join(["2026-07-14 24:45"] + f[1:])   # impossible time
    f = fields(k + 9); rows[k + 9] = ",".join(["14/07/2026 10:15"] + f[1:])   # wrong format
    rows[k + 11] = rows[k + 11][:19]                                          # truncated line
    f = fields(k + 13); rows[k + 13] = ",".join([f[0], f[1] + "." + "5", f[2], f[3]])  # "3.41.5"
    rows.insert(k + 15, header)                                               # repeated header
    rows.insert(k + 16, ",,,")                                                # empty record
    events.append(_events_row("malformed", MALFORMED_FILE[0], MALFORMED_START,
                              MALFORMED_START + pd.Timedelta(minutes=15 * 15),
                              "9 damaged rows + repeated header + empty record in buoys/CR-DB/2026-07.csv"))
    return rows


# --------------------------------------------------------------------------
# Lab samples
# --------------------------------------------------------------------------
LAB_ROUTE = (("CR-FA", 0, "09:00"), ("CR-MR", 1, "09:45"), ("CR-DB", 2, "10:30"), ("SL-01", 3, "13:30"))
LAB_SKIPPED = (pd.Timestamp("2026-05-26"),)     # a holiday week without sampling


def make_lab(rng: np.random.Generator, truth: dict, local: pd.DatetimeIndex) -> pd.DataFrame:
    """Weekly Tuesday samples at each site: nitrate, SRP, TP, extracted chl-a, microcystin."""
    tuesdays = pd.date_range("2026-05-05", SEASON_END_LOCAL.normalize(), freq="7D")
    rows = []
    start = local[0]
    for day in tuesdays:
        if day in LAB_SKIPPED:
            continue
        for site, b, hhmm in LAB_ROUTE:
            t = day + pd.Timedelta(hhmm + ":00") + pd.Timedelta(minutes=5 * int(rng.integers(0, 5)))
            k = int((t - start) / pd.Timedelta(minutes=STEP_MIN))
            algae = truth["algae"][k, b]
            chl_tot = algae.sum()
            tp = truth["srp"][k, b] + CHL_TO_P * chl_tot + truth["det_p"][k, b]
            nitrate = truth["nitrate"][k, b] / 1000.0 * np.exp(rng.normal(0, 0.05))
            srp = max(truth["srp"][k, b] * np.exp(rng.normal(0, 0.10)) + rng.normal(0, 0.3), 0.2)
            tp = tp * np.exp(rng.normal(0, 0.08))
            chla = chl_tot * max(1.0 + rng.normal(0, 0.10), 0.5)
            quota = 0.10 + 0.08 * np.sin(np.pi * np.clip((t - start).days / 184.0, 0, 1))
            mc = algae[2] * quota * np.exp(rng.normal(0, 0.3))
            ts = t.strftime("%Y-%m-%d %H:%M")
            rows += [(ts, site, "nitrate", f"{nitrate:.3f}", "mg/L"),
                     (ts, site, "srp", f"{srp:.1f}", "ug/L"),
                     (ts, site, "total_phosphorus", f"{tp:.1f}", "ug/L"),
                     (ts, site, "chlorophyll_a", f"{chla:.2f}", "ug/L"),
                     (ts, site, "microcystin", "<0.1" if mc < 0.1 else f"{mc:.2f}", "ug/L")]
    return pd.DataFrame(rows, columns=["sampled_at", "site", "variable", "value", "unit"])


# --------------------------------------------------------------------------
# Summary and optional plot
# --------------------------------------------------------------------------

def daily_truth(truth: dict, local: pd.DatetimeIndex) -> pd.DataFrame:
    frames = []
    date = local.strftime("%Y-%m-%d")
    for b, basin in enumerate(BASINS):
        a = truth["algae"][:, b, :]
        tp = truth["srp"][:, b] + CHL_TO_P * a.sum(axis=1) + truth["det_p"][:, b]
        df = pd.DataFrame({"date": date, "water_temp_c": truth["temp"][:, b],
                           "nitrate_ugL": truth["nitrate"][:, b], "srp_ugL": truth["srp"][:, b],
                           "total_phosphorus_ugL": tp, "chl_diatoms_ugL": a[:, 0],
                           "chl_greens_ugL": a[:, 1], "chl_cyanobacteria_ugL": a[:, 2],
                           "chl_total_ugL": a.sum(axis=1)})
        d = df.groupby("date", sort=True).mean().reset_index()
        d.insert(1, "water_body", basin.water_body)
        d.insert(2, "basin", basin.basin)
        d.insert(3, "site", basin.site)
        frames.append(d)
    return pd.concat(frames, ignore_index=True)


def summary_text(daily: pd.DataFrame) -> str:
    lines = ["Bloomline demo season 2026-05-01 .. 2026-10-31 (truth, daily means, local dates)",
             f"{'basin':26s} {'>1':>6s} {'>10':>6s} {'>50':>6s}  {'peak cyano':>10s} {'on':>6s}"
             f"  {'max rise/d':>10s}  {'max tot chl':>11s}"]
    for (wb, basin), d in daily.groupby(["water_body", "basin"], sort=False):
        c = d["chl_cyanobacteria_ugL"].to_numpy()
        dates = d["date"].to_numpy()

        def first(level):
            k = np.flatnonzero(c > level)
            return dates[k[0]][5:] if k.size else "-"
        growth = np.max(np.expm1(np.diff(np.log(c)))) * 100      # largest day-to-day rise
        kp = int(np.argmax(c))
        lines.append(f"{wb + '/' + basin:26s} {first(1):>6s} {first(10):>6s} {first(50):>6s}  "
                     f"{c[kp]:10.1f} {dates[kp][5:]:>6s}  {growth:8.1f} %  {d['chl_total_ugL'].max():11.1f}")
    sl = daily[daily["water_body"] == "sorrel-lake"]
    lines.append(f"sorrel-lake: max cyanobacteria chl {sl['chl_cyanobacteria_ugL'].max():.2f} ug/L, "
                 f"max total chl {sl['chl_total_ugL'].max():.2f} ug/L (daily means)")
    res = daily[daily["water_body"] == "corrisdale"]
    early = res[res["date"] < "2026-07-01"]
    lines.append(f"corrisdale before July: total chl {early['chl_total_ugL'].min():.1f}.."
                 f"{early['chl_total_ugL'].max():.1f} ug/L; water temp max "
                 + ", ".join(f"{b} {g['water_temp_c'].max():.1f}" for b, g in res.groupby("basin", sort=False)) + " C")
    return "\n".join(lines)


def plot_season(path: Path, daily: pd.DataFrame, weather: pd.DataFrame, inflows: pd.DataFrame) -> None:
    import matplotlib
    matplotlib.use("Agg")
    import matplotlib.pyplot as plt
    fig, ax = plt.subplots(5, 1, figsize=(12, 16), sharex=True)
    for (wb, basin), d in daily.groupby(["water_body", "basin"], sort=False):
        t = pd.to_datetime(d["date"])
        ax[0].semilogy(t, d["chl_cyanobacteria_ugL"], label=basin)
        ax[1].plot(t, d["chl_total_ugL"], label=f"{basin} total")
        ax[2].plot(t, d["water_temp_c"], label=basin)
        ax[3].semilogy(t, d["nitrate_ugL"], label=f"{basin} N")
        ax[3].semilogy(t, d["srp_ugL"], "--", label=f"{basin} SRP")
    for lvl in (1, 10, 50):
        ax[0].axhline(lvl, color="grey", lw=0.5)
    ax[0].set_ylabel("cyano chl ug/L")
    ax[1].set_ylabel("total chl ug/L")
    ax[2].set_ylabel("water temp C")
    ax[3].set_ylabel("N, SRP ug/L")
    w = weather.set_index("time_utc").resample("D").mean()
    ax[4].plot(w.index, w["air_temp_c"], label="air C")
    ax[4].plot(w.index, w["wind_ms"], label="wind m/s")
    ax[4].plot(w.index, w["shortwave_wm2"] / 20, label="SW/20")
    for g, d in inflows.groupby("gauge"):
        ax[4].plot(pd.to_datetime(d["date"]), d["discharge_m3s"], ":", label=g)
    for a in ax:
        a.legend(fontsize=7, ncol=4)
        a.grid(alpha=0.3)
    fig.tight_layout()
    fig.savefig(path, dpi=80)


# --------------------------------------------------------------------------
# Main
# --------------------------------------------------------------------------

def _iso_z(times) -> np.ndarray:
    return pd.DatetimeIndex(times).strftime("%Y-%m-%dT%H:%M:%SZ").to_numpy()


def generate(seed: int, out_dir: Path, plot: Path | None = None) -> str:
    rng_storm, rng_weather, rng_fc, rng_inflow, rng_buoy, rng_lab = _child_rngs(seed, 6)
    local = pd.date_range(SEASON_START_LOCAL, SEASON_END_LOCAL, freq=f"{STEP_MIN}min")
    n_days = len(local) // STEPS_PER_DAY
    t0_utc = SEASON_START_LOCAL - LOCAL_OFFSET
    n_hours = (n_days + 8) * 24

    storms = storm_days(rng_storm)
    weather = make_weather(rng_weather, storms, n_hours, t0_utc)
    # 15-minute model forcing by linear interpolation of the hourly weather
    hours = np.arange(n_hours, dtype=float)
    t15 = np.arange(len(local)) / 4.0
    w15 = {k: np.interp(t15, hours, weather[c].to_numpy())
           for k, c in (("air", "air_temp_c"), ("sw", "shortwave_wm2"), ("wind", "wind_ms"))}

    air_daily = np.array([w15["air"][d * 96:(d + 1) * 96].mean() for d in range(n_days)])
    inflows = make_inflows(rng_inflow, storms, n_days, air_daily)
    day15 = np.arange(len(local)) / STEPS_PER_DAY
    mid = np.arange(n_days) + 0.5
    inflow15 = {}
    for key, col, scale in (("q", "discharge_m3s", 1.0), ("nitrate", "nitrate_mgL", 1000.0),
                            ("srp", "srp_ugL", 1.0), ("temp", "temp_c", 1.0)):
        inflow15[key] = np.stack([np.interp(day15, mid, inflows.loc[inflows["gauge"] == g, col].to_numpy() * scale)
                                  for g in GAUGES], axis=1)
    truth = run_truth(w15, inflow15, day15)

    # ---- buoys
    events: list = []
    buoy_rngs = rng_buoy.spawn(len(SENSORS))
    series = {s.site: make_buoy_series(r, s, b, truth, local, w15["sw"], w15["wind"], events)
              for b, (s, r) in enumerate(zip(SENSORS, buoy_rngs))}
    write_buoys(out_dir, series, events)

    # ---- lab
    (out_dir / "lab").mkdir(parents=True, exist_ok=True)
    make_lab(rng_lab, truth, local).to_csv(out_dir / "lab" / "samples.csv", index=False, lineterminator="\n")

    # ---- inflows
    (out_dir / "inflows").mkdir(parents=True, exist_ok=True)
    dates = pd.date_range(SEASON_START_LOCAL, periods=n_days, freq="D").strftime("%Y-%m-%d").to_numpy()
    inf = inflows.sort_values(["day", "gauge"]).reset_index(drop=True)
    pd.DataFrame({"date": dates[inf["day"].to_numpy()], "gauge": inf["gauge"],
                  "discharge_m3s": _fmt(inf["discharge_m3s"].to_numpy(), 3),
                  "nitrate_mgL": _fmt(inf["nitrate_mgL"].to_numpy(), 3),
                  "srp_ugL": _fmt(inf["srp_ugL"].to_numpy(), 1)}).to_csv(
        out_dir / "inflows" / "daily.csv", index=False, lineterminator="\n")
    inflows["date"] = dates[inflows["day"].to_numpy()]

    # ---- weather observations (season only) and forecasts
    (out_dir / "weather" / "forecasts").mkdir(parents=True, exist_ok=True)
    obs = weather.iloc[: n_days * 24]
    pd.DataFrame({"time_utc": _iso_z(obs["time_utc"]), "air_temp_c": _fmt(obs["air_temp_c"].to_numpy(), 1),
                  "shortwave_wm2": _fmt(obs["shortwave_wm2"].to_numpy(), 0),
                  "wind_ms": _fmt(obs["wind_ms"].to_numpy(), 1)}).to_csv(
        out_dir / "weather" / "hourly.csv", index=False, lineterminator="\n")
    issues = pd.date_range("2026-05-01 00:00", "2026-10-31 00:00", freq="D")
    fc = make_forecasts(rng_fc, weather, issues)
    month = fc["issued_utc"].dt.strftime("%Y-%m").to_numpy()
    fc_text = pd.DataFrame({"issued_utc": _iso_z(fc["issued_utc"]), "valid_utc": _iso_z(fc["valid_utc"]),
                            "air_temp_c": _fmt(fc["air_temp_c"].to_numpy(), 1),
                            "shortwave_wm2": _fmt(fc["shortwave_wm2"].to_numpy(), 0),
                            "wind_ms": _fmt(fc["wind_ms"].to_numpy(), 1)})
    for m in np.unique(month):
        fc_text[month == m].to_csv(out_dir / "weather" / "forecasts" / f"{m}.csv", index=False, lineterminator="\n")

    # ---- truth
    (out_dir / "truth").mkdir(parents=True, exist_ok=True)
    daily = daily_truth(truth, local)
    daily.round(4).to_csv(out_dir / "truth" / "daily.csv", index=False, lineterminator="\n")
    pd.DataFrame([{"site": s.site, "chl_gain": s.chl_gain, "pc_gain": s.pc_gain,
                   "pc_offset_ugL": s.pc_offset_ugL,
                   "pc_unit": "RFU" if s.site == "SL-01" else "ug/L"} for s in SENSORS]).to_csv(
        out_dir / "truth" / "sensors.csv", index=False, lineterminator="\n")
    for d0, mag in storms:
        t = SEASON_START_LOCAL + pd.Timedelta(days=d0)
        events.append(_events_row("storm", "MET-01", t, t + pd.Timedelta(days=2), f"magnitude {mag:.2f}"))
    pd.DataFrame(events).to_csv(out_dir / "truth" / "events.csv", index=False, lineterminator="\n")

    text = summary_text(daily)
    if plot is not None:
        plot_season(plot, daily, weather.iloc[: n_days * 24], inflows)
    return text


def main(argv=None) -> None:
    parser = argparse.ArgumentParser(description=__doc__.splitlines()[0])
    parser.add_argument("--seed", type=int, default=20260501)
    parser.add_argument("--out", type=Path, default=Path(__file__).resolve().parent)
    parser.add_argument("--plot", type=Path, default=None, help="write a PNG overview (needs matplotlib)")
    args = parser.parse_args(argv)
    print(generate(args.seed, args.out, args.plot))


if __name__ == "__main__":
    main()
