"""Charts of the verification page: skill by lead, reliability diagram, forecast versus observed."""

from __future__ import annotations

import io

import matplotlib

matplotlib.use("Agg")

from matplotlib.figure import Figure  # noqa: E402

from web.palette import ANALYSIS as HISTORY  # noqa: E402
from web.palette import BLUISH_GREEN, FORECAST, OBSERVED, ORANGE, REDDISH_PURPLE, SKY_BLUE  # noqa: E402

#: One colour per forecaster (Okabe & Ito 2008 palette; Bloomline as on the forecast charts).
FORECASTER_COLOURS = {"bloomline": FORECAST, "process_model": HISTORY, "blend": SKY_BLUE, "persistence": "#999999",
                      "persistence_ensemble": BLUISH_GREEN, "climatology": ORANGE, "statistical": REDDISH_PURPLE}
FORECASTER_NAMES = {"bloomline": "Bloomline (published)", "process_model": "process model alone",
                    "blend": "calibrated blend",
                    "persistence": "persistence", "persistence_ensemble": "persistence ensemble",
                    "climatology": "climatology", "statistical": "autoregression"}


def _png(fig: Figure) -> bytes:
    buf = io.BytesIO()
    fig.savefig(buf, format="png")
    return buf.getvalue()


def crps_by_lead(by_lead: list[dict], quantity: str) -> bytes:
    """Mean CRPS [µg/L] per lead day and forecaster for one quantity (lower is better)."""
    fig = Figure(figsize=(6.4, 3.4), dpi=100, layout="constrained")
    ax = fig.add_subplot()
    for name, colour in FORECASTER_COLOURS.items():
        rows = sorted((r for r in by_lead if r["quantity"] == quantity and r["forecaster"] == name),
                      key=lambda r: r["lead_days"])
        if rows:
            ax.plot([r["lead_days"] for r in rows], [r["crps"] for r in rows], marker="o", color=colour,
                    linewidth=2.2 if name == "bloomline" else 1.2, label=FORECASTER_NAMES[name])
    ax.set_xlabel("lead (days)")
    ax.set_ylabel("mean CRPS (µg/L)")
    ax.set_ylim(bottom=0)
    ax.grid(alpha=0.3)
    ax.legend(fontsize=8, frameon=False)
    return _png(fig)


def reliability_diagram(entries: list[dict]) -> bytes:
    """Observed frequency against forecast probability, per forecaster, for one level."""
    fig = Figure(figsize=(4.2, 4.0), dpi=100, layout="constrained")
    ax = fig.add_subplot()
    ax.plot([0, 1], [0, 1], color=HISTORY, linewidth=0.8, linestyle=":", label="perfect reliability")
    for e in entries:
        bins = e["bins"]
        colour = FORECASTER_COLOURS.get(e["forecaster"], HISTORY)
        ax.plot([b["forecast"] for b in bins], [b["observed"] for b in bins], marker="o", color=colour,
                label=f"{FORECASTER_NAMES.get(e['forecaster'], e['forecaster'])} (n={e['n']})")
    ax.set_xlim(0, 1)
    ax.set_ylim(0, 1)
    ax.set_xlabel("forecast probability")
    ax.set_ylabel("observed frequency")
    ax.legend(fontsize=7, frameon=False, loc="upper left")
    return _png(fig)


def forecast_vs_observed(rows: list[dict], lead_days: int) -> bytes:
    """Observed daily values with Bloomline's forecast for them at one lead (median and 5–95 %)."""
    fig = Figure(figsize=(8.0, 3.4), dpi=100, layout="constrained")
    ax = fig.add_subplot()
    t = [r["valid_utc"].tz_convert(None) for r in rows]
    lo = [r.get("bloomline_q05") for r in rows]
    hi = [r.get("bloomline_q95") for r in rows]
    if all(v is not None for v in lo + hi) and rows:
        ax.fill_between(t, lo, hi, color=FORECAST, alpha=0.2, linewidth=0, label="Bloomline 5–95 %")
    ax.plot(t, [r.get("bloomline_median") for r in rows], color=FORECAST, linewidth=1.5,
            label=f"Bloomline median, {lead_days} d ahead")
    ax.plot(t, [r.get("persistence_ensemble_median") for r in rows], color=FORECASTER_COLOURS["persistence_ensemble"],
            linewidth=1.0, linestyle="--", label="persistence ensemble median")
    ax.plot(t, [r["observed"] for r in rows], "o", color=OBSERVED, markersize=3, label="observed daily mean")
    ax.set_ylabel("chlorophyll-a (µg/L)")
    ax.grid(alpha=0.3)
    ax.legend(fontsize=7, frameon=False)
    fig.autofmt_xdate()
    return _png(fig)
