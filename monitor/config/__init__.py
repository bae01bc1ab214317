"""Bloomline's configuration: one TOML file, validated once into frozen dataclasses.

Every error names the file, the key (a dotted path such as
``water_bodies[0].basins[1].volume_m3``) and what was expected, and
:func:`load_config` refuses to return a half-valid configuration: unknown
keys are refused in every table, and each water body's model spec and
filter settings are built at load exactly as the cycle builds them.
Secrets (SMTP password, push tokens, webhook signing secrets) may be given by the name of an
environment variable instead of in the file.

Modules: :mod:`~monitor.config.models` (the dataclasses),
:mod:`~monitor.config.reader` (typed reading with file and key in errors),
:mod:`~monitor.config.sections`, :mod:`~monitor.config.water_bodies`,
:mod:`~monitor.config.stations`, :mod:`~monitor.config.feeds` (one per
kind of table), :mod:`~monitor.config.model_setup` (ModelSpec and
FilterConfig of a water body) and :mod:`~monitor.config.load`.
"""

from monitor.config.errors import ConfigError
from monitor.config.load import load_config, parse_config
from monitor.config.model_setup import chlorophyll_sensors, filter_config, model_spec
from monitor.config.models import (
    BELOW_DETECTION,
    DEFAULT_OBSERVATION_ERRORS,
    FEED_KINDS,
    FEED_ROLES,
    LAYOUTS,
    STATION_KINDS,
    USES,
    AlertConfig,
    BasinConfig,
    Calibration,
    ColumnConfig,
    Config,
    FeedConfig,
    FilterSettings,
    InflowConfig,
    ObservationErrorConfig,
    ScheduleConfig,
    ServiceConfig,
    SmtpConfig,
    StationConfig,
    SubscriberConfig,
    WaterBodyConfig,
    WebhookConfig,
)
from monitor.config.sections import FILTER_SETTINGS_KEYS
from monitor.config.stations import QC_KEYS
from monitor.config.water_bodies import MODEL_KEYS

__all__ = [
    "ConfigError", "load_config", "parse_config", "model_spec", "filter_config", "chlorophyll_sensors",
    "Config", "ServiceConfig", "ScheduleConfig", "SmtpConfig", "FilterSettings", "ObservationErrorConfig",
    "WaterBodyConfig", "BasinConfig", "InflowConfig", "AlertConfig", "StationConfig", "Calibration",
    "FeedConfig", "ColumnConfig", "SubscriberConfig", "WebhookConfig", "DEFAULT_OBSERVATION_ERRORS",
    "USES", "STATION_KINDS", "FEED_KINDS", "FEED_ROLES", "LAYOUTS", "BELOW_DETECTION",
    "FILTER_SETTINGS_KEYS", "QC_KEYS", "MODEL_KEYS",
]
