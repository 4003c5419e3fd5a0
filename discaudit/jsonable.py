"""Conversion of results to plain JSON values (no numpy types, no NaN or infinity)."""

from __future__ import annotations

import math
from collections import Counter
from collections.abc import Mapping, Sequence
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
        if value.ndim and value.dtype.kind in "biu":
            return value.tolist()  # already plain Python ints and bools, nested as the array
        if value.ndim and value.dtype.kind == "f" and np.isfinite(value).all():
            return value.tolist()  # plain Python floats, none of them to replace
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


def distinct_names(values: Sequence[Any]) -> list[str]:
    """Text for each value that tells apart any two which would print alike.

    A value prints as ``str(label(v))`` unless another value in ``values`` prints the same, as
    True and 'True' or 1 and '1' do: then each of those is shown as its ``repr`` (True, 'True';
    1, '1'). Should reprs still coincide, a ``#k`` suffix (k the position) keeps them apart.
    """
    plain_text = [str(label(v)) for v in values]
    counts = Counter(plain_text)
    out = [repr(v) if counts[t] > 1 else t for v, t in zip(values, plain_text, strict=True)]
    if len(set(out)) < len(out):
        seen = Counter(out)
        out = [f"{t} #{k}" if seen[t] > 1 else t for k, t in enumerate(out)]
    return out
