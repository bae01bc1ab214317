"""The what-if chart: both fans of one basin on one chart (matplotlib, Agg, no global state).

Without the action and with it, each as the ensemble's 5–95 % band and median of the daily
means of cyanobacterial chlorophyll-a; the periods of the flow actions shaded; a dashed line
per alert level. Colours from the colour-blind-safe palette of Okabe & Ito (2008).
"""

from __future__ import annotations

import datetime as dt
import io

import matplotlib

matplotlib.use("Agg")

from matplotlib import dates as mdates  # noqa: E402
from matplotlib.figure import Figure  # noqa: E402

from web.palette import BLUISH_GREEN, FORECAST  # noqa: E402
from web.palette import LEVELS as LEVEL_COLOURS  # noqa: E402
from web.plots import FORMATS  # noqa: E402

SCENARIO = BLUISH_GREEN   # Okabe & Ito (2008) palette, as the other charts
ACTION = "#999999"


def _time(iso: str) -> dt.datetime:
    return dt.datetime.strptime(iso, "%Y-%m-%dT%H:%M:%SZ")


def whatif_chart(*, title: str, rows: list[dict], levels: list[dict], periods: list[tuple[str, str]],
                 fmt: str = "svg") -> bytes:
    """PNG or SVG bytes. ``rows``: the basin's days of one quantity from a what-if payload (valid_utc,
    ``without`` and ``with`` holding q05, q50, q95 [µg/L]); ``levels``: number, name, chlorophyll_ugL;
    ``periods``: (start, end) ISO UTC times of the flow actions."""
    if fmt not in FORMATS:
        raise ValueError(f"format must be one of {', '.join(FORMATS)}, got {fmt!r}")
    fig = Figure(figsize=(8.0, 4.0), dpi=100, layout="constrained")
    ax = fig.add_subplot()
    t = [_time(r["valid_utc"]) for r in rows]
    values = [0.0]
    for key, colour, label in (("without", FORECAST, "without the action"), ("with", SCENARIO, "with the action")):
        lo = [r[key]["q05"] for r in rows]
        mid = [r[key]["q50"] for r in rows]
        hi = [r[key]["q95"] for r in rows]
        ax.fill_between(t, lo, hi, color=colour, alpha=0.2, linewidth=0, label=f"{label}: 5–95 %")
        ax.plot(t, mid, color=colour, linewidth=2.0, linestyle="-" if key == "without" else "--",
                label=f"{label}: median")
        values += [v for v in hi if v is not None]
    for i, (start, end) in enumerate(periods):
        ax.axvspan(_time(start), _time(end), color=ACTION, alpha=0.12, linewidth=0,
                   label="action period" if i == 0 else None)
    top = max(values)
    for i, lv in enumerate(levels):
        if lv["chlorophyll_ugL"] <= 1.6 * top or i == 0:
            ax.axhline(lv["chlorophyll_ugL"], color=LEVEL_COLOURS[min(i, len(LEVEL_COLOURS) - 1)], linestyle=":",
                       linewidth=1.2, label=f"{lv['name']} ({lv['chlorophyll_ugL']:g} µg/L)")
            values.append(lv["chlorophyll_ugL"])
    ax.set_ylim(0, max(values) * 1.12)
    ax.set_ylabel("cyanobacterial chl-a [µg/L]")
    ax.set_title(title, fontsize=11, loc="left")
    ax.xaxis.set_major_locator(mdates.AutoDateLocator(minticks=4, maxticks=9))
    ax.xaxis.set_major_formatter(mdates.DateFormatter("%d %b"))
    ax.grid(True, color="#dddddd", linewidth=0.6)
    ax.spines[["top", "right"]].set_visible(False)
    handles, labels = ax.get_legend_handles_labels()
    fig.legend(handles, labels, loc="outside lower center", fontsize=7.5, frameon=False, ncol=3)
    buf = io.BytesIO()
    fig.savefig(buf, format=fmt, metadata={"Software": None} if fmt == "png" else {"Date": None})
    return buf.getvalue()
