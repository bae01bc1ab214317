"""Email text: alert changes and sign-up confirmations name the level, the framework and the caution."""

from __future__ import annotations

import datetime as dt
import html.parser

import pytest

from monitor.alerting.caution import CAUTION
from monitor.alerting.frameworks import FRAMEWORKS
from monitor.alerting.messages import render_alert, render_confirmation
from monitor.alerting.subscriptions import Subscriber
from monitor.config import parse_config

T0 = dt.datetime(2026, 8, 1, 7, 0, tzinfo=dt.UTC)


def make_config(tmp_path):
    return parse_config({
        "service": {"database": f"sqlite:///{tmp_path / 'messages.sqlite'}", "base_url": "http://bloomline.test"},
        "water_bodies": [{"id": "hollin", "name": "Hollin Mere", "use": "drinking-water",
                          "basins": [{"id": "arm", "name": "Reed Arm", "volume_m3": 1e6, "mean_depth_m": 4.0,
                                      "area_m2": 2.5e5}]}],
    })


def subscriber(min_level=1, active=True):
    return Subscriber(id=1, name="Gil", email="gil@hollin.example", water_body_id="hollin", min_level=min_level,
                      origin="web", token="tok123", active=active)


def test_alert_email_names_level_framework_probability_and_carries_the_caution(tmp_path):
    wb = make_config(tmp_path).water_body("hollin")
    event = dict(water_body_id="hollin", basin_id="arm", time_utc=T0, from_level=0, to_level=1,
                 probability=0.72, observed_ugL=0.6, reason="")
    email = render_alert(wb, event, base_url="http://bloomline.test")
    subject, body = email.subject, email.text
    # WHO (1999) drinking-water Alert Level 1 at 1 µg/L chlorophyll-a (Chorus & Bartram 1999) [verified]
    assert subject == "Bloomline alert: Reed Arm, Hollin Mere raised to Alert Level 1 (1 µg/L)"
    assert "72 %" in body and "0.60 µg/L" in body
    assert "WHO alert levels for drinking-water sources (1999)" in body
    assert CAUTION in body
    assert "http://bloomline.test/water-bodies/hollin" in body


def test_cleared_email_says_no_alert_level_forecast_and_never_safe(tmp_path):
    wb = make_config(tmp_path).water_body("hollin")
    event = dict(water_body_id="hollin", basin_id="arm", time_utc=T0, from_level=1, to_level=0,
                 probability=0.1, observed_ugL=None, reason="")
    email = render_alert(wb, event, base_url="http://bloomline.test")
    subject, body = email.subject, email.text
    assert "cleared" in subject and "no alert level forecast" in subject
    assert "not a safety clearance" in body and CAUTION in body
    assert "is safe" not in body.lower()


def test_a_raise_from_level_zero_names_both_levels_and_the_unsubscribe_link(tmp_path):
    wb = make_config(tmp_path).water_body("hollin")
    event = dict(water_body_id="hollin", basin_id="arm", time_utc=T0, from_level=0, to_level=2,
                 probability=0.55, observed_ugL=None, reason="")
    email = render_alert(wb, event, base_url="http://bloomline.test/", subscriber=subscriber(2))
    subject, body = email.subject, email.text
    # WHO (1999) drinking-water Alert Level 2 at 50 µg/L (Chorus & Bartram 1999; from memory)
    assert subject == "Bloomline alert: Reed Arm, Hollin Mere raised to Alert Level 2 (50 µg/L)"
    assert body.startswith("The alert level for Reed Arm, Hollin Mere has been raised from "
                           "no alert level forecast to Alert Level 2 (50 µg/L): ")
    assert "gil@hollin.example is subscribed to alerts for Hollin Mere at Alert Level 2 (50 µg/L) and above" in body
    assert "http://bloomline.test/unsubscribe/tok123" in body


def test_a_lowering_says_which_level_still_applies(tmp_path):
    wb = make_config(tmp_path).water_body("hollin")
    event = dict(water_body_id="hollin", basin_id="arm", time_utc=T0, from_level=2, to_level=1,
                 probability=0.2, observed_ugL=3.0, reason="")
    email = render_alert(wb, event, base_url="http://bloomline.test")
    subject, body = email.subject, email.text
    assert subject == "Bloomline: Reed Arm, Hollin Mere lowered to Alert Level 1 (1 µg/L)"
    assert "Alert Level 1 (1 µg/L) still applies." in body


def test_confirmation_email_links_the_token_and_carries_the_caution(tmp_path):
    wb = make_config(tmp_path).water_body("hollin")
    email = render_confirmation(wb, subscriber(1, active=False), base_url="http://bloomline.test")
    subject, body = email.subject, email.text
    assert subject == "Bloomline: confirm your alert subscription for Hollin Mere"
    assert "at Alert Level 1 (1 µg/L) and above" in body
    assert "http://bloomline.test/subscribe/confirm/tok123" in body and CAUTION in body


class _Text(html.parser.HTMLParser):
    """The visible text and the link targets of an HTML body (an independent reading of it)."""

    def __init__(self):
        super().__init__()
        self.text: list[str] = []
        self.links: list[str] = []

    def handle_data(self, data):
        self.text.append(data)

    def handle_starttag(self, tag, attrs):
        if tag == "a":
            self.links.append(dict(attrs)["href"])


def _read_html(markup: str) -> tuple[str, list[str]]:
    parser = _Text()
    parser.feed(markup)
    return " ".join("".join(parser.text).split()), parser.links


def test_alert_email_html_says_what_the_text_says_with_the_caution_and_links(tmp_path):
    wb = make_config(tmp_path).water_body("hollin")
    event = dict(water_body_id="hollin", basin_id="arm", time_utc=T0, from_level=0, to_level=1,
                 probability=0.72, observed_ugL=0.6, reason="")
    email = render_alert(wb, event, base_url="http://bloomline.test", subscriber=subscriber(1))
    text, links = _read_html(email.html)
    assert " ".join(CAUTION.split()) in text
    assert "raised from no alert level forecast to Alert Level 1 (1 µg/L)" in text and "72 %" in text
    assert links == ["http://bloomline.test/water-bodies/hollin", "http://bloomline.test/unsubscribe/tok123"]
    assert email.unsubscribe_url == "http://bloomline.test/unsubscribe/tok123"


def test_html_body_escapes_names_from_the_configuration(tmp_path):
    cfg = make_config(tmp_path)
    wb = cfg.water_body("hollin")
    from dataclasses import replace

    wb = replace(wb, name="Hollin <b>Mere</b> & Co")
    event = dict(water_body_id="hollin", basin_id="arm", time_utc=T0, from_level=0, to_level=1,
                 probability=0.72, observed_ugL=None, reason="")
    email = render_alert(wb, event, base_url="http://bloomline.test")
    assert "<b>Mere</b>" not in email.html and "Hollin &lt;b&gt;Mere&lt;/b&gt; &amp; Co" in email.html


def test_links_start_at_the_configured_base_url(tmp_path):
    wb = make_config(tmp_path).water_body("hollin")
    event = dict(water_body_id="hollin", basin_id="arm", time_utc=T0, from_level=0, to_level=1,
                 probability=0.72, observed_ugL=None, reason="")
    email = render_alert(wb, event, base_url="https://lakes.example.org/bloomline/", subscriber=subscriber(1))
    assert "https://lakes.example.org/bloomline/water-bodies/hollin" in email.text
    assert email.unsubscribe_url == "https://lakes.example.org/bloomline/unsubscribe/tok123"
    assert "8050" not in email.text + email.html


@pytest.mark.parametrize("framework", sorted(FRAMEWORKS))
def test_public_text_carries_no_internal_notes(tmp_path, framework):
    cfg = parse_config({
        "service": {"database": f"sqlite:///{tmp_path / 'm.sqlite'}", "base_url": "http://bloomline.test"},
        "water_bodies": [{"id": "hollin", "name": "Hollin Mere", "use": "drinking-water",
                          "alerts": {"framework": framework},
                          "basins": [{"id": "arm", "name": "Reed Arm", "volume_m3": 1e6, "mean_depth_m": 4.0,
                                      "area_m2": 2.5e5}]}],
    })
    wb = cfg.water_body("hollin")
    for to_level, from_level in ((1, 0), (0, 1), (2, 0), (1, 2)):
        event = dict(water_body_id="hollin", basin_id="arm", time_utc=T0, from_level=from_level,
                     to_level=to_level, probability=0.5, observed_ugL=1.0, reason="")
        email = render_alert(wb, event, base_url="http://bloomline.test", subscriber=subscriber(1))
        for part in (email.subject, email.text, email.html):
            assert "memory" not in part.lower() and "docs/references" not in part
    assert FRAMEWORKS[framework].source in render_alert(wb, event, base_url="http://b.test").text
