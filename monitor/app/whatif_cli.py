"""The ``bloomline what-if`` command: try an action on today's analysis without writing anything."""

from __future__ import annotations

import json
from pathlib import Path

import click

from monitor.config import ConfigError, load_config
from monitor.timeutil import now_utc, parse_utc

ACTION_HELP = """An action (repeatable; combine several), as KIND key=value …:

\b
  release  basin=ID flow_m3s=Q from_day=K days=N
           Q m³/s more through a basin from forecast day K for N days,
           made up by the inflows that feed it.
  transfer basin=ID flow_m3s=Q from_day=K days=N nitrogen_ugL=C phosphorus_ugL=C [temperature_C=T]
           Water brought from elsewhere, with its nutrients (and temperature).
  load     inflow=ID from_day=K [nitrogen_pct=X] [phosphorus_pct=Y]
           An inflow's nutrient concentrations changed by X and Y % from day K on.
  intake   basin=ID
           Draw drinking water from another basin.

Day 1 is the 24 hours after the analysis."""


@click.command("what-if", epilog=ACTION_HELP)
@click.option("--config", "config_path", envvar="BLOOMLINE_CONFIG", required=True,
              type=click.Path(dir_okay=False), help="Bloomline TOML file (or $BLOOMLINE_CONFIG).")
@click.option("--water-body", "water_body", required=True, help="The water body's id.")
@click.option("--action", "actions", multiple=True, required=True, metavar="'KIND key=value …'",
              help="An action; see below. Repeat for several.")
@click.option("--horizon", "horizon", type=int, default=None,
              help="Days to run (1–14; default the water body's alert horizon).")
@click.option("--members", "members", type=int, default=None, help="Ensemble members (default all, at most 100).")
@click.option("--at", "at", help="Use the newest analysis at or before this time (ISO 8601, UTC if no offset); "
                                 "default now.")
@click.option("--json", "as_json", is_flag=True, help="Print the scenario as one JSON object.")
def what_if(config_path, water_body, actions, horizon, members, at, as_json) -> None:
    """Run the process model's ensemble from the latest analysis with and without ACTIONS.

    A what-if is a model experiment for comparing options: not a forecast, not
    advice and never a safety clearance. It changes nothing in the store.
    """
    from monitor.scenarios.request import RequestError, parse_action_text, parse_request
    from monitor.scenarios.run import NoAnalysis, run_what_if
    from monitor.scenarios.skill import recent_skill
    from monitor.store.db import open_store

    try:
        config = load_config(config_path)
    except ConfigError as exc:
        raise click.ClickException(f"configuration error: {exc}") from None
    try:
        wb = config.water_body(water_body)
    except KeyError:
        raise click.ClickException(f"no water body {water_body!r}; water bodies: "
                                   f"{', '.join(w.id for w in config.water_bodies)}") from None
    try:
        when = now_utc() if at is None else parse_utc(at)
    except ValueError as exc:
        raise click.BadParameter(str(exc), param_hint="--at") from None
    try:
        request = parse_request({"actions": [parse_action_text(a) for a in actions], "horizon_days": horizon,
                                 "members": members}, wb)
    except RequestError as exc:
        raise click.ClickException(str(exc)) from None
    url = config.service.database_url
    if url.startswith("sqlite:///") and url != "sqlite:///:memory:" and not Path(url[len("sqlite:///"):]).exists():
        raise click.ClickException(f"no store at {url[len('sqlite:///'):]}: a what-if starts from the latest "
                                   f"analysis, so run the service or `bloomline cycle` first")
    engine = open_store(url)
    try:
        result = run_what_if(engine, config, wb, request, now=when)
        result["skill"] = recent_skill(engine, config, wb, now=when)
    except NoAnalysis as exc:
        raise click.ClickException(str(exc)) from None
    finally:
        engine.dispose()
    if as_json:
        click.echo(json.dumps(result))
        return
    click.echo(format_text(result))


def _pct(p) -> str:
    if p is None:
        return "—"
    if 0 < p < 0.005:
        return "<1%"
    return f"{100 * p:.0f}%"


def format_text(r: dict) -> str:
    """The scenario for a terminal: notice, actions, water and loads, per basin the median and the chance of
    each level without and with the action, the drinking-water outlook, the model's recent skill, caution."""
    lines = [r["notice"], r["model"], "",
             f"{r['water_body']['name']}: from the analysis of {r['analysis_utc']}, {r['horizon_days']} days, "
             f"{r['members']} members.", "Actions:"]
    lines += [f"  - {a['description']}" for a in r["actions"]]
    b = r["budget"]
    lines.append(f"Water moved: {b['water_m3']:,.0f} m³; external load change: {b['nitrogen_kg']:+,.1f} kg N, "
                 f"{b['phosphorus_kg']:+,.1f} kg P.")
    levels = r["levels"]
    for basin in r["basins"]:
        lines += ["", f"{basin['name']} — cyanobacterial chlorophyll-a [µg/L], median without → with, "
                      f"paired difference median (5–95 %), chance of each level without → with"]
        head = "  day   without     with   difference (5–95 %)       " + "  ".join(
            f"{lv['name']:>22}" for lv in levels)
        lines.append(head)
        for q, lv in zip(basin["quantities"]["cyanobacteria_chlorophyll"][1:], basin["levels"][1:]):
            d = q["difference"]
            probs = "  ".join(f"{_pct(lv['without'][str(n['number'])]):>10} → {_pct(lv['with'][str(n['number'])]):<9}"
                              for n in levels)
            lines.append(f"  {q['day']:>3} {q['without']['q50']:>9.2f} {q['with']['q50']:>8.2f}   "
                         f"{d['q50']:>+8.2f} ({d['q05']:+.2f} to {d['q95']:+.2f})   {probs}")
    if "drinking_water" in r:
        dw = r["drinking_water"]
        p0, p1 = dw["p_max_within_horizon"]["without"], dw["p_max_within_horizon"]["with"]
        lines += ["", f"Drinking-water intake: {dw['intake_basin']} now, {dw['intake_basin_with']} in the scenario; "
                      "chance of reaching each level within the horizon: "
                  + "; ".join(f"{lv['name']} {_pct(p0[str(lv['number'])])} → {_pct(p1[str(lv['number'])])}"
                              for lv in levels)]
    s = r.get("skill")
    if s:
        lines += ["", s["message"]]
        if s["available"]:
            lines.append("  " + ", ".join(f"day {x['lead_days']}: "
                                          f"{'—' if x['crps_skill'] is None else format(x['crps_skill'], '+.2f')}"
                                          for x in s["by_lead"]) + f"  ({s['measure']})")
    lines += ["", r["caution"]]
    return "\n".join(lines)
