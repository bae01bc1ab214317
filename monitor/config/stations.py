"""``[[stations]]`` and the QC settings: variables, stored-only variables, sensor calibrations, QC overrides
and climatology."""

from __future__ import annotations

from monitor.config.models import STATION_KINDS, Calibration, StationConfig
from monitor.config.reader import Reader
from monitor.ingest.variables import VARIABLES, is_valid_name

#: QC parameters a station may override per variable (see ``monitor.ingest.qc``).
QC_KEYS = (
    "sensor_min", "sensor_max", "user_min", "user_max",
    "climatology_min", "climatology_max",
    "spike_suspect", "spike_fail", "rate_of_change_per_h",
    "flat_line_tolerance", "flat_line_suspect_h", "flat_line_fail_h",
    "drift_suspect_fraction", "threshold_scale_level",
)


def read_station(r: Reader) -> StationConfig:
    """One ``[[stations]]`` table → :class:`StationConfig` (references are checked by the loader)."""
    variables = tuple(r.get("variables", list))
    for v in variables:
        if v not in VARIABLES:
            raise r.error("variables", f"unknown variable {v!r}; expected any of {', '.join(VARIABLES)}")
    cal = {}
    ct = r.sub("calibration")
    for variable in list(ct.table):
        if variable not in VARIABLES:
            raise ct.error(variable, "unknown variable")
        c = ct.sub(variable)
        cal[variable] = Calibration(unit=c.get("unit", str), slope=c.get("slope", float),
                                    intercept=c.get("intercept", float, 0.0))
        c.finish()
    ct.finish()
    stored_only = _stored_only(r)
    own = frozenset(stored_only)
    st = StationConfig(id=r.get("id", str), kind=r.choice("kind", STATION_KINDS),
                       water_body=r.get("water_body", str, None), basin=r.get("basin", str, None),
                       variables=variables, calibration=cal, qc=qc_table(r, "qc", own),
                       climatology=_climatology(r, own), stored_only=stored_only,
                       reporting_delay_days=_delay(r))
    r.finish()
    return st


def _stored_only(r: Reader) -> tuple[str, ...]:
    """``stored_only = ["name", …]``: the station's own variables, stored as sent (not canonical ones)."""
    names = r.get("stored_only", list, [])
    for name in names:
        if not isinstance(name, str) or not is_valid_name(name):
            raise r.error("stored_only", f"expected variable names of lower-case letters, digits and '_' "
                                         f"(a letter first, at most 64 characters); got {name!r}")
        if name in VARIABLES:
            raise r.error("stored_only", f"{name!r} is a canonical variable (converted and checked as such): "
                                         f"list it in variables, not stored_only")
    if len(set(names)) != len(names):
        raise r.error("stored_only", f"names must be unique, got {names}")
    return tuple(names)


def _delay(r: Reader) -> float:
    """``reporting_delay_days``: days from a reading's time to its arrival (>= 0, default 0)."""
    value = r.get("reporting_delay_days", float, 0.0)
    if not 0 <= value < 366:
        raise r.error("reporting_delay_days", f"expected a number of days from 0 to 365, got {value!r}")
    return float(value)


def _unknown(own: frozenset[str]) -> str:
    extra = f", or one of the station's stored_only ({', '.join(sorted(own))})" if own else ""
    return f"unknown variable; expected one of {', '.join(VARIABLES)}{extra}"


def qc_table(r: Reader, name: str, own: frozenset[str] = frozenset()) -> dict[str, dict[str, float]]:
    """``<name>.<variable>.<QC setting> = number``, at the top level or per station (where the
    station's stored-only variables ``own`` may have settings too)."""
    table = r.sub(name)
    out: dict[str, dict[str, float]] = {}
    for variable in list(table.table):
        if variable not in VARIABLES and variable not in own:
            raise table.error(variable, _unknown(own))
        vr = table.sub(variable)
        values = {}
        for key in list(vr.table):
            if key not in QC_KEYS:
                raise vr.error(key, f"unknown QC setting; expected one of {', '.join(QC_KEYS)}")
            values[key] = vr.get(key, float)
        out[variable] = values
    table.finish()
    return out


def _climatology(r: Reader, own: frozenset[str]) -> dict[str, tuple[tuple[float, float], ...]]:
    """``climatology.<variable> = [[min, max], …]``: twelve monthly spans, January first."""
    table = r.sub("climatology")
    out = {}
    for variable in list(table.table):
        if variable not in VARIABLES and variable not in own:
            raise table.error(variable, _unknown(own))
        spans = table.get(variable, list)
        ok = len(spans) == 12 and all(
            isinstance(p, list) and len(p) == 2 and all(isinstance(x, (int, float)) and not isinstance(x, bool)
                                                        for x in p) and p[0] < p[1] for p in spans)
        if not ok:
            raise table.error(variable, "expected 12 [min, max] pairs (January to December) with min < max")
        out[variable] = tuple((float(lo), float(hi)) for lo, hi in spans)
    table.finish()
    return out
