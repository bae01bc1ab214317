"""Server-side charts (matplotlib, Agg backend): no scripts in the browser.

Two charts per basin, each as PNG or SVG, wide (desktop, 800×400 px) or
narrow (phones, 400×380 px, the same text size so it stays legible when
scaled to a 390 px screen):

* the fan chart: the cyanobacterial chlorophyll-a forecast as nested
  quantile bands (5–95 % and 25–75 %) with the median, the analysis history
  (day 0 of earlier runs), the observed daily means of the phycocyanin
  sensors and a line per alert level in view. The y-axis follows the data,
  so a level far above it never flattens the fan; such a level is named at
  the top edge instead.
* the readings chart: every reading of the bloom sensors with a marker per
  QC flag.

Times are drawn in the water body's time zone, named on the x-axis with
the year. Figures use the object-oriented API (``matplotlib.figure.Figure``);
rendering is serialised by a lock, as matplotlib's text layout is not
thread-safe.
"""

from __future__ import annotations

import datetime as dt
import io
import threading

import matplotlib

matplotlib.use("Agg")

from matplotlib import dates as mdates  # noqa: E402
from matplotlib.figure import Figure  # noqa: E402

from web import palette  # noqa: E402
from web.formatting import zone_label  # noqa: E402

FORMATS = {"png": "image/png", "svg": "image/svg+xml"}
#: Figure size [inches at 100 dpi] and base font size [pt] per layout.
SIZES = {"wide": ((8.0, 4.0), 9.5), "narrow": ((4.0, 3.8), 9.0)}
#: A level above the data is drawn when it is at most this factor above the data's top.
LEVEL_IN_VIEW = 1.3
_RENDER = threading.Lock()
_QC_NAMES = {1: "pass", 2: "not evaluated", 3: "suspect", 4: "fail"}


def _check(fmt: str, size: str) -> None:
    if fmt not in FORMATS:
        raise ValueError(f"format must be one of {', '.join(FORMATS)}, got {fmt!r}")
    if size not in SIZES:
        raise ValueError(f"size must be one of {', '.join(SIZES)}, got {size!r}")


def _figure(size: str, rows: int = 1):
    (w, h), font = SIZES[size]
    fig = Figure(figsize=(w, h * (1 if rows == 1 else 0.8 * rows)), dpi=100, layout="constrained")
    return fig, font


def _time_axis(ax, tz: dt.tzinfo, window: tuple[dt.datetime, dt.datetime], font: float, label: bool = True) -> None:
    locator = mdates.AutoDateLocator(minticks=3, maxticks=7, tz=tz)
    ax.xaxis.set_major_locator(locator)
    ax.xaxis.set_major_formatter(mdates.ConciseDateFormatter(locator, tz=tz, show_offset=False,
                                                             formats=["%Y", "%b", "%d %b", "%H:%M", "%H:%M", "%S"]))
    ax.set_xlim(window[0], window[1])
    start_year = window[0].astimezone(tz).year
    end_year = window[1].astimezone(tz).year
    years = f"{start_year}" if start_year == end_year else f"{start_year}–{end_year}"
    if label:
        ax.set_xlabel(f"{years}, local time ({zone_label(window[1], tz)})", fontsize=font)
    ax.tick_params(labelsize=font)


def _save(fig, fmt: str) -> bytes:
    buf = io.BytesIO()
    fig.savefig(buf, format=fmt, metadata={"Software": None} if fmt == "png" else {"Date": None})
    return buf.getvalue()


def _legend(fig, ax, font: float, size: str) -> None:
    handles, labels = ax.get_legend_handles_labels()
    if handles:
        # below the axes, so it never hides data
        fig.legend(handles, labels, loc="outside lower center", fontsize=font - 1, frameon=False,
                   ncol=2 if size == "narrow" else min(4, len(handles)))


def fan_chart(*, fmt: str = "svg", size: str = "wide", **chart) -> bytes:
    """The fan chart (:func:`fan_figure`) as PNG or SVG bytes."""
    _check(fmt, size)
    with _RENDER:
        return _save(fan_figure(size=size, **chart), fmt)


def fan_figure(*, title: str, forecast: list[dict], history: list[dict], observed: list[dict], levels,
               tz: dt.tzinfo, window: tuple[dt.datetime, dt.datetime], size: str = "wide",
               analysis_utc: dt.datetime | None = None) -> Figure:
    """The fan chart's figure (call under the render lock, or from one thread).

    ``forecast``: rows with valid_utc and q05, q25, q50, q75, q95 [µg/L];
    ``history``: rows with analysis_utc and q05, q50, q95 [µg/L];
    ``observed``: rows with day_start_utc (local midnight) and mean [µg/L];
    ``levels``: the water body's AlertLevel ladder; ``tz``: its time zone;
    ``window``: the (start, end) of the x-axis (aware datetimes).
    """
    _check("svg", size)
    fig, font = _figure(size)
    ax = fig.add_subplot()
    values: list[float] = []
    hist = [h for h in history if "q50" in h]
    if hist:
        t = [h["analysis_utc"] for h in hist]
        if all("q05" in h and "q95" in h for h in hist):
            ax.fill_between(t, [h["q05"] for h in hist], [h["q95"] for h in hist], color=palette.ANALYSIS,
                            alpha=0.18, linewidth=0, label="analysis 5–95 %")
            values += [h["q95"] for h in hist]
        ax.plot(t, [h["q50"] for h in hist], color=palette.ANALYSIS, linewidth=1.3, label="analysis median")
        values += [h["q50"] for h in hist]
    fc = [f for f in forecast if all(k in f for k in ("q05", "q25", "q50", "q75", "q95"))]
    if fc:
        t = [f["valid_utc"] for f in fc]
        ax.fill_between(t, [f["q05"] for f in fc], [f["q95"] for f in fc], color=palette.FORECAST, alpha=0.2,
                        linewidth=0, label="forecast 5–95 %")
        ax.fill_between(t, [f["q25"] for f in fc], [f["q75"] for f in fc], color=palette.FORECAST, alpha=0.4,
                        linewidth=0, label="forecast 25–75 %")
        ax.plot(t, [f["q50"] for f in fc], color=palette.FORECAST, linewidth=2.0, label="forecast median")
        values += [f["q95"] for f in fc]
    if observed:
        ax.plot([o["day_start_utc"] + dt.timedelta(hours=12) for o in observed], [o["mean"] for o in observed],
                linestyle="none", marker="o", markersize=4.5, markerfacecolor=palette.OBSERVED,
                markeredgecolor="white", markeredgewidth=0.6, color=palette.OBSERVED, label="observed daily mean")
        values += [o["mean"] for o in observed]
    _levels(ax, levels, max(values) if values else None, font)
    if analysis_utc is not None:
        ax.axvline(analysis_utc, color="#8A949B", linewidth=0.9)
    ax.set_ylabel("cyanobacterial chl-a [µg/L]", fontsize=font)
    ax.set_title(title, fontsize=font + 1, loc="left")
    _time_axis(ax, tz, window, font)
    ax.grid(True, color="#dddddd", linewidth=0.6)
    ax.spines[["top", "right"]].set_visible(False)
    if not (hist or fc or observed):
        ax.text(0.5, 0.5, "no forecast or observations yet", transform=ax.transAxes, ha="center",
                va="center", color="#5C6770", fontsize=font + 1)
    _legend(fig, ax, font, size)
    return fig


def _levels(ax, levels, top: float | None, font: float) -> None:
    """Draw the levels within view and set the y-range from the data; name the first level above it."""
    if top is None or top <= 0:
        top = levels[0].chlorophyll_ugL if levels else 1.0
    ceiling = top * 1.12
    for lv in levels:
        if lv.chlorophyll_ugL <= top * LEVEL_IN_VIEW:
            ceiling = max(ceiling, lv.chlorophyll_ugL * 1.08)
            ax.axhline(lv.chlorophyll_ugL, color=palette.level_colour(lv.number), linewidth=1.6,
                       linestyle=palette.level_dash(lv.number), label=f"{lv.name} ({lv.chlorophyll_ugL:g} µg/L)")
        else:
            ax.text(0.01, 0.98, f"↑ {lv.name} at {lv.chlorophyll_ugL:g} µg/L, above this chart",
                    transform=ax.transAxes, ha="left", va="top", fontsize=font - 1, color="#3b4349",
                    bbox={"facecolor": "white", "edgecolor": "none", "alpha": 0.8, "pad": 1.5})
            break
    ax.set_ylim(0, ceiling)


def readings_chart(*, title: str, rows: list[dict], variables: dict[str, str], tz: dt.tzinfo,
                   window: tuple[dt.datetime, dt.datetime], fmt: str = "svg", size: str = "wide") -> bytes:
    """Readings of the bloom sensors by QC flag, one panel per variable, as PNG or SVG bytes.

    ``rows``: station_id, variable, time_utc, value, qc_flag; ``variables``:
    variable → axis label (with unit), in panel order.
    """
    _check(fmt, size)
    with _RENDER:
        fig, font = _figure(size, rows=max(1, len(variables)))
        axes = fig.subplots(max(1, len(variables)), 1, sharex=True, squeeze=False)[:, 0]
        drawn: set[int] = set()
        for ax, (variable, label) in zip(axes, variables.items()):
            mine = [r for r in rows if r["variable"] == variable]
            for flag, (colour, marker) in palette.QC_MARKERS.items():
                pts = [r for r in mine if r["qc_flag"] == flag]
                if not pts:
                    continue
                ax.scatter([r["time_utc"] for r in pts], [r["value"] for r in pts], s=9 if flag == 1 else 16,
                           c=colour, marker=marker, linewidths=0.9, rasterized=True,
                           label=None if flag in drawn else f"QC {_QC_NAMES[flag]}")
                drawn.add(flag)
            if not mine:
                ax.text(0.5, 0.5, "no readings in this period", transform=ax.transAxes, ha="center", va="center",
                        color="#5C6770", fontsize=font)
            ax.set_ylabel(label, fontsize=font)
            ax.set_ylim(bottom=0)
            ax.grid(True, color="#dddddd", linewidth=0.6)
            ax.spines[["top", "right"]].set_visible(False)
            _time_axis(ax, tz, window, font, label=ax is axes[-1])
        axes[0].set_title(title, fontsize=font + 1, loc="left")
        handles, labels = [], []
        for ax in axes:
            h, lab = ax.get_legend_handles_labels()
            handles += h
            labels += lab
        if handles:
            fig.legend(handles, labels, loc="outside lower center", fontsize=font - 1, frameon=False,
                       ncol=min(4, len(handles)))
        return _save(fig, fmt)
