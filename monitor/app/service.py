"""The Bloomline service: one object holding the config, the store and the injected I/O.

The scheduler, the command line and the demo all drive the same three jobs:
ingest new feed files, run the daily cycle for every water body, send the
outbox. The clock and the mail transport are injected, so a test can drive
a whole season with a fake clock.
"""

from __future__ import annotations

import datetime as dt
import logging
from typing import Callable, Iterable, Sequence

from sqlalchemy.engine import Engine

from monitor.alerting import notify, subscriptions
from monitor.forecasting import cycle
from monitor.store import runs as store
from monitor.config import Config
from monitor.store.db import open_store
from monitor.ingest.feeds import poll_due, start_mqtt_feeds
from monitor.ingest.batches import BatchResult
from monitor.ingest.feeds.csv_folder import ingest_all
from monitor.timeutil import now_utc

log = logging.getLogger("bloomline")


class Service:
    def __init__(self, config: Config, *, engine: Engine | None = None,
                 transport: notify.Transport | None = None,
                 clock: Callable[[], dt.datetime] = now_utc):
        self.config = config
        self.engine = engine if engine is not None else open_store(config.service.database_url)
        self.transport = transport if transport is not None else notify.transport_from_config(config)
        self.clock = clock
        self._dask = None
        self._pull_states: dict = {}
        store.sync_config(self.engine, config)
        subscriptions.sync_from_config(self.engine, config, clock())

    # ------------------------------------------------------------------ ingest
    def ingest(self, *, progress=None) -> list[BatchResult]:
        """Ingest every new file of the csv-folder feeds; a bad file never stops the others."""
        return ingest_all(self.engine, self.config, progress=progress, now=self.clock())

    def poll_feeds(self) -> list[BatchResult]:
        """One scheduled round: new drop-folder files and the HTTP pulls that are due."""
        return poll_due(self.engine, self.config, states=self._pull_states, now=self.clock())

    def start_subscriptions(self) -> list:
        """Start the MQTT subscriptions; each batch is stored as it arrives. Stop them with ``.stop()``."""
        return start_mqtt_feeds(self.engine, self.config)

    # ------------------------------------------------------------------ cycles
    def run_cycles(self, analysis: dt.datetime, *, only: Iterable[str] | None = None,
                   season_start: dt.datetime | None = None) -> list[dict]:
        """One cycle per water body at ``analysis``; computed in parallel where configured.

        A water body whose cycle fails is reported with status "failed"; the
        others still run.
        """
        wanted = set(only) if only else None
        bodies = [wb for wb in self.config.water_bodies if wanted is None or wb.id in wanted]
        inputs = [cycle.gather(self.engine, self.config, wb, analysis, season_start=season_start) for wb in bodies]
        outputs = self.compute_many(inputs)
        return [cycle.record(self.engine, self.config, out, now=self.clock()) for out in outputs]

    def compute_many(self, inputs: Sequence[cycle.CycleInputs]) -> list[cycle.CycleOutputs]:
        """Run :func:`monitor.forecasting.cycle.compute` for each input: in-process, or on a Dask cluster."""
        address = self.config.service.dask_scheduler
        if not address or len(inputs) < 2:
            return [cycle.compute(i) for i in inputs]
        if self._dask is None:
            from monitor.forecasting.parallel import DaskRunner

            self._dask = DaskRunner(address)
        return self._dask.map(cycle.compute, inputs)

    def close(self) -> None:
        """Release the Dask client (if any) and the database connections."""
        if self._dask is not None:
            self._dask.close()
            self._dask = None
        self.engine.dispose()

    # ------------------------------------------------------------------ mail
    def send_mail(self) -> notify.SendSummary:
        """Send the outbox messages due now; failures are retried with back-off."""
        return notify.send_due(self.engine, self.transport, self.clock())
