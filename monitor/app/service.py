"""The Bloomline service: one object holding the config, the store and the injected I/O.

The scheduler, the command line and the demo all drive the same jobs:
ingest new feed data, run the daily cycle for every water body (catching
up after downtime), send the email outbox, call the webhooks. The clock
and the transports are injected, so a test can drive a whole season with a
fake clock.

Every job run is recorded (:mod:`monitor.store.jobs`) and logged as
structured events. Jobs stop between units of work (a water body's cycle,
a feed file, a message) when :attr:`Service.stopping` is set, and every
write transaction of a job runs :attr:`Service.guard` first (the
scheduler's lease, when one is held).
"""

from __future__ import annotations

import contextlib
import dataclasses
import datetime as dt
import logging
import threading
import time
from collections.abc import Callable, Iterable, Sequence
from dataclasses import dataclass, field

from sqlalchemy.engine import Connection, Engine

from monitor.alerting import notify, subscriptions
from monitor.alerting.transports import WebhookTransport
from monitor.config import Config
from monitor.forecasting import batch_record, cycle, many
from monitor.forecasting.late import replay_availability
from monitor.forecasting.many import compute_guarded
from monitor.ingest.batches import BatchResult
from monitor.ingest.feeds import start_mqtt_feeds
from monitor.ingest.feeds.csv_folder import ingest_all, poll_folder
from monitor.ingest.feeds.http_pull import PullState, load_states, pull_feed, save_state
from monitor.store import jobs
from monitor.store import runs as store
from monitor.store.availability import Availability
from monitor.store.db import open_store
from monitor.store.lease import LeaseLost
from monitor.timeutil import now_utc
from monitor.verification.live import score_recent

log = logging.getLogger("bloomline")
DAY = dt.timedelta(days=1)
#: Water bodies from which a cycle is run in batches (:mod:`monitor.forecasting.many`); fewer are run one
#: by one, each gathered, computed and recorded before the next starts.
BATCH_FROM = 20


@dataclass
class JobRecord:
    """What a running job reports about itself: counts, and a failure that raised nothing."""

    counts: dict = field(default_factory=dict)
    error: str | None = None

    def fail(self, error: str) -> None:
        self.error = error


class _StopAfterFile(Exception):
    """Raised between two files of a drop folder when the service is stopping."""


def latest_cycle_time(now: dt.datetime, cycle_at_utc: str) -> dt.datetime:
    """The most recent daily cycle time (``HH:MM`` UTC) at or before ``now``."""
    hour, minute = (int(x) for x in cycle_at_utc.split(":"))
    t = now.astimezone(dt.UTC).replace(hour=hour, minute=minute, second=0, microsecond=0)
    return t if t <= now else t - DAY


class Service:
    def __init__(self, config: Config, *, engine: Engine | None = None,
                 transport: notify.Transport | None = None,
                 clock: Callable[[], dt.datetime] = now_utc,
                 webhook_transport: WebhookTransport | None = None, owner: str | None = None,
                 replay: bool = False):
        self.config = config
        self.replay = replay
        self.engine = engine if engine is not None else open_store(config.service.database_url)
        self.transport = transport if transport is not None else notify.transport_from_config(config)
        self.webhook_transport = webhook_transport if webhook_transport is not None else WebhookTransport(
            config.webhooks)
        self.clock = clock
        self.owner = owner or jobs.process_id()
        #: set to make running jobs stop after their current unit of work
        self.stopping = threading.Event()
        self.stop_signal: str | None = None  # the signal that asked the service to stop, if any
        #: run first in every write transaction of a job; raises when this process may not act
        self.guard: Callable[[Connection], None] | None = None
        self._dask = None
        #: from this many water bodies a cycle reads, computes and records them in batches
        self.batch_from = BATCH_FROM
        store.sync_config(self.engine, config)
        subscriptions.sync_from_config(self.engine, config, clock())

    # ------------------------------------------------------------------ job records
    @contextlib.contextmanager
    def job(self, name: str, *, water_body: str | None = None, scheduled: dt.datetime | None = None):
        """Record one job run (start, end, outcome, error, counts) and log it as structured events."""
        fields = {"job": name, "water_body": water_body}
        run_id = jobs.start_job(self.engine, name, now=self.clock(), owner=self.owner, water_body_id=water_body,
                                scheduled_utc=scheduled)
        log.info("%s started", name, extra={"event": "job.started", **fields})
        record, t0 = JobRecord(), time.monotonic()
        try:
            yield record
        except BaseException as exc:
            error = f"{type(exc).__name__}: {exc}"
            self._finish(run_id, "failed", t0, error, record.counts)
            log.error("%s failed: %s", name, error, extra={"event": "job.failed", **fields}, exc_info=exc)
            raise
        outcome = "failed" if record.error else "ok"
        self._finish(run_id, outcome, t0, record.error, record.counts)
        done = {"outcome": outcome, "duration_s": round(time.monotonic() - t0, 3), "counts": record.counts, **fields}
        if record.error:
            log.warning("%s failed: %s", name, record.error, extra={"event": "job.failed", **done})
        else:
            log.info("%s finished", name, extra={"event": "job.finished", **done})

    def _finish(self, run_id: int, outcome: str, t0: float, error: str | None, counts: dict) -> None:
        try:
            jobs.finish_job(self.engine, run_id, now=self.clock(), outcome=outcome,
                            duration_s=time.monotonic() - t0, error=error, counts=counts)
        except Exception:  # noqa: BLE001 - the store may be the very thing that failed; the log still has it
            log.exception("could not record the end of job run %d", run_id, extra={"event": "job.unrecorded"})

    # ------------------------------------------------------------------ ingest
    def ingest(self, *, progress=None) -> list[BatchResult]:
        """Ingest every new file of the csv-folder feeds; a bad file never stops the others."""
        with self.job("ingest") as rec:
            results = ingest_all(self.engine, self.config, progress=progress, now=self.clock())
            rec.counts = _ingest_counts(results)
        return results

    def poll_feeds(self) -> list[BatchResult]:
        """One scheduled round: new drop-folder files and the HTTP pulls that are due.

        Each pull feed's state (validators, back-off) is read from and written
        back to the store. When the service is stopping the round ends after
        the file or pull in hand.
        """
        with self.job("ingest") as rec:
            results: list[BatchResult] = []
            states = load_states(self.engine)
            for feed in self.config.feeds:
                if self.stopping.is_set():
                    break
                if feed.kind == "csv-folder":
                    results.extend(self._poll_folder(feed))
                elif feed.kind == "http-pull":
                    state = states.get(feed.name) or PullState()
                    now = self.clock()
                    result = pull_feed(self.engine, self.config, feed, state, now=now)
                    save_state(self.engine, feed.name, state, now=now)
                    if result is not None:
                        results.append(result)
            rec.counts = _ingest_counts(results)
        return results

    def _poll_folder(self, feed) -> list[BatchResult]:
        done: list[BatchResult] = []

        def after_each(_i, _n, result):
            done.append(result)
            if self.stopping.is_set():
                raise _StopAfterFile

        with contextlib.suppress(_StopAfterFile):
            poll_folder(self.engine, self.config, feed, progress=after_each, now=self.clock())
        return done

    def start_subscriptions(self) -> list:
        """Start the MQTT subscriptions; each batch is stored as it arrives. Stop them with ``.stop()``."""
        return start_mqtt_feeds(self.engine, self.config)

    # ------------------------------------------------------------------ cycles
    def run_cycles(self, analysis: dt.datetime, *, only: Iterable[str] | None = None,
                   season_start: dt.datetime | None = None) -> list[dict]:
        """One cycle per water body at ``analysis``; computed in parallel where configured.

        Each water body is guarded at every step (gather, compute, record): one
        whose cycle fails is reported with status "failed" and the step that
        failed, and the others still run. Each is one recorded job run.
        Summaries come back in config order; when the service is stopping, the
        water bodies not yet started are left for the next run.
        """
        wanted = set(only) if only else None
        chosen = [wb for wb in self.config.water_bodies if wanted is None or wb.id in wanted]
        bodies = [wb for wb in chosen if wb.in_season(analysis)]
        skipped = {wb.id: _out_of_season(wb, analysis) for wb in chosen if not wb.in_season(analysis)}
        if len(bodies) >= self.batch_from or (self.config.service.dask_scheduler and len(bodies) > 1):
            done = {s["water_body"]: s for s in self._run_cycles_batched(bodies, analysis, season_start)}
            return [done.get(wb.id) or skipped[wb.id] for wb in chosen if wb.id in done or wb.id in skipped]
        summaries = []
        for wb in bodies:
            if self.stopping.is_set():
                log.info("stopping: cycles left for the next run", extra={"event": "cycle.deferred"})
                break
            with self.job("cycle", water_body=wb.id, scheduled=analysis) as rec:
                try:
                    inputs = cycle.gather(self.engine, self.config, wb, analysis, season_start=season_start,
                                          replay=self.replay)
                except Exception as exc:  # noqa: BLE001 - one water body's failure never stops the others
                    summary = _failed(wb.id, analysis, "gather", exc)
                else:
                    summary = self._record(compute_guarded(inputs), analysis)
                    if summary.get("run_id") is not None:
                        self.verify(wb.id, analysis)
                _report(rec, summary)
            summaries.append(summary)
        done = {s["water_body"]: s for s in summaries}
        return [done.get(wb.id) or skipped[wb.id] for wb in chosen if wb.id in done or wb.id in skipped]

    def _run_cycles_batched(self, bodies, analysis: dt.datetime, season_start) -> list[dict]:
        """Many water bodies: batched gather, compute in-process or on the Dask cluster (results as they
        finish), record in batches (:mod:`monitor.forecasting.many`); each still one job run."""
        summaries: dict[str, dict] = {}
        client = self._dask_client() if self.config.service.dask_scheduler else None
        results = many.computed(self.engine, self.config, bodies, analysis, season_start=season_start,
                                replay=self.replay, client=client, stopping=self.stopping)
        for batch in many.batches(results, many.RECORD_BATCH):
            outputs = []
            for out in batch:
                if isinstance(out, many.StepFailed):
                    summaries[out.water_body_id] = _failed(out.water_body_id, analysis, out.step, out.error)
                else:
                    outputs.append(out)
            for out, result in zip(outputs, self._record_many(outputs, analysis)):
                summaries[out.water_body_id] = result
                if result.get("run_id") is not None:
                    self.verify(out.water_body_id, analysis)
        if len(summaries) < len(bodies):
            log.info("stopping: cycles left for the next run", extra={"event": "cycle.deferred"})
        for wb in bodies:
            if wb.id in summaries:
                with self.job("cycle", water_body=wb.id, scheduled=analysis) as rec:
                    _report(rec, summaries[wb.id])
        return [summaries[wb.id] for wb in bodies if wb.id in summaries]

    def _record_many(self, outputs: list[cycle.CycleOutputs], analysis: dt.datetime) -> list[dict]:
        """Record a batch in one transaction; a water body whose writes fail is reported alone. If the
        batch itself cannot be written, each is recorded on its own."""
        try:
            results = batch_record.record_many(self.engine, self.config, outputs, now=self.clock(), guard=self.guard,
                                               replay=self.replay)
        except LeaseLost:
            raise
        except Exception:  # noqa: BLE001 - e.g. the observed-level query: fall back to one by one
            log.exception("batched record failed; recording one by one", extra={"event": "cycle.record_fallback"})
            return [self._record(out, analysis) for out in outputs]
        return [_failed(out.water_body_id, analysis, "record", r) if isinstance(r, Exception) else r
                for out, r in zip(outputs, results)]

    def verify(self, water_body_id: str, analysis: dt.datetime) -> None:
        """Score the recent runs of a water body against the readings now stored (the live record).

        A failure is logged and leaves the cycle's result alone: verification never stops a forecast.
        """
        try:
            score_recent(self.engine, self.config, self.config.water_body(water_body_id), analysis,
                         available=self._available(analysis))
        except Exception:  # noqa: BLE001
            log.exception("verification of %s at %s failed", water_body_id, analysis.isoformat())

    def _available(self, analysis: dt.datetime) -> Availability | None:
        """In a replay, the readings a cycle at ``analysis`` may see (their stations' reporting delays)."""
        return replay_availability(self.config, analysis) if self.replay else None

    def _record(self, out: cycle.CycleOutputs, analysis: dt.datetime) -> dict:
        try:
            return cycle.record(self.engine, self.config, out, now=self.clock(), guard=self.guard,
                                available=self._available(analysis))
        except LeaseLost:
            raise  # this process may no longer act: not a water body's failure
        except Exception as exc:  # noqa: BLE001
            return _failed(out.water_body_id, analysis, "record", exc)

    def due_cycles(self, now: dt.datetime | None = None) -> dict[dt.datetime, list[str]]:
        """The cycles due at ``now`` (default the clock): analysis time → water bodies.

        A water body whose newest run is older than the latest daily cycle
        time gets one catch-up cycle at that time (``[schedule] catch_up =
        "latest"``, the default: the cycle assimilates every reading since its
        checkpoint), or one per missed day (``"each-day"``).
        """
        now = now or self.clock()
        due = latest_cycle_time(now, self.config.schedule.cycle_at_utc)
        newest = store.newest_run_times(self.engine)
        plan: dict[dt.datetime, list[str]] = {}
        for wb in self.config.water_bodies:
            last = newest.get(wb.id)
            if last is not None and last >= due:
                continue
            times = [due]
            if last is not None and self.config.schedule.catch_up == "each-day":
                first = latest_cycle_time(last, self.config.schedule.cycle_at_utc) + DAY
                times = [first + k * DAY for k in range((due - first) // DAY + 1)]
            for t in times:
                plan.setdefault(t, []).append(wb.id)
        return plan

    def run_due_cycles(self) -> list[dict]:
        """Run every due cycle (see :meth:`due_cycles`), oldest first, until none is due.

        A cycle that failed without storing a run is not tried again in the
        same call (the next daily run catches it up).
        """
        summaries: list[dict] = []
        tried: set[tuple[str, dt.datetime]] = set()
        while not self.stopping.is_set():
            plan = {t: [w for w in ids if (w, t) not in tried] for t, ids in self.due_cycles().items()}
            plan = {t: ids for t, ids in plan.items() if ids}
            if not plan:
                break
            for t in sorted(plan):
                if self.stopping.is_set():
                    break
                tried.update((w, t) for w in plan[t])
                summaries.extend(self.run_cycles(t, only=plan[t]))
        return summaries

    def compute_many(self, inputs: Sequence[cycle.CycleInputs]) -> list[cycle.CycleOutputs]:
        """Run :func:`monitor.forecasting.cycle.compute` for each input: in-process, or on a Dask cluster.

        An exception in one water body's compute becomes that body's "failed" output.
        """
        address = self.config.service.dask_scheduler
        if not address or len(inputs) < 2:
            return [compute_guarded(i) for i in inputs]
        return self._dask_runner().map(compute_guarded, inputs)

    def _dask_runner(self):
        if self._dask is None:
            from monitor.forecasting.parallel import DaskRunner

            self._dask = DaskRunner(self.config.service.dask_scheduler)
        return self._dask

    def _dask_client(self):
        return self._dask_runner().client

    def close(self, *, dispose_engine: bool = True) -> None:
        """Release the Dask client (if any) and, unless told not to, the database connections."""
        if self._dask is not None:
            self._dask.close()
            self._dask = None
        if dispose_engine:
            self.engine.dispose()

    # ------------------------------------------------------------------ messages
    def send_mail(self) -> notify.SendSummary:
        """Send the outbox emails due now; failures are retried with back-off."""
        return self._send("send", "email", self.transport)

    def send_webhooks(self) -> notify.SendSummary:
        """Call the webhooks due now; failures are retried with back-off."""
        return self._send("webhooks", "webhook", self.webhook_transport)

    def _send(self, job: str, channel: str, transport) -> notify.SendSummary:
        with self.job(job) as rec:
            summary = notify.send_due(self.engine, transport, self.clock(), channel=channel, owner=self.owner,
                                      guard=self.guard, stop=self.stopping, clock=self.clock)
            rec.counts = dataclasses.asdict(summary)
            if summary.sent == 0 and (summary.failed or summary.dead):
                rec.fail(summary.last_error or "every message failed")
        return summary


def _ingest_counts(results: list[BatchResult]) -> dict:
    return {"batches": len(results), "accepted": sum(r.accepted for r in results),
            "rejected": sum(r.rejected for r in results), "duplicate": sum(r.duplicate for r in results),
            "failed_batches": sum(r.status == "failed" for r in results)}


def _report(rec: JobRecord, summary: dict) -> None:
    rec.counts = {"status": summary["status"], "run_id": summary["run_id"], "events": len(summary["events"])}
    if summary["status"] == "failed":
        rec.fail(summary["message"] or "the cycle failed")


def _out_of_season(wb, analysis: dt.datetime) -> dict:
    """The summary of a water body whose monitoring season does not hold ``analysis``: no cycle, no run."""
    return {"water_body": wb.id, "analysis_utc": analysis.isoformat(), "status": "out_of_season",
            "message": f"outside the monitoring season ({wb.season_text()}): no cycle", "run_id": None,
            "events": []}


def _failed(water_body_id: str, analysis: dt.datetime, step: str, exc: Exception) -> dict:
    """The summary of a water body whose ``step`` raised; logged with its traceback."""
    log.error("cycle of %s at %s failed in %s", water_body_id, analysis.isoformat(), step, exc_info=exc,
              extra={"event": "cycle.failed", "job": "cycle", "water_body": water_body_id, "step": step})
    return {"water_body": water_body_id, "analysis_utc": analysis.isoformat(), "status": "failed",
            "message": f"{step} failed: {type(exc).__name__}: {exc}", "run_id": None, "events": []}
