"""Conversions from the units people send to Bloomline's canonical units.

Canonical units are those of :mod:`monitor.ingest.variables` (µg/L with nitrogen as
N and phosphorus as P, °C, m, m³/s, W/m², m/s). A reading in a raw sensor
unit (RFU, mV, counts) is converted through the station's linear
calibration ``value = slope · raw + intercept``. An unknown unit or variable
is an error with a message that lists what is accepted; the ingest records it
as the row's rejection reason.

Conversion factors:

* mass concentration: 1 mg/L = 1000 µg/L = 1 g/m³; 1 ppb ≈ 1 µg/L and
  1 ppm ≈ 1 mg/L in fresh water (density 1 kg/L, common practice);
* nitrate reported as the NO3⁻ ion: × 14.007/62.004 to express it as N;
  phosphate reported as PO4³⁻: × 30.974/94.971 to express it as P (molar
  masses from the IUPAC standard atomic weights);
* °F → °C: (F − 32)·5/9; K → °C: K − 273.15;
* 1 ft = 0.3048 m exactly (international foot, 1959); 1 in = 0.0254 m;
* 1 ft³/s (cfs) = 0.028316846592 m³/s exactly (from the foot);
* 1 knot = 1852/3600 m/s; 1 mph = 0.44704 m/s; 1 km/h = 1/3.6 m/s (exact
  definitions);
* 1 langley/min = 697.3 W/m² (1 cal_th/cm²/min = 4.184·10⁴/60 W/m²).
"""

from __future__ import annotations

from collections.abc import Mapping

import numpy as np

from monitor.ingest.variables import VARIABLES

N_PER_NO3 = 14.007 / 62.004  # g N per g NO3⁻ (IUPAC atomic weights)
P_PER_PO4 = 30.974 / 94.971  # g P per g PO4³⁻
FOOT_M = 0.3048
CFS_M3S = FOOT_M ** 3


class UnitError(ValueError):
    """A unit or variable Bloomline does not know how to convert."""


def normalize_unit(unit: str) -> str:
    """A unit string in a comparable form: lower case, ASCII, no spaces.

    ``"µg/L"``, ``"μg/l"``, ``"ug L-1"`` and ``"ug/L"`` all become ``"ug/l"``;
    ``"°C"`` becomes ``"degc"``; ``"m³/s"`` becomes ``"m3/s"``.
    """
    u = unit.strip().lower()
    for a, b in (("µ", "u"), ("μ", "u"), ("°", "deg"), ("³", "3"), ("²", "2"), ("⁻¹", "-1"),
                 ("⁻²", "-2"), ("·", " "), ("per ", "/")):
        u = u.replace(a, b)
    u = " ".join(u.split())
    # "ug l-1" → "ug/l", "w m-2" → "w/m2", "m3 s-1" → "m3/s"
    for a, b in ((" l-1", "/l"), (" m-2", "/m2"), (" s-1", "/s"), (" h-1", "/h"), (" d-1", "/d")):
        if u.endswith(a):
            u = u[: -len(a)] + b
    return u.replace(" / ", "/").replace(" /", "/").replace("/ ", "/")


def _affine(scale: float, offset: float = 0.0) -> tuple[float, float]:
    return (scale, offset)


_CONCENTRATION = {
    "ug/l": _affine(1.0), "ppb": _affine(1.0), "mg/m3": _affine(1.0), "ng/ml": _affine(1.0),
    "mg/l": _affine(1000.0), "ppm": _affine(1000.0), "g/m3": _affine(1000.0),
    "ng/l": _affine(1e-3), "g/l": _affine(1e6),
}
_NITROGEN = {**_CONCENTRATION}
_PHOSPHORUS = {**_CONCENTRATION}
for _u, (_s, _o) in _CONCENTRATION.items():
    _mass = _u.split("/")[0]
    for form in (f"{_u} as n", f"{_u}-n", f"{_u} n", f"{_mass} n/l", f"{_mass}n/l", f"{_mass}-n/l"):
        _NITROGEN[form] = (_s, _o)
    for form in (f"{_u} as no3", f"{_u}-no3", f"{_u} no3", f"{_mass} no3/l", f"{_mass}no3/l"):
        _NITROGEN[form] = (_s * N_PER_NO3, 0.0)
    for form in (f"{_u} as p", f"{_u}-p", f"{_u} p", f"{_mass} p/l", f"{_mass}p/l", f"{_mass}-p/l"):
        _PHOSPHORUS[form] = (_s, _o)
    for form in (f"{_u} as po4", f"{_u}-po4", f"{_u} po4", f"{_mass} po4/l", f"{_mass}po4/l"):
        _PHOSPHORUS[form] = (_s * P_PER_PO4, 0.0)

_TEMPERATURE = {
    "degc": _affine(1.0), "c": _affine(1.0), "celsius": _affine(1.0), "deg c": _affine(1.0),
    "degf": _affine(5.0 / 9.0, -32.0 * 5.0 / 9.0), "f": _affine(5.0 / 9.0, -32.0 * 5.0 / 9.0),
    "fahrenheit": _affine(5.0 / 9.0, -32.0 * 5.0 / 9.0), "deg f": _affine(5.0 / 9.0, -32.0 * 5.0 / 9.0),
    "k": _affine(1.0, -273.15), "kelvin": _affine(1.0, -273.15),
}
_LENGTH = {"m": _affine(1.0), "cm": _affine(0.01), "mm": _affine(0.001), "ft": _affine(FOOT_M),
           "feet": _affine(FOOT_M), "in": _affine(0.0254)}
_DISCHARGE = {"m3/s": _affine(1.0), "cms": _affine(1.0), "cumecs": _affine(1.0),
              "l/s": _affine(1e-3), "m3/h": _affine(1.0 / 3600.0), "m3/d": _affine(1.0 / 86400.0),
              "ml/d": _affine(1e3 / 86400.0),  # megalitres per day
              "cfs": _affine(CFS_M3S), "ft3/s": _affine(CFS_M3S), "cusecs": _affine(CFS_M3S)}
_IRRADIANCE = {"w/m2": _affine(1.0), "kw/m2": _affine(1000.0), "ly/min": _affine(697.3),
               "langley/min": _affine(697.3)}
_SPEED = {"m/s": _affine(1.0), "km/h": _affine(1.0 / 3.6), "kph": _affine(1.0 / 3.6),
          "kn": _affine(1852.0 / 3600.0), "kt": _affine(1852.0 / 3600.0), "knots": _affine(1852.0 / 3600.0),
          "mph": _affine(0.44704)}

#: accepted spellings (normalized) → (scale, offset) into the variable's canonical unit
CONVERSIONS: dict[str, dict[str, tuple[float, float]]] = {
    "chlorophyll_fluorescence": _CONCENTRATION,
    "phycocyanin": _CONCENTRATION,
    "chlorophyll_a": _CONCENTRATION,
    "microcystin": _CONCENTRATION,
    "nitrate": _NITROGEN,
    "srp": _PHOSPHORUS,
    "total_phosphorus": _PHOSPHORUS,
    "water_temperature": _TEMPERATURE,
    "air_temperature": _TEMPERATURE,
    "secchi_depth": _LENGTH,
    "discharge": _DISCHARGE,
    "shortwave_radiation": _IRRADIANCE,
    "wind_speed": _SPEED,
}
assert set(CONVERSIONS) == set(VARIABLES), "every canonical variable needs its unit table"


def conversion(variable: str, unit: str, calibration: Mapping | None = None) -> tuple[float, float]:
    """(scale, offset) such that canonical = scale · value + offset.

    variable: a canonical variable name; unit: the unit as sent;
    calibration: the station's ``{variable: Calibration}`` used for raw
    sensor units (e.g. RFU). Raises :class:`UnitError` with what is accepted.
    """
    if variable not in VARIABLES:
        raise UnitError(f"unknown variable {variable!r}; expected one of {', '.join(VARIABLES)}")
    cal = (calibration or {}).get(variable)
    if cal is not None and normalize_unit(cal.unit) == normalize_unit(unit):
        return (float(cal.slope), float(cal.intercept))
    table = CONVERSIONS[variable]
    key = normalize_unit(unit)
    if key in table:
        return table[key]
    hint = f" or {cal.unit!r} (station calibration)" if cal is not None else ""
    shown = sorted({k for k in table if " " not in k and "-" not in k})
    raise UnitError(f"unknown unit {unit!r} for {variable}; expected {', '.join(shown)}{hint}"
                    + ("" if cal is not None or key not in {"rfu", "mv", "counts"} else
                       "; a raw sensor unit needs a calibration for this station"))


def to_canonical(values, variable: str, unit: str, calibration: Mapping | None = None) -> np.ndarray:
    """Convert ``values`` [unit] to the canonical unit of ``variable`` (vectorised)."""
    scale, offset = conversion(variable, unit, calibration)
    return np.asarray(values, dtype=float) * scale + offset
