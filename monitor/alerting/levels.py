"""How an alert level is named wherever Bloomline shows one: emails, pages, API, demo.

Level numbers count from 1 up the water body's ladder
(``water_body.alerts.levels``); level 0 means that no alert level is
forecast, which is never the same as a safety clearance, so it is named
that way everywhere.
"""

from __future__ import annotations

#: The name of level 0.
NO_LEVEL = "no alert level forecast"


def _level(water_body, level: int):
    """The :class:`AlertLevel` of number ``level`` (the top one above the ladder), None for level 0."""
    if level <= 0:
        return None
    levels = water_body.alerts.levels
    return levels[min(level, len(levels)) - 1]


def level_label(water_body, level: int, *, with_threshold: bool = False) -> str:
    """The name of alert level ``level`` of a water body, e.g. 'Alert Level 1'.

    Level 0 (or below) is :data:`NO_LEVEL`. A level above the ladder (the
    config lost a level since it was stored) is named as the top level.
    ``with_threshold`` appends the level's cyanobacterial chlorophyll-a
    threshold [µg/L], e.g. 'Alert Level 1 (1 µg/L)'.
    """
    lv = _level(water_body, level)
    if lv is None:
        return NO_LEVEL
    return f"{lv.name} ({lv.chlorophyll_ugL:g} µg/L)" if with_threshold else lv.name


def level_info(water_body, level: int) -> dict:
    """Number, name (:func:`level_label`), threshold [µg/L] and meaning of a level.

    Level 0 has number 0, the name :data:`NO_LEVEL`, no threshold and no meaning.
    """
    lv = _level(water_body, level)
    if lv is None:
        return {"number": 0, "name": NO_LEVEL, "chlorophyll_ugL": None, "meaning": ""}
    return {"number": lv.number, "name": level_label(water_body, lv.number),
            "chlorophyll_ugL": lv.chlorophyll_ugL, "meaning": lv.meaning}
