"""Exact comparison of two cycles' inputs (dataclasses, arrays, frames, nested containers)."""

from __future__ import annotations

import dataclasses

import numpy as np
import pandas as pd


def differences(a, b, path: str = "inputs") -> list[str]:
    """Where ``a`` and ``b`` differ (empty: equal to the bit, arrays with NaN in the same places)."""
    if type(a) is not type(b):
        return [f"{path}: {type(a).__name__} != {type(b).__name__}"]
    if dataclasses.is_dataclass(a):
        return [d for f in dataclasses.fields(a) for d in differences(getattr(a, f.name), getattr(b, f.name),
                                                                        f"{path}.{f.name}")]
    if isinstance(a, np.ndarray):
        if a.shape != b.shape or a.dtype != b.dtype:
            return [f"{path}: shape/dtype {a.shape} {a.dtype} != {b.shape} {b.dtype}"]
        same = np.array_equal(a, b, equal_nan=a.dtype.kind in "fc")
        return [] if same else [f"{path}: arrays differ"]
    if isinstance(a, (pd.DataFrame, pd.Series)):
        try:
            (pd.testing.assert_frame_equal if isinstance(a, pd.DataFrame) else pd.testing.assert_series_equal)(
                a, b, check_exact=True)
        except AssertionError as exc:
            return [f"{path}: {exc}"]
        return []
    if isinstance(a, dict):
        if list(a) != list(b):
            return [f"{path}: keys {list(a)} != {list(b)}"]
        return [d for k in a for d in differences(a[k], b[k], f"{path}[{k!r}]")]
    if isinstance(a, (list, tuple)):
        if len(a) != len(b):
            return [f"{path}: length {len(a)} != {len(b)}"]
        return [d for i, (x, y) in enumerate(zip(a, b)) for d in differences(x, y, f"{path}[{i}]")]
    if isinstance(a, float) and np.isnan(a) and np.isnan(b):
        return []
    return [] if a == b else [f"{path}: {a!r} != {b!r}"]
