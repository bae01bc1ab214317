"""Server-side charts (matplotlib, Agg backend): no scripts in the browser.

The forecast fan chart of one basin shows the cyanobacterial chlorophyll-a
of the ensemble forecast as nested quantile bands (5–95 % and 25–75 %) with
the median, the analysis history (day 0 of earlier runs: median and 5–95 %
band), the observed daily means of the phycocyanin sensor and a dashed line
per alert level. Figures are built with the object-oriented API
(``matplotlib.figure.Figure``), which keeps no global state and is safe in
a threaded server.
"""

from __future__ import annotations

import datetime as dt
import io

import matplotlib

matplotlib.use("Agg")

from matplotlib import dates as mdates  # noqa: E402
from matplotlib.figure import Figure  # noqa: E402

FORMATS = {"png": "image/png", "svg": "image/svg+xml"}

# Colour-blind-safe palette (Okabe & Ito 2008, "Color Universal Design").
FORECAST = "#0072B2"
HISTORY = "#555555"
OBSERVED = "#D55E00"
LEVEL_COLOURS = ("#E69F00", "#CC79A7", "#7a0177", "#000000")


def _naive(t: dt.datetime) -> dt.datetime:
    return t.astimezone(dt.UTC).replace(tzinfo=None)


def fan_chart(*, title: str, forecast: list[dict], history: list[dict], observed: list[dict],
              levels, fmt: str = "png", analysis_utc: dt.datetime | None = None) -> bytes:
    """The fan chart as PNG or SVG bytes.

    ``forecast``: rows with valid_utc and q05, q25, q50, q75, q95 [µg/L];
    ``history``: rows with analysis_utc and q05, q50, q95 [µg/L];
    ``observed``: rows with day and mean [µg/L]; ``levels``: the water
    body's AlertLevel ladder.
    """
    if fmt not in FORMATS:
        raise ValueError(f"format must be one of {', '.join(FORMATS)}, got {fmt!r}")
    fig = Figure(figsize=(8.0, 4.0), dpi=100, layout="constrained")
    ax = fig.add_subplot()
    values: list[float] = []

    hist = [h for h in history if "q50" in h]
    if hist:
        t = [_naive(h["analysis_utc"]) for h in hist]
        if all("q05" in h and "q95" in h for h in hist):
            ax.fill_between(t, [h["q05"] for h in hist], [h["q95"] for h in hist], color=HISTORY, alpha=0.15,
                            linewidth=0, label="analysis 5–95 %")
            values += [h["q95"] for h in hist]
        ax.plot(t, [h["q50"] for h in hist], color=HISTORY, linewidth=1.2, label="analysis median")
        values += [h["q50"] for h in hist]

    fc = [f for f in forecast if all(k in f for k in ("q05", "q25", "q50", "q75", "q95"))]
    if fc:
        t = [_naive(f["valid_utc"]) for f in fc]
        ax.fill_between(t, [f["q05"] for f in fc], [f["q95"] for f in fc], color=FORECAST, alpha=0.18,
                        linewidth=0, label="forecast 5–95 %")
        ax.fill_between(t, [f["q25"] for f in fc], [f["q75"] for f in fc], color=FORECAST, alpha=0.35,
                        linewidth=0, label="forecast 25–75 %")
        ax.plot(t, [f["q50"] for f in fc], color=FORECAST, linewidth=2.0, label="forecast median")
        values += [f["q95"] for f in fc]

    if observed:
        ax.plot([_naive(o["day"]) + dt.timedelta(hours=12) for o in observed], [o["mean"] for o in observed],
                linestyle="none", marker="o", markersize=3.5, color=OBSERVED, label="observed daily mean")
        values += [o["mean"] for o in observed]

    top = max(values) if values else 1.0
    for i, lv in enumerate(levels):
        # Draw a level when it is in view or just above the data, so the reader sees the distance to it.
        if lv.chlorophyll_ugL <= 1.6 * top or i == 0:
            colour = LEVEL_COLOURS[min(i, len(LEVEL_COLOURS) - 1)]
            ax.axhline(lv.chlorophyll_ugL, color=colour, linestyle="--", linewidth=1.2,
                       label=f"{lv.name} ({lv.chlorophyll_ugL:g} µg/L)")
            values.append(lv.chlorophyll_ugL)
    if analysis_utc is not None:
        ax.axvline(_naive(analysis_utc), color="#999999", linewidth=0.8)

    ax.set_ylim(0, max(values) * 1.12 if values else 1.0)
    ax.set_ylabel("cyanobacterial chl-a [µg/L]")
    ax.set_title(title, fontsize=11, loc="left")
    ax.xaxis.set_major_locator(mdates.AutoDateLocator(minticks=4, maxticks=9))
    ax.xaxis.set_major_formatter(mdates.DateFormatter("%d %b"))
    ax.grid(True, color="#dddddd", linewidth=0.6)
    ax.spines[["top", "right"]].set_visible(False)
    if not (hist or fc or observed):
        ax.text(0.5, 0.5, "no forecast or observations yet", transform=ax.transAxes, ha="center",
                va="center", color="#666666")
    handles, labels = ax.get_legend_handles_labels()
    if handles:
        # Below the axes, so it never hides data.
        fig.legend(handles, labels, loc="outside lower center", fontsize=7.5, frameon=False,
                   ncol=min(4, len(handles)))
    buf = io.BytesIO()
    fig.savefig(buf, format=fmt, metadata={"Software": None} if fmt == "png" else {"Date": None})
    return buf.getvalue()
