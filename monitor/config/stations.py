"""``[[stations]]`` and the QC settings: variables, sensor calibrations, QC overrides and climatology."""

from __future__ import annotations

from monitor.config.models import STATION_KINDS, Calibration, StationConfig
from monitor.config.reader import Reader
from monitor.ingest.variables import VARIABLES

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
    st = StationConfig(id=r.get("id", str), kind=r.choice("kind", STATION_KINDS),
                       water_body=r.get("water_body", str, None), basin=r.get("basin", str, None),
                       variables=variables, calibration=cal, qc=qc_table(r, "qc"),
                       climatology=_climatology(r))
    r.finish()
    return st


def qc_table(r: Reader, name: str) -> dict[str, dict[str, float]]:
    """``<name>.<variable>.<QC setting> = number``, at the top level or per station."""
    table = r.sub(name)
    out: dict[str, dict[str, float]] = {}
    for variable in list(table.table):
        if variable not in VARIABLES:
            raise table.error(variable, f"unknown variable; expected one of {', '.join(VARIABLES)}")
        vr = table.sub(variable)
        values = {}
        for key in list(vr.table):
            if key not in QC_KEYS:
                raise vr.error(key, f"unknown QC setting; expected one of {', '.join(QC_KEYS)}")
            values[key] = vr.get(key, float)
        out[variable] = values
    table.finish()
    return out


def _climatology(r: Reader) -> dict[str, tuple[tuple[float, float], ...]]:
    """``climatology.<variable> = [[min, max], …]``: twelve monthly spans, January first."""
    table = r.sub("climatology")
    out = {}
    for variable in list(table.table):
        if variable not in VARIABLES:
            raise table.error(variable, f"unknown variable; expected one of {', '.join(VARIABLES)}")
        spans = table.get(variable, list)
        ok = len(spans) == 12 and all(
            isinstance(p, list) and len(p) == 2 and all(isinstance(x, (int, float)) and not isinstance(x, bool)
                                                        for x in p) and p[0] < p[1] for p in spans)
        if not ok:
            raise table.error(variable, "expected 12 [min, max] pairs (January to December) with min < max")
        out[variable] = tuple((float(lo), float(hi)) for lo, hi in spans)
    table.finish()
    return out
