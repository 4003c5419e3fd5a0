"""Conversion of results to plain JSON values (no numpy types, no NaN or infinity)."""

from __future__ import annotations

import math
from collections.abc import Mapping
from typing import Any

import numpy as np
import pandas as pd


def plain(value: Any) -> Any:
    """Return ``value`` as plain JSON types.

    numpy scalars and arrays become Python numbers and lists, pandas objects become lists
    or mappings, tuples become lists, mapping keys become strings, and non-finite floats
    become ``None`` (the caller records the reason beside them).
    """
    if value is None or isinstance(value, (str, bool)):
        return value
    if isinstance(value, (np.bool_,)):
        return bool(value)
    if isinstance(value, (int, np.integer)):
        return int(value)
    if isinstance(value, (float, np.floating)):
        v = float(value)
        return v if math.isfinite(v) else None
    if isinstance(value, Mapping):
        return {str(k): plain(v) for k, v in value.items()}
    if isinstance(value, pd.Series):
        return {str(k): plain(v) for k, v in value.items()}
    if isinstance(value, pd.DataFrame):
        return [plain(r) for r in value.to_dict(orient="records")]
    if isinstance(value, np.ndarray):
        return [plain(v) for v in value.tolist()]
    if isinstance(value, (list, tuple, set, frozenset)):
        return [plain(v) for v in value]
    if isinstance(value, (pd.Timestamp, np.datetime64)):
        return str(value)
    return str(value)


def label(value: Any) -> Any:
    """A class or row label as a JSON scalar: ints and strings kept, anything else as text."""
    if isinstance(value, (bool, np.bool_)):
        return str(bool(value))
    if isinstance(value, (int, np.integer)):
        return int(value)
    if isinstance(value, str):
        return value
    if isinstance(value, (float, np.floating)) and float(value).is_integer():
        return int(value)
    return str(value)
