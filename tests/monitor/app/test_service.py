"""The service's cycle job: one water body's failure never stops the others."""

from __future__ import annotations

import datetime as dt
import logging
import shutil
from pathlib import Path

import pytest

from monitor.alerting.transports import MailboxTransport
from monitor.app.service import Service
from monitor.config import load_config
from monitor.forecasting import cycle

SAMPLE = Path(__file__).resolve().parents[3] / "sample_feeds"
ANALYSIS = dt.datetime(2026, 6, 2, tzinfo=dt.UTC)


def _service(tmp_path) -> Service:
    shutil.copytree(SAMPLE / "lab", tmp_path / "feeds" / "lab")
    shutil.copyfile(SAMPLE / "bloomline.toml", tmp_path / "bloomline.toml")
    config = load_config(tmp_path / "bloomline.toml")
    return Service(config, transport=MailboxTransport(tmp_path / "mailbox"), clock=lambda: ANALYSIS)


def _broken_for(water_body_id: str, original, step: str):
    """``original`` that raises for one water body, as a deliberately broken one would."""

    def wrapper(*args, **kwargs):
        subject = next((a for a in args if hasattr(a, "water_body_id") or hasattr(a, "basins")), None)
        wb_id = getattr(subject, "water_body_id", None) or getattr(subject, "id", None)
        if wb_id == water_body_id:
            raise RuntimeError(f"{step} broken on purpose")
        return original(*args, **kwargs)

    return wrapper


@pytest.mark.parametrize("step", ["gather", "compute", "record"])
def test_a_failing_water_body_is_reported_and_the_others_still_run(tmp_path, monkeypatch, caplog, step):
    service = _service(tmp_path)
    ids = [wb.id for wb in service.config.water_bodies]
    assert len(ids) >= 2
    broken, good = ids[0], ids[1:]
    monkeypatch.setattr(cycle, step, _broken_for(broken, getattr(cycle, step), step))
    with caplog.at_level(logging.ERROR, logger="bloomline"):
        summaries = service.run_cycles(ANALYSIS, season_start=ANALYSIS - dt.timedelta(days=1))
    by_id = {s["water_body"]: s for s in summaries}
    assert [s["water_body"] for s in summaries] == ids
    assert by_id[broken]["status"] == "failed"
    assert f"{step} broken on purpose" in by_id[broken]["message"]
    for wb_id in good:
        assert by_id[wb_id]["status"] in ("ok", "no_data", "degraded")
        assert by_id[wb_id]["run_id"] is not None
    if step != "compute":  # compute failures are reported in the run itself, not logged as errors
        assert f"cycle of {broken}" in caplog.text
