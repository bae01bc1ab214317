"""Subscribers: config sync, web sign-up with confirmation, unsubscribe by token."""

from __future__ import annotations

import datetime as dt

import pytest

from monitor.alerting.subscriptions import (
    SubscriptionError,
    by_token,
    confirm,
    list_subscribers,
    normalise_email,
    subscribe,
    subscribers_for,
    sync_from_config,
    unsubscribe,
)
from monitor.config import parse_config
from monitor.store.db import open_store

T0 = dt.datetime(2026, 6, 1, tzinfo=dt.UTC)


def make_config(tmp_path, subscribers):
    return parse_config({
        "service": {"database": f"sqlite:///{tmp_path / 'subs.sqlite'}"},
        "water_bodies": [
            {"id": "brackwater", "name": "Brackwater", "use": "recreation",
             "basins": [{"id": "main", "volume_m3": 1e6, "mean_depth_m": 2.0, "area_m2": 5e5}]},
            {"id": "kestle", "name": "Kestle Reservoir", "use": "drinking-water",
             "basins": [{"id": "dam", "volume_m3": 5e6, "mean_depth_m": 8.0, "area_m2": 6e5}]},
        ],
        "subscribers": subscribers,
    })


@pytest.fixture
def engine(tmp_path):
    engine = open_store(f"sqlite:///{tmp_path / 'subs.sqlite'}")
    yield engine
    engine.dispose()


def web_signup(engine, email="dee@brackwater.example", wb="brackwater", level=1):
    return subscribe(engine, name="Dee", email=email, water_body_id=wb, min_level=level,
                     known_water_bodies=["brackwater", "kestle"], max_level=2, now=T0)


def test_sync_adds_one_row_per_water_body_and_is_idempotent(engine, tmp_path):
    cfg = make_config(tmp_path, [{"name": "Eli", "email": "Eli@Brackwater.EXAMPLE",
                                  "water_bodies": ["brackwater", "kestle"], "min_level": 2}])
    assert sync_from_config(engine, cfg, T0) == {"added": 2, "updated": 0, "deactivated": 0}
    assert sync_from_config(engine, cfg, T0) == {"added": 0, "updated": 0, "deactivated": 0}
    subs = list_subscribers(engine)
    assert [(s.email, s.water_body_id, s.min_level, s.origin) for s in subs] == [
        ("Eli@brackwater.example", "brackwater", 2, "config"), ("Eli@brackwater.example", "kestle", 2, "config")]


def test_sync_deactivates_a_subscriber_removed_from_the_config(engine, tmp_path):
    sync_from_config(engine, make_config(tmp_path, [{"name": "Eli", "email": "eli@b.example",
                                                     "water_bodies": ["kestle"]}]), T0)
    assert sync_from_config(engine, make_config(tmp_path, []), T0)["deactivated"] == 1
    assert list_subscribers(engine) == []
    assert len(list_subscribers(engine, active_only=False)) == 1  # kept, not deleted


def test_web_signup_is_inactive_until_confirmed(engine):
    sub = web_signup(engine)
    assert not sub.active and sub.origin == "web" and len(sub.token) == 32
    assert subscribers_for(engine, "brackwater", 1) == []
    assert confirm(engine, sub.token).active
    assert [s.email for s in subscribers_for(engine, "brackwater", 1)] == ["dee@brackwater.example"]


def test_min_level_filters_who_hears_of_a_level(engine):
    confirm(engine, web_signup(engine, "one@b.example", level=1).token)
    confirm(engine, web_signup(engine, "two@b.example", level=2).token)
    assert [s.email for s in subscribers_for(engine, "brackwater", 1)] == ["one@b.example"]
    assert [s.email for s in subscribers_for(engine, "brackwater", 2)] == ["one@b.example", "two@b.example"]


def test_unsubscribe_by_token_keeps_the_row_and_resubscribing_needs_a_new_confirmation(engine):
    sub = web_signup(engine)
    confirm(engine, sub.token)
    assert unsubscribe(engine, sub.token).active is False
    assert subscribers_for(engine, "brackwater", 2) == []
    again = web_signup(engine)
    assert not again.active and again.token != sub.token
    assert by_token(engine, sub.token) is None  # the old link no longer works


def test_unknown_token_changes_nothing(engine):
    web_signup(engine)
    assert confirm(engine, "not-a-token") is None and unsubscribe(engine, "not-a-token") is None


@pytest.mark.parametrize("email", ["", "no-at-sign", "two@@example.org", "a b@example.org", "x@nodot"])
def test_bad_addresses_are_refused(email):
    with pytest.raises(SubscriptionError, match="is not an email address"):
        normalise_email(email)


def test_unknown_water_body_and_level_out_of_range_are_refused(engine):
    with pytest.raises(SubscriptionError, match="unknown water body 'atlantis'"):
        web_signup(engine, wb="atlantis")
    with pytest.raises(SubscriptionError, match="alert level must be between 1 and 2, got 3"):
        web_signup(engine, level=3)
