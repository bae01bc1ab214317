"""Shared fixtures: the real local services some tests need.

Tests that need PostgreSQL or the MQTT broker use the local servers. They
skip with a clear reason when a server is absent, except in CI
(``BLOOMLINE_REQUIRE_SERVICES=1``, set by ``.ci/run``), where an absent
service is a failure.
"""

from __future__ import annotations

import os
import shutil
import socket
from pathlib import Path

import pytest

from monitor.config import load_config
from monitor.ingest.feeds.csv_folder import ingest_feed
from monitor.store.db import open_store

POSTGRES_URL = os.environ.get("BLOOMLINE_TEST_POSTGRES_URL", "postgresql+psycopg://postgres@127.0.0.1:5432/test")
MQTT_HOST = os.environ.get("BLOOMLINE_TEST_MQTT_HOST", "127.0.0.1")
MQTT_PORT = int(os.environ.get("BLOOMLINE_TEST_MQTT_PORT", "1883"))


def _reachable(host: str, port: int) -> bool:
    try:
        with socket.create_connection((host, port), timeout=2):
            return True
    except OSError:
        return False


def _absent(what: str) -> None:
    if os.environ.get("BLOOMLINE_REQUIRE_SERVICES") == "1":
        pytest.fail(f"{what} is not reachable, and BLOOMLINE_REQUIRE_SERVICES=1 says it must be")
    pytest.skip(f"{what} is not reachable on this machine")


@pytest.fixture(scope="session")
def postgres_url() -> str:
    """URL of the local PostgreSQL test database."""
    from sqlalchemy.engine import make_url

    url = make_url(POSTGRES_URL)
    if not _reachable(url.host or "127.0.0.1", url.port or 5432):
        _absent(f"PostgreSQL at {url.host}:{url.port}")
    return POSTGRES_URL


@pytest.fixture(scope="session")
def mqtt_address() -> tuple[str, int]:
    """(host, port) of the local MQTT broker."""
    if not _reachable(MQTT_HOST, MQTT_PORT):
        _absent(f"the MQTT broker at {MQTT_HOST}:{MQTT_PORT}")
    return MQTT_HOST, MQTT_PORT


# ---------------------------------------------------------------- invented scenarios

BRACKENFOLD = Path(__file__).resolve().parents[1] / "sample_feeds" / "brackenfold"


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
