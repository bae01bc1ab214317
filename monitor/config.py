"""Bloomline's configuration: one TOML file, validated once into frozen dataclasses.

Every error names the file, the key (a dotted path such as
``water_bodies[0].basins[1].volume_m3``) and what was expected, and
:func:`load_config` refuses to return a half-valid configuration. Secrets
(SMTP password, push tokens) may be given by the name of an environment
variable instead of in the file.
"""

from __future__ import annotations

import os
import tomllib
from dataclasses import dataclass, field
from pathlib import Path
from typing import Any, Mapping
from zoneinfo import ZoneInfo, ZoneInfoNotFoundError

from monitor.alerting.frameworks import FRAMEWORKS, AlertLevel
from monitor.ingest.variables import VARIABLES

USES = ("drinking-water", "recreation")
STATION_KINDS = ("buoy", "lab", "gauge", "weather")
FEED_KINDS = ("csv-folder", "http-pull", "push", "mqtt")
FEED_ROLES = ("readings", "weather-forecast")
LAYOUTS = ("wide", "long")
FILTER_METHODS = ("sqrt", "stochastic")
BELOW_DETECTION = ("reject", "half", "zero")

#: QC parameters a station may override per variable (see ``monitor.ingest.qc``).
#: Model constants a water body may override (fields of ``assimilation.spec.ModelSpec``).
MODEL_KEYS = (
    "par_fraction", "background_attenuation_per_m", "chlorophyll_attenuation_m2_mg",
    "recycled_fraction", "sediment_phosphorus_release_20_mg_m2_d", "theta_sediment_release",
)

QC_KEYS = (
    "sensor_min", "sensor_max", "user_min", "user_max",
    "climatology_min", "climatology_max",
    "spike_suspect", "spike_fail", "rate_of_change_per_h",
    "flat_line_tolerance", "flat_line_suspect_h", "flat_line_fail_h",
    "drift_suspect_fraction", "threshold_scale_level",
)


class ConfigError(ValueError):
    """A configuration problem: which file, which key, what was expected."""

    def __init__(self, path: str | os.PathLike | None, key: str, message: str):
        self.path = str(path) if path is not None else "<config>"
        self.key = key
        self.message = message
        super().__init__(f"{self.path}: {key}: {message}")


# --------------------------------------------------------------------------
# The dataclasses


@dataclass(frozen=True)
class BasinConfig:
    id: str
    name: str
    volume_m3: float
    mean_depth_m: float
    area_m2: float
    flows_to: str  # another basin's id, or "outlet"


@dataclass(frozen=True)
class InflowConfig:
    id: str
    name: str
    basin: str
    gauge: str  # station id of the gauge measuring discharge and concentrations


@dataclass(frozen=True)
class AlertConfig:
    framework: str
    levels: tuple[AlertLevel, ...]
    warn_probability: float = 0.5
    horizon_days: int = 7
    clear_after_cycles: int = 3


@dataclass(frozen=True)
class WaterBodyConfig:
    id: str
    name: str
    use: str
    timezone: str
    weather_station: str | None
    basins: tuple[BasinConfig, ...]
    inflows: tuple[InflowConfig, ...]
    alerts: AlertConfig
    model: Mapping[str, float] = field(default_factory=dict)  # ModelSpec constants overridden for this water body

    def basin_index(self, basin_id: str) -> int:
        return [b.id for b in self.basins].index(basin_id)


@dataclass(frozen=True)
class Calibration:
    """Linear calibration of a sensor's raw unit: value = slope·raw + intercept."""

    unit: str
    slope: float
    intercept: float = 0.0


@dataclass(frozen=True)
class StationConfig:
    id: str
    kind: str
    water_body: str | None
    basin: str | None
    variables: tuple[str, ...]
    calibration: Mapping[str, Calibration] = field(default_factory=dict)
    qc: Mapping[str, Mapping[str, float]] = field(default_factory=dict)
    # seasonal expected span per variable: 12 (min, max) pairs, January … December (QC climatology test)
    climatology: Mapping[str, tuple[tuple[float, float], ...]] = field(default_factory=dict)


@dataclass(frozen=True)
class ColumnConfig:
    variable: str
    unit: str


@dataclass(frozen=True)
class FeedConfig:
    name: str
    kind: str
    role: str = "readings"
    source: str = ""  # source label stored with each reading (defaults to the feed name)
    # csv-folder
    path: Path | None = None
    pattern: str = "*.csv"
    archive: bool = False
    # http-pull / mqtt
    url: str | None = None
    every_minutes: float = 15.0
    timeout_s: float = 10.0
    host: str = "127.0.0.1"
    port: int = 1883
    topic: str | None = None
    # push
    token: str | None = None
    # parsing
    format: str = "csv"  # csv | json
    layout: str = "long"
    time_column: str = "time"
    time_format: str = "iso"
    timezone: str = "UTC"
    issued_column: str | None = None
    station: str | None = None
    station_column: str | None = None
    station_from_folder: bool = False
    variable_column: str = "variable"
    value_column: str = "value"
    unit_column: str = "unit"
    columns: Mapping[str, ColumnConfig] = field(default_factory=dict)
    below_detection: str = "reject"
    # long layout: the feed's own variable names → canonical names (e.g. "NO3-N" → "nitrate")
    variable_names: Mapping[str, str] = field(default_factory=dict)


@dataclass(frozen=True)
class SubscriberConfig:
    name: str
    email: str
    water_bodies: tuple[str, ...]
    min_level: int = 1


@dataclass(frozen=True)
class SmtpConfig:
    host: str = "127.0.0.1"
    port: int = 25
    sender: str = "bloomline@localhost"
    username: str | None = None
    password: str | None = None
    starttls: bool = False
    timeout_s: float = 10.0


@dataclass(frozen=True)
class ScheduleConfig:
    cycle_at_utc: str = "06:00"
    ingest_every_minutes: float = 15.0
    send_every_minutes: float = 1.0


@dataclass(frozen=True)
class ObservationErrorConfig:
    """Observation error of one variable: sd = max(floor, fraction · value). [µg/L]"""

    fraction: float
    floor: float


@dataclass(frozen=True)
class FilterSettings:
    members: int = 60
    method: str = "sqrt"
    seed: int = 20260501
    window_days: float = 1.0
    assimilate_suspect: bool = False
    spin_up_cycles: int = 7  # cycles after a cold start before alert rules are evaluated
    options: Mapping[str, Any] = field(default_factory=dict)  # passed to assimilation FilterConfig


@dataclass(frozen=True)
class ServiceConfig:
    database_url: str
    archive_dir: Path
    mailbox_dir: Path | None
    base_url: str
    host: str
    port: int
    dask_scheduler: str | None = None  # "tcp://host:8786", "local", or None for in-process


@dataclass(frozen=True)
class Config:
    path: Path | None
    service: ServiceConfig
    schedule: ScheduleConfig
    smtp: SmtpConfig
    filter: FilterSettings
    observation_errors: Mapping[str, ObservationErrorConfig]
    qc: Mapping[str, Mapping[str, float]]
    water_bodies: tuple[WaterBodyConfig, ...]
    stations: tuple[StationConfig, ...]
    feeds: tuple[FeedConfig, ...]
    subscribers: tuple[SubscriberConfig, ...]

    def water_body(self, water_body_id: str) -> WaterBodyConfig:
        for wb in self.water_bodies:
            if wb.id == water_body_id:
                return wb
        raise KeyError(f"unknown water body {water_body_id!r}")

    def station(self, station_id: str) -> StationConfig:
        for st in self.stations:
            if st.id == station_id:
                return st
        raise KeyError(f"unknown station {station_id!r}")

    def feed(self, name: str) -> FeedConfig:
        for fd in self.feeds:
            if fd.name == name:
                return fd
        raise KeyError(f"unknown feed {name!r}")


DEFAULT_OBSERVATION_ERRORS = {
    # Sensor and lab errors as a fraction of the value with a floor [µg/L];
    # common practice for fluorometers (±20 %) and lab assays (±10–15 %).
    "chlorophyll_fluorescence": ObservationErrorConfig(0.25, 0.5),
    "phycocyanin": ObservationErrorConfig(0.25, 0.3),
    "chlorophyll_a": ObservationErrorConfig(0.15, 0.3),
    "nitrate": ObservationErrorConfig(0.15, 10.0),
    "srp": ObservationErrorConfig(0.2, 1.0),
}


# --------------------------------------------------------------------------
# Reading and checking


class _Reader:
    """Typed access to a TOML table that reports the file and dotted key on error."""

    def __init__(self, path: Path | None, table: Mapping[str, Any], prefix: str = ""):
        self.path = path
        self.table = table
        self.prefix = prefix
        if not isinstance(table, Mapping):
            raise ConfigError(path, prefix or "<top>", f"expected a table, got {type(table).__name__}")
        self.used: set[str] = set()

    def key(self, name: str) -> str:
        return f"{self.prefix}.{name}" if self.prefix else name

    def error(self, name: str, message: str) -> ConfigError:
        return ConfigError(self.path, self.key(name), message)

    _MISSING = object()

    def get(self, name: str, kind: type | tuple[type, ...], default: Any = _MISSING) -> Any:
        self.used.add(name)
        if name not in self.table:
            if default is _Reader._MISSING:
                raise self.error(name, f"is required ({_kind_name(kind)})")
            return default
        value = self.table[name]
        kinds = kind if isinstance(kind, tuple) else (kind,)
        if float in kinds and isinstance(value, int) and not isinstance(value, bool):
            value = float(value)
        if isinstance(value, bool) and bool not in kinds:
            raise self.error(name, f"expected {_kind_name(kind)}, got a boolean")
        if not isinstance(value, kinds):
            raise self.error(name, f"expected {_kind_name(kind)}, got {value!r}")
        return value

    def positive(self, name: str, default: Any = _MISSING) -> float:
        value = self.get(name, float, default)
        if value is not None and not value > 0:
            raise self.error(name, f"expected a positive number, got {value!r}")
        return value

    def choice(self, name: str, choices: tuple[str, ...], default: Any = _MISSING) -> str:
        value = self.get(name, str, default)
        if value not in choices:
            raise self.error(name, f"expected one of {', '.join(choices)}; got {value!r}")
        return value

    def sub(self, name: str, required: bool = False) -> "_Reader":
        value = self.get(name, dict, _Reader._MISSING if required else {})
        return _Reader(self.path, value, self.key(name))

    def items(self, name: str, required: bool = False) -> list["_Reader"]:
        value = self.get(name, list, _Reader._MISSING if required else [])
        out = []
        for i, item in enumerate(value):
            key = f"{self.key(name)}[{i}]"
            if not isinstance(item, Mapping):
                raise ConfigError(self.path, key, "expected a table")
            out.append(_Reader(self.path, item, key))
        return out

    def finish(self) -> None:
        unknown = sorted(set(self.table) - self.used)
        if unknown:
            raise self.error(unknown[0], "unknown key (check the spelling; see README.md for the keys)")


def _kind_name(kind: type | tuple[type, ...]) -> str:
    names = {str: "a string", float: "a number", int: "an integer", bool: "true or false",
             dict: "a table", list: "an array"}
    kinds = kind if isinstance(kind, tuple) else (kind,)
    return " or ".join(names.get(k, k.__name__) for k in kinds)


def _timezone(r: _Reader, name: str, default: str) -> str:
    tz = r.get(name, str, default)
    try:
        ZoneInfo(tz)
    except (ZoneInfoNotFoundError, ValueError):
        raise r.error(name, f"unknown time zone {tz!r} (expected an IANA name such as 'UTC' or 'Etc/GMT-2')") from None
    return tz


def _secret(r: _Reader, name: str) -> str | None:
    """A secret given inline as NAME or by environment variable as NAME_env."""
    value = r.get(name, str, None)
    env = r.get(f"{name}_env", str, None)
    if env is not None:
        if env not in os.environ:
            raise r.error(f"{name}_env", f"environment variable {env} is not set")
        return os.environ[env]
    return value


def _resolve(base: Path, value: str) -> Path:
    p = Path(value).expanduser()
    return p if p.is_absolute() else (base / p)


def _database_url(base: Path, url: str) -> str:
    """Make a relative SQLite path absolute against the config file's folder."""
    prefix = "sqlite:///"
    if url.startswith(prefix) and not url.startswith(prefix + "/") and url != "sqlite:///:memory:":
        return prefix + str((base / url[len(prefix):]).resolve())
    return url


def _qc_table(r: _Reader, name: str) -> dict[str, dict[str, float]]:
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


def _levels(r: _Reader, framework: str) -> tuple[AlertLevel, ...]:
    items = r.items("levels")
    if not items:
        if framework not in FRAMEWORKS:
            raise r.error("framework", f"expected one of {', '.join(FRAMEWORKS)}, or 'custom' with levels")
        return FRAMEWORKS[framework].levels
    levels = []
    for i, item in enumerate(items, start=1):
        levels.append(AlertLevel(number=i, name=item.get("name", str),
                                 chlorophyll_ugL=item.positive("chlorophyll_ugL"),
                                 meaning=item.get("meaning", str, "")))
        item.finish()
    thresholds = [lv.chlorophyll_ugL for lv in levels]
    if thresholds != sorted(thresholds) or len(set(thresholds)) != len(thresholds):
        raise r.error("levels", f"thresholds must increase strictly, got {thresholds}")
    return tuple(levels)


def _water_body(r: _Reader) -> WaterBodyConfig:
    wid = r.get("id", str)
    basins = []
    for b in r.items("basins", required=True):
        basins.append(BasinConfig(
            id=b.get("id", str), name=b.get("name", str, None) or b.get("id", str),
            volume_m3=b.positive("volume_m3"), mean_depth_m=b.positive("mean_depth_m"),
            area_m2=b.positive("area_m2"), flows_to=b.get("flows_to", str, "outlet")))
        b.finish()
    if not basins:
        raise r.error("basins", "a water body needs at least one basin")
    ids = [b.id for b in basins]
    if len(set(ids)) != len(ids):
        raise r.error("basins", f"basin ids must be unique, got {ids}")
    for i, b in enumerate(basins):
        if b.flows_to != "outlet" and b.flows_to not in ids:
            raise ConfigError(r.path, f"{r.key('basins')}[{i}].flows_to",
                              f"expected 'outlet' or one of {', '.join(ids)}; got {b.flows_to!r}")
    _check_acyclic(r, basins)
    inflows = []
    for f in r.items("inflows"):
        inflow = InflowConfig(id=f.get("id", str), name=f.get("name", str, None) or f.get("id", str),
                              basin=f.get("basin", str), gauge=f.get("gauge", str))
        if inflow.basin not in ids:
            raise f.error("basin", f"expected one of {', '.join(ids)}; got {inflow.basin!r}")
        f.finish()
        inflows.append(inflow)
    use = r.choice("use", USES)
    a = r.sub("alerts")
    default_framework = "who-1999-drinking-water" if use == "drinking-water" else "who-2003-recreation"
    framework = a.get("framework", str, default_framework)
    alerts = AlertConfig(
        framework=framework, levels=_levels(a, framework),
        warn_probability=a.get("warn_probability", float, 0.5),
        horizon_days=a.get("horizon_days", int, 7),
        clear_after_cycles=a.get("clear_after_cycles", int, 3))
    if not 0 < alerts.warn_probability <= 1:
        raise a.error("warn_probability", f"expected a probability in (0, 1], got {alerts.warn_probability}")
    if not 1 <= alerts.horizon_days <= 30:
        raise a.error("horizon_days", f"expected 1 to 30 days, got {alerts.horizon_days}")
    if alerts.clear_after_cycles < 1:
        raise a.error("clear_after_cycles", f"expected at least 1, got {alerts.clear_after_cycles}")
    a.finish()
    mr = r.sub("model")
    model = {}
    for key in list(mr.table):
        if key not in MODEL_KEYS:
            raise mr.error(key, f"unknown model constant; expected one of {', '.join(MODEL_KEYS)}")
        model[key] = mr.get(key, float)
        if model[key] < 0:
            raise mr.error(key, f"expected a non-negative number, got {model[key]}")
    mr.finish()
    wb = WaterBodyConfig(
        id=wid, name=r.get("name", str, wid), use=use, timezone=_timezone(r, "timezone", "UTC"),
        weather_station=r.get("weather_station", str, None),
        basins=tuple(basins), inflows=tuple(inflows), alerts=alerts, model=model)
    r.finish()
    return wb


def _check_acyclic(r: _Reader, basins: list[BasinConfig]) -> None:
    downstream = {b.id: b.flows_to for b in basins}
    for start in downstream:
        seen, node = set(), start
        while node != "outlet":
            if node in seen:
                raise r.error("basins", f"the flow network has a loop through {start!r}")
            seen.add(node)
            node = downstream[node]


def _station(r: _Reader) -> StationConfig:
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
                       variables=variables, calibration=cal, qc=_qc_table(r, "qc"),
                       climatology=_climatology(r))
    r.finish()
    return st


def _climatology(r: _Reader) -> dict[str, tuple[tuple[float, float], ...]]:
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


def _variable_names(r: _Reader) -> dict[str, str]:
    table = r.sub("variable_names")
    out = {}
    for name in list(table.table):
        canonical = table.get(name, str)
        if canonical not in VARIABLES:
            raise table.error(name, f"expected one of {', '.join(VARIABLES)}; got {canonical!r}")
        out[name] = canonical
    table.finish()
    return out


def _feed(r: _Reader, base: Path) -> FeedConfig:
    name = r.get("name", str)
    kind = r.choice("kind", FEED_KINDS)
    columns = {}
    cr = r.sub("columns")
    for col in list(cr.table):
        c = cr.sub(col)
        variable = c.get("variable", str)
        if variable not in VARIABLES:
            raise c.error("variable", f"unknown variable {variable!r}")
        columns[col] = ColumnConfig(variable=variable, unit=c.get("unit", str))
        c.finish()
    cr.finish()
    path = r.get("path", str, None)
    fd = FeedConfig(
        name=name, kind=kind, role=r.choice("role", FEED_ROLES, "readings"),
        source=r.get("source", str, name),
        path=_resolve(base, path) if path else None, pattern=r.get("pattern", str, "*.csv"),
        archive=r.get("archive", bool, False),
        url=r.get("url", str, None), every_minutes=r.positive("every_minutes", 15.0),
        timeout_s=r.positive("timeout_s", 10.0), host=r.get("host", str, "127.0.0.1"),
        port=r.get("port", int, 1883), topic=r.get("topic", str, None),
        token=_secret(r, "token"),
        format=r.choice("format", ("csv", "json"), "csv"), layout=r.choice("layout", LAYOUTS, "long"),
        time_column=r.get("time_column", str, "time"), time_format=r.get("time_format", str, "iso"),
        timezone=_timezone(r, "timezone", "UTC"), issued_column=r.get("issued_column", str, None),
        station=r.get("station", str, None), station_column=r.get("station_column", str, None),
        station_from_folder=r.get("station_from_folder", bool, False),
        variable_column=r.get("variable_column", str, "variable"),
        value_column=r.get("value_column", str, "value"), unit_column=r.get("unit_column", str, "unit"),
        columns=columns, below_detection=r.choice("below_detection", BELOW_DETECTION, "reject"),
        variable_names=_variable_names(r))
    if kind == "csv-folder" and fd.path is None:
        raise r.error("path", "a csv-folder feed needs the folder it watches")
    if kind == "http-pull" and not fd.url:
        raise r.error("url", "an http-pull feed needs a url")
    if kind == "mqtt" and not fd.topic:
        raise r.error("topic", "an mqtt feed needs a topic")
    if kind == "push" and not fd.token:
        raise r.error("token", "a push feed needs a token (token = '…' or token_env = 'VARIABLE')")
    if fd.layout == "wide" and not columns:
        raise r.error("columns", "a wide layout needs a [columns] table mapping column → variable and unit")
    if fd.role == "weather-forecast" and not fd.issued_column:
        raise r.error("issued_column", "a weather-forecast feed needs the column with the issue time")
    r.finish()
    return fd


def parse_config(data: Mapping[str, Any], path: Path | None = None) -> Config:
    """Validate a parsed TOML document into a :class:`Config`."""
    base = path.parent.resolve() if path is not None else Path.cwd()
    top = _Reader(path, data)
    s = top.sub("service")
    mailbox = s.get("mailbox_dir", str, None)
    service = ServiceConfig(
        database_url=_database_url(base, s.get("database", str, "sqlite:///bloomline.sqlite")),
        archive_dir=_resolve(base, s.get("archive_dir", str, "archive")),
        mailbox_dir=_resolve(base, mailbox) if mailbox else None,
        base_url=s.get("base_url", str, "http://127.0.0.1:8050"),
        host=s.get("host", str, "127.0.0.1"), port=s.get("port", int, 8050),
        dask_scheduler=s.get("dask_scheduler", str, None))
    s.finish()
    sc = top.sub("schedule")
    schedule = ScheduleConfig(cycle_at_utc=sc.get("cycle_at_utc", str, "06:00"),
                              ingest_every_minutes=sc.positive("ingest_every_minutes", 15.0),
                              send_every_minutes=sc.positive("send_every_minutes", 1.0))
    hh, _, mm = schedule.cycle_at_utc.partition(":")
    if not (hh.isdigit() and mm.isdigit() and int(hh) < 24 and int(mm) < 60):
        raise sc.error("cycle_at_utc", f"expected HH:MM, got {schedule.cycle_at_utc!r}")
    sc.finish()
    sm = top.sub("smtp")
    smtp = SmtpConfig(host=sm.get("host", str, "127.0.0.1"), port=sm.get("port", int, 25),
                      sender=sm.get("sender", str, "bloomline@localhost"),
                      username=sm.get("username", str, None), password=_secret(sm, "password"),
                      starttls=sm.get("starttls", bool, False), timeout_s=sm.positive("timeout_s", 10.0))
    sm.finish()
    fr = top.sub("filter")
    known = {"members", "method", "seed", "window_days", "assimilate_suspect", "spin_up_cycles"}
    options = {k: v for k, v in fr.table.items() if k not in known}
    for k in options:
        fr.used.add(k)
    filt = FilterSettings(members=fr.get("members", int, 60), method=fr.choice("method", FILTER_METHODS, "sqrt"),
                          seed=fr.get("seed", int, 20260501), window_days=fr.positive("window_days", 1.0),
                          assimilate_suspect=fr.get("assimilate_suspect", bool, False),
                          spin_up_cycles=fr.get("spin_up_cycles", int, 7), options=options)
    if filt.spin_up_cycles < 0:
        raise fr.error("spin_up_cycles", f"expected 0 or more, got {filt.spin_up_cycles}")
    if filt.members < 3:
        raise fr.error("members", f"expected at least 3 ensemble members, got {filt.members}")
    fr.finish()
    errors = dict(DEFAULT_OBSERVATION_ERRORS)
    er = top.sub("observation_errors")
    for variable in list(er.table):
        if variable not in DEFAULT_OBSERVATION_ERRORS:
            raise er.error(variable, f"expected one of {', '.join(DEFAULT_OBSERVATION_ERRORS)}")
        v = er.sub(variable)
        errors[variable] = ObservationErrorConfig(fraction=v.get("fraction", float), floor=v.positive("floor"))
        v.finish()
    er.finish()
    water_bodies = tuple(_water_body(w) for w in top.items("water_bodies", required=True))
    stations = tuple(_station(st) for st in top.items("stations"))
    feeds = tuple(_feed(f, base) for f in top.items("feeds"))
    subscribers = []
    for sub in top.items("subscribers"):
        subscribers.append(SubscriberConfig(name=sub.get("name", str), email=sub.get("email", str),
                                            water_bodies=tuple(sub.get("water_bodies", list)),
                                            min_level=sub.get("min_level", int, 1)))
        sub.finish()
    cfg = Config(path=path, service=service, schedule=schedule, smtp=smtp, filter=filt,
                 observation_errors=errors, qc=_qc_table(top, "qc"), water_bodies=water_bodies,
                 stations=stations, feeds=feeds, subscribers=tuple(subscribers))
    top.finish()
    _cross_check(cfg, path)
    return cfg


def _cross_check(cfg: Config, path: Path | None) -> None:
    """References between sections: ids exist and are unique."""
    wb_ids = [w.id for w in cfg.water_bodies]
    if len(set(wb_ids)) != len(wb_ids):
        raise ConfigError(path, "water_bodies", f"water body ids must be unique, got {wb_ids}")
    st_ids = [s.id for s in cfg.stations]
    if len(set(st_ids)) != len(st_ids):
        raise ConfigError(path, "stations", f"station ids must be unique, got {st_ids}")
    for i, st in enumerate(cfg.stations):
        key = f"stations[{i}]"
        if st.water_body is not None:
            if st.water_body not in wb_ids:
                raise ConfigError(path, f"{key}.water_body", f"expected one of {', '.join(wb_ids)}")
            basins = [b.id for b in cfg.water_body(st.water_body).basins]
            if st.basin is not None and st.basin not in basins:
                raise ConfigError(path, f"{key}.basin", f"expected one of {', '.join(basins)}")
        if st.kind in ("buoy", "lab") and (st.water_body is None or st.basin is None):
            raise ConfigError(path, key, f"a {st.kind} station needs water_body and basin")
    for i, wb in enumerate(cfg.water_bodies):
        for j, inflow in enumerate(wb.inflows):
            if inflow.gauge not in st_ids:
                raise ConfigError(path, f"water_bodies[{i}].inflows[{j}].gauge",
                                  f"no station {inflow.gauge!r} in [[stations]]")
        if wb.weather_station is not None and wb.weather_station not in st_ids:
            raise ConfigError(path, f"water_bodies[{i}].weather_station",
                              f"no station {wb.weather_station!r} in [[stations]]")
    names = [f.name for f in cfg.feeds]
    if len(set(names)) != len(names):
        raise ConfigError(path, "feeds", f"feed names must be unique, got {names}")
    for i, fd in enumerate(cfg.feeds):
        if fd.station is not None and fd.station not in st_ids:
            raise ConfigError(path, f"feeds[{i}].station", f"no station {fd.station!r} in [[stations]]")
    for i, sub in enumerate(cfg.subscribers):
        for w in sub.water_bodies:
            if w not in wb_ids:
                raise ConfigError(path, f"subscribers[{i}].water_bodies", f"unknown water body {w!r}")


def load_config(path: str | os.PathLike) -> Config:
    """Read and validate a Bloomline TOML file; raise :class:`ConfigError` if anything is wrong."""
    p = Path(path)
    try:
        raw = p.read_bytes()
    except OSError as exc:
        raise ConfigError(p, "<file>", f"cannot read the file: {exc.strerror or exc}") from None
    try:
        data = tomllib.loads(raw.decode("utf-8"))
    except UnicodeDecodeError:
        raise ConfigError(p, "<file>", "expected UTF-8 text") from None
    except tomllib.TOMLDecodeError as exc:
        raise ConfigError(p, "<syntax>", f"not valid TOML: {exc}") from None
    return parse_config(data, p)
