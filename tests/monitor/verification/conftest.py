"""A store holding the invented Brackenfold Mere scenario (daily lab chlorophyll-a, two seasons)."""

from __future__ import annotations

import shutil
from pathlib import Path

import pytest

from monitor.config import load_config
from monitor.ingest.feeds.csv_folder import ingest_feed
from monitor.store.db import open_store

BRACKENFOLD = Path(__file__).resolve().parents[3] / "sample_feeds" / "brackenfold"


@pytest.fixture(scope="module")
def brackenfold(tmp_path_factory):
    """(config, engine, folder) of a store with both Brackenfold seasons ingested."""
    folder = tmp_path_factory.mktemp("brackenfold")
    shutil.copyfile(BRACKENFOLD / "bloomline.toml", folder / "bloomline.toml")
    shutil.copytree(BRACKENFOLD / "data", folder / "data")
    config = load_config(folder / "bloomline.toml")
    engine = open_store(config.service.database_url)
    results = ingest_feed(engine, config, config.feed("brackenfold-lab"))
    assert sum(r.accepted for r in results) == 880
    yield config, engine, folder
    engine.dispose()
