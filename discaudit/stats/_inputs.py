"""Coercion of array-like input for the public statistics.

One place turns what a user passes to a function in :mod:`discaudit.stats` into float64
arrays, keeping DataFrame column names, and raises :class:`~discaudit.errors.DataError`
with a message that names the culprit.
"""

from __future__ import annotations

from collections.abc import Sequence
from typing import Any

import numpy as np
import numpy.typing as npt
import pandas as pd

from discaudit.errors import DataError

FloatMatrix = npt.NDArray[np.float64]

#: Squares of values beyond this overflow float64 in a scatter matrix.
LARGEST_SQUARABLE = 1e150


def power_of_two_scaled(values: FloatMatrix) -> FloatMatrix:
    """Each column multiplied by a power of two that brings its range near 1 (exact in float64).

    For statistics that do not depend on the units of a feature (VIF, condition indices,
    Box's M, Wilks' Lambda): squares of features in tiny or huge units then neither underflow
    nor overflow, and no rounding is added.
    """
    spread = np.ptp(values, axis=0)
    _, exponent = np.frexp(np.where(spread > 0, spread, 1.0))
    return np.ldexp(values, -exponent[None, :])


def feature_names(X: Any, p: int) -> list[str]:
    """Column names of ``X`` if it is a DataFrame, else ``x0 .. x{p-1}``."""
    if isinstance(X, pd.DataFrame):
        return [str(c) for c in X.columns]
    return [f"x{j}" for j in range(p)]


def as_matrix(X: Any, *, min_rows: int = 2, name: str = "X") -> tuple[FloatMatrix, list[str]]:
    """Return ``X`` as a finite float64 matrix (n, p) and its feature names.

    Raises
    ------
    DataError
        If ``X`` is not two-dimensional numeric data, has fewer than ``min_rows`` rows,
        or holds NaN or infinite values (the offending columns are named).
    """
    if isinstance(X, pd.Series):
        X = X.to_frame()
    if isinstance(X, pd.DataFrame):
        if X.columns.duplicated().any():
            dup = sorted({str(c) for c in X.columns[X.columns.duplicated()]})
            raise DataError(f"{name} has duplicated column names {_short(dup)}; rename them so results can name them.")
        bad = [str(c) for c, dtype in zip(X.columns, X.dtypes, strict=True) if not _is_numeric_dtype(dtype)]
        if bad:
            raise DataError(
                f"{name} has non-numeric columns {_short(bad)}; pass numeric columns only (encode or drop the others)."
            )
        values = X.to_numpy(dtype=np.float64, copy=False)
    else:
        try:
            values = np.asarray(X, dtype=np.float64)
        except (TypeError, ValueError) as exc:
            raise DataError(f"{name} could not be read as numbers ({exc}); pass a numeric array.") from None
        if values.ndim == 1:
            values = values[:, None]
    if values.ndim != 2:
        raise DataError(f"{name} must be two-dimensional (rows x features); got shape {values.shape}.")
    n, p = values.shape
    names = feature_names(X, p)
    if p == 0:
        raise DataError(f"{name} has no columns; pass at least one numeric feature.")
    if n < min_rows:
        raise DataError(f"{name} has {n} rows; this statistic needs at least {min_rows}.")
    # Two reductions screen for non-finite values (a NaN propagates into the minimum, an infinity is
    # the minimum or the maximum) without an n x p mask; the mask is made only to name the columns.
    low, high = values.min(axis=0), values.max(axis=0)
    if not (np.isfinite(low).all() and np.isfinite(high).all()):
        counts = (~np.isfinite(values)).sum(axis=0)
        cols = [f"{names[j]} ({int(counts[j])})" for j in np.flatnonzero(counts)]
        raise DataError(
            f"{name} has NaN or infinite values in columns {_short(cols)}; drop or impute those rows first."
        )
    check_magnitude(np.maximum(-low, high), names, f"{name} columns")
    return np.ascontiguousarray(values), names


def check_magnitude(max_abs: npt.NDArray[np.float64], names: Sequence[Any], what: str = "Columns") -> None:
    """DataError naming the columns whose largest magnitude would overflow float64 when squared."""
    huge = max_abs > LARGEST_SQUARABLE
    if huge.any():
        cols = [str(names[int(j)]) for j in np.flatnonzero(huge)]
        raise DataError(
            f"{what} {cols[:8]} hold values beyond 1e150 in magnitude, whose squares overflow float64; "
            "rescale them (e.g. change units or take logs)."
        )


def as_labels(y: Any, n: int, *, name: str = "y") -> tuple[npt.NDArray[np.intp], list[Any]]:
    """Return integer class codes (0..K-1) for ``y`` and the class labels in code order.

    Labels are sorted when they are mutually comparable, otherwise kept in order of first
    appearance, so the result does not depend on row order.

    Raises
    ------
    DataError
        If ``y`` is not one-dimensional, its length differs from ``n``, or a label is missing.
    """
    if np.ndim(y) != 1 and not isinstance(y, pd.Series):
        raise DataError(f"{name} must be one-dimensional; got shape {np.shape(y)}.")
    native = y.to_numpy() if isinstance(y, pd.Series) else np.asarray(y)
    if native.dtype.kind in "iub" and native.shape == (n,):
        # Integers and booleans cannot be missing and are comparable: sorted codes straight from their
        # values, the same codes and (Python) labels as the general path below, without object arrays.
        codes, uniques = pd.factorize(native, sort=True)
        return np.asarray(codes, dtype=np.intp), uniques.tolist()
    labels = pd.Series(np.asarray(y, dtype=object) if not isinstance(y, pd.Series) else y.to_numpy(dtype=object))
    if len(labels) != n:
        raise DataError(f"{name} has {len(labels)} labels but X has {n} rows; they must match.")
    missing = labels.isna().to_numpy()
    if missing.any():
        rows = np.flatnonzero(missing)
        raise DataError(
            f"{name} has {rows.size} missing labels (first at positions {_short([int(r) for r in rows])}); "
            "drop those rows or label them."
        )
    return label_codes(labels)


def label_codes(labels: pd.Series) -> tuple[npt.NDArray[np.intp], list[Any]]:
    """Integer codes of non-missing labels and the classes in code order (see ``ordered_unique``)."""
    first_seen, uniques = pd.factorize(labels, sort=False)
    seen = list(uniques)
    classes = ordered_unique(seen)
    lookup = {c: k for k, c in enumerate(classes)}
    # factorize may keep apart labels Python counts as equal (1 and 1.0): the lookup merges them.
    return np.asarray([lookup[v] for v in seen], dtype=np.intp)[first_seen], classes


def ordered_unique(values: Sequence[Any]) -> list[Any]:
    """Distinct values, sorted if comparable, else in order of first appearance."""
    seen = list(dict.fromkeys(values))
    try:
        return sorted(seen)
    except TypeError:
        return sorted(seen, key=lambda v: (type(v).__name__, str(v)))


def _is_numeric_dtype(dtype: Any) -> bool:
    return bool(pd.api.types.is_numeric_dtype(dtype) or pd.api.types.is_bool_dtype(dtype))


def _short(items: Sequence[Any], limit: int = 6) -> str:
    shown = ", ".join(str(i) for i in items[:limit])
    more = f" and {len(items) - limit} more" if len(items) > limit else ""
    return f"[{shown}{more}]"
