"""The frozen dataclasses a validated configuration is made of, and the values they allow.

Units are in the field names (``volume_m3``, ``timeout_s``) or beside them.
:class:`Config` indexes its water bodies, stations and feeds once when it
is made, so lookups by id do not scan lists.
"""

from __future__ import annotations

from collections.abc import Mapping
from dataclasses import dataclass, field
from pathlib import Path
from typing import Any
from zoneinfo import ZoneInfo

from monitor.alerting.frameworks import AlertLevel

USES = ("drinking-water", "recreation")
STATION_KINDS = ("buoy", "lab", "gauge", "weather")
FEED_KINDS = ("csv-folder", "http-pull", "push", "mqtt")
FEED_ROLES = ("readings", "weather-forecast")
LAYOUTS = ("wide", "long")
#: ``below_detection``: a value written ``<x`` is stored as censored with its detection limit x, or
#: rejected. "half" and "zero" (older configs, which substituted a number) are read as "censored":
#: Bloomline never stores a value below detection as a plain number.
BELOW_DETECTION = ("censored", "reject")
BELOW_DETECTION_LEGACY = ("half", "zero")
DEFAULT_SENTINELS = (-9999.0, -999.0)  # numbers that mean "no value" in many loggers' exports (common practice)
DEFAULT_SENTINEL_MAGNITUDE = 1e30  # |value| at or above this is a fill value, not a reading


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
    clear_probability: float | None = None  # a cycle counts towards clearing below this; None: warn_probability / 2


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
    latitude_deg: float | None = None   # [° N] for clear-sky light when there is no weather feed
    longitude_deg: float | None = None  # [° E]
    # the monitoring season: first and last (month, day), local dates, both included; may wrap the new
    # year (("11-01", "03-31") reads as November to March); None = all year
    season: tuple[tuple[int, int], tuple[int, int]] | None = None
    #: a free-text region (a district, a catchment) the status overview and the API filter by; None = none
    region: str | None = None

    def in_season(self, t) -> bool:
        """Whether the local date of ``t`` (an aware datetime) lies in the monitoring season."""
        if self.season is None:
            return True
        local = t.astimezone(ZoneInfo(self.timezone))
        md = (local.month, local.day)
        first, last = self.season
        return first <= md <= last if first <= last else (md >= first or md <= last)

    def season_text(self) -> str:
        """The season as people write it: ``04-01 to 10-31``."""
        if self.season is None:
            return "all year"
        (m0, d0), (m1, d1) = self.season
        return f"{m0:02d}-{d0:02d} to {m1:02d}-{d1:02d}"

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
    # the station's own variables, stored as sent with their unit string, QC only as configured
    stored_only: tuple[str, ...] = ()
    # days between a reading's time and its arrival (lab results); a replay makes a reading available
    # only at its time plus this delay
    reporting_delay_days: float = 0.0


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
    below_detection: str = "censored"
    # long layout: the feed's own variable names → canonical names (e.g. "NO3-N" → "nitrate")
    variable_names: Mapping[str, str] = field(default_factory=dict)
    # long layout, per station: station id → {the feed's name → variable}; before variable_names
    station_variable_names: Mapping[str, Mapping[str, str]] = field(default_factory=dict)
    # unit strings as sent → the unit to read them as ("ug/L N (nitrate+nitrite)" → "ug/L N")
    units: Mapping[str, str] = field(default_factory=dict)
    # a negative value of a detection-limited variable (blank-corrected lab result) is below detection
    negative_means_below_detection: bool = False
    # detection limits [canonical unit] stored with such negative values (else the limit is unknown)
    detection_limits: Mapping[str, float] = field(default_factory=dict)
    # numbers that mean "no value": rejected, never stored (compared as written, before conversion)
    sentinels: tuple[float, ...] = DEFAULT_SENTINELS
    sentinel_magnitude: float = DEFAULT_SENTINEL_MAGNITUDE


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
    ca_file: Path | None = None  # CA bundle that signs the server's certificate (default: the system's)


CATCH_UP = ("latest", "each-day")
WEBHOOK_EVENTS = ("alert", "forecast")


@dataclass(frozen=True)
class ScheduleConfig:
    cycle_at_utc: str = "06:00"
    ingest_every_minutes: float = 15.0
    send_every_minutes: float = 1.0
    #: a second scheduler takes over within this time after the active one dies [s]
    lease_seconds: float = 30.0
    #: a daily cycle that starts later than its time by at most this still runs [min]
    misfire_grace_minutes: float = 60.0
    #: after downtime: one cycle per water body at the latest due time, or one per missed day
    catch_up: str = "latest"


@dataclass(frozen=True)
class WebhookConfig:
    """One subscriber's JSON webhook: alert changes and new forecasts, signed with HMAC-SHA256."""

    name: str
    url: str
    secret: str
    water_bodies: tuple[str, ...]  # empty: every water body
    events: tuple[str, ...] = WEBHOOK_EVENTS
    min_level: int = 1
    timeout_s: float = 10.0

    def wants(self, water_body_id: str, event: str) -> bool:
        """Does this webhook subscribe to ``event`` ("alert" or "forecast") of the water body?"""
        return event in self.events and (not self.water_bodies or water_body_id in self.water_bodies)


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
    late_window_days: float = 14.0  # late readings up to this old are re-analysed; older ones are reported
    cold_start_gap_days: float = 30.0  # a checkpoint older than this is not resumed: the cycle starts cold
    published: str = "blend"  # the forecast published: the calibrated "blend" or the "process_model" alone
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


DEFAULT_OBSERVATION_ERRORS = {
    # Sensor and lab errors as a fraction of the value with a floor [µg/L];
    # common practice for fluorometers (±20 %) and lab assays (±10–15 %).
    "chlorophyll_fluorescence": ObservationErrorConfig(0.25, 0.5),
    "phycocyanin": ObservationErrorConfig(0.25, 0.3),
    "chlorophyll_a": ObservationErrorConfig(0.15, 0.3),
    "nitrate": ObservationErrorConfig(0.15, 10.0),
    "srp": ObservationErrorConfig(0.2, 1.0),
    "total_phosphorus": ObservationErrorConfig(0.15, 2.0),
    "total_nitrogen": ObservationErrorConfig(0.15, 20.0),
    "ammonium": ObservationErrorConfig(0.15, 5.0),  # added to nitrate in the DIN observation
}


@dataclass(frozen=True)
class Config:
    """A whole validated configuration, with its sections indexed by id."""

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
    webhooks: tuple[WebhookConfig, ...] = ()
    # indexes built once from the tuples above (the first of equal ids wins;
    # loading refuses duplicate ids anyway)
    _water_body_by_id: Mapping[str, WaterBodyConfig] = field(init=False, repr=False, compare=False)
    _station_by_id: Mapping[str, StationConfig] = field(init=False, repr=False, compare=False)
    _stations_by_water_body: Mapping[str, tuple[StationConfig, ...]] = field(init=False, repr=False, compare=False)
    _feed_by_name: Mapping[str, FeedConfig] = field(init=False, repr=False, compare=False)

    def __post_init__(self):
        def first_by(items, key):
            out = {}
            for item in items:
                out.setdefault(key(item), item)
            return out

        by_water_body: dict[str, list[StationConfig]] = {}
        for st in self.stations:
            if st.water_body is not None:
                by_water_body.setdefault(st.water_body, []).append(st)
        object.__setattr__(self, "_water_body_by_id", first_by(self.water_bodies, lambda w: w.id))
        object.__setattr__(self, "_station_by_id", first_by(self.stations, lambda s: s.id))
        object.__setattr__(self, "_stations_by_water_body", {k: tuple(v) for k, v in by_water_body.items()})
        object.__setattr__(self, "_feed_by_name", first_by(self.feeds, lambda f: f.name))

    def water_body(self, water_body_id: str) -> WaterBodyConfig:
        """The water body with this id; KeyError if there is none."""
        try:
            return self._water_body_by_id[water_body_id]
        except KeyError:
            raise KeyError(f"unknown water body {water_body_id!r}") from None

    def station(self, station_id: str) -> StationConfig:
        """The station with this id; KeyError if there is none."""
        try:
            return self._station_by_id[station_id]
        except KeyError:
            raise KeyError(f"unknown station {station_id!r}") from None

    def stations_of(self, water_body_id: str, basin: str | None = None,
                    variable: str | None = None) -> tuple[StationConfig, ...]:
        """The stations of a water body, in file order; only those in ``basin`` and measuring
        ``variable`` when these are given. Empty for an unknown water body."""
        return tuple(st for st in self._stations_by_water_body.get(water_body_id, ())
                     if (basin is None or st.basin == basin) and (variable is None or variable in st.variables))

    def feed(self, name: str) -> FeedConfig:
        """The feed with this name; KeyError if there is none."""
        try:
            return self._feed_by_name[name]
        except KeyError:
            raise KeyError(f"unknown feed {name!r}") from None
