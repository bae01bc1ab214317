"""Database connections and migrations.

SQLite (WAL journal, foreign keys on) is the embedded default; PostgreSQL
by URL (``postgresql+psycopg://…``). The schema is created and changed only
by the alembic migrations in ``monitor/store/migrations``.
"""

from __future__ import annotations

from pathlib import Path

from alembic import command
from alembic.config import Config as AlembicConfig
from sqlalchemy import create_engine, event
from sqlalchemy.engine import Connection, Engine

MIGRATIONS = Path(__file__).with_name("migrations")


def connect(url: str, *, echo: bool = False) -> Engine:
    """An engine for ``url``; SQLite gets WAL, a busy timeout and foreign keys."""
    if url.startswith("postgresql://"):
        url = "postgresql+psycopg://" + url[len("postgresql://"):]
    if url.startswith("sqlite"):
        engine = create_engine(url, echo=echo, connect_args={"timeout": 30})

        @event.listens_for(engine, "connect")
        def _sqlite_pragmas(dbapi_connection, _record):
            cur = dbapi_connection.cursor()
            if url not in ("sqlite://", "sqlite:///:memory:"):
                cur.execute("PRAGMA journal_mode=WAL")
            cur.execute("PRAGMA synchronous=NORMAL")
            cur.execute("PRAGMA foreign_keys=ON")
            cur.close()

        return engine
    return create_engine(url, echo=echo, pool_pre_ping=True)


def param_marker(conn: Connection) -> str:
    """The driver's placeholder for a bound parameter in raw SQL: ``?`` (SQLite) or ``%s`` (psycopg)."""
    return "?" if conn.dialect.paramstyle == "qmark" else "%s"


def alembic_config(engine: Engine) -> AlembicConfig:
    cfg = AlembicConfig()
    cfg.set_main_option("script_location", str(MIGRATIONS))
    cfg.set_main_option("sqlalchemy.url", engine.url.render_as_string(hide_password=False))
    return cfg


def upgrade(engine: Engine, revision: str = "head") -> None:
    """Bring the database to ``revision`` (default: the newest schema)."""
    cfg = alembic_config(engine)
    with engine.begin() as conn:
        cfg.attributes["connection"] = conn
        command.upgrade(cfg, revision)


def open_store(url: str) -> Engine:
    """Connect and migrate: the one call the service and the web app use at start-up."""
    engine = connect(url)
    upgrade(engine)
    return engine
