"""The service-wide tables: ``[service]``, ``[schedule]``, ``[smtp]``, ``[filter]``,
``[observation_errors]`` and ``[[subscribers]]``."""

from __future__ import annotations

import re
from pathlib import Path

from monitor.config.model_setup import filter_option_kinds
from monitor.config.models import (
    CATCH_UP,
    DEFAULT_OBSERVATION_ERRORS,
    WEBHOOK_EVENTS,
    FilterSettings,
    ObservationErrorConfig,
    ScheduleConfig,
    ServiceConfig,
    SmtpConfig,
    SubscriberConfig,
    WebhookConfig,
)
from monitor.config.reader import Reader, database_url, resolve, secret

#: Keys of ``[filter]`` that Bloomline reads itself; any other key must be an
#: option of ``assimilation``'s FilterConfig (see :func:`model_setup.filter_option_kinds`).
FILTER_SETTINGS_KEYS = ("members", "method", "seed", "window_days", "assimilate_suspect", "spin_up_cycles",
                        "late_window_days", "published", "cold_start_gap_days")


def read_service(s: Reader, base: Path) -> ServiceConfig:
    """``[service]``; relative paths and SQLite files are taken against ``base``, the config's folder."""
    mailbox = s.get("mailbox_dir", str, None)
    service = ServiceConfig(
        database_url=database_url(base, s.get("database", str, "sqlite:///bloomline.sqlite")),
        archive_dir=resolve(base, s.get("archive_dir", str, "archive")),
        mailbox_dir=resolve(base, mailbox) if mailbox else None,
        base_url=s.get("base_url", str, "http://127.0.0.1:8050"),
        host=s.get("host", str, "127.0.0.1"), port=s.get("port", int, 8050),
        dask_scheduler=s.get("dask_scheduler", str, None))
    s.finish()
    return service


def read_schedule(sc: Reader) -> ScheduleConfig:
    """``[schedule]``: daily cycle time (HH:MM UTC), the ingest and send intervals [min], the
    scheduler lease [s], the daily cycle's misfire grace [min] and the catch-up after downtime."""
    schedule = ScheduleConfig(cycle_at_utc=sc.get("cycle_at_utc", str, "06:00"),
                              ingest_every_minutes=sc.positive("ingest_every_minutes", 15.0),
                              send_every_minutes=sc.positive("send_every_minutes", 1.0),
                              lease_seconds=sc.positive("lease_seconds", 30.0),
                              misfire_grace_minutes=sc.positive("misfire_grace_minutes", 60.0),
                              catch_up=sc.choice("catch_up", CATCH_UP, "latest"))
    hh, _, mm = schedule.cycle_at_utc.partition(":")
    if not (hh.isdigit() and mm.isdigit() and int(hh) < 24 and int(mm) < 60):
        raise sc.error("cycle_at_utc", f"expected HH:MM, got {schedule.cycle_at_utc!r}")
    sc.finish()
    return schedule


def read_smtp(sm: Reader, base: Path | None = None) -> SmtpConfig:
    """``[smtp]``; the password may come from an environment variable (``password_env``)."""
    smtp = SmtpConfig(host=sm.get("host", str, "127.0.0.1"), port=sm.get("port", int, 25),
                      sender=sm.get("sender", str, "bloomline@localhost"),
                      username=sm.get("username", str, None), password=secret(sm, "password"),
                      starttls=sm.get("starttls", bool, False), timeout_s=sm.positive("timeout_s", 10.0),
                      ca_file=_ca_file(sm, base))
    sm.finish()
    return smtp


def _ca_file(sm: Reader, base: Path | None) -> Path | None:
    value = sm.get("ca_file", str, None)
    if value is None:
        return None
    path = resolve(base or Path.cwd(), value)
    if not path.is_file():
        raise sm.error("ca_file", f"no such file: {path}")
    return path


#: A webhook's name: it is part of idempotency keys and Message-IDs, so letters, digits, '-' and '_'.
_WEBHOOK_NAME = re.compile(r"^[A-Za-z0-9_-]{1,64}$")
#: Shortest secret accepted for HMAC-SHA256 signing [characters] (common practice: at least 128 bits).
MIN_SECRET_LENGTH = 16


def read_webhook(wh: Reader) -> WebhookConfig:
    """One ``[[webhooks]]`` table: name, url, secret (or secret_env), water_bodies, events,
    min_level, timeout_s [s]. Its water bodies are checked by the loader."""
    name = wh.get("name", str)
    if not _WEBHOOK_NAME.match(name):
        raise wh.error("name", f"expected 1–64 letters, digits, '-' or '_', got {name!r}")
    url = wh.get("url", str)
    if not url.startswith(("http://", "https://")):
        raise wh.error("url", f"expected an http:// or https:// URL, got {url!r}")
    secret_value = secret(wh, "secret")
    if not secret_value or len(secret_value) < MIN_SECRET_LENGTH:
        raise wh.error("secret", f"a signing secret of at least {MIN_SECRET_LENGTH} characters is required "
                                 "(secret, or secret_env naming an environment variable)")
    events = tuple(wh.get("events", list, list(WEBHOOK_EVENTS)))
    for e in events:
        if e not in WEBHOOK_EVENTS:
            raise wh.error("events", f"expected a list of {', '.join(WEBHOOK_EVENTS)}; got {e!r}")
    webhook = WebhookConfig(name=name, url=url, secret=secret_value,
                            water_bodies=tuple(wh.get("water_bodies", list, [])), events=events,
                            min_level=wh.get("min_level", int, 1), timeout_s=wh.positive("timeout_s", 10.0))
    wh.finish()
    return webhook


def read_filter(fr: Reader) -> FilterSettings:
    """``[filter]``: Bloomline's own keys, and FilterConfig options typed as FilterConfig declares them.

    The values' ranges are checked by building the FilterConfig
    (:func:`monitor.config.model_setup.check_filter_config`).
    """
    kinds = filter_option_kinds()
    options = {}
    for key in list(fr.table):
        if key in FILTER_SETTINGS_KEYS:
            continue
        if key not in kinds:
            raise fr.error(key, f"unknown key; expected one of {', '.join((*FILTER_SETTINGS_KEYS, *kinds))}")
        options[key] = fr.get(key, kinds[key])
    filt = FilterSettings(members=fr.get("members", int, 60), method=fr.get("method", str, "sqrt"),
                          seed=fr.get("seed", int, 20260501), window_days=fr.positive("window_days", 1.0),
                          assimilate_suspect=fr.get("assimilate_suspect", bool, False),
                          spin_up_cycles=fr.get("spin_up_cycles", int, 7),
                          late_window_days=fr.positive("late_window_days", 14.0),
                          cold_start_gap_days=fr.positive("cold_start_gap_days", 30.0),
                          published=fr.choice("published", ("process_model", "blend"), "blend"),
                          options=options)
    if filt.spin_up_cycles < 0:
        raise fr.error("spin_up_cycles", f"expected 0 or more, got {filt.spin_up_cycles}")
    if filt.members < 3:
        raise fr.error("members", f"expected at least 3 ensemble members, got {filt.members}")
    fr.finish()
    return filt


def read_observation_errors(er: Reader) -> dict[str, ObservationErrorConfig]:
    """``[observation_errors.<variable>]``: fraction [-] and floor [µg/L] over the defaults."""
    errors = dict(DEFAULT_OBSERVATION_ERRORS)
    for variable in list(er.table):
        if variable not in DEFAULT_OBSERVATION_ERRORS:
            raise er.error(variable, f"expected one of {', '.join(DEFAULT_OBSERVATION_ERRORS)}")
        v = er.sub(variable)
        errors[variable] = ObservationErrorConfig(fraction=v.get("fraction", float), floor=v.positive("floor"))
        v.finish()
    er.finish()
    return errors


def read_subscriber(sub: Reader) -> SubscriberConfig:
    """One ``[[subscribers]]`` table (its water bodies are checked by the loader)."""
    subscriber = SubscriberConfig(name=sub.get("name", str), email=sub.get("email", str),
                                  water_bodies=tuple(sub.get("water_bodies", list)),
                                  min_level=sub.get("min_level", int, 1))
    sub.finish()
    return subscriber
