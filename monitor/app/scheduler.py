"""The long-running service: APScheduler jobs for ingest, the daily cycle and the outbox.

Each job catches and logs its own errors, so one bad run never stops the
schedule; the next run picks up where it left off (ingest is idempotent,
the cycle resumes from the newest checkpoint, unsent mail stays in the
outbox).
"""

from __future__ import annotations

import logging
import threading

from apscheduler.schedulers.blocking import BlockingScheduler
from apscheduler.triggers.cron import CronTrigger
from apscheduler.triggers.interval import IntervalTrigger

from monitor.app.service import Service
from monitor.config import Config

log = logging.getLogger("bloomline")


def _guarded(name: str, job):
    def run():
        try:
            job()
        except Exception:  # a job's failure is logged, the schedule goes on
            log.exception("job %s failed; it runs again at its next time", name)
    run.__name__ = name
    return run


def build_scheduler(service: Service, scheduler=None):
    """Add Bloomline's three jobs to ``scheduler`` (default a BlockingScheduler in UTC)."""
    cfg = service.config.schedule
    scheduler = scheduler or BlockingScheduler(timezone="UTC")
    hour, minute = (int(x) for x in cfg.cycle_at_utc.split(":"))

    def ingest():
        results = service.poll_feeds()
        if results:
            log.info("ingested %d batch(es): %d readings accepted, %d rejected", len(results),
                     sum(r.accepted for r in results), sum(r.rejected for r in results))

    def daily_cycle():
        for summary in service.run_cycles(service.clock().replace(minute=minute, second=0, microsecond=0)):
            log.info("cycle %s %s: %s %s", summary["water_body"], summary["analysis_utc"],
                     summary["status"], summary["message"])

    def send():
        service.send_mail()

    scheduler.add_job(_guarded("ingest", ingest), IntervalTrigger(minutes=cfg.ingest_every_minutes),
                      id="ingest", max_instances=1, coalesce=True)
    scheduler.add_job(_guarded("cycle", daily_cycle), CronTrigger(hour=hour, minute=minute, timezone="UTC"),
                      id="cycle", max_instances=1, coalesce=True)
    scheduler.add_job(_guarded("send", send), IntervalTrigger(minutes=cfg.send_every_minutes),
                      id="send", max_instances=1, coalesce=True)
    return scheduler


def run_service(config: Config, *, with_web: bool = True) -> None:
    """Run the schedule until interrupted (and the web app in a thread, if asked)."""
    logging.basicConfig(level=logging.INFO, format="%(asctime)s %(levelname)s %(message)s")
    service = Service(config)
    if with_web:
        from web import create_app
        from web.serving import serve

        app = create_app(config)
        thread = threading.Thread(target=lambda: serve(app, config.service.host, config.service.port), daemon=True)
        thread.start()
        log.info("status page on http://%s:%d/", config.service.host, config.service.port)
    scheduler = build_scheduler(service)
    subscriptions = service.start_subscriptions()
    try:
        scheduler.start()
    except (KeyboardInterrupt, SystemExit):
        pass
    finally:
        for sub in subscriptions:
            sub.stop()
        service.close()
