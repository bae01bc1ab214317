"""The long-running service: one acting scheduler, APScheduler jobs, clean stops.

:func:`run_service` waits for the scheduler lease (:mod:`monitor.app.lease`);
while it holds it, APScheduler runs the jobs of :func:`build_scheduler`:

* ``ingest`` every ``ingest_every_minutes``: new drop-folder files, due HTTP pulls;
* ``cycle`` daily at ``cycle_at_utc`` (with ``misfire_grace_minutes``), and once
  at once on taking the lease: every due cycle, one catch-up cycle per water
  body after downtime (:meth:`Service.run_due_cycles`);
* ``send`` and ``webhooks`` every ``send_every_minutes``: the outbox.

Each job catches and logs its own errors, so one bad run never stops the
schedule; the next run picks up where it left off (ingest is idempotent,
the cycle resumes from the newest checkpoint, unsent messages stay in the
outbox). SIGTERM and SIGINT both let the running jobs finish their current
unit of work (a water body's cycle, a file, a message), release the lease
and end the process. Times run on the service clock (:mod:`monitor.app.clock`).
"""

from __future__ import annotations

import datetime as dt
import logging
import signal
import threading

from apscheduler.schedulers.background import BackgroundScheduler
from apscheduler.triggers.cron import CronTrigger
from apscheduler.triggers.interval import IntervalTrigger

from monitor.app.clock import ClockTrigger, ServiceClock
from monitor.app.lease import SchedulerLease
from monitor.app.logs import setup_logging
from monitor.app.service import Service
from monitor.config import Config
from monitor.store.jobs import interrupt_unfinished
from monitor.store.lease import LeaseLost
from monitor.timeutil import UTC

log = logging.getLogger("bloomline")
JOBS = ("ingest", "cycle", "send", "webhooks")


def _guarded(name: str, job):
    def run():
        try:
            job()
        except LeaseLost as exc:
            log.warning("job %s stopped: %s", name, exc, extra={"event": "lease.lost", "job": name})
        except Exception:  # a job's failure is logged, the schedule goes on
            log.exception("job %s failed; it runs again at its next time", name,
                          extra={"event": "job.error", "job": name})
    run.__name__ = name
    return run


def build_scheduler(service: Service, scheduler=None, *, clock: ServiceClock | None = None,
                    catch_up_now: bool = False):
    """Add Bloomline's jobs to ``scheduler`` (default a BackgroundScheduler in UTC).

    Triggers run in ``clock``'s service time (default the wall clock);
    ``catch_up_now`` runs the cycle job once at once as well.
    """
    clock = clock or ServiceClock()
    cfg = service.config.schedule
    scheduler = scheduler or BackgroundScheduler(timezone="UTC")
    hour, minute = (int(x) for x in cfg.cycle_at_utc.split(":"))

    def every(minutes: float) -> ClockTrigger:
        return ClockTrigger(clock, IntervalTrigger(minutes=minutes, start_date=clock(), timezone="UTC"))

    grace_s = max(1, round(clock.wall_seconds(cfg.misfire_grace_minutes * 60)))
    scheduler.add_job(_guarded("ingest", lambda: service.poll_feeds()), every(cfg.ingest_every_minutes), id="ingest",
                      name="ingest", max_instances=1, coalesce=True, misfire_grace_time=None)
    scheduler.add_job(_guarded("cycle", lambda: service.run_due_cycles()),
                      ClockTrigger(clock, CronTrigger(hour=hour, minute=minute, timezone="UTC")), id="cycle",
                      name="cycle", max_instances=1, coalesce=True, misfire_grace_time=grace_s,
                      **({"next_run_time": dt.datetime.now(UTC)} if catch_up_now else {}))
    scheduler.add_job(_guarded("send", lambda: service.send_mail()), every(cfg.send_every_minutes), id="send",
                      name="send", max_instances=1, coalesce=True, misfire_grace_time=None)
    scheduler.add_job(_guarded("webhooks", lambda: service.send_webhooks()), every(cfg.send_every_minutes), id="webhooks",
                      name="webhooks", max_instances=1, coalesce=True, misfire_grace_time=None)
    return scheduler


def _lead(service: Service, lease: SchedulerLease, clock: ServiceClock, stop: threading.Event) -> None:
    """Act as the scheduler until ``stop`` is set or the lease is lost."""
    heartbeat_s = lease.seconds / 3
    service.stopping = threading.Event()
    if stop.is_set():
        service.stopping.set()
    service.guard = lease.guard
    gone = interrupt_unfinished(service.engine, owner=service.owner, now=service.clock())
    log.info("acting scheduler (term %d)", lease.term,
             extra={"event": "lease.acquired", "holder": lease.holder, "term": lease.term,
                    "interrupted_job_runs": gone})
    scheduler = build_scheduler(service, BackgroundScheduler(timezone="UTC"), clock=clock, catch_up_now=True)
    scheduler.start()
    for job in scheduler.get_jobs():
        log.info("job %s scheduled: %s", job.id, job.trigger,
                 extra={"event": "job.scheduled", "job": job.id, "next_run_utc": job.next_run_time})
    feeds = []
    try:
        feeds = service.start_subscriptions()
        while not stop.wait(heartbeat_s):
            if not lease.renew():
                log.error("scheduler lease lost: stopping the jobs", extra={"event": "lease.lost"})
                break
        if stop.is_set():
            log.info("%s received: finishing the current work and stopping", getattr(service, "stop_signal", "stop"),
                     extra={"event": "service.stopping"})
    finally:
        service.stopping.set()
        scheduler.shutdown(wait=True)  # the running jobs finish their current unit of work
        for sub in feeds:
            sub.stop()
        service.guard = None
        lease.release()
        log.info("scheduler lease released", extra={"event": "lease.released"})


def _on_signals(stop: threading.Event, service: Service) -> None:
    """SIGTERM and SIGINT set ``stop`` and the service's stopping flag (no logging inside the handler:
    the interrupted thread may hold the logging lock)."""
    def handler(signum, _frame):
        service.stop_signal = signal.Signals(signum).name
        stop.set()
        service.stopping.set()

    try:
        signal.signal(signal.SIGTERM, handler)
        signal.signal(signal.SIGINT, handler)
    except ValueError:  # not the main thread (tests): the caller sets ``stop`` itself
        pass


def run_service(config: Config, *, with_web: bool = True, clock: ServiceClock | None = None,
                stop: threading.Event | None = None, json_logs: bool = True) -> None:
    """Run the schedule until SIGTERM or SIGINT (or ``stop``), with the web app in a thread if asked.

    Several processes may run this against one database: one acts, the
    others wait and take over within ``[schedule] lease_seconds`` of its end.
    """
    setup_logging(json_lines=json_logs)
    clock = clock or ServiceClock()
    stop = stop or threading.Event()
    service = Service(config, clock=clock)
    _on_signals(stop, service)
    if with_web:
        from web import create_app
        from web.serving import serve

        app = create_app(config)
        thread = threading.Thread(target=lambda: serve(app, config.service.host, config.service.port), daemon=True)
        thread.start()
        log.info("status page on http://%s:%d/", config.service.host, config.service.port,
                 extra={"event": "web.started"})
    lease = SchedulerLease(service.engine, holder=service.owner, seconds=config.schedule.lease_seconds)
    log.info("service started", extra={"event": "service.started", "holder": service.owner,
                                       "service_time_utc": clock().isoformat()})
    waiting = False
    try:
        while not stop.is_set():
            if lease.acquire():
                waiting = False
                _lead(service, lease, clock, stop)
            else:
                if not waiting:
                    log.info("another scheduler acts: waiting to take over", extra={"event": "lease.waiting"})
                    waiting = True
                stop.wait(lease.seconds / 3)
    finally:
        lease.close()
        service.close()
        log.info("service stopped", extra={"event": "service.stopped"})
