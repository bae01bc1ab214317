"""The List-Unsubscribe URL of an alert email unsubscribes with one POST (RFC 8058 §3.1)."""

from __future__ import annotations

import datetime as dt

from monitor.alerting.messages import render_alert
from monitor.alerting.outbox import ONE_CLICK, email_headers
from monitor.alerting.subscriptions import by_token, subscribers_for, sync_from_config
from monitor.config import parse_config
from web import create_app

T0 = dt.datetime(2026, 8, 1, 7, 0, tzinfo=dt.UTC)


def test_the_list_unsubscribe_url_takes_a_one_click_post(tmp_path):
    cfg = parse_config({
        "service": {"database": f"sqlite:///{tmp_path / 'u.sqlite'}", "base_url": "http://bloomline.test"},
        "water_bodies": [{"id": "hollin", "name": "Hollin Mere", "use": "drinking-water",
                          "basins": [{"id": "arm", "name": "Reed Arm", "volume_m3": 1e6, "mean_depth_m": 4.0,
                                      "area_m2": 2.5e5}]}],
        "subscribers": [{"name": "Gil", "email": "gil@hollin.example", "water_bodies": ["hollin"]}],
    })
    app = create_app(cfg, clock=lambda: T0)
    engine = app.extensions["bloomline"]["engine"]
    sync_from_config(engine, cfg, T0)
    with engine.connect() as conn:
        (sub,) = subscribers_for(conn, "hollin", 1)
    event = dict(water_body_id="hollin", basin_id="arm", time_utc=T0, from_level=0, to_level=1, probability=0.7,
                 observed_ugL=None, reason="")
    headers = email_headers(render_alert(cfg.water_body("hollin"), event, base_url=cfg.service.base_url,
                                         subscriber=sub))
    url = headers["List-Unsubscribe"].strip("<>")
    assert headers["List-Unsubscribe-Post"] == ONE_CLICK == "List-Unsubscribe=One-Click"
    path = url.removeprefix("http://bloomline.test")
    # what a mail client does for one-click: a POST of exactly this body, no cookies, no form token
    answer = app.test_client().post(path, data=ONE_CLICK, content_type="application/x-www-form-urlencoded")
    assert answer.status_code == 200
    assert by_token(engine, sub.token).active is False
    engine.dispose()
