"""Read models of a basin's stations: readings by QC flag, data health and the other readings.

The basin page shows the raw readings with their QARTOD QC flags, how each
station is doing (its last reading, how many readings passed QC lately,
the filter's estimate of a chlorophyll sensor's gain and the drift check)
and the latest value of every other variable measured in the basin.
Nothing here writes; times are aware UTC datetimes.
"""

from __future__ import annotations

import datetime as dt
from collections.abc import Iterable

from sqlalchemy import and_, func, select
from sqlalchemy.engine import Engine

from assimilation.augmentation import GAIN_PREFIX
from monitor.config.model_setup import chlorophyll_sensors
from monitor.ingest.qc import TESTS
from monitor.ingest.qc_flags import FAIL, MISSING, NOT_EVALUATED, PASS, SUSPECT
from monitor.ingest.variables import VARIABLES
from monitor.store.schema import readings

#: The variables drawn on the readings chart: the sensors that observe the blooms.
BLOOM_VARIABLES = ("phycocyanin", "chlorophyll_fluorescence")
#: QC flags in the order they are counted and shown, with their names (U.S. IOOS 2020).
FLAG_NAMES = {PASS: "pass", NOT_EVALUATED: "not evaluated", SUSPECT: "suspect", FAIL: "fail", MISSING: "missing"}
#: Days of readings the QC summary and the drift count look back over.
HEALTH_DAYS = 7
#: The digit of the drift test in a reading's ``qc_tests`` string.
_DRIFT_DIGIT = TESTS.index("drift")


def readings_by_flag(engine: Engine, config, water_body_id: str, basin_id: str, *,
                     variables: Iterable[str] = BLOOM_VARIABLES, start: dt.datetime,
                     end: dt.datetime) -> list[dict]:
    """Readings of ``variables`` at the basin's stations in [start, end), oldest first.

    Rows: station_id, variable, time_utc, value [the variable's unit], qc_flag. Missing values
    (flag 9) are left out: there is nothing to draw.
    """
    variables = list(variables)
    stations = [s.id for s in config.stations_of(water_body_id, basin=basin_id)
                if any(v in s.variables for v in variables)]
    if not stations:
        return []
    q = (select(readings.c.station_id, readings.c.variable, readings.c.time_utc, readings.c.value,
                readings.c.qc_flag)
         .where(and_(readings.c.station_id.in_(stations), readings.c.variable.in_(variables),
                     readings.c.time_utc >= start, readings.c.time_utc < end, readings.c.value.is_not(None)))
         .order_by(readings.c.time_utc))
    with engine.connect() as conn:
        return [dict(station_id=r.station_id, variable=r.variable, time_utc=r.time_utc, value=float(r.value),
                     qc_flag=int(r.qc_flag)) for r in conn.execute(q)]


def _gain(run: dict | None, config, water_body, station_id: str) -> dict | None:
    """The filter's estimate of a chlorophyll sensor's gain in ``run``: {"mean", "sd"} [-] or None."""
    if run is None:
        return None
    sensors = chlorophyll_sensors(config, water_body)
    if station_id not in sensors:
        return None
    key = f"{GAIN_PREFIX}:{sensors.index(station_id)}"
    diagnostics = run.get("diagnostics") or {}
    mean = (diagnostics.get("parameter_mean") or {}).get(key)
    if mean is None:
        return None
    return {"mean": float(mean), "sd": (diagnostics.get("parameter_sd") or {}).get(key)}


def station_health(engine: Engine, config, water_body, basin_id: str, *, now: dt.datetime,
                   run: dict | None = None) -> list[dict]:
    """Data health of each station in a basin at ``now`` (aware UTC).

    Per station (file order): id, kind, variables, last_utc (its newest
    reading of any variable, or None), flags (readings of the last
    :data:`HEALTH_DAYS` days per QC flag, every flag of :data:`FLAG_NAMES`),
    drift_suspect (of those, how many the drift test marked suspect), and
    gain (the filter's estimated sensor gain in ``run`` for chlorophyll
    fluorometers: {"mean", "sd"} [-], else None).
    """
    since = now - dt.timedelta(days=HEALTH_DAYS)
    drift_digit = func.substr(readings.c.qc_tests, _DRIFT_DIGIT + 1, 1)  # SQL counts characters from 1
    out = []
    with engine.connect() as conn:
        for st in config.stations_of(water_body.id, basin=basin_id):
            # the newest reading per variable: each an index lookup on (station, variable, time)
            lasts = [conn.execute(select(func.max(readings.c.time_utc)).where(and_(
                readings.c.station_id == st.id, readings.c.variable == v, readings.c.time_utc <= now))).scalar()
                for v in st.variables]
            recent = and_(readings.c.station_id == st.id, readings.c.time_utc >= since, readings.c.time_utc <= now)
            flags = {flag: 0 for flag in FLAG_NAMES}
            for flag, n in conn.execute(select(readings.c.qc_flag, func.count()).where(recent)
                                        .group_by(readings.c.qc_flag)):
                flags[int(flag)] = int(n)
            drift = conn.execute(select(func.count()).where(and_(recent, drift_digit == str(SUSPECT)))).scalar_one()
            out.append({"id": st.id, "kind": st.kind, "variables": list(st.variables),
                        "last_utc": max((t for t in lasts if t is not None), default=None),
                        "flags": flags, "drift_suspect": int(drift), "gain": _gain(run, config, water_body, st.id)})
    return out


def other_readings(engine: Engine, config, water_body_id: str, basin_id: str, *, now: dt.datetime,
                   exclude: Iterable[str] = BLOOM_VARIABLES) -> list[dict]:
    """The newest reading at or before ``now`` of every other variable the basin's stations measure.

    Rows (stations in file order, then variables by name): station_id, variable,
    label, unit, time_utc, value (None when reported missing) and qc_flag.
    """
    exclude = set(exclude)
    out = []
    with engine.connect() as conn:
        for st in config.stations_of(water_body_id, basin=basin_id):
            for variable in sorted(set(st.variables) - exclude):
                # newest first along the (station, variable, time) index: one row read
                r = conn.execute(select(readings.c.time_utc, readings.c.value, readings.c.qc_flag)
                                 .where(and_(readings.c.station_id == st.id, readings.c.variable == variable,
                                             readings.c.time_utc <= now))
                                 .order_by(readings.c.time_utc.desc()).limit(1)).first()
                if r is None:
                    continue
                var = VARIABLES.get(variable)
                out.append({"station_id": st.id, "variable": variable, "label": var.label if var else variable,
                            "unit": var.unit if var else "", "time_utc": r.time_utc,
                            "value": None if r.value is None else float(r.value), "qc_flag": int(r.qc_flag)})
    return out
