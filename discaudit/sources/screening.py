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
from discaudit.dataset import Coordinates
from discaudit.errors import DataError
from discaudit.jsonable import distinct_names, label
from discaudit.stats._inputs import check_magnitude, label_codes
from discaudit.stats.blocks import ROW_BLOCK, block_starts

FloatArray = npt.NDArray[np.float64]

#: Rows compared first when looking for identical columns (a cheap key before a full comparison).
_KEY_ROWS = 64
#: Rows whose distinct values are counted before a full pass (a cheap screen).
_DISTINCT_SCREEN_ROWS = 1000

__all__ = [
    "ColumnScreen",
    "Coordinates",
    "MissingScreen",
    "as_labels",
    "audit_values",
    "check_classes",
    "check_magnitude",
    "choose_coordinates",
    "column_kind",
    "column_range",
    "distinct_classes",
    "distinct_values",
    "encode",
    "exact_range",
    "frame_columns",
    "identical_columns",
    "named_columns",
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
    if frame.shape[0] == 0:
        raise DataError("The input has no data rows; an audit needs labelled rows.")
    return named_columns(frame), labels


def named_columns(frame: pd.DataFrame) -> pd.DataFrame:
    """The frame with each column named by the text findings show (columns 1 and '1' become 1 and
    '1', see :func:`~discaudit.jsonable.distinct_names`); the caller's frame is not changed."""
    names = distinct_names(list(frame.columns))
    if list(frame.columns) == names:
        return frame
    renamed: pd.DataFrame = frame.set_axis(pd.Index(names, dtype=object), axis=1)
    return renamed


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


#: What to do about each kind of column that is not plain numbers (the fix named in the error).
_FIXES = {
    "text": "encode it as numbers or drop it",
    "mixed": "clean it: it mixes numbers and other values, so the export or the reader mis-typed it",
    "datetime": "convert it to elapsed time, e.g. (s - s.min()).dt.total_seconds(), or drop it",
    "timedelta": "convert it to a number of units, e.g. s.dt.total_seconds(), or drop it",
    "categorical": "one-hot encode it, or pass Config(categorical='codes') to audit its category codes",
    "complex": "split each into real columns (its real and imaginary parts, or its modulus) or drop it",
    "other": "convert it to numbers or drop it",
}


def column_kind(column: pd.Series) -> str:
    """What a feature column holds: ``numeric`` (audited as is), ``number_objects`` (an object column
    of real numbers, converted), or a kind that is not numbers (``text``, ``mixed``, ``datetime``,
    ``timedelta``, ``categorical``, ``complex``, ``other``)."""
    dtype = column.dtype
    if isinstance(dtype, pd.CategoricalDtype):
        return "categorical"
    if pd.api.types.is_complex_dtype(dtype):
        return "complex"
    if pd.api.types.is_bool_dtype(dtype) or pd.api.types.is_numeric_dtype(dtype):
        return "numeric"
    if pd.api.types.is_datetime64_any_dtype(dtype) or isinstance(dtype, pd.PeriodDtype):
        return "datetime"
    if pd.api.types.is_timedelta64_dtype(dtype):
        return "timedelta"
    if pd.api.types.is_string_dtype(dtype) or pd.api.types.is_object_dtype(dtype):
        present = column[column.notna()]
        numbers = present.map(_is_real_number).to_numpy(dtype=bool)
        if numbers.all():
            return "number_objects" if len(present) else "text"
        if numbers.any():
            return "mixed"
        return "text"
    return "other"


def _is_real_number(value: Any) -> bool:
    if isinstance(value, (bool, np.bool_, str, bytes)):
        return isinstance(value, (bool, np.bool_))
    if isinstance(value, (complex, np.complexfloating)):
        return False
    try:
        float(value)
    except (TypeError, ValueError, OverflowError):
        return False
    return True


def _describe(column: pd.Series, kind: str) -> str:
    """A column's kind in words, for an error message (the mixed types and the first stray value)."""
    if kind == "mixed":
        present = column[column.notna()]
        stray = present[~present.map(_is_real_number).to_numpy(dtype=bool)]
        types = sorted({type(v).__name__ for v in present})
        return f"mixed types {', '.join(types)}; first non-number {stray.iloc[0]!r} at row {label(stray.index[0])!r}"
    return {"text": "text", "other": f"dtype {column.dtype}"}.get(kind, f"{kind} ({column.dtype})")


def numeric_columns(frame: pd.DataFrame, config: Config) -> tuple[pd.DataFrame, list[str], dict[str, str]]:
    """The numeric feature columns, the names set aside as not numbers, and the conversions made.

    Numbers (any integer, float or boolean dtype, pandas nullable ones included) are kept as
    they are. Converted, and recorded: an object column whose every value is a real number
    (pd.to_numeric), and a categorical column under ``Config(categorical='codes')`` (its
    category codes; a missing category becomes a missing value). Complex columns are refused
    whatever the policy (auditing their real part would drop half the number without a word).
    Every other kind (text, mixed numbers and text, datetime, timedelta, categorical) follows
    ``Config.non_numeric``: a DataError naming each column, its kind and the fix, or set aside.
    """
    kinds = {c: column_kind(frame[c]) for c in frame.columns}
    complex_cols = [str(c) for c, k in kinds.items() if k == "complex"]
    if complex_cols:
        raise DataError(
            f"Feature columns {complex_cols[:8]} hold complex numbers; {_FIXES['complex']}. "
            "An audit of the real part alone would silently drop the imaginary part."
        )
    conversions: dict[str, str] = {}
    converted: dict[Any, pd.Series] = {}
    for c, kind in kinds.items():
        if kind == "number_objects":
            converted[c] = pd.to_numeric(frame[c], errors="raise").astype(np.float64)
            conversions[str(c)] = "object column of numbers converted to float64"
        elif kind == "categorical" and config.categorical == "codes":
            codes = frame[c].cat.codes.astype(np.float64)
            converted[c] = codes.where(codes >= 0, np.nan)
            conversions[str(c)] = "categorical: its category codes audited as numbers (Config.categorical='codes')"
    for c in converted:
        kinds[c] = "numeric"
    non_numeric = [c for c, k in kinds.items() if k != "numeric"]
    if non_numeric and config.non_numeric == "error":
        shown = [str(c) for c in non_numeric[:8]]
        listed = "; ".join(f"{c!s} ({_describe(frame[c], kinds[c])}): {_FIXES[kinds[c]]}" for c in non_numeric[:8])
        more = f"; and {len(non_numeric) - 8} more" if len(non_numeric) > 8 else ""
        raise DataError(
            f"Non-numeric feature columns {shown}: {listed}{more}. Or pass Config(non_numeric='drop') to set them aside."
        )
    keep = [c for c in frame.columns if kinds[c] == "numeric"]
    if not keep:
        shown = [str(c) for c in non_numeric[:8]]
        raise DataError(f"No numeric feature: every feature column is non-numeric ({shown}).")
    kept = frame[keep]
    if converted:
        kept = kept.copy()  # the caller's frame is never changed
        for c, values in converted.items():
            kept[c] = values
    return kept, [str(c) for c in non_numeric], conversions


#: A feature is offset-dominated when its spread is below this fraction of its magnitude: fewer
#: than about 33 of float64's 53 bits then vary, and sums of squares about a rounded mean lose them.
OFFSET_FRACTION = 2.0**-20
#: A feature whose centred magnitude is below this is rescaled by a power of two (exact), since
#: its squares would fall among float64's subnormal numbers (below 2.2e-308) or to zero.
SMALLEST_SQUARABLE = 1e-150
#: Integers beyond this are not all exact in float64, so they are centred in integer arithmetic.
EXACT_INTEGERS = 2**53


def _integer_column(column: Any) -> npt.NDArray[Any] | None:
    """The values of an integer column as a numpy integer array (missing ones as 0), else None."""
    dtype = getattr(column, "dtype", None)
    if dtype is None or not pd.api.types.is_integer_dtype(dtype) or pd.api.types.is_bool_dtype(dtype):
        return None
    if isinstance(column, pd.Series):
        target = np.uint64 if str(dtype).lower().startswith("uint") else np.int64
        out: npt.NDArray[Any] = column.to_numpy(dtype=target, na_value=0)
        return out
    return np.asarray(column)


def exact_range(column: Any) -> tuple[int | float, int | float] | None:
    """Smallest and largest finite value, exactly (Python ints for integer columns); None if none."""
    ints = _integer_column(column)
    if ints is not None:
        present = ints if not isinstance(column, pd.Series) else ints[column.notna().to_numpy()]
        return (int(present.min()), int(present.max())) if present.size else None
    with np.errstate(invalid="ignore"):
        values = np.asarray(
            column.to_numpy(dtype=np.float64, na_value=np.nan) if isinstance(column, pd.Series) else column,
            dtype=np.float64,
        )
    finite = values[np.isfinite(values)]
    return (float(finite.min()), float(finite.max())) if finite.size else None


def choose_coordinates(ranges: Sequence[tuple[int | float, int | float] | None]) -> Coordinates:
    """The coordinates of some numeric columns from their exact ranges (see :class:`Coordinates`)."""
    locations: list[int | float] = []
    exponents: list[int] = []
    for found in ranges:
        location: int | float = 0
        if found is not None:
            lo, hi = found
            magnitude, spread = max(abs(lo), abs(hi)), hi - lo
            big_integers = isinstance(lo, int) and magnitude > EXACT_INTEGERS
            if spread > 0 and (big_integers or spread < OFFSET_FRACTION * magnitude):
                location = lo
        centred = 0.0 if found is None else float(max(abs(found[0] - location), abs(found[1] - location)))
        exponents.append(int(np.frexp(centred)[1]) if 0 < centred < SMALLEST_SQUARABLE else 0)
        locations.append(location)
    return Coordinates(tuple(locations), tuple(exponents))


def audit_values(columns: Sequence[Any], coordinates: Coordinates) -> FloatArray:
    """Numeric columns as one C-ordered float64 array in the audit's coordinates (a new array).

    Missing values become NaN. Integer columns with a location are shifted in integer
    arithmetic before conversion, so integers near 2**62 keep every digit that varies.
    """
    n = len(columns[0]) if columns else 0
    out = np.empty((n, len(columns)), dtype=np.float64)
    for j, (column, location, exponent) in enumerate(
        zip(columns, coordinates.locations, coordinates.exponents, strict=True)
    ):
        ints = _integer_column(column) if isinstance(location, int) and location else None
        if ints is not None and isinstance(location, int):
            shifted = _shift_integers(ints, location)
            if isinstance(column, pd.Series) and column.hasnans:
                shifted[column.isna().to_numpy()] = np.nan
            out[:, j] = shifted
        else:
            with np.errstate(invalid="ignore"):
                if isinstance(column, pd.Series):
                    out[:, j] = column.to_numpy(dtype=np.float64, na_value=np.nan)
                else:
                    out[:, j] = column
            if location:
                out[:, j] -= location
        if exponent:
            out[:, j] = np.ldexp(out[:, j], -exponent)
    return out


def _shift_integers(values: npt.NDArray[Any], location: int) -> FloatArray:
    """``values - location`` as float64, computed exactly in integers where the result fits."""
    if values.dtype.kind == "u":
        anchor_u = np.uint64(max(location, 0))
        below = values < anchor_u
        unsigned: FloatArray = (values - anchor_u).astype(np.float64)  # wraps below the anchor: fixed next
        unsigned[below] = -((anchor_u - values[below]).astype(np.float64))
        return unsigned
    wide = values.astype(np.int64)
    try:
        anchor = np.int64(location)
    except OverflowError:
        fallback: FloatArray = wide.astype(np.float64) - float(location)
        return fallback
    with np.errstate(over="ignore"):
        diff = wide - anchor
    # where the difference overflowed int64 its sign is wrong: fall back to float there
    wrong = (wide >= anchor) != (diff >= 0)
    out: FloatArray = diff.astype(np.float64)
    if wrong.any():
        out[wrong] = wide[wrong].astype(np.float64) - float(location)
    return out


def frame_columns(frame: pd.DataFrame) -> list[pd.Series]:
    """The columns of a frame as Series (by position, so duplicated or odd names do no harm)."""
    return [frame.iloc[:, j] for j in range(frame.shape[1])]


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
            "or pass Config(missing='drop_rows').",
            rows=list(label_rows)[:5],
        )
    if missing_per_column.any():
        cols = [f"{columns[int(j)]} ({int(missing_per_column[j])})" for j in np.flatnonzero(missing_per_column)]
        raise DataError(
            f"NaN or infinite values in columns {', '.join(cols[:8])} (first at row "
            f"{first_bad_row}); impute or drop them, or pass Config(missing='drop_rows').",
            rows=[first_bad_row],
        )


def encode(labels: pd.Series) -> tuple[npt.NDArray[np.intp], tuple[Any, ...]]:
    """Integer codes of the labels and the classes (sorted when comparable); DataError if too few.

    Classes that would print alike (True and 'True', 1 and '1') are renamed to the text that tells
    them apart (see :func:`distinct_classes`), so no report or mapping shows two as one.
    """
    codes, classes = label_codes(labels)
    classes = distinct_classes(classes)
    check_classes(classes, np.bincount(codes, minlength=len(classes)))
    return codes, tuple(classes)


def distinct_classes(classes: Sequence[Any]) -> list[Any]:
    """The classes, with those that would print alike replaced by their repr (others unchanged)."""
    shown = [label(c) for c in classes]
    if len({str(s) for s in shown}) == len(shown):
        return list(classes)
    names = distinct_names(list(classes))
    return [c if str(label(c)) == n else n for c, n in zip(classes, names, strict=True)]


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
