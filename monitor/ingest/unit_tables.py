"""The units Bloomline accepts for each canonical variable, and their conversion factors.

Each variable has a :class:`UnitTable`: the spellings people write (shown in
error messages, e.g. ``ug/L N``, ``mg/L P``) and every accepted spelling in
normalised form (:func:`normalize_unit`) → (scale, offset) such that
canonical = scale · value + offset.

Conversion factors:

* mass concentration: 1 mg/L = 1000 µg/L = 1 g/m³; 1 ppb ≈ 1 µg/L and
  1 ppm ≈ 1 mg/L in fresh water (density 1 kg/L, common practice);
* nitrate reported as the NO3⁻ ion: × 14.007/62.004 to express it as N;
  ammonium as the NH4⁺ ion: × 14.007/18.038; phosphate reported as PO4³⁻:
  × 30.974/94.971 to express it as P; dissolved oxygen in µmol/L:
  × 31.998 µg/µmol (molar masses from the IUPAC standard atomic weights);
* °F → °C: (F − 32)·5/9; K → °C: K − 273.15;
* 1 ft = 0.3048 m exactly (international foot, 1959); 1 in = 0.0254 m;
* 1 ft³/s (cfs) = 0.028316846592 m³/s exactly (from the foot);
* 1 knot = 1852/3600 m/s; 1 mph = 0.44704 m/s; 1 km/h = 1/3.6 m/s (exact
  definitions);
* 1 langley/min = 697.3 W/m² (1 cal_th/cm²/min = 4.184·10⁴/60 W/m²);
* conductance: 1 S/m = 10 mS/cm = 10⁴ µS/cm; 1 mho = 1 S (SI definitions);
* turbidity in NTU (nephelometric, white light, EPA 180.1), FNU (formazin
  nephelometric, near infrared, ISO 7027) and FTU are taken as equal
  (common practice; the methods differ and the values are comparable only
  roughly, as the USGS notes for its records).
"""

from __future__ import annotations

from collections.abc import Iterable, Mapping
from dataclasses import dataclass

N_PER_NO3 = 14.007 / 62.004  # g N per g NO3⁻ (IUPAC atomic weights)
N_PER_NH4 = 14.007 / 18.038  # g N per g NH4⁺
P_PER_PO4 = 30.974 / 94.971  # g P per g PO4³⁻
O2_UG_PER_UMOL = 31.998  # µg O2 per µmol O2
FOOT_M = 0.3048
CFS_M3S = FOOT_M ** 3


def normalize_unit(unit: str) -> str:
    """A unit string in a comparable form: lower case, ASCII, single spaces.

    ``"µg/L"``, ``"μg/l"``, ``"ug L-1"`` and ``"ug/L"`` all become ``"ug/l"``;
    ``"°C"`` becomes ``"degc"``; ``"m³/s"`` becomes ``"m3/s"``.
    """
    u = unit.strip().lower()
    for a, b in (("µ", "u"), ("μ", "u"), ("°", "deg"), ("³", "3"), ("²", "2"), ("⁻¹", "-1"),
                 ("⁻²", "-2"), ("·", " "), ("per ", "/")):
        u = u.replace(a, b)
    u = " ".join(u.split())
    # "ug l-1" → "ug/l", "w m-2" → "w/m2", "m3 s-1" → "m3/s", "us cm-1" → "us/cm"
    for a, b in ((" l-1", "/l"), (" m-2", "/m2"), (" s-1", "/s"), (" h-1", "/h"), (" d-1", "/d"),
                 (" cm-1", "/cm"), (" m-1", "/m")):
        if u.endswith(a):
            u = u[: -len(a)] + b
    return u.replace(" / ", "/").replace(" /", "/").replace("/ ", "/")


@dataclass(frozen=True)
class UnitTable:
    """The units of one variable: ``shown`` in messages, ``factors`` keyed by normalised spelling."""

    shown: tuple[str, ...]
    factors: Mapping[str, tuple[float, float]]


def _table(entries: Iterable[tuple[str, float, float]], shown: Iterable[str]) -> UnitTable:
    factors: dict[str, tuple[float, float]] = {}
    for u, s, o in entries:
        key = normalize_unit(u)
        assert factors.get(key, (s, o)) == (s, o), f"{u!r} spelled twice with different factors"
        factors[key] = (float(s), float(o))
    shown = tuple(shown)
    assert all(normalize_unit(u) in factors for u in shown), shown
    return UnitTable(shown, factors)


_MASS = (("ug/L", 1.0), ("mg/L", 1000.0), ("ng/L", 1e-3), ("g/L", 1e6), ("mg/m3", 1.0), ("g/m3", 1000.0),
         ("ng/mL", 1.0), ("ppb", 1.0), ("ppm", 1000.0))
_MASS_SHOWN = ("ug/L", "mg/L", "ng/L", "mg/m3", "ppb", "ppm")

#: chemical forms written after a concentration unit ("mg/L as N", "mg/L NO3-N", "mg N/L"):
#: the element form (as N, as P) and the forms that name the element (NO3-N …)
ELEMENT_FORMS = {
    "n": ("n", "no3-n", "no2+no3-n", "no3+no2-n", "nox-n", "nh4-n", "nh3-n", "tn", "tn-n"),
    "p": ("p", "po4-p", "tp", "tp-p", "srp-p"),
}
ION_FORMS = {"no3": N_PER_NO3, "nh4": N_PER_NH4, "po4": P_PER_PO4}


def _form_spellings(unit: str, form: str) -> list[str]:
    """The ways a concentration ``unit`` with a chemical ``form`` is written: mg/L as N, mg/L-N, mg/L N, mg N/L …"""
    out = [f"{unit} as {form}", f"{unit}-{form}", f"{unit} {form}"]
    if unit.endswith("/L"):  # "mg N/L"; not from mg/m3 or ng/mL, whose mass would read per litre
        mass = unit[:-2]
        out += [f"{mass} {form}/L", f"{mass}{form}/L", f"{mass}-{form}/L"]
    return out


def concentration() -> UnitTable:
    """Mass concentrations [µg/L]."""
    return _table(((u, s, 0.0) for u, s in _MASS), _MASS_SHOWN)


def element(symbol: str, ion: str | None) -> UnitTable:
    """Concentrations of nitrogen (``symbol`` "n") or phosphorus ("p") [µg/L as the element].

    A plain mass unit is read as the element; ``ion`` ("no3", "nh4", "po4")
    is the ion the variable may be reported as, converted by its molar mass.
    """
    entries = [(u, s, 0.0) for u, s in _MASS]
    for u, s in _MASS:
        for form in ELEMENT_FORMS[symbol]:
            entries += [(x, s, 0.0) for x in _form_spellings(u, form)]
        if ion is not None:
            entries += [(x, s * ION_FORMS[ion], 0.0) for x in _form_spellings(u, ion)]
    sym = symbol.upper()
    shown = [f"ug/L {sym}", f"mg/L {sym}"]
    if ion is not None:
        shown += [f"ug/L {ion.upper()}", f"mg/L {ion.upper()}"]
    return _table(entries, shown + ["ug/L", "mg/L", "ppb", "ppm"])


_F = (5.0 / 9.0, -32.0 * 5.0 / 9.0)
TEMPERATURE = _table([("degC", 1.0, 0.0), ("C", 1.0, 0.0), ("celsius", 1.0, 0.0), ("deg C", 1.0, 0.0),
                      ("degF", *_F), ("F", *_F), ("fahrenheit", *_F), ("deg F", *_F),
                      ("K", 1.0, -273.15), ("kelvin", 1.0, -273.15)], ("degC", "°C", "degF", "°F", "K"))
LENGTH = _table([("m", 1.0, 0.0), ("cm", 0.01, 0.0), ("mm", 0.001, 0.0), ("ft", FOOT_M, 0.0),
                 ("feet", FOOT_M, 0.0), ("in", 0.0254, 0.0)], ("m", "cm", "mm", "ft", "in"))
DISCHARGE = _table([("m3/s", 1.0, 0.0), ("cms", 1.0, 0.0), ("cumecs", 1.0, 0.0), ("L/s", 1e-3, 0.0),
                    ("m3/h", 1.0 / 3600.0, 0.0), ("m3/d", 1.0 / 86400.0, 0.0),
                    ("ML/d", 1e3 / 86400.0, 0.0),  # megalitres per day
                    ("cfs", CFS_M3S, 0.0), ("ft3/s", CFS_M3S, 0.0), ("cusecs", CFS_M3S, 0.0)],
                   ("m3/s", "L/s", "m3/h", "m3/d", "ML/d", "cfs"))
IRRADIANCE = _table([("W/m2", 1.0, 0.0), ("kW/m2", 1000.0, 0.0), ("ly/min", 697.3, 0.0),
                     ("langley/min", 697.3, 0.0)], ("W/m2", "kW/m2", "ly/min"))
SPEED = _table([("m/s", 1.0, 0.0), ("km/h", 1.0 / 3.6, 0.0), ("kph", 1.0 / 3.6, 0.0),
                ("kn", 1852.0 / 3600.0, 0.0), ("kt", 1852.0 / 3600.0, 0.0), ("knots", 1852.0 / 3600.0, 0.0),
                ("mph", 0.44704, 0.0)], ("m/s", "km/h", "knots", "mph"))
OXYGEN = _table([("mg/L", 1.0, 0.0), ("g/m3", 1.0, 0.0), ("ppm", 1.0, 0.0), ("ug/L", 1e-3, 0.0),
                 ("umol/L", O2_UG_PER_UMOL * 1e-3, 0.0), ("uM", O2_UG_PER_UMOL * 1e-3, 0.0)],
                ("mg/L", "ug/L", "umol/L", "ppm"))
SATURATION = _table([("%", 1.0, 0.0), ("percent", 1.0, 0.0), ("% sat", 1.0, 0.0), ("%sat", 1.0, 0.0),
                     ("% saturation", 1.0, 0.0), ("pct", 1.0, 0.0)], ("%", "% sat"))
PH = _table([("-", 1.0, 0.0), ("", 1.0, 0.0), ("pH", 1.0, 0.0), ("pH units", 1.0, 0.0), ("SU", 1.0, 0.0),
             ("1", 1.0, 0.0)], ("-", "pH", "SU"))
TURBIDITY = _table([("NTU", 1.0, 0.0), ("FNU", 1.0, 0.0), ("FTU", 1.0, 0.0)], ("NTU", "FNU", "FTU"))
CONDUCTANCE = _table([("uS/cm", 1.0, 0.0), ("umho/cm", 1.0, 0.0), ("mS/cm", 1000.0, 0.0),
                      ("mmho/cm", 1000.0, 0.0), ("S/m", 1e4, 0.0), ("mS/m", 10.0, 0.0)],
                     ("uS/cm", "mS/cm", "mS/m", "S/m"))

_CONC = concentration()
_NITRATE, _AMMONIUM, _NITROGEN = element("n", "no3"), element("n", "nh4"), element("n", None)
_PHOSPHORUS = element("p", "po4")

#: canonical variable → its units
TABLES: dict[str, UnitTable] = {
    "chlorophyll_fluorescence": _CONC, "phycocyanin": _CONC, "chlorophyll_a": _CONC, "microcystin": _CONC,
    "nitrate": _NITRATE, "ammonium": _AMMONIUM, "total_nitrogen": _NITROGEN,
    "srp": _PHOSPHORUS, "total_phosphorus": _PHOSPHORUS,
    "dissolved_oxygen": OXYGEN, "oxygen_saturation": SATURATION, "ph": PH, "turbidity": TURBIDITY,
    "specific_conductance": CONDUCTANCE,
    "water_temperature": TEMPERATURE, "air_temperature": TEMPERATURE, "secchi_depth": LENGTH,
    "discharge": DISCHARGE, "shortwave_radiation": IRRADIANCE, "wind_speed": SPEED,
}

#: every chemical-form word that may stand in parentheses after a unit and belongs to it ("mg/L (as N)")
FORM_WORDS = frozenset(f for forms in ELEMENT_FORMS.values() for f in forms) | frozenset(ION_FORMS)
