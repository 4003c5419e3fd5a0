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
from discaudit.dataset import ArrayRows, AuditData, IntakeRecord
from discaudit.errors import DataError
from discaudit.jsonable import label
from discaudit.sources.screening import (
    as_labels,
    column_range,
    distinct_values,
    encode,
    identical_columns,
    numeric_columns,
    raise_for_missing,
    screen_columns,
    screen_missing,
    split,
)
from discaudit.stats.blocks import ROW_BLOCK, block_starts
from discaudit.stats.moments import ClassMoments

FloatArray = npt.NDArray[np.float64]


def load(X: Any, y: Any = None, *, target: str | None = None, config: Config) -> AuditData:
    """Validate in-memory input and compute the moments once.

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
    col_min, col_max = column_range(values)  # reductions only: no temporary copy of the data
    screen = screen_columns(col_min, col_max, identical_columns(values), [str(c) for c in columns])
    if not screen.keep.all():
        values = np.ascontiguousarray(values[:, screen.keep])
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
    )
    rows = ArrayRows(values, codes, labels.index)
    return AuditData(values, codes, classes, features, labels.index, moments, record, distinct, all_rows=rows)


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
    if not all(np.isfinite(values[a : a + ROW_BLOCK]).all() for a in block_starts(values.shape[0])):
        return None
    view = values.view()
    view.flags.writeable = False
    try:
        labels = as_labels(y, pd.RangeIndex(values.shape[0]))
    except DataError:
        return None
    if labels.isna().any():
        return None
    return view, labels


def _handle_missing(
    frame: pd.DataFrame, labels: pd.Series, config: Config
) -> tuple[FloatArray, pd.DataFrame, pd.Series, dict[Any, int], int]:
    with np.errstate(invalid="ignore"):
        values = np.ascontiguousarray(frame.to_numpy(dtype=np.float64, na_value=np.nan))
    screen = screen_missing(values, labels, frame.index)
    if config.missing == "error":
        raise_for_missing(
            screen.missing_per_column,
            screen.first_bad_row,
            int(screen.missing_label.sum()),
            list(frame.columns),
            [label(r) for r in frame.index[screen.missing_label][:5]],
        )
        return values, frame, labels, {}, 0
    dropped = labels[screen.bad_rows & ~screen.missing_label].value_counts().to_dict()
    kept = screen.keep
    return (
        values[kept],
        frame[kept],
        labels[kept],
        {label(k): int(v) for k, v in dropped.items()},
        int(screen.missing_label.sum()),
    )
