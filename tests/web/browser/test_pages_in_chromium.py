"""The pages in a real browser (headless chromium): desktop and a 390 px phone, and the email sign-up flow."""

from __future__ import annotations

import email
import email.policy
import re
from urllib.parse import urlsplit

import pytest

from monitor.alerting.caution import CAUTION

pytestmark = [pytest.mark.browser, pytest.mark.slow]

PHONE, DESKTOP = 390, 1280
OVERVIEW, BASIN = "/", "/water-bodies/corrisdale/basins/fennick-arm"
EVERY_PAGE = [OVERVIEW, "/water-bodies/corrisdale", BASIN, "/water-bodies/sorrel-lake/basins/main",
              "/water-bodies/corrisdale/runs", "/subscribe", "/water-bodies/nowhere"]
#: Smallest chart text [CSS px] we accept on screen: 9 px (common practice for chart labels; 12 px body text).
MIN_CHART_TEXT_PX = 9.0


def _open(page, url: str):
    response = page.goto(url)
    # charts load lazily: scroll through the page so every one is fetched
    height = page.evaluate("document.documentElement.scrollHeight")
    for y in range(0, height + 600, 600):
        page.evaluate(f"window.scrollTo(0, {y})")
        page.wait_for_timeout(30)
    page.wait_for_load_state("networkidle")
    page.evaluate("window.scrollTo(0, 0)")
    return response


def _overflow(page) -> int:
    """How many CSS px the page is wider than its viewport (0: no horizontal scrolling)."""
    return page.evaluate("document.documentElement.scrollWidth - document.documentElement.clientWidth")


@pytest.mark.parametrize("width", [DESKTOP, PHONE])
@pytest.mark.parametrize("url", [OVERVIEW, BASIN])
def test_page_fits_shows_its_charts_and_the_caution(site, page_at, artifacts, url, width):
    page = page_at(width)
    assert _open(page, site + url).status == 200
    page.screenshot(path=str(artifacts / f"{url.strip('/').replace('/', '_') or 'overview'}-{width}.png"),
                    full_page=True)
    assert _overflow(page) == 0
    caution = page.locator("#caution")
    assert caution.is_visible() and CAUTION in caution.inner_text()
    box = caution.bounding_box()
    assert box["y"] < 400 and box["x"] >= 0 and box["x"] + box["width"] <= width  # at the top, within the screen
    images = page.locator("figure.chart img")
    if url == BASIN:
        assert images.count() == 2
    for i in range(images.count()):
        img = images.nth(i)
        img.scroll_into_view_if_needed()
        assert img.is_visible()
        assert page.evaluate("(el) => el.complete && el.naturalWidth > 0", img.element_handle())
        shown = img.bounding_box()
        assert shown["width"] > 0.8 * min(width - 60, 800) and shown["x"] + shown["width"] <= width


@pytest.mark.parametrize("url", EVERY_PAGE)
def test_no_page_overflows_a_phone(site, page_at, url):
    page = page_at(PHONE)
    _open(page, site + url)
    assert _overflow(page) == 0, url
    assert CAUTION in page.locator("#caution").inner_text()


def test_chart_text_stays_legible_on_a_phone(site, page_at):
    page = page_at(PHONE)
    _open(page, site + BASIN)
    img = page.locator("figure.chart img").first
    img.scroll_into_view_if_needed()
    src = page.evaluate("(el) => el.currentSrc", img.element_handle())
    assert "size=narrow" in src  # the phone gets the narrow layout
    natural = page.evaluate("(el) => el.naturalWidth", img.element_handle())
    shown = img.bounding_box()["width"]
    from web.plots import SIZES

    font_pt = SIZES["narrow"][1] - 1  # the smallest text on the chart: legend and notes
    font_px = font_pt * 100 / 72      # figures are drawn at 100 dpi
    assert font_px * shown / natural >= MIN_CHART_TEXT_PX


def test_subscribe_confirm_and_unsubscribe_through_the_pages(site, page_at, demo, artifacts):
    from monitor.alerting import notify, subscriptions
    from monitor.alerting.transports import transport_from_config
    from monitor.store.db import open_store

    config, now = demo
    engine = open_store(config.service.database_url)
    page = page_at(PHONE)
    page.goto(site + "/subscribe")
    page.fill("input[name=name]", "Wren Tallis")
    page.fill("input[name=email]", "wren@corrisdale.example")
    page.select_option("select[name=water_body]", "corrisdale")
    page.select_option("select[name=min_level]", "2")
    page.click("button[type=submit]")
    assert "Check your email" in page.locator("h1").inner_text()
    assert "queued for wren@corrisdale.example" in page.content()
    page.screenshot(path=str(artifacts / "subscribe-done-390.png"), full_page=True)

    notify.send_due(engine, transport_from_config(config), now)
    mails = [email.message_from_bytes(p.read_bytes(), policy=email.policy.default)
             for p in config.service.mailbox_dir.glob("*.eml")]
    (msg,) = [m for m in mails if m["To"] == "wren@corrisdale.example"]
    body = msg.get_body(preferencelist=("plain",)).get_content() if msg.is_multipart() else msg.get_content()
    (link,) = re.findall(r"https?://\S+/subscribe/confirm/\S+", body)
    page.goto(site + urlsplit(link).path)  # the link's path on the test server
    def wren():
        return [s for s in subscriptions.subscribers_for(engine, "corrisdale", 2) if s.email == "wren@corrisdale.example"]

    assert wren() == []  # opening the link changes nothing
    page.click("button[type=submit]")
    assert "Confirmed" in page.locator("p.ok").inner_text()
    (sub,) = wren()
    assert sub.min_level == 2

    page.goto(f"{site}/unsubscribe/{sub.token}")
    page.click("button[type=submit]")
    assert "Unsubscribed" in page.locator("p.ok").inner_text()
    page.screenshot(path=str(artifacts / "unsubscribed-390.png"), full_page=True)
    assert wren() == []
    engine.dispose()
