"""The ``bloomline hindcast`` command."""

from __future__ import annotations

import contextlib
import datetime as dt
import json
import sys

import click

from monitor.config import ConfigError, load_config


def _date(value: str | None, name: str) -> dt.date | None:
    if value is None:
        return None
    try:
        return dt.date.fromisoformat(value)
    except ValueError:
        raise click.BadParameter(f"expected a date as YYYY-MM-DD, got {value!r}", param_hint=name) from None


@click.command("hindcast")
@click.option("--config", "config_path", envvar="BLOOMLINE_CONFIG", required=True,
              type=click.Path(dir_okay=False), help="Bloomline TOML file (or $BLOOMLINE_CONFIG).")
@click.option("--water-body", "water_bodies", multiple=True, help="Only this water body (repeatable).")
@click.option("--from", "first", help="First analysis day, YYYY-MM-DD (default: the day after the first reading).")
@click.option("--to", "last", help="Last analysis day, YYYY-MM-DD (default: the day after the last reading).")
@click.option("--json", "as_json", is_flag=True, help="Print the scores as one JSON object.")
@click.option("--out", "out_csv", type=click.Path(dir_okay=False), help="Write every forecast-observation pair here (CSV).")
def hindcast(config_path, water_bodies, first, last, as_json, out_csv) -> None:
    """Replay the stored history day by day as if live, and score every forecast.

    Each daily forecast sees only the readings stamped at or before its issue
    time; the live store is not modified. Scores are given beside those of
    persistence, a persistence ensemble, day-of-year climatology and an
    autoregressive model, on the same days.
    """
    from monitor.store.db import open_store
    from monitor.verification import report
    from monitor.verification.hindcast import default_days, run_hindcast

    try:
        config = load_config(config_path)
    except ConfigError as exc:
        raise click.ClickException(f"configuration error: {exc}") from None
    known = {wb.id for wb in config.water_bodies}
    unknown = [w for w in water_bodies if w not in known]
    if unknown:
        raise click.BadParameter(f"unknown water body {unknown[0]!r}; known: {', '.join(sorted(known))}",
                                 param_hint="--water-body")
    only = list(water_bodies) or None
    engine = open_store(config.service.database_url)
    cycle_at = dt.time.fromisoformat(config.schedule.cycle_at_utc)
    days = default_days(engine, config, only, cycle_at, _date(first, "--from"), _date(last, "--to"))
    if not days:
        raise click.ClickException("the store holds no basin readings to replay (ingest the feeds first)")
    n_bodies = len(only or known)
    quiet = as_json or not sys.stderr.isatty()
    bar_context = (contextlib.nullcontext(None) if quiet else
                   click.progressbar(length=len(days) * (1 + n_bodies), label="Replaying and scoring", file=sys.stderr))
    with bar_context as bar:
        result = run_hindcast(config, engine, days, only=only,
                              progress=(lambda stage, n: bar.update(n)) if bar is not None else None)
    levels = {wb.id: tuple(lv.chlorophyll_ugL for lv in wb.alerts.levels) for wb in config.water_bodies}
    if out_csv:
        report.pair_rows(result, levels).to_csv(out_csv, index=False, float_format="%.6g")
    if as_json:
        click.echo(json.dumps(report.summary(result)))
        return
    click.echo(f"Hindcast of {len(days)} days ({days[0]:%Y-%m-%d} to {days[-1]:%Y-%m-%d}), "
               f"{len(result.pairs.meta)} forecast-observation pairs, {result.seconds:.0f} s.")
    click.echo("CRPS [µg/L] by lead day (lower is better); skill = 1 − CRPS/CRPS of the persistence ensemble:")
    click.echo(report.headline(result).to_string())
    if len(result.warnings):
        w = result.warnings.pivot_table(index=["water_body", "basin_id", "level", "crossing_utc"],
                                        columns="forecaster", values="lead_days")
        click.echo("Warning lead [days] before each first crossing of a level:")
        click.echo(w.to_string())
    if out_csv:
        click.echo(f"Pairs written to {out_csv}.")
