"""Spark DataFrames: the engine part of :mod:`discaudit.sources.engines` for PySpark.

Only summaries, the per-class sample and the results of the row pass reach the driver:

* row labels are positions in partition order, from ``monotonically_increasing_id`` (partition
  index in the upper bits) and the row count of each partition (one small job);
* the sample key is ``xxhash64`` of the row label and the seed;
* the row pass runs the function on the executors with ``mapInPandas``, one result per partition
  (pickled), combined on the driver in partition order;
* above :data:`~discaudit.sources.engines.PUSHDOWN_MAX_FEATURES` features each partition is
  summarized on its executor (:func:`discaudit.sources.chunks.summarize_values`) and the
  summaries are merged on the driver.

The executors must be able to import ``discaudit`` (install it on the cluster's Python, or ship
it with ``spark.submit.pyFiles``) and pyarrow. Needs the optional extra ``discaudit[spark]``.
"""

from __future__ import annotations

import functools
import pickle
from collections.abc import Callable, Iterator
from dataclasses import dataclass
from typing import Any, TypeVar

import numpy as np
import pandas as pd

from discaudit.config import Config
from discaudit.dataset import Coordinates, RowBlock, RowPass
from discaudit.errors import DataError
from discaudit.sources.chunks import ChunkSummary, merge, summarize_values
from discaudit.sources.frame_schema import CODE, KEY, ROW, FrameColumns
from discaudit.stats.seeds import CHUNK_MERGE, CHUNK_SAMPLE, PARTITION_MERGE, stream_rng

T = TypeVar("T")

#: ``monotonically_increasing_id`` keeps the partition index above bit 33.
_PARTITION_SHIFT = 33
_ROW_IN_PARTITION = (1 << _PARTITION_SHIFT) - 1


def _functions() -> Any:
    from pyspark.sql import functions

    return functions


def _dumps(obj: Any) -> bytes:
    """Pickle a partition's result; cloudpickle (shipped with PySpark) also takes read-only mappings."""
    from pyspark import cloudpickle

    return bytes(cloudpickle.dumps(obj))  # type: ignore[no-untyped-call]


def _partition_id() -> int:
    from pyspark import TaskContext

    context = TaskContext.get()
    return int(context.partitionId()) if context is not None else 0


@dataclass
class SparkEngine:
    """Row labels, keys and row passes for a PySpark DataFrame."""

    native: Any
    name: str = "Spark"
    label_column: str | None = None

    def numbered(self) -> Any:
        F = _functions()
        if self.label_column is not None:
            return self.native.withColumn(ROW, F.col(self.label_column))
        ids = self.native.withColumn("__discaudit_id", F.monotonically_increasing_id())
        part = F.shiftright(F.col("__discaudit_id"), _PARTITION_SHIFT)
        counts = sorted(
            (int(r[0]), int(r[1]))
            for r in ids.groupBy(part.alias("p")).count().collect()  # one row per partition
        )
        offsets, start = [], 0
        for p, n in counts:
            offsets += [F.lit(p), F.lit(start)]
            start += n
        offset = F.element_at(F.create_map(*offsets), part) if offsets else F.lit(0)
        row = (F.col("__discaudit_id").bitwiseAND(F.lit(_ROW_IN_PARTITION)) + offset).cast("long")
        return ids.withColumn(ROW, row).drop("__discaudit_id")

    def keyed(self, numbered: Any, seed: int) -> Any:
        F = _functions()
        hashed = F.xxhash64(F.col(ROW), F.lit(int(seed))).cast("double") / float(2**64) + 0.5
        return numbered.withColumn(KEY, hashed)

    def batches(self, native: Any) -> Iterator[Any]:
        """Not used: Spark rows stay on the executors (see :meth:`row_pass`)."""
        raise DataError("Spark rows are not streamed to the driver.")

    def row_pass(self, native: Any, features: tuple[str, ...]) -> RowPass:
        return SparkRows(native, features)

    def summaries(
        self,
        native: Any,
        target: str,
        columns: FrameColumns,
        coordinates: Coordinates,
        config: Config,
        seed: int | None,
    ) -> ChunkSummary:
        task = functools.partial(_summarize_partition, target, ROW, columns, coordinates, config, seed)
        blobs = _collect_blobs(native.mapInPandas(task, schema="p long, blob binary"))
        parts = [pickle.loads(b) for b in blobs]
        if not parts:
            raise DataError("The Spark DataFrame has no rows.")
        level = 0
        while len(parts) > 1:  # a tree, as for Dask partitions: seeds depend on the position only
            paired = [
                merge(parts[j], parts[j + 1], stream_rng(seed, PARTITION_MERGE, level, j))
                for j in range(0, len(parts) - 1, 2)
            ]
            parts = paired + ([parts[-1]] if len(parts) % 2 else [])
            level += 1
        summary: ChunkSummary = parts[0]
        return summary


def _collect_blobs(frame: Any) -> list[bytes]:
    rows = sorted(frame.collect(), key=lambda r: int(r[0]))
    return [bytes(r[1]) for r in rows]


def _summarize_partition(
    target: str,
    row: str,
    columns: FrameColumns,
    coordinates: Coordinates,
    config: Config,
    seed: int | None,
    batches: Iterator[pd.DataFrame],
) -> Iterator[pd.DataFrame]:
    p = _partition_id()
    total: ChunkSummary | None = None
    for i, batch in enumerate(batches):
        with np.errstate(invalid="ignore"):
            values = np.ascontiguousarray(batch[list(columns.features)].to_numpy(dtype=np.float64, na_value=np.nan))
        labels = pd.Series(batch[target].to_numpy(dtype=object), index=pd.Index(batch[row].to_numpy()))
        part = summarize_values(
            values,
            labels,
            columns.features,
            config,
            config.sample_rows_per_class,
            stream_rng(seed, CHUNK_SAMPLE, p, i),
            coordinates=coordinates,
            non_numeric=columns.non_numeric,
            n_features_input=columns.n_features_input,
        )
        total = part if total is None else merge(total, part, stream_rng(seed, CHUNK_MERGE, p, i))
    if total is not None:
        yield pd.DataFrame({"p": [p], "blob": [_dumps(total)]})


def _score_partition(
    fn: Callable[[RowBlock], Any],
    combine: Callable[[Any, Any], Any],
    features: tuple[str, ...],
    batches: Iterator[pd.DataFrame],
) -> Iterator[pd.DataFrame]:
    out = None
    for batch in batches:
        with np.errstate(invalid="ignore"):
            values = np.ascontiguousarray(batch[list(features)].to_numpy(dtype=np.float64, na_value=np.nan))
        block = RowBlock(values, batch[CODE].to_numpy(dtype=np.intp), pd.Index(batch[ROW].to_numpy()))
        part = fn(block)
        out = part if out is None else combine(out, part)
    if out is not None:
        yield pd.DataFrame({"p": [_partition_id()], "blob": [_dumps(out)]})


@dataclass(frozen=True)
class SparkRows:
    """A :class:`~discaudit.dataset.RowPass` that runs the function on Spark's executors."""

    native: Any
    features: tuple[str, ...]

    def map_reduce(self, fn: Callable[[RowBlock], T], combine: Callable[[T, T], T]) -> T:
        task = functools.partial(_score_partition, fn, combine, self.features)
        parts = [pickle.loads(b) for b in _collect_blobs(self.native.mapInPandas(task, schema="p long, blob binary"))]
        if not parts:
            empty = RowBlock(np.empty((0, len(self.features))), np.empty(0, dtype=np.intp), pd.Index([]))
            return fn(empty)
        out: T = functools.reduce(combine, parts)
        return out
