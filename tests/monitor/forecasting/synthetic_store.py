"""Stores of synthetic water bodies for the batched-cycle tests."""

from __future__ import annotations

import datetime as dt
from collections.abc import Callable

from monitor.alerting.transports import MailboxTransport
from monitor.app import synthetic
from monitor.app.service import Service
from monitor.config import parse_config
from monitor.store.db import connect, upgrade

SEASON_START = dt.datetime(2026, 6, 1, tzinfo=dt.UTC)


def synthetic_service(folder, n: int, *, seed: int = 7, url: str | None = None, engine=None, days: int = 21,
                      members: int = 8, horizon_days: int = 3, dask_scheduler: str | None = None,
                      edit: Callable[[dict], None] | None = None) -> Service:
    """A service over ``n`` synthetic water bodies with ``days`` of readings (small ensembles: fast);
    ``edit`` may change the configuration's dict before it is parsed."""
    url = url or f"sqlite:///{folder / 'store.sqlite'}"
    data = synthetic.config_data(n, seed=seed, database_url=url, members=members, horizon_days=horizon_days,
                                 dask_scheduler=dask_scheduler)
    if edit is not None:
        edit(data)
    config = parse_config(data, folder / "bloomline.toml")
    if engine is None:
        engine = connect(url)
        upgrade(engine)
    synthetic.write_readings(engine, config, seed=seed, start=SEASON_START, days=days)
    return Service(config, engine=engine, transport=MailboxTransport(folder / "mailbox"), clock=lambda: SEASON_START)
