"""In-memory input: a pandas DataFrame with a target column, or X (frame or array) and y.

Applies the shared input rules (:mod:`discaudit.sources.screening`) to all rows at once and
computes the per-class moments once. Everything that makes an audit impossible raises
:class:`DataError` naming the column, class or row at fault; everything else is recorded for
the ``data_hygiene`` finding and the audit goes on.
"""

from __future__ import annotations

from typing import Any

import numpy as np
import numpy.typing as npt
import pandas as pd

from discaudit.config import Config
from discaudit.dataset import ArrayRows, AuditData, Coordinates, IntakeRecord
from discaudit.errors import DataError
from discaudit.jsonable import label
from discaudit.sources.screening import (
    as_labels,
    audit_values,
    choose_coordinates,
    column_range,
    distinct_values,
    encode,
    exact_range,
    frame_columns,
    identical_columns,
    numeric_columns,
    raise_for_missing,
    screen_columns,
    screen_missing,
    split,
)
from discaudit.stats.moments import ClassMoments

FloatArray = npt.NDArray[np.float64]


def load(X: Any, y: Any = None, *, target: str | None = None, config: Config) -> AuditData:
    """Validate in-memory input and compute the moments once.

    Raises
    ------
    DataError
        For a missing target, fewer than two classes, a class with fewer than two rows, no
        numeric feature, mismatched lengths, non-finite values under ``missing="error"``,
        non-numeric features under ``non_numeric="error"``, and complex columns.
    """
    X, y, conversions = unwrap_arrays(X, y)
    plain = _plain_array(X, y, target)
    ranges = None
    if plain is not None:
        values, labels, coordinates, ranges = plain
        columns: list[Any] = [f"x{j}" for j in range(values.shape[1])]
        n_rows_input, n_features_input = values.shape
        non_numeric: list[str] = []
        dropped: dict[Any, int] = {}
        unlabelled = 0
    else:
        frame, labels = split(X, y, target)
        n_rows_input, n_features_input = frame.shape
        frame, non_numeric, converted = numeric_columns(frame, config)
        conversions.update(converted)
        try:
            values, frame, labels, dropped, unlabelled, coordinates = _handle_missing(frame, labels, config)
        except DataError as exc:
            if any(v.startswith("masked") for v in conversions.values()):
                raise DataError(f"{exc} (Masked entries count as missing values.)") from None
            raise
        columns = list(frame.columns)
    codes, classes = encode(labels)
    # reductions only, no temporary copy of the data (or those the plain-array check already made)
    col_min, col_max = column_range(values) if ranges is None else ranges
    screen = screen_columns(col_min, col_max, identical_columns(values), [str(c) for c in columns])
    if not screen.keep.all():
        values = np.ascontiguousarray(values[:, screen.keep])
        coordinates = coordinates.take(np.flatnonzero(screen.keep).tolist())
    features = tuple(str(c) for c, k in zip(columns, screen.keep, strict=True) if k)
    moments = ClassMoments.from_arrays(values, codes, classes)
    distinct = {
        name: len(found)
        for j, name in enumerate(features)
        if (found := distinct_values(values[:, j], config.few_distinct_values)) is not None
    }
    record = IntakeRecord(
        n_rows_input=n_rows_input,
        n_features_input=n_features_input,
        dropped_rows_per_class=dropped,
        dropped_rows_unlabelled=unlabelled,
        non_numeric_dropped=tuple(non_numeric),
        constant_columns=screen.constant,
        duplicate_columns=screen.duplicates,
        conversions=conversions,
    )
    rows = ArrayRows(values, codes, labels.index)
    return AuditData(
        values,
        codes,
        classes,
        features,
        labels.index,
        moments,
        record,
        distinct,
        all_rows=rows,
        coordinates=None if coordinates.trivial else coordinates,
    )


def unwrap_arrays(X: Any, y: Any) -> tuple[Any, Any, dict[str, str]]:
    """numpy masked and structured arrays as plain input, and the conversions made (documented).

    A masked entry of X becomes a missing value (NaN), so it follows ``Config.missing``; a masked
    label becomes a missing label. A structured array becomes a DataFrame with one column per
    field (a field holding sub-arrays raises DataError naming it).
    """
    conversions: dict[str, str] = {}
    if isinstance(X, np.ma.MaskedArray):
        mask = np.ma.getmaskarray(X)
        if X.dtype.names is None:
            if X.dtype.kind not in "fiub":
                raise DataError(
                    f"X is a masked array of dtype {X.dtype}; pass numbers (a masked array of floats or integers)."
                )
            X = np.ma.filled(X.astype(np.float64), np.nan)
        else:
            X = _structured_frame(np.ma.getdata(X), np.ma.getmaskarray(X))
        if mask.any():
            conversions["X"] = f"masked array: {int(mask.sum())} masked entries became missing values (Config.missing)"
    if isinstance(X, np.ndarray) and X.dtype.names is not None:
        X = _structured_frame(X, None)
        conversions.setdefault("X", "structured array: one feature column per field")
    if isinstance(y, np.ma.MaskedArray):
        mask = np.ma.getmaskarray(y)
        labels = np.ma.getdata(y).astype(object)
        labels[mask] = None
        y = labels
        if mask.any():
            conversions["y"] = f"masked array: {int(mask.sum())} masked labels became missing labels"
    return X, y, conversions


def _structured_frame(X: np.ndarray, mask: Any) -> pd.DataFrame:
    if X.ndim != 1:
        raise DataError(f"X is a structured array of shape {X.shape}; pass a one-dimensional one (one record per row).")
    assert X.dtype.names is not None
    columns: dict[str, Any] = {}
    for name in X.dtype.names:
        field = X[name]
        if field.ndim != 1:
            raise DataError(
                f"Field {name!r} of the structured array X holds sub-arrays of shape {field.shape[1:]}; "
                "pass one scalar field per feature."
            )
        if mask is not None and mask[name].any():
            field = field.astype(np.float64 if field.dtype.kind in "fiub" else object)
            field[mask[name]] = np.nan if field.dtype.kind == "f" else None
        columns[name] = field
    frame: pd.DataFrame = pd.DataFrame(columns)
    return frame


def _plain_array(
    X: Any, y: Any, target: str | None
) -> tuple[FloatArray, pd.Series, Coordinates, tuple[FloatArray, FloatArray] | None] | None:
    """A finite numeric 2-D ndarray X with labels y, taken as is (no copy if float64, C order).

    The common case of ``preflight(X, y)``: no DataFrame is built and the array is audited in
    place, through a read-only view. Anything else (missing values or labels, other types)
    returns None and takes the general path, which reports problems by column and row. A
    column that needs other coordinates (offset-dominated, integers beyond 2**53, tiny
    magnitudes) is audited from a converted copy. Returns the values, the labels, the
    coordinates and, when the values are the input's floats as they are, their column minima and
    maxima (else None). Finiteness is read from those two reductions: a NaN propagates into the
    minimum and an infinity is the minimum or the maximum, so no n x p mask is made.
    """
    if target is not None or y is None or not isinstance(X, np.ndarray) or X.ndim != 2:
        return None
    if X.dtype.kind not in "fiub" or X.shape[1] == 0 or X.shape[0] == 0:
        return None
    if X.dtype.kind in "iu":
        low, high = X.min(axis=0).tolist(), X.max(axis=0).tolist()
        coordinates = choose_coordinates([(int(a), int(b)) for a, b in zip(low, high, strict=True)])
    else:
        values = np.asarray(X, dtype=np.float64, order="C")
        low, high = column_range(values)
        if not (np.isfinite(low).all() and np.isfinite(high).all()):
            return None
        coordinates = choose_coordinates([(float(a), float(b)) for a, b in zip(low, high, strict=True)])
    ranges = (low, high) if X.dtype.kind == "f" and coordinates.trivial else None
    if coordinates.trivial:
        values = np.asarray(X, dtype=np.float64, order="C")
    else:
        values = audit_values([X[:, j] for j in range(X.shape[1])], coordinates)
    view = values.view()
    view.flags.writeable = False
    labels = _plain_labels(y, values.shape[0])
    if labels is None or labels.isna().any():
        return None
    return view, labels, coordinates, ranges


def _plain_labels(y: Any, n: int) -> pd.Series | None:
    """The labels of a plain array as a Series on positions; None when they need the general path.

    Integer and boolean arrays keep their dtype (they cannot hold a missing label, and their codes
    and classes come out as from objects, Python numbers in sorted order); anything else becomes an
    object Series.
    """
    index = pd.RangeIndex(n)
    if isinstance(y, np.ndarray) and y.ndim == 1 and y.dtype.kind in "iub" and y.shape[0] == n:
        return pd.Series(y, index=index, copy=False)
    try:
        return as_labels(y, index)
    except DataError:
        return None


def _handle_missing(
    frame: pd.DataFrame, labels: pd.Series, config: Config
) -> tuple[FloatArray, pd.DataFrame, pd.Series, dict[Any, int], int, Coordinates]:
    columns = frame_columns(frame)
    coordinates = choose_coordinates([exact_range(c) for c in columns])
    values = audit_values(columns, coordinates)
    screen = screen_missing(values, labels, frame.index)
    if config.missing == "error":
        raise_for_missing(
            screen.missing_per_column,
            screen.first_bad_row,
            int(screen.missing_label.sum()),
            list(frame.columns),
            [label(r) for r in frame.index[screen.missing_label][:5]],
        )
        return values, frame, labels, {}, 0, coordinates
    dropped = labels[screen.bad_rows & ~screen.missing_label].value_counts().to_dict()
    kept = screen.keep
    return (
        values[kept],
        frame[kept],
        labels[kept],
        {label(k): int(v) for k, v in dropped.items()},
        int(screen.missing_label.sum()),
        coordinates,
    )
