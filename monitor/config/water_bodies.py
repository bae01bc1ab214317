"""``[[water_bodies]]``: basins and their flow network, inflows, alert levels and model overrides.

The flow network and the model overrides are checked by building the
water body's :class:`assimilation.spec.ModelSpec` (see
:mod:`monitor.config.model_setup`), so the configuration refuses exactly
what the model would refuse.
"""

from __future__ import annotations

import datetime as dt

from monitor.alerting.frameworks import FRAMEWORKS, AlertLevel
from monitor.config.errors import ConfigError
from monitor.config.model_setup import check_model_spec
from monitor.config.models import USES, AlertConfig, BasinConfig, InflowConfig, WaterBodyConfig
from monitor.config.reader import Reader, timezone

#: Model constants a water body may override (fields of ``assimilation.spec.ModelSpec``).
MODEL_KEYS = (
    "par_fraction", "background_attenuation_per_m", "chlorophyll_attenuation_m2_mg",
    "recycled_fraction", "sediment_phosphorus_release_20_mg_m2_d", "theta_sediment_release",
)


def read_water_body(r: Reader) -> WaterBodyConfig:
    """One ``[[water_bodies]]`` table → :class:`WaterBodyConfig`, its model spec checked."""
    wid = r.get("id", str)
    basins = _basins(r)
    ids = [b.id for b in basins]
    inflows = []
    for f in r.items("inflows"):
        inflow = InflowConfig(id=f.get("id", str), name=f.get("name", str, None) or f.get("id", str),
                              basin=f.get("basin", str), gauge=f.get("gauge", str))
        if inflow.basin not in ids:
            raise f.error("basin", f"expected one of {', '.join(ids)}; got {inflow.basin!r}")
        f.finish()
        inflows.append(inflow)
    use = r.choice("use", USES)
    wb = WaterBodyConfig(
        id=wid, name=r.get("name", str, wid), use=use, timezone=timezone(r, "timezone", "UTC"),
        weather_station=r.get("weather_station", str, None),
        basins=tuple(basins), inflows=tuple(inflows), alerts=_alerts(r.sub("alerts"), use), model=_model(r),
        latitude_deg=_bounded(r, "latitude", -90.0, 90.0), longitude_deg=_bounded(r, "longitude", -180.0, 180.0),
        season=_season(r), region=_region(r))
    r.finish()
    check_model_spec(wb, r.path, r.prefix)
    return wb


def _region(r: Reader) -> str | None:
    """``region = "North District"``: a free-text region, 1–100 characters (surrounding spaces dropped)."""
    value = r.get("region", str, None)
    if value is None:
        return None
    if not 1 <= len(value.strip()) <= 100:
        raise r.error("region", f"expected 1 to 100 characters; got {value[:120]!r}")
    return value.strip()


def _season(r: Reader) -> tuple[tuple[int, int], tuple[int, int]] | None:
    """``season = ["04-01", "10-31"]``: the first and last local date (month-day) of monitoring."""
    value = r.get("season", list, None)
    if value is None:
        return None
    expected = 'expected ["MM-DD", "MM-DD"], the first and last day of the season (e.g. ["04-01", "10-31"])'
    if len(value) != 2 or not all(isinstance(x, str) for x in value):
        raise r.error("season", f"{expected}; got {value!r}")
    out = []
    for text in value:
        try:
            month, day = (int(x) for x in text.strip().split("-"))
            dt.date(2024, month, day)  # a leap year: 02-29 is a day of the season
        except ValueError:
            raise r.error("season", f"{expected}; {text!r} is not a month-day") from None
        out.append((month, day))
    if out[0] == out[1]:
        raise r.error("season", f"{expected}; the first and last day are the same")
    return out[0], out[1]


def _bounded(r: Reader, name: str, lo: float, hi: float) -> float | None:
    value = r.get(name, float, None)
    if value is not None and not lo <= value <= hi:
        raise r.error(name, f"expected degrees in [{lo:g}, {hi:g}], got {value!r}")
    return value


def _basins(r: Reader) -> list[BasinConfig]:
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
    return basins


def _alerts(a: Reader, use: str) -> AlertConfig:
    default_framework = "who-1999-drinking-water" if use == "drinking-water" else "who-2003-recreation"
    framework = a.get("framework", str, default_framework)
    alerts = AlertConfig(
        framework=framework, levels=_levels(a, framework),
        warn_probability=a.get("warn_probability", float, 0.5),
        horizon_days=a.get("horizon_days", int, 7),
        clear_after_cycles=a.get("clear_after_cycles", int, 3),
        clear_probability=a.get("clear_probability", float, None))
    if not 0 < alerts.warn_probability <= 1:
        raise a.error("warn_probability", f"expected a probability in (0, 1], got {alerts.warn_probability}")
    if not 1 <= alerts.horizon_days <= 30:
        raise a.error("horizon_days", f"expected 1 to 30 days, got {alerts.horizon_days}")
    if alerts.clear_probability is not None and not 0 <= alerts.clear_probability <= alerts.warn_probability:
        raise a.error("clear_probability", f"expected a probability in [0, warn_probability], got {alerts.clear_probability}")
    if alerts.clear_after_cycles < 1:
        raise a.error("clear_after_cycles", f"expected at least 1, got {alerts.clear_after_cycles}")
    a.finish()
    return alerts


def _levels(r: Reader, framework: str) -> tuple[AlertLevel, ...]:
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


def _model(r: Reader) -> dict[str, float]:
    """``[water_bodies.model]``: numbers only here; their ranges are the ModelSpec's to check."""
    mr = r.sub("model")
    model = {}
    for key in list(mr.table):
        if key not in MODEL_KEYS:
            raise mr.error(key, f"unknown model constant; expected one of {', '.join(MODEL_KEYS)}")
        model[key] = mr.get(key, float)
    mr.finish()
    return model
