"""Charts: the fan is not flattened by a far level, one colour per level everywhere, readable axes, caching."""

from __future__ import annotations

import datetime as dt
import re
from html import unescape
from zoneinfo import ZoneInfo

import pytest
from matplotlib.colors import to_hex, to_rgb

from monitor.alerting.frameworks import FRAMEWORKS
from tests.web.conftest import ANALYSIS, write_readings
from web import palette
from web.plots import fan_figure

UTC = dt.UTC
TZ = ZoneInfo("Etc/GMT-2")
LEVELS = FRAMEWORKS["who-2003-recreation"].levels  # 10 and 50 µg/L
WINDOW = (ANALYSIS - dt.timedelta(days=30), ANALYSIS + dt.timedelta(days=4))


def _fan(median=(2.0, 2.2, 2.5, 2.8), **kw):
    forecast = [{"valid_utc": ANALYSIS + dt.timedelta(days=k), "q05": m * 0.5, "q25": m * 0.8, "q50": m,
                 "q75": m * 1.25, "q95": m * 1.8} for k, m in enumerate(median)]
    args = {"title": "t", "forecast": forecast, "history": [], "observed": [], "levels": LEVELS, "tz": TZ,
            "window": WINDOW, "analysis_utc": ANALYSIS} | kw
    return fan_figure(**args)


def _wcag_luminance(hex_colour: str) -> float:
    """Relative luminance (WCAG 2.1, definition of relative luminance)."""
    def lin(c):
        return c / 12.92 if c <= 0.04045 else ((c + 0.055) / 1.055) ** 2.4
    r, g, b = (lin(c) for c in to_rgb(hex_colour))
    return 0.2126 * r + 0.7152 * g + 0.0722 * b


def _contrast(a: str, b: str) -> float:
    """Contrast ratio (WCAG 2.1, 1.4.3): (L1 + 0.05) / (L2 + 0.05)."""
    la, lb = sorted((_wcag_luminance(a), _wcag_luminance(b)), reverse=True)
    return (la + 0.05) / (lb + 0.05)


def test_a_level_far_above_the_data_does_not_flatten_the_fan():
    # data reach 2.8·1.8 ≈ 5 µg/L; level 1 is at 10 µg/L: drawing it would squeeze the fan into the bottom half
    ax = _fan().axes[0]
    top = ax.get_ylim()[1]
    assert top < 6.0
    assert not any(line.get_label().startswith("Guidance level") for line in ax.get_lines())
    notes = [t.get_text() for t in ax.texts]
    assert "↑ Guidance level 1 at 10 µg/L, above this chart" in notes


def test_a_level_just_above_the_data_is_drawn_in_its_colour_and_dash():
    ax = _fan(median=(6.0, 6.5, 7.0, 7.5)).axes[0]   # q95 up to 13.5 µg/L: level 1 (10) in view
    (line,) = [ln for ln in ax.get_lines() if ln.get_label() == "Guidance level 1 (10 µg/L)"]
    assert to_hex(line.get_color()).upper() == palette.level_colour(1)
    assert line.get_linestyle() == palette.level_dash(1)
    assert ax.get_ylim()[1] < 20.0   # level 2 (50 µg/L) is only named


def test_badges_and_chart_lines_share_one_colour_per_level(client):
    css = client.get("/levels.css").get_data(as_text=True)
    for n in (1, 2, 3):
        assert re.search(rf"\.level-{n} \{{ background: {palette.level_colour(n)};", css), n
        assert f".fill-{n} {{ fill: {palette.level_colour(n)}; }}" in css
    html = client.get("/").get_data(as_text=True)
    assert 'href="/levels.css"' in html


def test_level_colours_are_okabe_ito_and_readable():
    # Okabe & Ito (2008), "Color Universal Design": orange, vermillion, reddish purple
    assert palette.LEVELS == ("#E69F00", "#D55E00", "#CC79A7")
    for n in (0, 1, 2, 3):
        # badge text against its level colour: at least 4.5:1 (WCAG 2.1, 1.4.3, normal text)
        assert _contrast(palette.LEVEL_TEXT, palette.level_colour(n)) >= 4.5, n
    # neighbouring levels differ in lightness too (not only in hue, which some readers cannot see)
    lum = [_wcag_luminance(c) for c in palette.LEVELS]
    assert all(abs(a - b) >= 0.07 for a, b in zip(lum, lum[1:]))


def test_observation_dots_stand_apart_from_the_level_lines():
    ax = _fan(median=(6.0, 6.5, 7.0, 7.5),
              observed=[{"day_start_utc": ANALYSIS - dt.timedelta(days=2), "mean": 6.0}]).axes[0]
    (dots,) = [ln for ln in ax.get_lines() if ln.get_label() == "observed daily mean"]
    dot = to_hex(dots.get_markerfacecolor()).upper()
    for n in (1, 2, 3):
        # at least 3:1 (WCAG 2.1, 1.4.11 non-text contrast) between the dots and every level colour
        assert _contrast(dot, palette.level_colour(n)) >= 3.0, n


def test_the_time_axis_names_the_year_and_the_zone():
    fig = _fan()
    fig.canvas.draw()
    ax = fig.axes[0]
    assert ax.get_xlabel() == "2026, local time (UTC+02:00)"
    labels = [t.get_text() for t in ax.get_xticklabels() if t.get_text()]
    assert len(labels) >= 3 and len(set(labels)) == len(labels)


def test_an_empty_chart_has_a_real_time_axis():
    fig = _fan(forecast=[])
    fig.canvas.draw()
    ax = fig.axes[0]
    labels = [t.get_text() for t in ax.get_xticklabels() if t.get_text()]
    # the defect: an empty axis read "01 Jan" eight times
    assert len(set(labels)) == len(labels) >= 3 and "01 Jan" not in labels
    assert "no forecast or observations yet" in [t.get_text() for t in ax.texts]


def _chart_url(client, kind="forecast", basin="west"):
    html = unescape(client.get(f"/water-bodies/quillmere/basins/{basin}").get_data(as_text=True))
    (url,) = re.findall(rf'<img src="(/water-bodies/quillmere/basins/{basin}/{kind}\.svg\?[^"]+)"', html)
    return url


def test_a_chart_is_rendered_once_and_then_served_from_memory(app, client):
    cache = app.extensions["bloomline"]["charts"]
    url = _chart_url(client)
    first = client.get(url)
    second = client.get(url)
    assert first.data == second.data and cache.renders == 1
    # the page's link carries the data's fingerprint: browsers may keep it for good
    assert first.headers["Cache-Control"] == "public, max-age=31536000, immutable"
    assert client.get(url, headers={"If-None-Match": first.headers["ETag"]}).status_code == 304
    # without the fingerprint the answer must be revalidated
    bare = client.get(url.split("?")[0])
    assert bare.headers["Cache-Control"] == "no-cache" and bare.headers["ETag"] == first.headers["ETag"]


def test_a_new_reading_changes_the_charts_fingerprint(app, client, engine):
    before = _chart_url(client)
    write_readings(engine, "QW-1", [(ANALYSIS + dt.timedelta(hours=2), 9.0, 1)])
    after = _chart_url(client)
    assert before != after and before.split("?")[0] == after.split("?")[0]
    assert client.get(after).status_code == 200
    assert app.extensions["bloomline"]["charts"].renders == 1  # only the new one was rendered


def test_the_readings_chart_marks_qc_flags(client):
    svg = client.get(_chart_url(client, "readings")).get_data(as_text=True)
    # West Bay's seeded readings pass QC, but one spike failed (flag 4)
    assert "QC pass" in svg and "QC fail" in svg


@pytest.mark.parametrize("query", ["size=tiny", "run=abc", "v=1&v=2", "colour=red"])
def test_chart_parameters_are_checked(client, query):
    r = client.get(f"/water-bodies/quillmere/basins/west/forecast.svg?{query}")
    assert r.status_code == 400
