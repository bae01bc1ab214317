"""HTML pages: status, water body, charts and the sign-up forms."""

from __future__ import annotations

import re
from html import unescape

from monitor.alerting.caution import CAUTION
from monitor.alerting.frameworks import FRAMEWORKS
from tests.web.conftest import post_form


def test_status_page_names_framework_levels_and_carries_the_caution(client):
    r = client.get("/")
    html = r.get_data(as_text=True)
    assert r.status_code == 200
    assert CAUTION in html
    assert FRAMEWORKS["who-2003-recreation"].title in html
    assert "West Bay" in html and "East Bay" in html
    # no basin has a level yet: it says so, and never calls the water safe
    assert "no alert level forecast" in html
    assert "safe" not in html.lower().replace("safety clearance", "")


def test_status_page_shows_the_highest_probability_within_the_horizon(client):
    html = client.get("/").get_data(as_text=True)
    # West Bay's p_level_1 over days 1..3 of the latest run is 0.45, 0.62, 0.80 → 80 %
    assert re.search(r"West Bay.*?80 %", html, re.S)


def test_water_body_page_links_its_charts_and_they_render(client):
    html = unescape(client.get("/water-bodies/quillmere").get_data(as_text=True))
    assert CAUTION in html
    srcs = re.findall(r'<img src="([^"]+)"', html)
    assert [s.split("?")[0] for s in srcs] == ["/water-bodies/quillmere/basins/west/forecast.svg",
                                               "/water-bodies/quillmere/basins/east/forecast.svg"]
    # every chart also comes in the narrow layout for phones
    assert len(re.findall(r'<source media="\(max-width: 600px\)" srcset="[^"]+size=narrow', html)) == 2
    svg = client.get(srcs[0])
    assert svg.status_code == 200 and svg.mimetype == "image/svg+xml"
    assert svg.data.lstrip().startswith(b"<?xml") and b"<svg" in svg.data
    png = client.get("/water-bodies/quillmere/basins/west/forecast.png")
    assert png.mimetype == "image/png" and png.data[:8] == b"\x89PNG\r\n\x1a\n"  # PNG signature (RFC 2083)


def test_pages_use_no_remote_resources(client):
    for url in ("/", "/water-bodies/quillmere", "/subscribe"):
        html = client.get(url).get_data(as_text=True)
        assert not re.search(r'(src|href)="(https?:)?//', html), url
    with client.get("/static/bloomline.css") as css:
        assert css.status_code == 200 and "url(" not in css.get_data(as_text=True)


def test_unknown_water_body_basin_and_chart_format_are_404(client):
    r = client.get("/water-bodies/nowhere")
    assert r.status_code == 404 and r.mimetype == "text/html"
    assert "There is no water body 'nowhere'." in unescape(r.get_data(as_text=True))
    assert client.get("/water-bodies/quillmere/basins/nowhere/forecast.png").status_code == 404
    assert client.get("/water-bodies/quillmere/basins/west/forecast.gif").status_code == 404


def _links(text: str) -> list[str]:
    return re.findall(r"http://bloomline\.test(/\S+)", text)


def test_subscribe_confirm_and_unsubscribe_through_the_pages_and_the_mailbox(app, client, config, engine, tmp_path):
    import email
    import email.policy

    from monitor.alerting import notify, subscriptions
    from monitor.alerting.transports import transport_from_config

    r = post_form(client, "/subscribe", {"name": "Fen Quill", "email": "fen@quillmere.example",
                                         "water_body": "quillmere", "min_level": "1"})
    assert r.status_code == 202 and "Check your email" in r.get_data(as_text=True)
    assert subscriptions.subscribers_for(engine, "quillmere", 2) == []  # not before confirming

    clock = app.extensions["bloomline"]["clock"]
    assert notify.send_due(engine, transport_from_config(config), clock()).sent == 1
    (eml,) = (tmp_path / "mailbox").glob("*.eml")
    msg = email.message_from_bytes(eml.read_bytes(), policy=email.policy.default)
    assert msg["To"] == "fen@quillmere.example" and "confirm" in msg["Subject"]
    (confirm_link,) = _links(msg.get_body(preferencelist=("plain",)).get_content())

    assert "Confirm" in client.get(confirm_link).get_data(as_text=True)
    assert subscriptions.subscribers_for(engine, "quillmere", 1) == []  # a GET (link scanner) changes nothing
    assert "Confirmed" in post_form(client, confirm_link, {}).get_data(as_text=True)
    (sub,) = subscriptions.subscribers_for(engine, "quillmere", 1)
    assert sub.email == "fen@quillmere.example"

    assert "Unsubscribed" in post_form(client, f"/unsubscribe/{sub.token}", {}).get_data(as_text=True)
    assert subscriptions.subscribers_for(engine, "quillmere", 2) == []


def test_subscribe_form_reports_a_bad_address_with_400(client):
    r = post_form(client, "/subscribe", {"email": "not an address", "water_body": "quillmere", "min_level": "1"})
    assert r.status_code == 400 and "is not an email address" in unescape(r.get_data(as_text=True))
    r = post_form(client, "/subscribe", {"email": "a@b.example", "water_body": "", "min_level": "1"})
    assert r.status_code == 400 and "Choose a water body" in r.get_data(as_text=True)


def test_unknown_token_link_is_404(client):
    assert client.get("/unsubscribe/not-a-token").status_code == 404
    assert post_form(client, "/subscribe/confirm/not-a-token", {}, form_page="/subscribe").status_code == 404


def test_chart_draws_level_lines_bands_and_observations(client):
    import io

    from matplotlib import image

    svg = client.get("/water-bodies/quillmere/basins/west/forecast.svg").get_data(as_text=True)
    for label in ("forecast 5–95 %", "forecast 25–75 %", "forecast median", "analysis median",
                  "observed daily mean", "Guidance level 1 (10 µg/L)"):
        assert label in svg, label
    # level 2 (50 µg/L) is far above West Bay's values (at most 13·1.8 µg/L): it is named at the top
    # edge instead of being drawn (which would flatten the fan)
    assert "Guidance level 2 (50 µg/L)" not in svg and "Guidance level 2 at 50 µg/L, above this chart" in svg
    png = client.get("/water-bodies/quillmere/basins/west/forecast.png").data
    assert image.imread(io.BytesIO(png), format="png").shape[:2] == (400, 800)
