"""Bloomline's canonical variables, their units and what they mean.

One source of truth: readers convert to these units (``monitor.ingest.units``), the
store keeps them, the filter assimilates them.
"""

from __future__ import annotations

from dataclasses import dataclass


@dataclass(frozen=True)
class Variable:
    name: str
    unit: str
    label: str


_ALL = (
    Variable("chlorophyll_fluorescence", "ug/L", "Chlorophyll-a fluorescence (in situ)"),
    Variable("phycocyanin", "ug/L", "Phycocyanin, cyanobacteria chlorophyll-a equivalent (in situ)"),
    Variable("water_temperature", "degC", "Water temperature"),
    Variable("chlorophyll_a", "ug/L", "Chlorophyll-a, extracted (lab)"),
    Variable("nitrate", "ug/L", "Nitrate + nitrite as N"),
    Variable("srp", "ug/L", "Soluble reactive phosphorus as P"),
    Variable("total_phosphorus", "ug/L", "Total phosphorus as P"),
    Variable("microcystin", "ug/L", "Total microcystins"),
    Variable("secchi_depth", "m", "Secchi depth"),
    Variable("discharge", "m3/s", "Inflow discharge"),
    Variable("air_temperature", "degC", "Air temperature"),
    Variable("shortwave_radiation", "W/m2", "Downwelling shortwave radiation"),
    Variable("wind_speed", "m/s", "Wind speed at 10 m"),
)

VARIABLES: dict[str, Variable] = {v.name: v for v in _ALL}
