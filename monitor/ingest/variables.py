"""Bloomline's canonical variables, their units and what they mean.

One source of truth: readers convert to these units (``monitor.ingest.units``), the
store keeps them, QC checks them (``monitor.ingest.qc``). Which of them the filter
assimilates is the forecasting's choice; the others are stored,
quality-controlled and shown.

A station may also declare variables of its own as *stored-only*
(``stored_only = ["chlorophyll_raw_volts"]`` in its config table): they are
stored as sent, with the unit string as sent, and quality-controlled only as
the config says (:func:`is_valid_name` is the rule their names follow).
"""

from __future__ import annotations

import re
from dataclasses import dataclass


@dataclass(frozen=True)
class Variable:
    """A canonical variable.

    unit: the canonical unit as people write it; label: what it is;
    detection_limited: a lab analyte that can be reported below a detection
    limit, so that a feed may declare its blank-corrected negative values
    below detection (``negative_means_below_detection``).
    """

    name: str
    unit: str
    label: str
    detection_limited: bool = False


_ALL = (
    Variable("chlorophyll_fluorescence", "ug/L", "Chlorophyll-a fluorescence (in situ)"),
    Variable("phycocyanin", "ug/L", "Phycocyanin, cyanobacteria chlorophyll-a equivalent (in situ)"),
    Variable("water_temperature", "degC", "Water temperature"),
    Variable("chlorophyll_a", "ug/L", "Chlorophyll-a, extracted (lab)", True),
    Variable("nitrate", "ug/L N", "Nitrate + nitrite as N", True),
    Variable("ammonium", "ug/L N", "Ammonium as N", True),
    Variable("total_nitrogen", "ug/L N", "Total nitrogen as N", True),
    Variable("srp", "ug/L P", "Soluble reactive phosphorus as P", True),
    Variable("total_phosphorus", "ug/L P", "Total phosphorus as P", True),
    Variable("microcystin", "ug/L", "Total microcystins", True),
    Variable("dissolved_oxygen", "mg/L", "Dissolved oxygen"),
    Variable("oxygen_saturation", "%", "Dissolved oxygen saturation"),
    Variable("ph", "-", "pH"),
    Variable("turbidity", "NTU", "Turbidity (NTU or FNU)"),
    Variable("specific_conductance", "uS/cm", "Specific conductance at 25 °C"),
    Variable("secchi_depth", "m", "Secchi depth"),
    Variable("discharge", "m3/s", "Inflow discharge"),
    Variable("air_temperature", "degC", "Air temperature"),
    Variable("shortwave_radiation", "W/m2", "Downwelling shortwave radiation"),
    Variable("wind_speed", "m/s", "Wind speed at 10 m"),
)

VARIABLES: dict[str, Variable] = {v.name: v for v in _ALL}

_NAME = re.compile(r"[a-z][a-z0-9_]{0,63}")


def is_valid_name(name: str) -> bool:
    """A variable name Bloomline can store: lower case letters, digits and ``_``, a letter first, ≤ 64 characters."""
    return bool(_NAME.fullmatch(name))
