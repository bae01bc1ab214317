"""Late readings: a lab result that arrives days after sampling is assimilated by a re-analysis."""

from __future__ import annotations

import datetime as dt
from pathlib import Path

from sqlalchemy import select

from monitor.app.service import Service
from monitor.config import load_config
from monitor.ingest.batches import ingest_bytes
from monitor.store import schema
from monitor.store.db import open_store
from monitor.verification.replay import DiscardTransport

BRACKENFOLD = Path(__file__).resolve().parents[3] / "sample_feeds" / "brackenfold"
UTC = dt.UTC
DAY = dt.timedelta(days=1)
FIRST = dt.datetime(2026, 6, 1, 6, 0, tzinfo=UTC)


def _csv(rows) -> bytes:
    lines = ["time,site,variable,value,unit"] + [f"{t},BF-SITE,{v},{x},{u}" for t, v, x, u in rows]
    return ("\n".join(lines) + "\n").encode()


def _day_rows(day: dt.datetime, chl: float):
    local = (day + dt.timedelta(hours=3)).strftime("%Y-%m-%d %H:%M")  # 09:00 local (UTC+1)
    return [(local, "chlorophyll_a", chl, "ug/L"), (local, "water_temperature", 19.0, "degC")]


def _season(tmp_path, late_value: float | None):
    (tmp_path / "drop").mkdir(parents=True)
    text = (BRACKENFOLD / "bloomline.toml").read_text().replace('path = "data"', f'path = "{tmp_path / "drop"}"')
    text = text.replace('database = "sqlite:///brackenfold.sqlite"', f'database = "sqlite:///{tmp_path / "s.sqlite"}"')
    (tmp_path / "bloomline.toml").write_text(text)
    config = load_config(tmp_path / "bloomline.toml")
    engine = open_store(config.service.database_url)
    feed = config.feed("brackenfold-lab")
    service = Service(config, engine=engine, transport=DiscardTransport(), clock=lambda: FIRST)
    messages = []
    for k in range(8):
        day = FIRST + k * DAY
        # each day's sample arrives on that day, except day 3's chlorophyll, which the lab reports on day 6
        rows = _day_rows(day - DAY + dt.timedelta(hours=1), 5.0 + k)
        if k == 3:
            rows = rows[1:]
        ingest_bytes(engine, config, feed, _csv(rows), f"day-{k}", now=day - dt.timedelta(minutes=30))
        if k == 6 and late_value is not None:
            late = _day_rows(FIRST + 2 * DAY + dt.timedelta(hours=1), late_value)[:1]
            ingest_bytes(engine, config, feed, _csv(late), "late-lab-report", now=day - dt.timedelta(minutes=20))
        service.clock = lambda day=day: day
        summary = service.run_cycles(day, season_start=FIRST - DAY)[0]
        messages.append(summary["message"])
    with engine.connect() as conn:
        ckpt = conn.execute(select(schema.checkpoints.c.data).order_by(schema.checkpoints.c.time_utc.desc())
                            .limit(1)).scalar()
    engine.dispose()
    return messages, ckpt


def test_a_late_lab_result_is_reanalysed_and_changes_the_next_analysis(tmp_path):
    messages, with_late = _season(tmp_path / "a", late_value=60.0)
    _, without = _season(tmp_path / "b", late_value=None)
    assert "re-analysed from" in messages[6] and "1 late readings" in messages[6]
    assert not any("late" in m for m in messages[:6] + messages[7:])
    assert with_late != without  # the late reading changed the analysis
