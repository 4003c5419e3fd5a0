"""Eager dataframes other than pandas: Polars DataFrames, PyArrow tables, and any frame narwhals
reads eagerly.

The frame is read through narwhals in batches of :data:`BATCH_ROWS` rows, each feature column cast
to float64 straight into one array per batch, so no pandas copy of the data is ever made (the
labels of a batch become one small object Series). Each batch is summarized by the chunked path
(:func:`discaudit.sources.chunks.summarize_values`) and the summaries merge exactly, so the moments
are exact over all rows and the rows held are a seeded per-class sample (all rows when each class
fits in ``Config.sample_rows_per_class``). ``all_rows`` reads the batches again. Row labels are the
0-based row positions (these frames have no index). Column names are kept.
"""

from __future__ import annotations

import dataclasses
from collections.abc import Callable, Iterator
from dataclasses import dataclass
from typing import Any, TypeVar

import numpy as np
import numpy.typing as npt
import pandas as pd

from discaudit.config import Config
from discaudit.dataset import AuditData, Coordinates, RowBlock
from discaudit.errors import DataError
from discaudit.sources.chunks import BlockSpec, ChunkSummary, block_spec, merge, summarize_values, to_audit_data
from discaudit.sources.frame_schema import FrameColumns, judge_columns
from discaudit.sources.screening import as_labels, audit_values, choose_coordinates, exact_range
from discaudit.stats.seeds import CHUNK_MERGE, CHUNK_SAMPLE, stream_rng

FloatArray = npt.NDArray[np.float64]
T = TypeVar("T")

#: Rows per batch: bounds the float copy to BATCH_ROWS x p x 8 bytes (16 MB at 10 features), the
#: same batch size as the file reader's (:func:`discaudit.sources.files.file_chunks`).
BATCH_ROWS = 200_000


def is_eager_frame(X: Any) -> bool:
    """A dataframe narwhals reads eagerly, other than pandas (which :mod:`~discaudit.sources.memory` reads)."""
    from narwhals import dependencies as nwd

    kinds = (nwd.is_polars_dataframe, nwd.is_pyarrow_table, nwd.is_modin_dataframe, nwd.is_cudf_dataframe)
    return any(is_kind(X) for is_kind in kinds)


def raw_columns(frame: Any, names: tuple[str, ...]) -> list[npt.NDArray[Any]]:
    """The named columns of an eager narwhals frame as numpy arrays: integers as integers (so that
    :func:`~discaudit.sources.screening.audit_values` can shift them exactly), the rest as float64
    with nulls as NaN."""
    import narwhals as nw

    out = []
    for name in names:
        column = frame[name]
        if column.dtype.is_integer() and column.null_count() == 0:
            out.append(np.asarray(column.to_numpy()))
        else:
            out.append(np.asarray(column.cast(nw.Float64).to_numpy(), dtype=np.float64))
    return out


@dataclass(frozen=True)
class _Batches:
    """The frame in batches: features in the audit's coordinates, labels indexed by row position."""

    frame: Any
    columns: FrameColumns
    labels: pd.Series | None  # external y, already on the row positions
    coordinates: Coordinates

    def __call__(self) -> Iterator[tuple[FloatArray, pd.Series]]:
        n = len(self.frame)
        for a in range(0, max(n, 1), BATCH_ROWS):
            part = self.frame[a : a + BATCH_ROWS]
            values = audit_values(raw_columns(part, self.columns.features), self.coordinates)
            if self.labels is not None:
                labels = self.labels.iloc[a : a + BATCH_ROWS]
            else:
                assert self.columns.target is not None
                raw = np.asarray(part[self.columns.target].to_numpy(), dtype=object)
                labels = pd.Series(raw, index=pd.RangeIndex(a, a + len(raw)), name=self.columns.target)
            yield values, labels


@dataclass(frozen=True)
class FrameRows:
    """A :class:`~discaudit.dataset.RowPass` over an eager frame: its batches read again."""

    batches: Callable[[], Iterator[tuple[FloatArray, pd.Series]]]
    spec: BlockSpec

    def map_reduce(self, fn: Callable[[RowBlock], T], combine: Callable[[T, T], T]) -> T:
        out: T | None = None
        for values, labels in self.batches():
            part = fn(self.spec.block_values(values, labels))
            out = part if out is None else combine(out, part)
        assert out is not None  # a frame gives at least one (possibly empty) batch
        return out


def load_frame(X: Any, y: Any = None, *, target: str | None, config: Config, random_state: int | None) -> AuditData:
    """Validate an eager non-pandas frame (with a target column, or with labels ``y``)."""
    import narwhals as nw

    frame = nw.from_native(X, eager_only=True)
    columns = judge_columns(frame, target, config, has_y=y is not None)
    labels = None
    if y is not None:
        if isinstance(nw.from_native(y, series_only=True, pass_through=True), nw.Series):
            y = np.asarray(nw.from_native(y, series_only=True).to_numpy(), dtype=object)
        labels = as_labels(y, pd.RangeIndex(len(frame)))
    # Coordinates from the first batch, as the chunked path chooses them from its first chunk.
    first = raw_columns(frame[:BATCH_ROWS], columns.features)
    coordinates = choose_coordinates([exact_range(c) for c in first])
    return load_batches(_Batches(frame, columns, labels, coordinates), columns, coordinates, config, random_state)


def load_batches(
    batches: Callable[[], Iterator[tuple[FloatArray, pd.Series]]],
    columns: FrameColumns,
    coordinates: Coordinates,
    config: Config,
    random_state: int | None,
) -> AuditData:
    """The chunked path on float batches: summaries merged, then a row pass reading the batches again.

    ``batches`` returns a fresh iterator of (features in ``columns.features`` order and in
    ``coordinates``, labels indexed by row label) each time it is called.
    """
    summary = summarize_batches(batches, columns, coordinates, config, random_state)
    data = to_audit_data(summary, config, random_state)
    return dataclasses.replace(data, all_rows=FrameRows(batches, block_spec(summary, data, columns.target or "")))


def summarize_batches(
    batches: Callable[[], Iterator[tuple[FloatArray, pd.Series]]],
    columns: FrameColumns,
    coordinates: Coordinates,
    config: Config,
    random_state: int | None,
) -> ChunkSummary:
    """Fold the summaries of every batch (pass 1), seeded per batch as the chunked path is."""
    total: ChunkSummary | None = None
    for i, (values, labels) in enumerate(batches()):
        part = summarize_values(
            values,
            labels,
            columns.features,
            config,
            config.sample_rows_per_class,
            stream_rng(random_state, CHUNK_SAMPLE, i),
            coordinates=coordinates,
            non_numeric=columns.non_numeric,
            n_features_input=columns.n_features_input,
        )
        total = part if total is None else merge(total, part, stream_rng(random_state, CHUNK_MERGE, i))
    if total is None or total.n_rows_input == 0:
        raise DataError(f"The {columns.engine} input has no data rows.")
    return total
