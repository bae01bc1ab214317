"""Cells of candidate readings → values in canonical units: missing, censored, sentinels, units.

For each candidate reading (its cell, variable, unit and station):

* the variable must be canonical (:mod:`monitor.ingest.variables`) or one the
  station declares ``stored_only``; any other is rejected with the reason;
* the cell must be a finite decimal number, *missing* (empty, ``NA``,
  ``NaN`` …: kept as a missing reading, QC flag 9, no value stored) or
  below a detection limit (``<0.1``);
* **sentinels** — the feed's fill values (default -9999 and -999) and any
  number of magnitude 10³⁰ or more, compared as written — are rejected with
  the reason, never stored;
* **censored values**: ``<x`` is below the detection limit x. Unless the
  feed's ``below_detection`` is "reject", it is kept as censored with its
  limit (converted like a value; a limit that is not positive, or is a
  sentinel, is rejected). With ``negative_means_below_detection`` a negative
  value of a lab analyte (a blank-corrected result below detection) is
  censored too, with the feed's ``detection_limits`` entry for the variable
  (canonical unit) or an unknown limit. A censored value is never a plain
  number: the store keeps it with ``censored = 1`` and its limit;
* **units**: values are converted per (station, variable, unit) by
  :func:`monitor.ingest.units.resolve` (the feed's unit map, the station's
  calibration, annotations in parentheses ignored and noted); a conversion
  whose result is not finite or reaches 10³⁰ is rejected. Stored-only
  variables keep their value and unit string as sent.
"""

from __future__ import annotations

from collections.abc import Callable, Mapping
from dataclasses import dataclass

import numpy as np

from monitor.ingest.cells import parse_numbers
from monitor.ingest.units import UnitError, resolve
from monitor.ingest.variables import VARIABLES

MAX_UNIT_CHARS = 64  # a stored-only variable's unit string is stored; longer ones are rejected

_DETECTION_LIMITED = frozenset(k for k, v in VARIABLES.items() if v.detection_limited)


@dataclass
class Values:
    """The values of candidate readings, in canonical units (stored-only variables: as sent)."""

    number: np.ndarray  # float: the value, or a censored value's detection limit (NaN: missing, or limit unknown)
    missing: np.ndarray  # bool
    censored: np.ndarray  # bool
    unit: np.ndarray  # object: a stored-only variable's unit string as sent, else None


class Verdicts:
    """Which of n items are still accepted, and the first reason against each of the others."""

    def __init__(self, n: int):
        self.ok = np.ones(n, dtype=bool)
        self.reason = np.full(n, None, dtype=object)

    def reject(self, mask: np.ndarray, reason: str | Callable[[int], str]) -> None:
        """Reject the items in ``mask`` not yet rejected; ``reason`` is a string or a function of the item."""
        new = mask & self.ok
        for j in np.nonzero(new)[0]:
            self.reason[j] = reason if isinstance(reason, str) else reason(j)
        self.ok[new] = False


def _shown(cell) -> str:
    return repr(str(cell).strip()[:60])


def _fmt(x: float) -> str:
    return f"{x:g}"


def read_values(cells: np.ndarray, variable: np.ndarray, unit: np.ndarray, station: np.ndarray, feed,
                known: Mapping, verdicts: Verdicts, where: Callable[[int], str], notes: list[str]) -> Values:
    """Values of the candidate readings; ``verdicts`` rejects what cannot be stored, with the reason.

    cells, variable, unit, station: one entry per candidate (object arrays);
    feed: its :class:`monitor.config.FeedConfig`; known: the config's
    stations by id; where: a prefix for reasons (the wide layout's column);
    notes: the batch's notes, extended (units read without their annotation).
    """
    own = {sid: frozenset(getattr(st, "stored_only", ())) for sid, st in known.items()}
    n = len(cells)
    canonical = np.fromiter((v in VARIABLES for v in variable), dtype=bool, count=n)
    stored_only = np.fromiter((v in own.get(s, ()) for v, s in zip(variable, station)), dtype=bool, count=n)
    stored_only &= ~canonical
    unknown = ~canonical & ~stored_only
    verdicts.reject(unknown, lambda i: f"unknown variable {str(variable[i])[:60]!r}; expected one of "
                                       f"{', '.join(VARIABLES)}, or a variable the station declares stored_only")
    number, missing, below = parse_numbers(cells)
    bad = ~(missing | below | np.isfinite(number))
    verdicts.reject(bad, lambda i: where(i) + f"value {_shown(cells[i])} is not a finite decimal number")
    _reject_sentinels(cells, number, missing, below, feed, verdicts, where)
    censored = below.copy()
    if below.any() and feed.below_detection == "reject":
        verdicts.reject(below, lambda i: where(i) + f"value {_shown(cells[i])} is below the detection limit "
                                                    "(the feed's below_detection is 'reject')")
    limit_given = np.zeros(number.size, dtype=bool)  # a limit from the config, already canonical
    if getattr(feed, "negative_means_below_detection", False):
        lab = np.fromiter((v in _DETECTION_LIMITED for v in variable), dtype=bool, count=n)
        with np.errstate(invalid="ignore"):
            negative = lab & ~missing & ~below & (number < 0)
        limits = getattr(feed, "detection_limits", {})
        number[negative] = [limits.get(v, np.nan) for v in variable[negative]]
        censored |= negative
        limit_given = negative
    unit_out = np.full(number.size, None, dtype=object)
    _convert(number, missing | limit_given, variable, unit, station, stored_only, feed, known, verdicts, where,
             notes, unit_out)
    return Values(number, missing, censored, unit_out)


def _reject_sentinels(cells, number, missing, below, feed, verdicts: Verdicts, where) -> None:
    """Fill values and magnitudes ≥ the feed's sentinel magnitude, as written, rejected; so are detection
    limits that are not positive."""
    sentinels = np.asarray(getattr(feed, "sentinels", ()), dtype=float)
    magnitude = float(getattr(feed, "sentinel_magnitude", 1e30))
    present = ~missing & np.isfinite(number)
    fill = present & (np.isin(number, sentinels) | (np.abs(np.where(present, number, 0.0)) >= magnitude))
    verdicts.reject(fill, lambda i: where(i) + f"value {_shown(cells[i])} is a fill value (sentinel: "
                                               f"{', '.join(map(_fmt, sentinels))} or magnitude ≥ "
                                               f"{_fmt(magnitude)}), not a reading")
    with np.errstate(invalid="ignore"):
        nonpositive = below & (number <= 0)
    verdicts.reject(nonpositive, lambda i: where(i) + f"value {_shown(cells[i])}: a detection limit must be "
                                                      "positive")


def _convert(number, keep_as_is, variable, unit, station, stored_only, feed, known, verdicts: Verdicts, where,
             notes: list[str], unit_out: np.ndarray) -> None:
    """Numbers to canonical units in place, per (station, variable, unit); unknown units and overflowing
    conversions rejected. ``keep_as_is``: entries not to convert (missing, limits from the config)."""
    magnitude = float(getattr(feed, "sentinel_magnitude", 1e30))
    unit_map = getattr(feed, "units", None)
    groups: dict[tuple, list[int]] = {}
    for i, key in enumerate(zip(station, variable, unit)):
        groups.setdefault(key, []).append(i)
    for (s, v, u), members in groups.items():
        members = np.asarray(members, dtype=np.int64)
        members = members[verdicts.ok[members]]
        if members.size == 0:
            continue
        if stored_only[members[0]]:
            text = str(u).strip()
            if len(text) > MAX_UNIT_CHARS:
                reason = f"unit {text[:60]!r}… is longer than {MAX_UNIT_CHARS} characters"
                verdicts.reject(_mask(number.size, members), lambda i, reason=reason: where(i) + reason)
            unit_out[members] = text
            continue
        cal = known[s].calibration if s in known else None
        try:
            r = resolve(v, u, cal, unit_map)
        except UnitError as exc:
            msg = str(exc)
            verdicts.reject(_mask(number.size, members), lambda i, msg=msg: where(i) + msg)
            continue
        if r.read_as is not None:
            note = f"unit {str(u)[:60]!r} read as {r.read_as!r} (annotation in parentheses ignored)"
            if note not in notes:
                notes.append(note)
        conv = members[~keep_as_is[members]]
        if conv.size == 0:
            continue
        raw = number[conv].copy()
        with np.errstate(over="ignore", invalid="ignore"):
            out = raw * r.scale + r.offset
        over = ~np.isfinite(out) | (np.abs(np.where(np.isfinite(out), out, 0.0)) >= magnitude)
        number[conv] = out
        if over.any():
            bad = conv[over]
            written = dict(zip(bad.tolist(), raw[over].tolist()))
            verdicts.reject(_mask(number.size, bad), lambda i, u=u, v=v, written=written: where(i) + (
                f"value {_fmt(written[i])} {str(u)[:60]} overflows when converted to {VARIABLES[v].unit} "
                f"(beyond ±{_fmt(magnitude)})"))
            number[bad] = np.nan


def _mask(n: int, idx: np.ndarray) -> np.ndarray:
    m = np.zeros(n, dtype=bool)
    m[idx] = True
    return m
