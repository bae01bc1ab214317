"""The alembic migrations build exactly the schema the code declares."""

from __future__ import annotations

from alembic.autogenerate import compare_metadata
from alembic.migration import MigrationContext
from sqlalchemy import inspect

from monitor.store.db import connect, upgrade
from monitor.store.schema import metadata


def test_migrations_create_every_table_of_the_schema(tmp_path):
    engine = connect(f"sqlite:///{tmp_path / 'm.sqlite'}")
    upgrade(engine)
    assert set(inspect(engine).get_table_names()) == set(metadata.tables) | {"alembic_version"}


def test_migrated_database_matches_the_declared_schema(tmp_path):
    engine = connect(f"sqlite:///{tmp_path / 'm.sqlite'}")
    upgrade(engine)
    with engine.connect() as conn:
        diff = compare_metadata(MigrationContext.configure(conn), metadata)
    assert diff == [], f"schema.py and the migrations disagree: {diff}"


def test_sqlite_store_uses_write_ahead_logging(tmp_path):
    engine = connect(f"sqlite:///{tmp_path / 'm.sqlite'}")
    with engine.connect() as conn:
        assert conn.exec_driver_sql("PRAGMA journal_mode").scalar() == "wal"
