"""Sign-ups: nothing takes effect without the emailed link, the form tells nothing, limits per address and client."""

from __future__ import annotations

import email
import email.policy
import re
from html import unescape

import pytest

from monitor.alerting import notify, subscriptions
from monitor.alerting.outbox import outbox_counts
from monitor.alerting.transports import transport_from_config
from tests.web.conftest import NOW, csrf_token, post_form

ADA = "ada@quillmere.example"  # an active subscriber from the config


@pytest.fixture
def synced(engine, config):
    subscriptions.sync_from_config(engine, config, NOW)
    (ada,) = subscriptions.list_subscribers(engine, "quillmere")
    assert ada.email == ADA and ada.min_level == 1 and ada.active
    return ada


def _sign_up(client, address, level="2", name="Mallory"):
    return post_form(client, "/subscribe", {"name": name, "email": address, "water_body": "quillmere",
                                            "min_level": level})


def _mail(engine, config, tmp_path):
    notify.send_due(engine, transport_from_config(config), NOW)
    return [email.message_from_bytes(p.read_bytes(), policy=email.policy.default)
            for p in sorted((tmp_path / "mailbox").glob("*.eml"))]


def test_a_sign_up_for_a_subscribed_address_changes_nothing_without_the_link(client, engine, config, tmp_path, synced):
    r = _sign_up(client, ADA, level="2", name="Mallory")
    assert r.status_code == 202
    (ada,) = subscriptions.list_subscribers(engine, "quillmere")
    assert (ada.min_level, ada.name, ada.active) == (1, "Ada Quill", True)  # untouched
    (msg,) = _mail(engine, config, tmp_path)
    assert msg["To"] == ADA and "confirm the change" in msg["Subject"]
    (link,) = re.findall(r"http://bloomline\.test(/subscribe/change/\S+)", msg.get_content())
    # the owner of the mailbox follows it: a GET only asks, the POST applies
    page = unescape(client.get(link).get_data(as_text=True))
    assert "from Guidance level 2, addressed to Mallory" in page
    assert subscriptions.list_subscribers(engine, "quillmere")[0].min_level == 1
    done = post_form(client, link.split("?")[0], {"min_level": "2", "name": "Mallory"}, form_page=link)
    assert "Changed" in done.get_data(as_text=True)
    (ada,) = subscriptions.list_subscribers(engine, "quillmere")
    assert (ada.min_level, ada.name, ada.active) == (2, "Mallory", True)


def test_the_form_answers_alike_for_subscribed_and_unknown_addresses(client, synced):
    known = _sign_up(client, ADA)
    unknown = _sign_up(client, "nobody@quillmere.example")
    assert known.status_code == unknown.status_code == 202
    strip = re.compile(r'name="csrf_token" value="[^"]+"')
    assert strip.sub("", known.get_data(as_text=True)).replace(ADA, "X") == \
        strip.sub("", unknown.get_data(as_text=True)).replace("nobody@quillmere.example", "X")
    assert "Subscription updated" not in known.get_data(as_text=True)


def test_the_answer_says_the_email_is_queued_not_sent(client):
    html = unescape(_sign_up(client, "fen@quillmere.example").get_data(as_text=True))
    assert "is queued for fen@quillmere.example" in html
    assert "We sent" not in html


def test_a_change_link_with_a_bad_level_or_for_an_inactive_row_changes_nothing(client, engine, synced):
    assert client.get(f"/subscribe/change/{synced.token}?min_level=9").status_code == 400
    assert client.get(f"/subscribe/change/{synced.token}?min_level=abc").status_code == 400
    subscriptions.unsubscribe(engine, synced.token)
    r = client.get(f"/subscribe/change/{synced.token}?min_level=2")
    assert r.status_code == 409 and "sign up again" in r.get_data(as_text=True)


def test_repeated_sign_ups_for_one_address_are_limited(client, engine):
    codes = [_sign_up(client, "flood@quillmere.example").status_code for _ in range(5)]
    assert codes == [202, 202, 202, 429, 429]
    assert outbox_counts(engine) == {"pending": 3}  # no email queued past the limit
    limited = _sign_up(client, "flood@quillmere.example")
    assert "Too many sign-ups for this address" in limited.get_data(as_text=True)
    assert "Retry-After" in limited.headers
    # the address is counted as it will be stored: a capitalised domain is the same address
    assert _sign_up(client, "flood@QUILLMERE.example").status_code == 429


def test_sign_ups_from_one_client_are_limited(client):
    codes = [_sign_up(client, f"user{i}@quillmere.example").status_code for i in range(11)]
    assert codes[:10] == [202] * 10 and codes[10] == 429


def test_limits_can_be_switched_off_for_a_deployment_behind_its_own(config, engine):
    from web import create_app

    client = create_app(config, clock=lambda: NOW, settings={"RATELIMIT_ENABLED": False}).test_client()
    token = csrf_token(client)
    codes = {client.post("/subscribe", data={"email": "many@quillmere.example", "water_body": "quillmere",
                                             "min_level": "1", "csrf_token": token}).status_code for _ in range(5)}
    assert codes == {202}
