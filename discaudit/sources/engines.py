"""Lazy and remote frames, audited where they live: Polars LazyFrames, DuckDB relations, Spark
DataFrames (:mod:`discaudit.sources.spark`) and Ibis tables, all through narwhals.

Nothing but summaries, a per-class sample and the results of the row pass leaves the engine:

1. **Moments pushed down** (at most :data:`PUSHDOWN_MAX_FEATURES` features). One grouped query over
   every row gives, per class, the row count, the rows with a missing or non-finite value, each
   column's missing count and exact range (integers as integers), and over the audited rows (label
   present, every feature finite) the means, minima and maxima. From the ranges the shared rule
   (:func:`~discaudit.sources.screening.choose_coordinates`) picks the audit's coordinates, as for
   pandas input: an offset-dominated column is audited about its minimum, an integer column beyond
   2**53 is shifted in the engine's integer arithmetic before any float conversion. A second
   grouped query, in those coordinates, gives the sums of centred products ``sum((x - m)(y - m'))``
   and of deviations ``d = sum(x - m)``, each class centred at its own mean from the first query;
   the mean is then ``m + d/n`` and the scatter ``S - d d'/n`` (the corrected two-pass algorithm;
   Chan, Golub & LeVeque 1983, "Algorithms for computing the sample variance", The American
   Statistician 37(3)). Raw sums of cross-products (``sum(x y) - n m m'``) are never formed: on
   offset data they lose every digit.
2. **A seeded per-class sample.** Each row gets a key in [0, 1) from a hash of its row label and a
   seed drawn from ``random_state`` (:data:`discaudit.stats.seeds.ENGINE_SAMPLE`); a class keeps its
   ``Config.sample_rows_per_class`` rows of smallest key (all its rows when it has fewer), a uniform
   sample without replacement. The engine filters on a key threshold a few standard deviations
   above the expected quantile, so only slightly more than the sample travels.
3. **Row-based screens on the sample, confirmed in the engine**: columns with few distinct values
   and exactly duplicated columns are found on the sample (by the shared rules) and, when the sample
   is not every row, confirmed by a query over all rows.
4. **The row pass** streams the audited rows back in batches (label codes computed in the engine);
   Spark runs it on the executors instead.

Above :data:`PUSHDOWN_MAX_FEATURES` features the p(p+1)/2 product aggregates per class stop paying,
and the existing per-chunk summaries (:func:`discaudit.sources.chunks.summarize_values`) run on
batches instead: streamed from local engines, inside ``mapInPandas`` on Spark.

Row labels are the row positions the engine assigns (``row_number`` in DuckDB and Ibis, the row
index in Polars, partition order in Spark), or the values of a label column when one is named
(``discaudit check --index-col``). They are stable when the engine's row order is (a file scan, an
in-memory frame, a query with ``ORDER BY``).
"""

from __future__ import annotations

import dataclasses
from abc import ABC, abstractmethod
from collections.abc import Callable, Iterator
from dataclasses import dataclass
from typing import Any, Protocol, TypeVar

import numpy as np
import numpy.typing as npt
import pandas as pd

from discaudit._threads import read_ahead
from discaudit.config import Config
from discaudit.dataset import AuditData, Coordinates, RowBlock, RowPass
from discaudit.errors import DataError
from discaudit.jsonable import label
from discaudit.sources.chunks import ChunkSummary, Reservoir, to_audit_data
from discaudit.sources.frame_schema import CODE, KEY, ROW, FrameColumns, judge_columns
from discaudit.sources.frames import summarize_batches
from discaudit.sources.screening import check_magnitude, choose_coordinates, identical_columns, raise_for_missing
from discaudit.stats.moments import ClassMoments
from discaudit.stats.seeds import ENGINE_SAMPLE, stream_rng

FloatArray = npt.NDArray[np.float64]
T = TypeVar("T")

#: Above this many features the moments come from per-batch summaries instead of pushed-down
#: aggregates. At p features a class needs p(p+1)/2 + p product sums: 230 at 20 features, 860 at 40,
#: 1,300 at 50. Design choice: past about a thousand aggregate expressions Spark's generated code
#: outgrows the JVM's method size limit and falls back to interpretation, and every engine spends
#: longer planning; per-batch summaries cost O(n p^2) BLAS work wherever the rows are read.
PUSHDOWN_MAX_FEATURES = 40
#: Rows per batch streamed back for the row pass (bounds the float copy: 16 MB at 10 features).
BATCH_ROWS = 200_000
#: Sample key threshold: expected count per class = capacity + this many standard deviations (plus
#: a few rows), so a class comes back short with probability below 1e-9 (then it is asked again).
_KEY_MARGIN_SD = 6.0


class Engine(Protocol):
    """What a lazy engine adds to narwhals: row labels, a hashed key, batches back, a row pass."""

    name: str

    def numbered(self) -> Any:
        """The native frame with an integer (or label) column :data:`ROW` naming each row."""
        ...

    def keyed(self, numbered: Any, seed: int) -> Any:
        """``numbered`` with a float column :data:`KEY` in [0, 1), a hash of :data:`ROW` and ``seed``."""
        ...

    def batches(self, native: Any) -> Iterator[Any]:
        """The rows of ``native`` as pyarrow record batches (or tables), in bounded batches."""
        ...

    def row_pass(self, native: Any, features: tuple[str, ...]) -> RowPass:
        """A pass over the rows of ``native`` (columns ROW, CODE, then ``features``)."""
        ...

    def summaries(
        self,
        native: Any,
        target: str,
        columns: FrameColumns,
        coordinates: Coordinates,
        config: Config,
        seed: int | None,
    ) -> Any:
        """Per-batch summaries of ``native`` merged (the route above PUSHDOWN_MAX_FEATURES)."""
        ...


# --- the engines narwhals does not abstract: row labels, hashing, batches -------------------------


@dataclass
class _LocalEngine(ABC):
    """Shared by engines whose rows are streamed back to this process; each engine supplies the three
    abstract steps."""

    native: Any
    name: str
    label_column: str | None = None

    @abstractmethod
    def numbered(self) -> Any:
        """The native frame with a column ROW: the row label column when one is named, else 0, 1, ..."""

    @abstractmethod
    def keyed(self, numbered: Any, seed: int) -> Any:
        """``numbered`` with a column KEY in [0, 1): a seeded hash of ROW, which chooses the sample."""

    @abstractmethod
    def batches(self, native: Any) -> Iterator[Any]:
        """The rows of ``native`` as Arrow record batches of about BATCH_ROWS rows."""

    def row_pass(self, native: Any, features: tuple[str, ...]) -> RowPass:
        return StreamedRows(lambda: self.batches(native), features)

    def summaries(
        self,
        native: Any,
        target: str,
        columns: FrameColumns,
        coordinates: Coordinates,
        config: Config,
        seed: int | None,
    ) -> Any:
        def batches() -> Iterator[tuple[FloatArray, pd.Series]]:
            for batch in self.batches(native):
                yield _batch_values(batch, columns.features, target)

        return summarize_batches(batches, columns, coordinates, config, seed)


class _PolarsLazy(_LocalEngine):
    def numbered(self) -> Any:
        import polars as pl

        if self.label_column is not None:
            return self.native.with_columns(pl.col(self.label_column).alias(ROW))
        return self.native.with_row_index(ROW).with_columns(pl.col(ROW).cast(pl.Int64))

    def keyed(self, numbered: Any, seed: int) -> Any:
        import polars as pl

        return numbered.with_columns((pl.col(ROW).hash(seed).cast(pl.Float64) / 2.0**64).alias(KEY))

    def batches(self, native: Any) -> Iterator[Any]:
        for frame in native.collect_batches(chunk_size=BATCH_ROWS):
            yield frame.to_arrow()


class _DuckDB(_LocalEngine):
    def numbered(self) -> Any:
        if self.label_column is not None:
            return self.native.project(f'*, "{self.label_column}" AS {ROW}')
        return self.native.project(f"*, row_number() OVER () - 1 AS {ROW}")

    def keyed(self, numbered: Any, seed: int) -> Any:
        return numbered.project(f"*, hash({ROW}, {int(seed)}::BIGINT) / 18446744073709551616.0 AS {KEY}")

    def batches(self, native: Any) -> Iterator[Any]:
        yield from native.to_arrow_reader(BATCH_ROWS)


class _Ibis(_LocalEngine):
    def numbered(self) -> Any:
        import ibis

        if self.label_column is not None:
            return self.native.mutate(**{ROW: self.native[self.label_column]})
        return self.native.mutate(**{ROW: ibis.row_number().cast("int64")})

    def keyed(self, numbered: Any, seed: int) -> Any:
        # Ibis's hash takes no seed: hash the row label shifted by the seed (an injective map).
        mixed = (numbered[ROW].cast("int64") + int(seed) * 1_000_003).hash()
        return numbered.mutate(**{KEY: mixed.cast("float64") / 2.0**64 + 0.5})

    def batches(self, native: Any) -> Iterator[Any]:
        # The result is read whole and cut into batches: Ibis 12's DuckDB backend cannot stream
        # record batches from DuckDB 2 (and a failed stream leaves its connection unusable).
        # Memory: the audited columns of every row, once, as Arrow.
        yield from native.to_pyarrow().to_batches(BATCH_ROWS)


def engine_for(native: Any, implementation: str, label_column: str | None) -> Engine:
    """The adapter for a native lazy frame (chosen by its narwhals implementation)."""
    if implementation in ("pyspark", "pyspark[connect]"):
        from discaudit.sources.spark import SparkEngine

        return SparkEngine(native, "Spark", label_column)
    local: dict[str, tuple[type[_LocalEngine], str]] = {
        "polars": (_PolarsLazy, "Polars"),
        "duckdb": (_DuckDB, "DuckDB"),
        "ibis": (_Ibis, "Ibis"),
    }
    if implementation not in local:
        raise DataError(
            f"Lazy {implementation} frames are not supported yet; collect the frame first (e.g. to Polars or pandas)."
        )
    kind, name = local[implementation]
    return kind(native, name, label_column)


# --- rows back from an engine ----------------------------------------------------------------------


def _batch_values(batch: Any, features: tuple[str, ...], target: str) -> tuple[FloatArray, pd.Series]:
    """Features (float64, nulls as NaN) and labels (indexed by :data:`ROW`) of one Arrow batch."""
    values = float_block(batch, features)
    index = pd.Index(_column(batch, ROW).to_numpy(zero_copy_only=False))
    labels = pd.Series(np.asarray(_column(batch, target).to_pylist(), dtype=object), index=index, name=target)
    return values, labels


def _column(batch: Any, name: str) -> Any:
    return batch.column(batch.schema.get_field_index(name))


def float_block(batch: Any, features: tuple[str, ...]) -> FloatArray:
    import pyarrow as pa
    import pyarrow.compute as pc

    out = np.empty((batch.num_rows, len(features)), dtype=np.float64)
    for j, name in enumerate(features):
        column = pc.cast(_column(batch, name), pa.float64())
        out[:, j] = (
            column.to_numpy(zero_copy_only=False)
            if column.null_count == 0
            else pc.fill_null(column, np.nan).to_numpy(zero_copy_only=False)
        )
    return out


def raw_arrow_columns(batch: Any, features: tuple[str, ...]) -> list[npt.NDArray[Any]]:
    """The columns of an Arrow batch as numpy arrays: integers without nulls as integers (shifted
    exactly by :func:`~discaudit.sources.screening.audit_values`), the rest as float64."""
    import pyarrow as pa

    out: list[npt.NDArray[Any]] = []
    for j, name in enumerate(features):
        column = _column(batch, name)
        if pa.types.is_integer(column.type) and column.null_count == 0:
            out.append(np.asarray(column.to_numpy(zero_copy_only=False)))
        else:
            out.append(float_block(batch, (features[j],))[:, 0])
    return out


def block_of(batch: Any, features: tuple[str, ...]) -> RowBlock:
    """A :class:`RowBlock` from a batch of audited rows (columns ROW, CODE, then ``features``)."""
    codes = np.asarray(_column(batch, CODE).to_numpy(zero_copy_only=False), dtype=np.intp)
    index = pd.Index(_column(batch, ROW).to_numpy(zero_copy_only=False))
    return RowBlock(float_block(batch, features), codes, index)


@dataclass(frozen=True)
class StreamedRows:
    """A :class:`~discaudit.dataset.RowPass` that streams the audited rows back from the engine."""

    source: Callable[[], Iterator[Any]]
    features: tuple[str, ...]

    def map_reduce(self, fn: Callable[[RowBlock], T], combine: Callable[[T, T], T]) -> T:
        out: T | None = None
        for block in read_ahead(block_of(batch, self.features) for batch in self.source()):
            part = fn(block)
            out = part if out is None else combine(out, part)
        if out is None:  # the engine gave no batch at all: score an empty block
            empty = RowBlock(np.empty((0, len(self.features))), np.empty(0, dtype=np.intp), pd.Index([]))
            out = fn(empty)
        return out


# --- the pushed-down intake --------------------------------------------------------------------------


@dataclass(frozen=True)
class _Exprs:
    """The narwhals expressions every query shares: features in the audit's coordinates, the
    audited-row filter."""

    target: str
    features: tuple[str, ...]
    float_target: bool
    integers: frozenset[str] = frozenset()
    coordinates: Coordinates | None = None

    def raw(self, name: str) -> Any:
        """The column as the engine holds it, as float64 (for finiteness and rough means)."""
        import narwhals as nw

        return nw.col(name).cast(nw.Float64)

    def x(self, name: str) -> Any:
        """The column in the audit's coordinates, ``(x - location) * 2**-exponent``: an integer
        column with an integer location is shifted in the engine's integer arithmetic first."""
        import narwhals as nw

        if self.coordinates is None:
            return self.raw(name)
        j = self.features.index(name)
        location, exponent = self.coordinates.locations[j], self.coordinates.exponents[j]
        if isinstance(location, int) and location and name in self.integers:
            shifted = (nw.col(name) - nw.lit(location)).cast(nw.Float64)
        else:
            shifted = self.raw(name) - float(location) if location else self.raw(name)
        return shifted * float(2.0**-exponent) if exponent else shifted

    def finite(self, name: str) -> Any:
        return self.raw(name).is_finite().fill_null(False)

    def label_missing(self) -> Any:
        import narwhals as nw

        missing = nw.col(self.target).is_null()
        return (missing | nw.col(self.target).is_nan().fill_null(True)) if self.float_target else missing

    def all_finite(self) -> Any:
        import narwhals as nw

        return nw.all_horizontal(*[self.finite(c) for c in self.features], ignore_nulls=False)

    def audited(self) -> Any:
        return ~self.label_missing() & self.all_finite()


def _as_int(expr: Any) -> Any:
    import narwhals as nw

    return expr.cast(nw.Int64)


def _collect(query: Any) -> Any:
    """A narwhals lazy query run in its engine, as an eager narwhals frame."""
    import narwhals as nw

    out = query.collect()
    return nw.from_native(out.to_native(), eager_only=True) if not isinstance(out, nw.DataFrame) else out


def _first_pass(frame: Any, e: _Exprs) -> dict[str, Any]:
    """Per class (null label included): counts, missing values, and over audited rows means and ranges."""
    import narwhals as nw

    ok = e.audited()
    bad_row = ~e.all_finite()
    aggs = [
        nw.len().alias("n_all"),
        _as_int(ok).sum().alias("n_ok"),
        _as_int(bad_row).sum().alias("n_bad"),
        nw.when(bad_row).then(nw.col(ROW)).min().alias("first_bad"),
    ]
    for j, c in enumerate(e.features):
        exact = nw.col(c) if c in e.integers else e.raw(c)  # integers exactly, for the coordinates
        aggs += [
            _as_int(~e.finite(c)).sum().alias(f"miss{j}"),
            nw.when(ok).then(e.raw(c)).mean().alias(f"mean{j}"),
            nw.when(ok).then(exact).min().alias(f"min{j}"),
            nw.when(ok).then(exact).max().alias(f"max{j}"),
            nw.when(e.finite(c)).then(exact).min().alias(f"lo{j}"),
            nw.when(e.finite(c)).then(exact).max().alias(f"hi{j}"),
        ]
    keyed = frame.with_columns(e.label_missing().alias("__missing_label"))
    result = _collect(keyed.group_by(e.target, "__missing_label").agg(*aggs))
    return {name: result[name].to_list() for name in result.columns}


def _centred_pass(frame: Any, e: _Exprs, classes: list[Any], means: FloatArray) -> tuple[FloatArray, FloatArray]:
    """Per class: sums of deviations from the class mean ``d`` and of their products (upper triangle)."""
    import narwhals as nw

    p = len(e.features)
    centred = [
        e.x(c) - nw.col(e.target).replace_strict(classes, means[:, j].tolist(), default=0.0, return_dtype=nw.Float64)
        for j, c in enumerate(e.features)
    ]
    aggs = [centred[j].sum().alias(f"d{j}") for j in range(p)]
    aggs += [(centred[i] * centred[j]).sum().alias(f"s{i}_{j}") for i in range(p) for j in range(i, p)]
    result = _collect(frame.filter(e.audited()).group_by(e.target).agg(*aggs))
    order = {label(v): r for r, v in enumerate(result[e.target].to_list())}
    rows = [order[label(c)] for c in classes]
    d = np.array([[result[f"d{j}"][r] for j in range(p)] for r in rows], dtype=np.float64).reshape(len(classes), p)
    s = np.zeros((len(classes), p, p))
    for i in range(p):
        for j in range(i, p):
            column = result[f"s{i}_{j}"].to_list()
            s[:, i, j] = s[:, j, i] = [column[r] for r in rows]
    return d, s


def _sample(
    engine: Engine,
    numbered: Any,
    e: _Exprs,
    classes: list[Any],
    counts: npt.NDArray[np.int64],
    capacity: int,
    seed: int,
) -> dict[Any, Reservoir]:
    """The ``capacity`` rows of smallest hashed key per class (all rows of a smaller class)."""
    import narwhals as nw

    margin = np.ones(len(classes))
    reservoirs: dict[Any, Reservoir] = {}
    pending = list(range(len(classes)))
    while pending:
        wanted = [classes[k] for k in pending]
        cut = [
            2.0
            if counts[k] <= capacity
            else min(2.0, (capacity + margin[k] * (_KEY_MARGIN_SD * np.sqrt(capacity) + 10)) / counts[k])
            for k in pending
        ]
        keyed = nw.from_native(engine.keyed(numbered, seed))
        below = nw.col(KEY) < nw.col(e.target).replace_strict(wanted, cut, default=-1.0, return_dtype=nw.Float64)
        query = keyed.filter(e.audited() & below).select(
            nw.col(ROW), nw.col(KEY), nw.col(e.target), *[e.x(c).alias(c) for c in e.features]
        )
        rows = _collect(query)
        labels = [label(v) for v in rows[e.target].to_list()]
        keys = np.asarray(rows[KEY].to_numpy(), dtype=np.float64)
        names = np.asarray(rows[ROW].to_numpy(), dtype=object)
        values = np.column_stack([np.asarray(rows[c].to_numpy(), dtype=np.float64) for c in e.features]).reshape(
            len(labels), len(e.features)
        )
        by_class: dict[Any, list[int]] = {}
        for r, v in enumerate(labels):
            by_class.setdefault(v, []).append(r)
        still = []
        for k in pending:
            picked = np.asarray(by_class.get(label(classes[k]), []), dtype=np.intp)
            need = min(capacity, int(counts[k]))
            if len(picked) < need:  # the key threshold fell short (rare): ask again with a wider margin
                margin[k] *= 4
                still.append(k)
                continue
            if len(picked) > need:
                order = np.lexsort((names[picked].astype(str), keys[picked]))
                picked = picked[order[:need]]
            picked = picked[np.argsort(names[picked], kind="stable")]  # rows in row-label order
            reservoirs[classes[k]] = Reservoir(values[picked], names[picked], int(counts[k]))
        pending = still
    return reservoirs


def _distinct(
    frame: Any, e: _Exprs, sample: FloatArray, limit: int, whole: bool
) -> tuple[frozenset[float] | None, ...]:
    """Distinct values of each column when at most ``limit`` (confirmed over all rows unless ``whole``)."""
    out: list[frozenset[float] | None] = []
    for j, c in enumerate(e.features):
        seen = np.unique(sample[:, j])
        if seen.size > limit:
            out.append(None)
            continue
        if not whole:
            found = _collect(frame.filter(e.audited()).select(e.x(c).alias(c)).unique().head(limit + 1))
            seen = np.unique(np.asarray(found[c].to_numpy(), dtype=np.float64))
        out.append(frozenset(seen.tolist()) if seen.size <= limit else None)
    return tuple(out)


def _same_as(frame: Any, e: _Exprs, sample: FloatArray, whole: bool) -> npt.NDArray[np.intp]:
    """For each column, the first column equal to it on every audited row (itself if none)."""

    candidates = identical_columns(sample)
    if whole:
        return candidates
    out = np.arange(len(e.features), dtype=np.intp)
    for j in np.flatnonzero(candidates != np.arange(len(e.features))):
        group = [i for i in range(int(j)) if candidates[i] == candidates[j] and out[i] == i]
        for i in group:
            differ = _collect(frame.filter(e.audited()).select(_as_int(e.x(e.features[i]) != e.x(e.features[j])).sum()))
            if int(differ.item(0, 0) or 0) == 0:
                out[j] = i
                break
    return out


def load_lazy(
    native: Any,
    *,
    target: str | None,
    config: Config,
    random_state: int | None,
    label_column: str | None = None,
) -> AuditData:
    """Validate a lazy frame where it lives (see the module docstring).

    ``label_column`` names a column of row labels (not a feature); by default rows are labelled by
    the positions the engine gives them.
    """
    import narwhals as nw

    frame = nw.from_native(native)
    implementation = str(frame.implementation.value)
    engine = engine_for(native, implementation, label_column)
    source = frame.drop(label_column) if label_column is not None else frame
    columns = judge_columns(source, target, config)
    assert target is not None  # judge_columns demands it for a lazy frame
    schema = frame.collect_schema()
    integers = frozenset(c for c in columns.features if schema[c].is_integer())
    e = _Exprs(target, columns.features, schema[target].is_float(), integers)
    numbered = engine.numbered()
    lazy = nw.from_native(numbered)
    seed = int(stream_rng(random_state, ENGINE_SAMPLE).integers(2**31 - 1))
    try:
        if len(columns.features) > PUSHDOWN_MAX_FEATURES:
            coordinates = _coordinates(_first_pass(lazy, e), len(columns.features))
            e = dataclasses.replace(e, coordinates=coordinates)
            mapped = lazy.select(nw.col(ROW), nw.col(target), *[e.x(c).alias(c) for c in columns.features])
            summary = engine.summaries(mapped.to_native(), target, columns, coordinates, config, random_state)
        else:
            summary = _pushed_down(engine, numbered, lazy, e, columns, config, seed)
    except DataError:
        raise
    except Exception as exc:
        raise DataError(
            f"{engine.name} could not compute the summaries of columns {list(columns.features)[:8]}: "
            f"{type(exc).__name__}: {_first_line(exc)}"
        ) from None
    data = to_audit_data(summary, config, random_state)
    e = dataclasses.replace(e, coordinates=summary.coordinates)
    codes = {c: k for k, c in enumerate(data.classes)}
    rows = lazy.filter(e.audited()).select(
        nw.col(ROW),
        nw.col(target).replace_strict(list(codes), list(codes.values()), default=-1, return_dtype=nw.Int64).alias(CODE),
        *[e.x(c).alias(c) for c in data.features],
    )
    return dataclasses.replace(data, all_rows=engine.row_pass(rows.to_native(), data.features))


def _coordinates(first: dict[str, Any], p: int) -> Coordinates:
    """The audit's coordinates from each column's exact range over its finite values."""
    ranges: list[tuple[int | float, int | float] | None] = []
    for j in range(p):
        lows = [v for v in first[f"lo{j}"] if v is not None]
        highs = [v for v in first[f"hi{j}"] if v is not None]
        ranges.append((_exact(min(lows)), _exact(max(highs))) if lows else None)
    return choose_coordinates(ranges)


def _exact(value: Any) -> int | float:
    return int(value) if isinstance(value, (int, np.integer)) and not isinstance(value, bool) else float(value)


def _in_coordinates(value: Any, location: int | float, exponent: int) -> float:
    """One raw value in the audit's coordinates, computed as :func:`screening.audit_values` does."""
    if isinstance(location, int) and location and isinstance(value, (int, np.integer)):
        shifted = float(int(value) - location)
    else:
        shifted = float(value) - location if location else float(value)
    return float(np.ldexp(shifted, -exponent)) if exponent else shifted


def _pushed_down(
    engine: Engine, numbered: Any, lazy: Any, e: _Exprs, columns: FrameColumns, config: Config, seed: int
) -> ChunkSummary:
    import narwhals as nw

    p = len(e.features)
    first = _first_pass(lazy, e)
    coordinates = _coordinates(first, p)
    e = dataclasses.replace(e, coordinates=coordinates)
    groups = list(zip(first[e.target], first["__missing_label"], strict=True))
    missing_label_rows = sum(n for (_, gone), n in zip(groups, first["n_all"], strict=True) if gone)
    unlabelled: tuple[Any, ...] = ()
    if missing_label_rows:
        found = _collect(lazy.filter(e.label_missing()).select(nw.col(ROW)).sort(ROW).head(5))
        unlabelled = tuple(label(v) for v in found[ROW].to_list())
    missing = np.array([sum(first[f"miss{j}"]) for j in range(p)], dtype=np.int64)
    bad_rows = [r for r in first["first_bad"] if r is not None]
    first_bad = label(min(bad_rows)) if bad_rows else None
    if config.missing == "error":
        raise_for_missing(missing, first_bad, missing_label_rows, list(e.features), unlabelled)
    present = [r for r, (_, gone) in enumerate(groups) if not gone]
    dropped = {label(groups[r][0]): int(first["n_bad"][r]) for r in present if first["n_bad"][r]}
    kept = [r for r in present if first["n_ok"][r] > 0]
    classes = [groups[r][0] for r in kept]  # the engine's own values: queries compare against them
    counts = np.array([first["n_ok"][r] for r in kept], dtype=np.int64)
    where = list(zip(coordinates.locations, coordinates.exponents, strict=True))
    rough = np.array(
        [[_in_coordinates(first[f"mean{j}"][r], *where[j]) for j in range(p)] for r in kept], dtype=np.float64
    ).reshape(-1, p)
    low = np.array([[_in_coordinates(first[f"min{j}"][r], *where[j]) for j in range(p)] for r in kept]).reshape(-1, p)
    high = np.array([[_in_coordinates(first[f"max{j}"][r], *where[j]) for j in range(p)] for r in kept]).reshape(-1, p)
    col_min = low.min(axis=0) if kept else np.full(p, np.inf)
    col_max = high.max(axis=0) if kept else np.full(p, -np.inf)
    check_magnitude(np.maximum(-col_min, col_max), list(e.features))  # before any square is formed
    if classes:
        d, s = _centred_pass(lazy, e, classes, rough)
        means = rough + d / counts[:, None]
        scatter = s - d[:, :, None] * d[:, None, :] / counts[:, None, None]
    else:
        means, scatter = np.empty((0, p)), np.empty((0, p, p))
    moments = ClassMoments.from_summaries(tuple(classes), counts, means, scatter, low, high)
    capacity = config.sample_rows_per_class
    reservoirs = _sample(engine, numbered, e, classes, counts, capacity, seed) if classes else {}
    whole = all(n <= capacity for n in counts)
    sample = np.vstack([r.values for r in reservoirs.values()]) if reservoirs else np.empty((0, p))
    return ChunkSummary(
        features=e.features,
        moments=moments,
        reservoirs=reservoirs,
        col_min=col_min,
        col_max=col_max,
        distinct=_distinct(lazy, e, sample, config.few_distinct_values, whole),
        missing_per_column=missing,
        first_missing_row=first_bad,
        missing_labels=int(missing_label_rows),
        missing_label_rows=unlabelled,
        dropped_per_class=dropped,
        non_numeric=columns.non_numeric,
        same_as=_same_as(lazy, e, sample, whole),
        n_rows_input=int(sum(first["n_all"])),
        n_features_input=columns.n_features_input,
        capacity=capacity,
        distinct_limit=config.few_distinct_values,
        coordinates=coordinates,
    )


def _first_line(exc: BaseException) -> str:
    text = " ".join(str(exc).split())
    return text if len(text) <= 240 else text[:237] + "..."
