"""The verification page and API: each water body's forecast record beside the baselines'.

Views read the live record through :mod:`monitor.verification.live` and
:mod:`monitor.verification.reliability`; charts are drawn by
:mod:`web.verification_plots`.
"""

from __future__ import annotations

import datetime as dt
import io

import pandas as pd
from flask import Blueprint, Response, abort, jsonify, render_template, request

from monitor.alerting.caution import CAUTION
from monitor.verification.live import latest_blend, record_summary
from monitor.verification.reliability import alert_quantity, history, reliability
from monitor.verification.report import records
from web import get_engine, water_body_or_404
from web import verification_plots as plots
from web.formatting import zone

verification = Blueprint("verification", __name__)

#: The endpoint's description for the OpenAPI document (paths item).
OPENAPI_PATH = {
    "/api/v1/water-bodies/{water_body_id}/verification": {"get": {
        "summary": "The forecast record: Bloomline's scores by lead day beside the baselines'",
        "description": "Scores of every issued forecast against the readings that came later, by lead day, with "
                       "CRPS skill against persistence, a persistence ensemble, climatology and an autoregression, "
                       "the rank histogram and reliability per alert level. " + CAUTION,
        "parameters": [
            {"name": "water_body_id", "in": "path", "required": True, "schema": {"type": "string"}},
            {"name": "since", "in": "query", "required": False, "schema": {"type": "string", "format": "date"},
             "description": "only days verified on or after this date (YYYY-MM-DD)"},
            {"name": "format", "in": "query", "required": False, "schema": {"enum": ["json", "csv"]}},
        ],
        "responses": {
            "200": {"description": "the record", "content": {"application/json": {"schema": {"type": "object"}},
                                                               "text/csv": {"schema": {"type": "string"}}}},
            "400": {"description": "a parameter out of range (the message says which)"},
            "404": {"description": "no such water body"},
        }}},
}

#: Days of the record shown by default (the page and the API accept ``since``).
DEFAULT_DAYS = 365
HISTORY_DAYS = 60


def _since() -> dt.datetime | None:
    text = request.args.get("since")
    if not text:
        return None
    try:
        return dt.datetime.combine(dt.date.fromisoformat(text), dt.time(), tzinfo=dt.UTC)
    except ValueError:
        abort(400, description=f"since must be a date as YYYY-MM-DD, got {text!r}")


def _record(wb):
    summary = record_summary(get_engine(), wb, _since())
    thresholds = tuple(lv.chlorophyll_ugL for lv in wb.alerts.levels)
    summary["reliability"] = reliability(summary["records"], thresholds)
    return summary


@verification.get("/api/v1/water-bodies/<water_body_id>/verification")
def verification_api(water_body_id: str):
    """Scores by lead day, skill against each baseline, rank histogram and reliability, as JSON or CSV."""
    wb = water_body_or_404(water_body_id)
    summary = _record(wb)
    fmt = request.args.get("format", "json")
    if fmt not in ("json", "csv"):
        abort(400, description=f"format must be json or csv, got {fmt!r}")
    if fmt == "csv":
        buf = io.StringIO()
        buf.write(f"# {CAUTION}\n")
        summary["by_lead"].to_csv(buf, index=False, float_format="%.6g")
        return Response(buf.getvalue(), mimetype="text/csv")
    return jsonify({"water_body": wb.id, "caution": CAUTION, "pairs": int(len(summary["records"])),
                    "by_lead": records(summary["by_lead"]), "skill_by_lead": records(summary["skill_by_lead"]),
                    "rank_histogram": summary["rank_histogram"], "reliability": summary["reliability"],
                    "blend": _blend(wb)})


def _blend(wb) -> dict | None:
    """The newest run's blend settings, with the analysis time as ISO 8601."""
    blend = latest_blend(get_engine(), wb.id)
    if blend is not None:
        blend["analysis_utc"] = blend["analysis_utc"].isoformat()
    return blend


@verification.get("/water-bodies/<water_body_id>/verification")
def verification_page(water_body_id: str):
    wb = water_body_or_404(water_body_id)
    summary = _record(wb)
    skill = summary["skill_by_lead"]
    table = (skill.pivot_table(index=["quantity", "lead_days"], columns="reference", values="crps_skill")
             .reset_index() if len(skill) else pd.DataFrame())
    quantities = sorted(set(summary["records"].quantity)) if len(summary["records"]) else []
    return render_template("verification.html", wb=wb, pairs=len(summary["records"]), quantities=quantities,
                           skill=records(table), references=[c for c in table.columns
                                                             if c not in ("quantity", "lead_days")],
                           rank_histogram=summary["rank_histogram"], reliability=summary["reliability"],
                           alert_quantity=alert_quantity(summary["records"]), blend=_blend_rows(wb),
                           tz=zone(wb.timezone))


def _blend_rows(wb) -> dict | None:
    """The newest run's blend as table rows: quantity, lead, one weight per component, spread factor."""
    blend = latest_blend(get_engine(), wb.id)
    if blend is None:
        return None
    components = sorted({c for leads in blend["by_quantity"].values() for e in leads for c in e["weights"]})
    rows = [dict(quantity=q, lead_days=e["lead_days"], spread_factor=e["spread_factor"],
                 **{c: e["weights"].get(c, 0.0) for c in components})
            for q, leads in sorted(blend["by_quantity"].items()) for e in leads]
    return {"analysis_utc": blend["analysis_utc"], "published": blend.get("published", True),
            "components": components, "rows": rows}


@verification.get("/water-bodies/<water_body_id>/verification/<chart>.png")
def verification_chart(water_body_id: str, chart: str):
    wb = water_body_or_404(water_body_id)
    summary = _record(wb)
    if chart.startswith("crps-"):
        data = plots.crps_by_lead(records(summary["by_lead"]), chart.removeprefix("crps-"))
    elif chart.startswith("reliability-"):
        level = request.args.get("level", "1")
        if not level.isdigit():
            abort(400, description="level must be a whole number")
        data = plots.reliability_diagram([e for e in summary["reliability"] if e["level"] == int(level)])
    elif chart.startswith("history-"):
        basin = chart.removeprefix("history-")
        if basin not in {b.id for b in wb.basins}:
            abort(404, description=f"There is no basin {basin!r} in {wb.name}.")
        rows = history(summary["records"], basin).to_dict(orient="records")
        cutoff = (rows[-1]["valid_utc"] - pd.Timedelta(days=HISTORY_DAYS)) if rows else None
        data = plots.forecast_vs_observed([r for r in rows if r["valid_utc"] >= cutoff] if rows else [], 1)
    else:
        abort(404, description=f"There is no chart {chart!r}.")
    return Response(data, mimetype="image/png")
