"""Brackenfold Mere, the second invented scenario (sample_feeds/brackenfold): its files, their ingest, its truth."""

from __future__ import annotations

import importlib
import shutil
import subprocess
import sys
from pathlib import Path

import numpy as np
import pandas as pd
import pytest

from monitor.config import load_config
from monitor.ingest.feeds.csv_folder import ingest_all
from monitor.store.db import open_store
from monitor.store.readings import readings_frame, rejected_rows_frame

SAMPLE_FEEDS = Path(__file__).resolve().parents[2] / "sample_feeds"
SCENARIO = SAMPLE_FEEDS / "brackenfold"
DATA = SCENARIO / "data"
SEED = 20250415  # the seed the committed files were written with (sample_feeds/brackenfold/README.md)


@pytest.fixture(scope="module")
def package():
    """The scenario's modules, imported the way generate_brackenfold.py imports them."""
    with pytest.MonkeyPatch.context() as mp:
        mp.syspath_prepend(str(SAMPLE_FEEDS))
        modules = {name: importlib.import_module(f"brackenfold.{name}") for name in ("setting", "forcing", "truth")}
    return modules


@pytest.fixture(scope="module")
def truth() -> pd.DataFrame:
    return pd.read_csv(DATA / "truth" / "daily.csv")


def _files(folder: Path) -> list[Path]:
    return sorted(p.relative_to(folder) for p in folder.rglob("*") if p.is_file())


def test_regenerating_with_the_seed_writes_the_committed_files_byte_for_byte(tmp_path):
    out = tmp_path / "data"
    subprocess.run([sys.executable, str(SAMPLE_FEEDS / "generate_brackenfold.py"), "--seed", str(SEED),
                    "--out", str(out)], check=True, capture_output=True, timeout=120)
    assert _files(out) == _files(DATA)
    for rel in _files(DATA):
        assert (out / rel).read_bytes() == (DATA / rel).read_bytes(), rel


def test_the_exports_ingest_through_the_feed_with_no_row_rejected(tmp_path):
    shutil.copytree(DATA, tmp_path / "data")
    shutil.copyfile(SCENARIO / "bloomline.toml", tmp_path / "bloomline.toml")
    config = load_config(tmp_path / "bloomline.toml")
    engine = open_store(config.service.database_url)
    try:
        results = ingest_all(engine, config)
        assert [Path(r.origin).name for r in results] == ["brackenfold_2025.csv", "brackenfold_2026.csv"]
        assert all(r.status == "ok" and r.rejected == 0 for r in results), [r.message for r in results]
        assert rejected_rows_frame(engine).empty
        exported = pd.concat([pd.read_csv(DATA / f"brackenfold_{y}.csv", dtype=str) for y in (2025, 2026)], ignore_index=True)
        stored = readings_frame(engine, max_flag=9, include_censored=True)
        assert len(stored) == len(exported) == sum(r.accepted for r in results)
        # every value is stored as written (the export's units are Bloomline's: µg/L, µg N/L, µg P/L, °C),
        # and "<DL" as censored with its detection limit, never as a number
        below = exported["value"].str.startswith("<")
        assert ((exported["variable"] == "srp") & (exported["value"] == "<2")).sum() > 0
        assert stored["censored"].sum() == below.sum() and stored.loc[stored["censored"], "value"].isna().all()
        as_written = exported["value"].map(lambda v: float(v[1:]) if v.startswith("<") else float(v))
        number = stored["detection_limit"].where(stored["censored"], stored["value"])
        for variable, rows in exported.groupby("variable"):
            np.testing.assert_allclose(np.sort(number[stored["variable"] == variable].to_numpy()),
                                       np.sort(as_written[rows.index].to_numpy()), err_msg=variable)
    finally:
        engine.dispose()


def test_the_truth_has_a_grazing_collapse_while_nutrients_are_ample(truth, package):
    """Chlorophyll-a falls by more than half within 10 days while nitrate and SRP stay above their
    half-saturation constants and the grazers have built up: a zooplankton-driven clear-water phase,
    which Bloomline's model (no zooplankton) cannot make."""
    k_n, k_p = package["truth"].K_N, package["truth"].K_P
    for year, season in truth.groupby("season"):
        chl = season["chl_a_ugL"].to_numpy()
        ample = ((season["nitrate_ugL"] >= k_n) & (season["srp_ugL"] >= k_p)).to_numpy()
        grazers = season["zooplankton_carbon_ugL"].to_numpy()
        found = [(i, j) for i in range(len(chl)) for j in range(i + 1, min(i + 11, len(chl)))
                 if chl[j] < 0.5 * chl[i] and ample[i:j + 1].all() and grazers[i:j + 1].max() > 10 * grazers[0]]
        assert found, f"no grazing collapse in {year}"


def test_the_seasons_are_a_moderate_one_and_a_bloom(truth):
    peaks = truth.groupby("season")["chl_a_ugL"].max()
    # README: 2025 peaks near 20 µg/L, 2026 near 65 µg/L (WHO 2003 recreational guidance levels 10 and 50)
    assert 10 < peaks[2025] < 25
    assert 50 < peaks[2026] < 80


def test_the_truth_chlorophyll_to_carbon_ratio_varies_within_a_season(truth):
    for _, season in truth.groupby("season"):
        ratio = season["chl_to_carbon"]
        assert ratio.max() > 2 * ratio.min()


def test_the_truth_phosphorus_changes_only_by_release_burial_and_hatching(package):
    """Total P (water, plankton, detritus, deep water, sediment) [mg] changes only by the legacy
    release of the anoxic sediment, burial, and the P carried by hatching zooplankton."""
    setting, forcing, truth_model = package["setting"], package["forcing"], package["truth"]
    season = setting.SEASONS[1]
    days, _ = forcing.make_forcing(np.random.default_rng(7), season)
    surface_m3 = (1.0 - setting.HYPOLIMNION_VOLUME_FRACTION) * setting.VOLUME_M3
    deep_m3 = setting.HYPOLIMNION_VOLUME_FRACTION * setting.VOLUME_M3
    y = np.array([500.0, 5.0, 1500.0, 80.0, 600.0, 100.0, 90.0, 0.015])
    for k in (10, 60, 100, 150):
        day = days.iloc[k]
        d = truth_model.rhs(0.0, y, day, season)
        change = (surface_m3 * (d[1] + truth_model.P_TO_C * (d[2] + d[3] + d[4])) + deep_m3 * d[5]
                  + setting.AREA_M2 * d[6])
        sediment = truth_model.THETA_SEDIMENT ** (day["water_temp_c"] - 20.0)
        hatch = truth_model.Z_HATCH if day["doy"] < truth_model.HATCH_UNTIL_DOY else 0.0
        expected = (season.anoxic_release_20 * sediment * day["anoxic_fraction"] * setting.HYPOLIMNION_AREA_M2
                    - truth_model.BURIAL * y[6] * setting.AREA_M2 + truth_model.P_TO_C * hatch * surface_m3)
        assert change == pytest.approx(expected, rel=1e-9, abs=1e-6)


def test_the_config_describes_the_scenario_lake(package):
    setting = package["setting"]
    config = load_config(SCENARIO / "bloomline.toml")
    (wb,) = config.water_bodies
    (basin,) = wb.basins
    assert (wb.id, wb.timezone, wb.inflows, wb.weather_station) == (setting.WATER_BODY, setting.TIMEZONE, (), None)
    assert (basin.volume_m3, basin.mean_depth_m, basin.area_m2) == (setting.VOLUME_M3, setting.MEAN_DEPTH_M,
                                                                  setting.AREA_M2)
    assert [s.id for s in config.stations] == [setting.SITE]
    assert config.feeds[0].path == DATA
