"""The Bloomline service: one object holding the config, the store and the injected I/O.

The scheduler, the command line and the demo all drive the same three jobs:
ingest new feed files, run the daily cycle for every water body, send the
outbox. The clock and the mail transport are injected, so a test can drive
a whole season with a fake clock.
"""

from __future__ import annotations

import datetime as dt
import logging
from collections.abc import Callable, Iterable, Sequence

from sqlalchemy.engine import Engine

from monitor.alerting import notify, subscriptions
from monitor.config import Config
from monitor.forecasting import cycle
from monitor.ingest.batches import BatchResult
from monitor.ingest.feeds import poll_due, start_mqtt_feeds
from monitor.ingest.feeds.csv_folder import ingest_all
from monitor.store import runs as store
from monitor.store.db import open_store
from monitor.timeutil import now_utc
from monitor.verification.live import score_recent

log = logging.getLogger("bloomline")


class Service:
    def __init__(self, config: Config, *, engine: Engine | None = None,
                 transport: notify.Transport | None = None,
                 clock: Callable[[], dt.datetime] = now_utc, replay: bool = False):
        """``replay``: the cycles replay a stored history (the demo, a hindcast): readings are
        available by their time stamps, and none is late."""
        self.config = config
        self.replay = replay
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

        Each water body is guarded at every step (gather, compute, record): one
        whose cycle fails is reported with status "failed" and the step that
        failed, and the others still run. Summaries come back in config order.
        """
        wanted = set(only) if only else None
        bodies = [wb for wb in self.config.water_bodies if wanted is None or wb.id in wanted]
        summaries: dict[str, dict] = {}
        inputs = []
        for wb in bodies:
            try:
                inputs.append(cycle.gather(self.engine, self.config, wb, analysis, season_start=season_start,
                                           replay=self.replay))
            except Exception as exc:  # noqa: BLE001 - one water body's failure never stops the others
                summaries[wb.id] = _failed(wb.id, analysis, "gather", exc)
        for out in self.compute_many(inputs):
            try:
                summaries[out.water_body_id] = cycle.record(self.engine, self.config, out, now=self.clock())
            except Exception as exc:  # noqa: BLE001
                summaries[out.water_body_id] = _failed(out.water_body_id, analysis, "record", exc)
                continue
            self.verify(out.water_body_id, analysis)
        return [summaries[wb.id] for wb in bodies]

    def verify(self, water_body_id: str, analysis: dt.datetime) -> None:
        """Score the recent runs of a water body against the readings now stored (the live record).

        A failure is logged and leaves the cycle's result alone: verification never stops a forecast.
        """
        try:
            score_recent(self.engine, self.config, self.config.water_body(water_body_id), analysis)
        except Exception:  # noqa: BLE001
            log.exception("verification of %s at %s failed", water_body_id, analysis.isoformat())

    def compute_many(self, inputs: Sequence[cycle.CycleInputs]) -> list[cycle.CycleOutputs]:
        """Run :func:`monitor.forecasting.cycle.compute` for each input: in-process, or on a Dask cluster.

        An exception in one water body's compute becomes that body's "failed" output.
        """
        address = self.config.service.dask_scheduler
        if not address or len(inputs) < 2:
            return [compute_guarded(i) for i in inputs]
        if self._dask is None:
            from monitor.forecasting.parallel import DaskRunner

            self._dask = DaskRunner(address)
        return self._dask.map(compute_guarded, inputs)

    def close(self, *, dispose_engine: bool = True) -> None:
        """Release the Dask client (if any) and, unless told not to, the database connections."""
        if self._dask is not None:
            self._dask.close()
            self._dask = None
        if dispose_engine:
            self.engine.dispose()

    # ------------------------------------------------------------------ mail
    def send_mail(self) -> notify.SendSummary:
        """Send the outbox messages due now; failures are retried with back-off."""
        return notify.send_due(self.engine, self.transport, self.clock())


def compute_guarded(inputs: cycle.CycleInputs) -> cycle.CycleOutputs:
    """:func:`cycle.compute`, with any exception turned into a "failed" output of that water body."""
    try:
        return cycle.compute(inputs)
    except Exception as exc:  # noqa: BLE001 - reported as the water body's status, never raised
        return cycle.CycleOutputs(inputs.water_body_id, inputs.analysis_d, "failed",
                                  f"compute failed: {type(exc).__name__}: {exc}", None, {}, {}, inputs.basin_ids)


def _failed(water_body_id: str, analysis: dt.datetime, step: str, exc: Exception) -> dict:
    """The summary of a water body whose ``step`` raised; logged with its traceback."""
    log.error("cycle of %s at %s failed in %s", water_body_id, analysis.isoformat(), step, exc_info=exc)
    return {"water_body": water_body_id, "analysis_utc": analysis.isoformat(), "status": "failed",
            "message": f"{step} failed: {type(exc).__name__}: {exc}", "run_id": None, "events": []}
