"""The input rules, one copy each, shared by every source.

Target and feature columns of a frame, numeric columns, missing values (error or drop rows),
label coding, the magnitude screen, constant and exactly duplicated columns, and the screen for
features with few distinct values. In-memory input applies them to all rows at once; chunked and
distributed input applies them per chunk and merges the results (:mod:`discaudit.sources.chunks`).
Every violation that makes an audit impossible raises :class:`DataError` naming the column,
class or row.
"""

from __future__ import annotations

from collections.abc import Sequence
from dataclasses import dataclass
from typing import Any

import numpy as np
import numpy.typing as npt
import pandas as pd

from discaudit.config import Config
from discaudit.errors import DataError
from discaudit.jsonable import label
from discaudit.stats._inputs import check_magnitude, label_codes
from discaudit.stats.blocks import ROW_BLOCK, block_starts

FloatArray = npt.NDArray[np.float64]

#: Rows compared first when looking for identical columns (a cheap key before a full comparison).
_KEY_ROWS = 64
#: Rows whose distinct values are counted before a full pass (a cheap screen).
_DISTINCT_SCREEN_ROWS = 1000

__all__ = [
    "ColumnScreen",
    "MissingScreen",
    "as_labels",
    "check_classes",
    "check_magnitude",
    "column_range",
    "distinct_values",
    "encode",
    "identical_columns",
    "numeric_columns",
    "raise_for_missing",
    "screen_columns",
    "screen_missing",
    "split",
]


def split(X: Any, y: Any, target: str | None) -> tuple[pd.DataFrame, pd.Series]:
    """The feature frame and the labels of a pandas DataFrame with a target column (or X, y)."""
    if target is not None and y is not None:
        raise DataError("Pass either y or target=, not both.")
    if target is not None:
        if not isinstance(X, pd.DataFrame):
            raise DataError(f"target={target!r} needs a pandas DataFrame; got {type(X).__name__}. Pass X, y instead.")
        if target not in X.columns:
            shown = ", ".join(map(str, list(X.columns)[:8]))
            raise DataError(f"Target column {target!r} not found; the columns are: {shown}.")
        labels = X[target]
        if isinstance(labels, pd.DataFrame):
            raise DataError(f"Target column {target!r} appears more than once; rename the duplicates.")
        frame = X.drop(columns=[target])
    elif y is None:
        raise DataError("No target: pass y, or a DataFrame with target='<column>'.")
    else:
        frame = _as_frame(X)
        labels = as_labels(y, frame.index)
    if frame.columns.duplicated().any():
        dup = sorted({str(c) for c in frame.columns[frame.columns.duplicated()]})
        raise DataError(f"Column names {dup} appear more than once; rename them so findings can name them.")
    if frame.shape[1] == 0:
        raise DataError("No feature columns: X has only the target.")
    return frame, labels


def _as_frame(X: Any) -> pd.DataFrame:
    if isinstance(X, pd.DataFrame):
        return X
    if isinstance(X, pd.Series):
        return X.to_frame()
    array = np.asarray(X, dtype=object) if not isinstance(X, np.ndarray) else X
    if array.ndim == 1:
        array = array[:, None]
    if array.ndim != 2:
        raise DataError(f"X must be two-dimensional (rows x features); got shape {array.shape}.")
    frame = pd.DataFrame(array, columns=[f"x{j}" for j in range(array.shape[1])])
    inferred: pd.DataFrame = frame.infer_objects()  # pandas-stubs' Self reads as Any when checked for 3.10
    return inferred


def as_labels(y: Any, index: pd.Index) -> pd.Series:
    """The labels ``y`` as an object Series on ``index``; DataError for a wrong shape or length."""
    if isinstance(y, pd.DataFrame):
        if y.shape[1] != 1:
            raise DataError(f"y must be one column; got a DataFrame with {y.shape[1]} columns.")
        y = y.iloc[:, 0]
    if not isinstance(y, pd.Series):
        array = np.asarray(y, dtype=object)
        if array.ndim != 1:
            raise DataError(f"y must be one-dimensional; got shape {array.shape}.")
        y = pd.Series(array)
    if len(y) != len(index):
        raise DataError(f"X has {len(index)} rows but y has {len(y)} labels; they must match.")
    labels: pd.Series = pd.Series(y.to_numpy(dtype=object), index=index, name=y.name)
    return labels


def numeric_columns(frame: pd.DataFrame, config: Config) -> tuple[pd.DataFrame, list[str]]:
    """The numeric (and boolean) feature columns, and the names of the others (error or set aside)."""
    non_numeric = [
        str(c)
        for c in frame.columns
        if not (pd.api.types.is_numeric_dtype(frame[c].dtype) or pd.api.types.is_bool_dtype(frame[c].dtype))
        or isinstance(frame[c].dtype, pd.CategoricalDtype)
    ]
    if non_numeric and config.non_numeric == "error":
        raise DataError(
            f"Non-numeric feature columns {non_numeric[:8]}: encode them as numbers, drop them, or pass "
            "Config(non_numeric='drop') to set them aside."
        )
    keep = [c for c in frame.columns if str(c) not in non_numeric]
    if not keep:
        raise DataError(f"No numeric feature: every feature column is non-numeric ({non_numeric[:8]}).")
    return frame[keep], non_numeric


@dataclass(frozen=True)
class MissingScreen:
    """Rows with a missing label or a non-finite feature value, found in one pass."""

    missing_per_column: npt.NDArray[np.int64]
    missing_label: npt.NDArray[np.bool_]
    bad_rows: npt.NDArray[np.bool_]
    first_bad_row: Any

    @property
    def keep(self) -> npt.NDArray[np.bool_]:
        """Rows with a label and finite values in every feature."""
        return ~(self.bad_rows | self.missing_label)


def screen_missing(values: FloatArray, labels: pd.Series, index: pd.Index) -> MissingScreen:
    """Where the labels and the float feature values of some rows are missing or non-finite."""
    bad = ~np.isfinite(values)
    bad_rows: npt.NDArray[np.bool_] = np.asarray(bad.any(axis=1))
    first = label(index[np.flatnonzero(bad_rows)[0]]) if bad_rows.any() else None
    return MissingScreen(bad.sum(axis=0).astype(np.int64), labels.isna().to_numpy(), bad_rows, first)


def raise_for_missing(
    missing_per_column: npt.NDArray[np.int64],
    first_bad_row: Any,
    n_missing_labels: int,
    columns: Sequence[Any],
    label_rows: Sequence[Any] = (),
) -> None:
    """DataError for missing labels or non-finite values under ``Config(missing='error')``."""
    if n_missing_labels:
        where = f" (rows {list(label_rows)[:5]})" if len(label_rows) else ""
        raise DataError(
            f"The target has {n_missing_labels} missing labels{where}; label or drop them, "
            "or pass Config(missing='drop_rows')."
        )
    if missing_per_column.any():
        cols = [f"{columns[int(j)]} ({int(missing_per_column[j])})" for j in np.flatnonzero(missing_per_column)]
        raise DataError(
            f"NaN or infinite values in columns {', '.join(cols[:8])} (first at row "
            f"{first_bad_row}); impute or drop them, or pass Config(missing='drop_rows')."
        )


def encode(labels: pd.Series) -> tuple[npt.NDArray[np.intp], tuple[Any, ...]]:
    """Integer codes of the labels and the classes (sorted when comparable); DataError if too few."""
    codes, classes = label_codes(labels)
    check_classes(classes, np.bincount(codes, minlength=len(classes)))
    return codes, tuple(classes)


def check_classes(classes: Sequence[Any], counts: npt.NDArray[np.int64]) -> None:
    """DataError unless there are two or more classes, each with at least two rows."""
    if len(classes) < 2:
        found = f"only class {classes[0]!r}" if len(classes) else "no labelled rows"
        raise DataError(f"An audit needs at least two classes in the target; found {found}.")
    small = [f"{classes[int(k)]!r} ({int(counts[k])} row)" for k in np.flatnonzero(counts < 2)]
    if small:
        raise DataError(
            f"Class {', '.join(small)} has fewer than two rows; a class covariance needs at least two. "
            "Merge or drop that class."
        )


def column_range(values: FloatArray) -> tuple[FloatArray, FloatArray]:
    """Per-column minimum and maximum (+inf and -inf for no rows), by reductions only (no copy)."""
    if not values.shape[0]:
        p = values.shape[1]
        return np.full(p, np.inf), np.full(p, -np.inf)
    return values.min(axis=0), values.max(axis=0)


def identical_columns(values: FloatArray) -> npt.NDArray[np.intp]:
    """For each column, the first column holding exactly the same values in these rows (itself if none).

    Columns are grouped by their first rows, then compared in full, so no copy of the data is made.
    ``-0.0`` and ``0.0`` count as equal.
    """
    p = values.shape[1]
    out = np.arange(p, dtype=np.intp)
    head = values[: min(values.shape[0], _KEY_ROWS)] + 0.0  # + 0.0: -0.0 and 0.0 are equal values
    by_key: dict[bytes, list[int]] = {}
    for j in range(p):
        candidates = by_key.setdefault(np.ascontiguousarray(head[:, j]).tobytes(), [])
        match = next((i for i in candidates if _equal_columns(values, i, j)), None)
        if match is None:
            candidates.append(j)
        else:
            out[j] = match
    return out


def _equal_columns(values: FloatArray, i: int, j: int) -> bool:
    return all(
        np.array_equal(values[a : a + ROW_BLOCK, i], values[a : a + ROW_BLOCK, j])
        for a in block_starts(values.shape[0])
    )


def distinct_values(column: FloatArray, limit: int) -> frozenset[float] | None:
    """The distinct values of a column when there are at most ``limit``, else None."""
    values = np.unique(column[:_DISTINCT_SCREEN_ROWS])
    if values.size > limit:
        return None
    values = np.unique(column)
    return frozenset(values.tolist()) if values.size <= limit else None


@dataclass(frozen=True)
class ColumnScreen:
    """Which numeric columns are audited, and which are set aside as constant or duplicates."""

    keep: npt.NDArray[np.bool_]
    constant: tuple[str, ...]
    duplicates: tuple[tuple[str, str], ...]


def screen_columns(
    col_min: FloatArray, col_max: FloatArray, same_as: npt.NDArray[np.intp], names: Sequence[str]
) -> ColumnScreen:
    """Set aside constant columns (min == max) and exact duplicates of an earlier column.

    Raises DataError when no column is left. Checks the magnitude of every column first.
    """
    check_magnitude(np.maximum(-col_min, col_max), names)
    constant = col_min == col_max
    duplicate_of = np.where(~constant & (same_as != np.arange(len(names))), same_as, -1)
    keep = ~constant & (duplicate_of < 0)
    constant_names = tuple(str(names[int(j)]) for j in np.flatnonzero(constant))
    if not keep.any():
        raise DataError(
            f"No usable feature: every numeric column is constant or a duplicate ({', '.join(constant_names)}); "
            "an audit needs at least one feature that varies."
        )
    duplicates = tuple((str(names[j]), str(names[i])) for j, i in enumerate(duplicate_of) if i >= 0)
    return ColumnScreen(keep, constant_names, duplicates)
