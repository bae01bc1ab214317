"""Alembic environment for Bloomline's schema (run through ``monitor.store.db.upgrade``)."""

from alembic import context

from monitor.store.schema import metadata

config = context.config


def run_migrations() -> None:
    connection = config.attributes.get("connection")
    if connection is None:
        from sqlalchemy import create_engine

        engine = create_engine(config.get_main_option("sqlalchemy.url"))
        with engine.begin() as conn:
            _run(conn)
        engine.dispose()
    else:
        _run(connection)


def _run(connection) -> None:
    context.configure(connection=connection, target_metadata=metadata,
                      render_as_batch=connection.dialect.name == "sqlite")
    with context.begin_transaction():
        context.run_migrations()


run_migrations()
