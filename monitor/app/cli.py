"""The ``bloomline`` command."""

from __future__ import annotations

import datetime as dt
import json
import sys
from pathlib import Path

import click

from monitor.app.hindcast_cli import hindcast
from monitor.app.ingest_cli import ingest
from monitor.app.ops_cli import backup, health, outbox, prune
from monitor.app.whatif_cli import what_if
from monitor.config import ConfigError, load_config
from monitor.timeutil import now_utc, parse_utc


def _load(path: str):
    try:
        return load_config(path)
    except ConfigError as exc:
        raise click.ClickException(f"configuration error: {exc}") from None


class IsoTime(click.ParamType):
    """An ISO 8601 date or date and time; without an offset it is UTC."""

    name = "ISO-8601"

    def convert(self, value, param, ctx):
        if isinstance(value, dt.datetime):
            return value
        try:
            return parse_utc(str(value).strip())
        except ValueError:
            self.fail(f"expected an ISO 8601 date or time such as 2026-08-20 or 2026-08-20T06:00Z, "
                      f"got {value!r}", param, ctx)


def _check_water_bodies(config, ids: tuple[str, ...]) -> None:
    """Refuse unknown water body ids with the known ones."""
    known = [wb.id for wb in config.water_bodies]
    unknown = [w for w in ids if w not in known]
    if unknown:
        raise click.BadParameter(f"unknown water body {unknown[0]!r}; expected one of {', '.join(known)}",
                                 param_hint="'--water-body'")


config_option = click.option("--config", "config_path", envvar="BLOOMLINE_CONFIG", required=True,
                             type=click.Path(dir_okay=False), help="Bloomline TOML file (or $BLOOMLINE_CONFIG).")


@click.group(context_settings={"help_option_names": ["-h", "--help"]})
@click.version_option(package_name="bloomline")
def main() -> None:
    """Bloomline: early warning of harmful algal blooms.

    Ingests sensor, lab, inflow and weather readings, quality-controls them,
    assimilates them into a nutrient–phytoplankton model with an ensemble
    Kalman filter and forecasts the probability of reaching each alert level.
    Forecasts are estimates: the advisories of the local water-quality and
    public-health authorities prevail.
    """


@main.command("check-config")
@click.argument("file", type=click.Path(dir_okay=False))
def check_config(file: str) -> None:
    """Validate a configuration FILE and summarise it."""
    cfg = _load(file)
    click.echo(f"{file}: ok")
    for wb in cfg.water_bodies:
        levels = ", ".join(f"{lv.name} {lv.chlorophyll_ugL:g} µg/L" for lv in wb.alerts.levels)
        click.echo(f"  {wb.id} ({wb.use}): {len(wb.basins)} basin(s), {len(wb.inflows)} inflow(s); "
                   f"framework {wb.alerts.framework}: {levels}")
    click.echo(f"  {len(cfg.stations)} station(s), {len(cfg.feeds)} feed(s), {len(cfg.subscribers)} subscriber(s)")


@main.command()
@config_option
def upgrade(config_path: str) -> None:
    """Create or migrate the database to the current schema."""
    from monitor.store.db import open_store

    cfg = _load(config_path)
    open_store(cfg.service.database_url)
    click.echo(f"database at {cfg.service.database_url} is up to date")


@main.command()
@config_option
@click.option("--at", "at", type=IsoTime(), help="Analysis time (ISO 8601, UTC if no offset); default now.")
@click.option("--water-body", "water_body", multiple=True, help="Only these water bodies (repeatable).")
def cycle(config_path: str, at: dt.datetime | None, water_body: tuple[str, ...]) -> None:
    """Run one assimilation and forecast cycle now (or --at a time)."""
    from monitor.app.service import Service

    config = _load(config_path)
    _check_water_bodies(config, water_body)
    svc = Service(config)
    for summary in svc.run_cycles(at or now_utc(), only=water_body or None):
        events = ", ".join(f"{e['basin_id']}: level {e['from_level']}→{e['to_level']}" for e in summary["events"])
        click.echo(f"{summary['water_body']} {summary['analysis_utc']}: {summary['status']}"
                   f"{' — ' + summary['message'] if summary['message'] else ''}{'; ' + events if events else ''}")


@main.command()
@config_option
def send(config_path: str) -> None:
    """Send the emails and webhook calls waiting in the outbox (failed ones are retried later)."""
    import dataclasses

    from monitor.app.service import Service

    svc = Service(_load(config_path))
    result = {"email": dataclasses.asdict(svc.send_mail()), "webhooks": dataclasses.asdict(svc.send_webhooks())}
    svc.close()
    click.echo(json.dumps(result, default=str))


@main.command()
@config_option
@click.option("--host", default=None, help="Address to listen on (default from the config).")
@click.option("--port", default=None, type=int, help="Port (default from the config).")
def serve(config_path: str, host: str | None, port: int | None) -> None:
    """Serve the status page, API and subscription forms."""
    from web import create_app
    from web.serving import serve as serve_app

    cfg = _load(config_path)
    app = create_app(cfg)
    host = host or cfg.service.host
    port = port or cfg.service.port
    click.echo(f"Bloomline status page: http://{host}:{port}/")
    serve_app(app, host, port)


@main.command()
@config_option
@click.option("--with-web/--no-web", default=True, help="Serve the web app in the same process.")
@click.option("--log-format", type=click.Choice(["json", "text"]), default="json", show_default=True,
              help="Logs on stderr: one JSON object per line, or plain text.")
@click.option("--clock-start", type=IsoTime(), default=None, hidden=True,
              help="Rehearsal: the service time at --clock-anchor (default: the wall clock).")
@click.option("--clock-speed", type=click.FloatRange(min=0, min_open=True), default=1.0, hidden=True,
              help="Rehearsal: service seconds per wall-clock second.")
@click.option("--clock-anchor", type=float, default=None, hidden=True,
              help="Rehearsal: the Unix time [s] at which the service time is --clock-start (default: now).")
def run(config_path: str, with_web: bool, log_format: str, clock_start: dt.datetime | None, clock_speed: float,
        clock_anchor: float | None) -> None:
    """Run the service: scheduled ingest, daily cycles, emails and webhooks (and the web app).

    Several processes may run against one database: one acts, the others
    take over within [schedule] lease_seconds when it stops. SIGTERM or
    SIGINT finish the current work and stop.
    """
    from monitor.app.clock import ServiceClock
    from monitor.app.scheduler import run_service

    clock = ServiceClock(clock_start, speed=clock_speed, anchor=clock_anchor)
    run_service(_load(config_path), with_web=with_web, clock=clock, json_logs=log_format == "json")


@main.command()
@click.option("--workdir", default="bloomline-demo", show_default=True, type=click.Path(file_okay=False),
              help="Folder for the demo's config, database, archive and mailbox.")
@click.option("--serve/--no-serve", "serve_", default=True, help="Serve the status page after the summary.")
@click.option("--json", "as_json", is_flag=True, help="Print the summary as one JSON object.")
@click.option("--port", default=8050, show_default=True, type=int, help="Port of the status page.")
@click.option("--feeds", default=None, type=click.Path(file_okay=False, exists=True),
              help="The scenario folder (default: the sample_feeds/ folder of this checkout).")
def demo(workdir: str, serve_: bool, as_json: bool, port: int, feeds: str | None) -> None:
    """Run the invented demo season end to end and show the status page."""
    from monitor.app.demo import run_demo

    summary, cfg = run_demo(Path(workdir), feeds=Path(feeds) if feeds else None, quiet=as_json, port=port)
    if as_json:
        click.echo(json.dumps(summary, default=str))
    if serve_:
        from web import create_app
        from web.serving import serve as serve_app

        # the pages show the season as it stood at its end (the simulated clock), not as a stale past
        season_end = parse_utc(summary["season"]["last_analysis_utc"]) + dt.timedelta(hours=1)
        app = create_app(cfg, clock=lambda: season_end)
        click.echo(f"Bloomline status page: http://127.0.0.1:{port}/  (Ctrl+C to stop)", err=as_json)
        serve_app(app, "127.0.0.1", port)


main.add_command(ingest)
main.add_command(hindcast)
main.add_command(what_if)
main.add_command(health)
main.add_command(outbox)
main.add_command(prune)
main.add_command(backup)

if __name__ == "__main__":  # pragma: no cover
    sys.exit(main())
