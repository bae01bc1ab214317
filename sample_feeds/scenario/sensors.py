"""The buoys' sensors: gains, noise, spikes, gaps, outages and the CR-MR fouling drift."""
from __future__ import annotations

from dataclasses import dataclass

import numpy as np
import pandas as pd

from .formatting import event_row
from .randomness import ar1


@dataclass(frozen=True)
class BuoySensor:
    site: str
    chl_gain: float       # chl_fluor = chl_gain * total chlorophyll-a (+ noise)
    pc_gain: float        # phycocyanin = pc_gain * cyanobacteria chl-a + pc_offset (+ noise)
    pc_offset_ugL: float


# One buoy per basin, in the order of setting.BASINS.
SENSORS = (
    BuoySensor("CR-FA", 1.18, 0.90, 0.30),
    BuoySensor("CR-MR", 0.86, 1.12, 0.20),
    BuoySensor("CR-DB", 1.05, 1.00, 0.25),
    BuoySensor("SL-01", 0.93, 0.95, 0.15),
)
RFU_SITE = "SL-01"
# SL-01 reports phycocyanin in RFU; its calibration is ugL = PC_RFU_A * RFU + PC_RFU_B
PC_RFU_A = 1.8      # [µg/L per RFU]
PC_RFU_B = -0.12    # [µg/L]
FOULING_SITE = "CR-MR"
FOULING_START = pd.Timestamp("2026-09-03 00:00")
FOULING_CLEANED = pd.Timestamp("2026-09-24 10:00")
FOULING_MAX = 0.40


def make_buoy_series(rng: np.random.Generator, sensor: BuoySensor, basin_index: int, truth: dict,
                     local: pd.DatetimeIndex, sw15: np.ndarray, wind15: np.ndarray, events: list) -> pd.DataFrame:
    """15-minute readings of one buoy, with noise, spikes, gaps and (CR-MR) fouling.

    ``sw15`` [W/m²] and ``wind15`` [m/s] are the weather at the model steps.
    Returns columns timestamp (local), chl_fluor [µg/L], pc [µg/L cyanobacteria
    chl-a equivalent] and temp [°C]; NaN marks a missing field; a boolean column
    ``present`` marks rows the logger wrote. Appends the quirks to ``events``.
    """
    n = len(local)
    chl_true = truth["algae"][:, basin_index, :].sum(axis=1)
    cya_true = truth["algae"][:, basin_index, 2]
    temp_true = truth["temp"][:, basin_index]
    calm = np.exp(-wind15 / 2.5)

    patch = np.exp(ar1(rng, n, np.exp(-1.0 / 6.0), 0.06))           # sub-hourly patchiness
    quench = 1.0 - 0.15 * np.clip(sw15 / 800.0, 0.0, 1.0)           # daytime fluorescence quenching
    chl = (sensor.chl_gain * chl_true * patch * quench * np.exp(rng.normal(0, 0.05, n))
           + rng.normal(0, 0.12, n))
    cpatch = np.exp(ar1(rng, n, np.exp(-1.0 / 6.0), 0.08) + 0.25 * calm * np.clip(sw15 / 600, 0, 1))
    pc = (sensor.pc_gain * cya_true * cpatch * np.exp(rng.normal(0, 0.06, n))
          + sensor.pc_offset_ugL + rng.normal(0, 0.08, n))
    temp = (temp_true + 0.6 * calm * np.clip(sw15 / 800.0, 0, 1)          # near-surface warming
            + rng.normal(0, 0.03, n))

    if sensor.site == FOULING_SITE:
        ramp = np.clip((local - FOULING_START) / (FOULING_CLEANED - FOULING_START), 0.0, 1.0)
        ramp = np.where(local < FOULING_CLEANED, ramp, 0.0)
        chl = chl * (1.0 + FOULING_MAX * ramp)
        events.append(event_row("fouling", sensor.site, FOULING_START, FOULING_CLEANED,
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
            events.append(event_row("spike", sensor.site, local[k], local[k], name))

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
        events.append(event_row("outage", sensor.site, local[s], local[e - 1], "no rows written"))
    # one sensor-only failure: phycocyanin empty for ~10 h while the other fields continue
    s = int(rng.integers(20 * 96, n - 20 * 96))
    pc[s:s + 40] = np.nan
    events.append(event_row("sensor_gap", sensor.site, local[s], local[s + 39], "pc field empty"))
    return pd.DataFrame({"timestamp": local, "chl_fluor": chl, "pc": pc, "temp": temp, "present": present})
