"""Conversions from the units people send to Bloomline's canonical units.

Canonical units are those of :mod:`monitor.ingest.variables` (µg/L with nitrogen as
N and phosphorus as P, °C, m, m³/s, W/m², m/s, mg/L of oxygen …); the accepted
spellings and factors are in :mod:`monitor.ingest.unit_tables`. A unit is
resolved in this order:

1. the feed's own unit map (``units = { "ug/L N (nitrate+nitrite)" = "ug/L N" }``),
   matched on the normalised spelling;
2. the station's calibration of a raw sensor unit (RFU, mV, counts):
   ``value = slope · raw + intercept``;
3. the variable's table;
4. the same with annotations in parentheses removed: ``ug/L (extracted; lab)``
   is read as ``ug/L`` and ``m/s (assumed)`` as ``m/s``. A parenthesised
   chemical form belongs to the unit and is kept: ``mg/L (as N)`` is read as
   ``mg/L as N``, never as a plain ``mg/L``.

An unknown unit or variable is a :class:`UnitError` whose message lists the
spellings people write (``ug/L N``, ``mg/L P`` …); the ingest records it as
the row's rejection reason.
"""

from __future__ import annotations

import re
from collections.abc import Mapping
from dataclasses import dataclass

import numpy as np

from monitor.ingest.unit_tables import FORM_WORDS, TABLES, normalize_unit
from monitor.ingest.variables import VARIABLES

__all__ = ["UnitError", "Resolved", "normalize_unit", "strip_annotations", "resolve", "conversion",
           "to_canonical", "known_unit", "shown_units"]

assert set(TABLES) == set(VARIABLES), "every canonical variable needs its unit table"

_PAREN = re.compile(r"\(([^()]*)\)")
RAW_SENSOR_UNITS = frozenset({"rfu", "mv", "counts", "v"})


class UnitError(ValueError):
    """A unit or variable Bloomline does not know how to convert."""


@dataclass(frozen=True)
class Resolved:
    """How a unit string converts: canonical = scale · value + offset.

    read_as: the unit the string was read as when an annotation was
    removed (``"ug/L N"`` for ``"ug/L N (nitrate+nitrite)"``), else None.
    """

    scale: float
    offset: float
    read_as: str | None = None


def strip_annotations(unit: str) -> tuple[str, list[str]]:
    """(the unit without its parenthesised annotations, the annotations).

    A parenthesised chemical form (``(as N)``, ``(NO3-N)``, ``(P)``) is part of
    the unit and stays, without its parentheses; nested parentheses are
    removed from the inside out.
    """
    notes: list[str] = []

    def drop(match: re.Match) -> str:
        inner = match.group(1).strip()
        form = " ".join(inner.lower().split())
        if form.startswith("as "):
            form = form[3:].strip()
        if form in FORM_WORDS:
            return f" as {form} " if inner.lower().startswith("as ") else f" {form} "
        notes.append(inner)
        return " "

    out = unit
    while True:
        new = _PAREN.sub(drop, out)
        if new == out:
            break
        out = new
    return " ".join(out.split()), notes


def _lookup(variable: str, unit: str, calibration: Mapping | None) -> tuple[float, float] | None:
    key = normalize_unit(unit)
    cal = (calibration or {}).get(variable)
    if cal is not None and normalize_unit(cal.unit) == key:
        return (float(cal.slope), float(cal.intercept))
    return TABLES[variable].factors.get(key)


def resolve(variable: str, unit: str, calibration: Mapping | None = None,
            unit_map: Mapping[str, str] | None = None) -> Resolved:
    """How ``unit`` converts to the canonical unit of ``variable`` (see the module's order of resolution).

    calibration: the station's ``{variable: Calibration}``; unit_map: the
    feed's ``{unit as sent: unit to read it as}``. Raises :class:`UnitError`
    with the spellings that are accepted.
    """
    if variable not in VARIABLES:
        raise UnitError(f"unknown variable {variable!r}; expected one of {', '.join(VARIABLES)}")
    if unit_map:
        mapped = {normalize_unit(k): v for k, v in unit_map.items()}.get(normalize_unit(unit))
        if mapped is not None:
            unit = mapped
    got = _lookup(variable, unit, calibration)
    if got is not None:
        return Resolved(*got)
    bare, notes = strip_annotations(unit)
    if bare != unit:
        got = _lookup(variable, bare, calibration)
        if got is not None:
            return Resolved(*got, read_as=bare if notes else None)
    cal = (calibration or {}).get(variable)
    hint = f" or {cal.unit!r} (station calibration)" if cal is not None else ""
    key = normalize_unit(bare)
    raw = "" if cal is not None or key not in RAW_SENSOR_UNITS else \
        "; a raw sensor unit needs a calibration for this station"
    ignored = f" (read as {bare!r} without the annotation in parentheses)" if bare != unit else ""
    raise UnitError(f"unknown unit {unit!r}{ignored} for {variable}; expected {', '.join(shown_units(variable))}"
                    f"{hint}{raw}")


def conversion(variable: str, unit: str, calibration: Mapping | None = None,
               unit_map: Mapping[str, str] | None = None) -> tuple[float, float]:
    """(scale, offset) such that canonical = scale · value + offset (:func:`resolve`)."""
    r = resolve(variable, unit, calibration, unit_map)
    return (r.scale, r.offset)


def to_canonical(values, variable: str, unit: str, calibration: Mapping | None = None) -> np.ndarray:
    """Convert ``values`` [unit] to the canonical unit of ``variable`` (vectorised)."""
    scale, offset = conversion(variable, unit, calibration)
    return np.asarray(values, dtype=float) * scale + offset


def shown_units(variable: str) -> tuple[str, ...]:
    """The spellings of ``variable``'s units as people write them (for messages)."""
    return TABLES[variable].shown


def known_unit(unit: str) -> bool:
    """Whether some canonical variable accepts ``unit`` as written (annotations not removed)."""
    key = normalize_unit(unit)
    return any(key in t.factors for t in TABLES.values())
