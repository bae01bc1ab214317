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
    out = []
    with engine.connect() as conn:
        for st in config.stations_of(water_body.id, basin=basin_id):
            last = conn.execute(select(func.max(readings.c.time_utc))
                                .where(and_(readings.c.station_id == st.id, readings.c.time_utc <= now))).scalar()
            flags = {flag: 0 for flag in FLAG_NAMES}
            drift = 0
            recent = conn.execute(select(readings.c.qc_flag, readings.c.qc_tests)
                                  .where(and_(readings.c.station_id == st.id, readings.c.time_utc >= since,
                                              readings.c.time_utc <= now)))
            for flag, tests in recent:
                flags[int(flag)] = flags.get(int(flag), 0) + 1
                if len(tests or "") > _DRIFT_DIGIT and tests[_DRIFT_DIGIT] == str(SUSPECT):
                    drift += 1
            out.append({"id": st.id, "kind": st.kind, "variables": list(st.variables), "last_utc": last,
                        "flags": flags, "drift_suspect": drift, "gain": _gain(run, config, water_body, st.id)})
    return out


def other_readings(engine: Engine, config, water_body_id: str, basin_id: str, *, now: dt.datetime,
                   exclude: Iterable[str] = BLOOM_VARIABLES) -> list[dict]:
    """The newest reading at or before ``now`` of every other variable at the basin's stations.

    Rows (by station, then variable): station_id, variable, label, unit, time_utc,
    value (None when reported missing) and qc_flag.
    """
    exclude = set(exclude)
    stations = [s.id for s in config.stations_of(water_body_id, basin=basin_id)]
    if not stations:
        return []
    newest = (select(readings.c.station_id, readings.c.variable, func.max(readings.c.time_utc).label("t"))
              .where(and_(readings.c.station_id.in_(stations), readings.c.variable.not_in(sorted(exclude)),
                          readings.c.time_utc <= now))
              .group_by(readings.c.station_id, readings.c.variable).subquery())
    q = (select(readings.c.station_id, readings.c.variable, readings.c.time_utc, readings.c.value, readings.c.qc_flag)
         .join(newest, and_(readings.c.station_id == newest.c.station_id, readings.c.variable == newest.c.variable,
                            readings.c.time_utc == newest.c.t))
         .order_by(readings.c.station_id, readings.c.variable))
    order = {s: i for i, s in enumerate(stations)}
    seen: set[tuple[str, str]] = set()
    out = []
    with engine.connect() as conn:
        for r in conn.execute(q):
            if (r.station_id, r.variable) in seen:  # two sources at the same time: the first is shown
                continue
            seen.add((r.station_id, r.variable))
            var = VARIABLES.get(r.variable)
            out.append({"station_id": r.station_id, "variable": r.variable,
                        "label": var.label if var else r.variable, "unit": var.unit if var else "",
                        "time_utc": r.time_utc, "value": None if r.value is None else float(r.value),
                        "qc_flag": int(r.qc_flag)})
    return sorted(out, key=lambda row: (order.get(row["station_id"], 0), row["variable"]))
