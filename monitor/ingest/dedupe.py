"""Repeats inside one batch: equal values are duplicates, differing ones rejections.

A reading is identified by its station, variable and time, and whether it
is a whole-day value (and issue time for weather forecasts); the first record of a key wins, a later record with
the same value counts as a duplicate and one with another value is
rejected, naming the line it conflicts with. Two readings have the same
value when both are missing, both are plain numbers that agree, or both are
censored with the same detection limit (or both with an unknown one).
"""

from __future__ import annotations

import numpy as np
import pandas as pd

from monitor.ingest.parsing import Parsed
from monitor.ingest.tables import Rejection


def same_values(a: np.ndarray, b: np.ndarray) -> np.ndarray:
    """Element-wise: both missing (NaN), or equal within a relative 1e-9 (absolute below 1)."""
    both_nan = np.isnan(a) & np.isnan(b)
    with np.errstate(invalid="ignore"):
        close = np.abs(a - b) <= 1e-9 * np.maximum(1.0, np.abs(b))
    return both_nan | close


def same_readings(a: np.ndarray, a_censored: np.ndarray, b: np.ndarray, b_censored: np.ndarray) -> np.ndarray:
    """Element-wise: the same value (:func:`same_values`) and the same censoring (a censored reading's
    value is its detection limit)."""
    return (np.asarray(a_censored, dtype=bool) == np.asarray(b_censored, dtype=bool)) & same_values(a, b)


def describe(value: float, censored: bool) -> str:
    """A reading's value as a message shows it: ``3.5``, ``<0.1`` (censored), ``<?`` (unknown limit), ``missing``."""
    if censored:
        return "<?" if np.isnan(value) else f"<{float(value)!r}"
    return "missing" if np.isnan(value) else repr(float(value))


def dedupe_batch(parsed: Parsed, rejections: list[Rejection], keys: list[str]) -> tuple[pd.DataFrame, int]:
    """Drop repeats inside the batch: equal values are duplicates, differing ones rejections.

    keys: ``["station", "variable", "t"]``, with ``"issued"`` for weather
    forecasts. Returns the remaining readings sorted by station, variable,
    (issue time,) time [ns] (columns station, variable, t, value, line,
    censored, unit, whole_day), with an integer column ``series`` numbering the
    (station, variable) series in that order, and the number of duplicates.
    """
    issued = "issued" in keys
    n = parsed.value.size
    st_codes, st_names = pd.factorize(parsed.station, sort=True)
    var_codes, var_names = pd.factorize(parsed.variable, sort=True)
    sort_keys = [parsed.line, parsed.whole_day, parsed.time_ns] + ([parsed.issued_ns] if issued else []) \
        + [var_codes, st_codes]
    order = np.lexsort(sort_keys) if n else np.array([], dtype=np.int64)
    st_c, var_c, t = st_codes[order], var_codes[order], parsed.time_ns[order]
    value, line, censored = parsed.value[order], parsed.line[order], parsed.censored[order]
    same_key = np.zeros(n, dtype=bool)
    if n > 1:
        whole = parsed.whole_day[order]
        same_key[1:] = (st_c[1:] == st_c[:-1]) & (var_c[1:] == var_c[:-1]) & (t[1:] == t[:-1]) \
            & (whole[1:] == whole[:-1])
        if issued:
            iss = parsed.issued_ns[order]
            same_key[1:] &= iss[1:] == iss[:-1]
    duplicate = 0
    if same_key.any():
        first = np.maximum.accumulate(np.where(same_key, 0, np.arange(n)))
        equal = same_readings(value, censored, value[first], censored[first])
        conflict = same_key & ~equal
        for i in np.nonzero(conflict)[0]:
            j = first[i]
            rejections.append(Rejection(int(line[i]), parsed.raw_text(line[i]),
                                        f"{var_names[var_c[i]]} at the same time as line {line[j]} "
                                        f"with another value ({describe(value[i], censored[i])} vs "
                                        f"{describe(value[j], censored[j])})"))
        duplicate = int((same_key & equal).sum())
    keep = ~same_key
    series = (st_c.astype(np.int64) * max(len(var_names), 1) + var_c)[keep]
    frame = pd.DataFrame({"station": np.asarray(st_names, dtype=object)[st_c[keep]] if n else np.array([], dtype=object),
                          "variable": np.asarray(var_names, dtype=object)[var_c[keep]] if n else np.array([], dtype=object),
                          "t": t[keep], "value": value[keep], "line": line[keep], "series": series,
                          "censored": censored[keep], "unit": parsed.unit[order][keep],
                          "whole_day": parsed.whole_day[order][keep]})
    if issued:
        frame["issued"] = parsed.issued_ns[order][keep]
    return frame, duplicate
