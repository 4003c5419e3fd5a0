"""The one validation entry point: user input -> validated data with per-class moments.

Everything that makes an audit impossible raises :class:`DataError` here, with a message
naming the column, class or row at fault; everything else is recorded for the
``data_hygiene`` finding and the audit goes on.
"""

from __future__ import annotations

from dataclasses import dataclass, field
from typing import Any

import numpy as np
import numpy.typing as npt
import pandas as pd

from discaudit._plain import label
from discaudit.config import Config
from discaudit.errors import DataError
from discaudit.moments import ClassMoments
from discaudit.stats._inputs import LARGEST_SQUARABLE, label_codes

FloatArray = npt.NDArray[np.float64]


@dataclass(frozen=True)
class IntakeRecord:
    """What intake changed or set aside, for the ``data_hygiene`` finding."""

    n_rows_input: int
    n_features_input: int
    dropped_rows_per_class: dict[Any, int] = field(default_factory=dict)
    dropped_rows_unlabelled: int = 0
    non_numeric_dropped: tuple[str, ...] = ()
    constant_columns: tuple[str, ...] = ()
    duplicate_columns: tuple[tuple[str, str], ...] = ()


@dataclass(frozen=True)
class SampleInfo:
    """How the rows in ``AuditData.values`` were sampled from a larger input."""

    n_total: int
    per_class: dict[Any, int]
    capacity: int
    random_state: int | None
    method: str = "seeded uniform reservoir sample per class, merged exactly across chunks"


@dataclass(frozen=True)
class AuditData:
    """Validated data shared by every check.

    Attributes
    ----------
    values : ndarray, shape (n, p)
        Float64 features actually audited (constant and duplicated columns set aside).
    codes : ndarray, shape (n,)
        Class code of each row, 0..K-1.
    classes : tuple
        Class labels in code order.
    features : tuple of str
        Names of the audited features.
    row_labels : pandas.Index
        The input's index labels of the retained rows, for reporting.
    moments : ClassMoments
        Per-class counts, means and scatter matrices, computed once.
    record : IntakeRecord
        What intake dropped or set aside.
    distinct_counts : dict
        Features with at most ``Config.few_distinct_values`` distinct values (over all rows),
        with their number of distinct values.
    sample : SampleInfo or None
        Set when ``values`` is a per-class random sample of a larger (streamed) input; the
        moments are then still exact over all rows.
    """

    values: FloatArray
    codes: npt.NDArray[np.intp]
    classes: tuple[Any, ...]
    features: tuple[str, ...]
    row_labels: pd.Index
    moments: ClassMoments
    record: IntakeRecord
    distinct_counts: dict[str, int] = field(default_factory=dict)
    sample: SampleInfo | None = None

    @property
    def n(self) -> int:
        return int(self.values.shape[0])

    @property
    def p(self) -> int:
        return int(self.values.shape[1])

    def class_rows(self, k: int) -> npt.NDArray[np.intp]:
        """Positions of the rows of class code ``k``."""
        return np.flatnonzero(self.codes == k)


def load(X: Any, y: Any = None, *, target: str | None = None, config: Config) -> AuditData:
    """Validate the input of :func:`discaudit.preflight` and compute the moments once.

    Raises
    ------
    DataError
        For a missing target, fewer than two classes, a class with fewer than two rows, no
        numeric feature, mismatched lengths, non-finite values under ``missing="error"``,
        or non-numeric features under ``non_numeric="error"``.
    """
    plain = _plain_array(X, y, target)
    if plain is not None:
        values, labels = plain
        columns: list[Any] = [f"x{j}" for j in range(values.shape[1])]
        n_rows_input, n_features_input = values.shape
        non_numeric: list[str] = []
        dropped: dict[Any, int] = {}
        unlabelled = 0
    else:
        frame, labels = split(X, y, target)
        n_rows_input, n_features_input = frame.shape
        frame, non_numeric = numeric_columns(frame, config)
        values, frame, labels, dropped, unlabelled = _handle_missing(frame, labels, config)
        columns = list(frame.columns)
    codes, classes = encode(labels)
    if values.size:  # reductions only: no temporary copy of the data
        col_min, col_max = values.min(axis=0), values.max(axis=0)
        check_magnitude(np.maximum(-col_min, col_max), columns)
        is_constant = col_min == col_max
    else:
        is_constant = np.ones(values.shape[1], dtype=bool)
    keep, constant, duplicates = _screen_columns(values, [str(c) for c in columns], is_constant)
    if not keep.any():
        raise DataError(
            f"No usable feature: every numeric column is constant or a duplicate ({', '.join(constant)}); "
            "an audit needs at least one feature that varies."
        )
    if not keep.all():
        values = np.ascontiguousarray(values[:, keep])
    features = tuple(str(c) for c, k in zip(columns, keep, strict=True) if k)
    moments = ClassMoments.from_arrays(values, codes, classes)
    distinct = distinct_counts(values, features, config.few_distinct_values)
    record = IntakeRecord(
        n_rows_input=n_rows_input,
        n_features_input=n_features_input,
        dropped_rows_per_class=dropped,
        dropped_rows_unlabelled=unlabelled,
        non_numeric_dropped=tuple(non_numeric),
        constant_columns=tuple(constant),
        duplicate_columns=tuple(duplicates),
    )
    return AuditData(values, codes, classes, features, labels.index, moments, record, distinct)


def _plain_array(X: Any, y: Any, target: str | None) -> tuple[FloatArray, pd.Series] | None:
    """A finite numeric 2-D ndarray X with labels y, taken as is (no copy if float64, C order).

    The common case of ``preflight(X, y)``: no DataFrame is built and the array is audited in
    place, through a read-only view. Anything else (missing values or labels, other types)
    returns None and takes the general path, which reports problems by column and row.
    """
    if target is not None or y is None or not isinstance(X, np.ndarray) or X.ndim != 2:
        return None
    if X.dtype.kind not in "fiub" or X.shape[1] == 0 or X.shape[0] == 0:
        return None
    values = np.asarray(X, dtype=np.float64, order="C")
    if not all(np.isfinite(values[a : a + 65536]).all() for a in range(0, values.shape[0], 65536)):
        return None
    view = values.view()
    view.flags.writeable = False
    try:
        labels = _as_labels(y, pd.RangeIndex(values.shape[0]))
    except DataError:
        return None
    if labels.isna().any():
        return None
    return view, labels


def split(X: Any, y: Any, target: str | None) -> tuple[pd.DataFrame, pd.Series]:
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
        labels = _as_labels(y, frame.index)
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


def _as_labels(y: Any, index: pd.Index) -> pd.Series:
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


def _handle_missing(
    frame: pd.DataFrame, labels: pd.Series, config: Config
) -> tuple[FloatArray, pd.DataFrame, pd.Series, dict[Any, int], int]:
    with np.errstate(invalid="ignore"):
        values = np.ascontiguousarray(frame.to_numpy(dtype=np.float64, na_value=np.nan))
    bad = ~np.isfinite(values)
    missing_label = labels.isna().to_numpy()
    bad_rows = bad.any(axis=1)
    if config.missing == "error":
        if missing_label.any():
            rows = [label(r) for r in frame.index[missing_label][:5]]
            raise DataError(
                f"The target has {int(missing_label.sum())} missing labels (rows {rows}); label or drop them, "
                "or pass Config(missing='drop_rows')."
            )
        if bad_rows.any():
            counts = bad.sum(axis=0)
            cols = [f"{frame.columns[int(j)]} ({int(counts[j])})" for j in np.flatnonzero(counts)]
            raise DataError(
                f"NaN or infinite values in columns {', '.join(cols[:8])} (first at row "
                f"{label(frame.index[np.flatnonzero(bad_rows)[0]])}); impute or drop them, "
                "or pass Config(missing='drop_rows')."
            )
        return values, frame, labels, {}, 0
    drop = bad_rows | missing_label
    dropped = labels[bad_rows & ~missing_label].value_counts().to_dict()
    kept = ~drop
    return (
        values[kept],
        frame[kept],
        labels[kept],
        {label(k): int(v) for k, v in dropped.items()},
        int(missing_label.sum()),
    )


def encode(labels: pd.Series) -> tuple[npt.NDArray[np.intp], tuple[Any, ...]]:
    """Integer codes of the labels and the classes (sorted when comparable); DataError if too few."""
    codes, classes = label_codes(labels)
    check_classes(classes, np.bincount(codes, minlength=len(classes)))
    return codes, tuple(classes)


def check_classes(classes: list[Any], counts: npt.NDArray[np.int64]) -> None:
    """DataError unless there are two or more classes, each with at least two rows."""
    if len(classes) < 2:
        found = f"only class {classes[0]!r}" if classes else "no labelled rows"
        raise DataError(f"An audit needs at least two classes in the target; found {found}.")
    small = [f"{classes[k]!r} ({int(counts[k])} row)" for k in np.flatnonzero(counts < 2)]
    if small:
        raise DataError(
            f"Class {', '.join(small)} has fewer than two rows; a class covariance needs at least two. "
            "Merge or drop that class."
        )


def check_magnitude(max_abs: FloatArray, columns: list[Any]) -> None:
    """DataError naming the columns whose largest magnitude would overflow when squared."""
    huge = max_abs > LARGEST_SQUARABLE
    if huge.any():
        cols = [str(columns[j]) for j in np.flatnonzero(huge)]
        raise DataError(
            f"Columns {cols[:8]} hold values beyond 1e150 in magnitude, whose squares overflow float64; "
            "rescale them (e.g. change units or take logs)."
        )


def distinct_counts(values: FloatArray, features: tuple[str, ...], limit: int) -> dict[str, int]:
    """Features taking at most ``limit`` distinct values, with their counts."""
    out = {}
    for j, name in enumerate(features):
        column = values[:, j]
        if np.unique(column[:1000]).size > limit:  # cheap screen before a full pass
            continue
        distinct = np.unique(column).size
        if distinct <= limit:
            out[name] = int(distinct)
    return out


def _screen_columns(
    values: FloatArray, names: list[str], constant: npt.NDArray[np.bool_]
) -> tuple[npt.NDArray[np.bool_], list[str], list[tuple[str, str]]]:
    """Mark the constant columns and exact duplicates of an earlier column to set aside."""
    keep = ~constant
    duplicates: list[tuple[str, str]] = []
    first_rows = values[: min(len(values), 64)]
    seen: dict[bytes, list[int]] = {}
    for j in np.flatnonzero(keep):
        key = (first_rows[:, j] + 0.0).tobytes()  # + 0.0: -0.0 and 0.0 are equal values
        for i in seen.get(key, []):
            if np.array_equal(values[:, i], values[:, j]):
                keep[j] = False
                duplicates.append((names[j], names[i]))
                break
        else:
            seen.setdefault(key, []).append(int(j))
    return keep, [names[j] for j in np.flatnonzero(constant)], duplicates
