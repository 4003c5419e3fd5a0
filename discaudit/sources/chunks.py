"""Chunked input: an iterable of DataFrames (or a function returning a fresh one), read once or twice.

A chunk becomes a :class:`ChunkSummary` by the shared input rules
(:mod:`discaudit.sources.screening`); summaries merge exactly (moments by Chan et al.'s
formula, column ranges and distinct values by union, groups of identical columns by refinement,
per-class reservoir samples by a hypergeometric split that keeps each merged sample uniform over
all rows). Streaming folds chunks one by one; Dask reduces partition summaries in a tree. The
merged summary becomes :class:`~discaudit.dataset.AuditData` whose moments are exact over all
rows, whose rows are the sample, and whose ``all_rows`` reads the chunks again (when they can
be) so that a check can score every row.
"""

from __future__ import annotations

import dataclasses
from collections.abc import Callable, Iterable
from dataclasses import dataclass, field
from typing import Any, TypeVar

import numpy as np
import numpy.typing as npt
import pandas as pd

from discaudit._threads import read_ahead
from discaudit.config import Config
from discaudit.dataset import AuditData, Coordinates, IntakeRecord, RowBlock, RowPass, SampleInfo
from discaudit.errors import DataError
from discaudit.jsonable import label
from discaudit.sources.screening import (
    audit_values,
    check_classes,
    check_magnitude,
    choose_coordinates,
    column_range,
    distinct_values,
    exact_range,
    frame_columns,
    identical_columns,
    named_columns,
    numeric_columns,
    raise_for_missing,
    screen_columns,
    screen_missing,
    split,
)
from discaudit.stats._inputs import label_codes, ordered_unique
from discaudit.stats.moments import ClassMoments
from discaudit.stats.seeds import CHUNK_MERGE, CHUNK_SAMPLE, LABEL_UNIFY, stream_rng

FloatArray = npt.NDArray[np.float64]
T = TypeVar("T")

#: Chunks as a function returning a fresh iterator (readable twice) or a plain iterable (once).
ChunkSource = Callable[[], Iterable[pd.DataFrame]] | Iterable[pd.DataFrame]


@dataclass(frozen=True)
class Reservoir:
    """A uniform random sample (without replacement) of ``seen`` rows of one class."""

    values: FloatArray
    labels: npt.NDArray[np.object_]
    seen: int

    @classmethod
    def of(
        cls, values: FloatArray, labels: npt.NDArray[np.object_], capacity: int, rng: np.random.Generator
    ) -> Reservoir:
        n = values.shape[0]
        if n <= capacity:
            return cls(values.copy(), labels, n)
        pick = np.sort(rng.choice(n, capacity, replace=False))
        return cls(values[pick], labels[pick], n)

    def merge(self, other: Reservoir, capacity: int, rng: np.random.Generator) -> Reservoir:
        """Uniform sample of the union: how many come from each side is hypergeometric."""
        size = min(capacity, self.seen + other.seen)
        if self.seen + other.seen <= capacity:
            return Reservoir(
                np.vstack([self.values, other.values]),
                np.concatenate([self.labels, other.labels]),
                self.seen + other.seen,
            )
        from_self = int(rng.hypergeometric(self.seen, other.seen, size))
        a = np.sort(rng.choice(len(self.values), from_self, replace=False))
        b = np.sort(rng.choice(len(other.values), size - from_self, replace=False))
        return Reservoir(
            np.vstack([self.values[a], other.values[b]]),
            np.concatenate([self.labels[a], other.labels[b]]),
            self.seen + other.seen,
        )


@dataclass(frozen=True)
class ChunkSummary:
    """Everything the audit keeps of a set of rows."""

    features: tuple[str, ...]
    moments: ClassMoments
    reservoirs: dict[Any, Reservoir]
    col_min: FloatArray
    col_max: FloatArray
    distinct: tuple[frozenset[float] | None, ...]
    missing_per_column: npt.NDArray[np.int64]
    first_missing_row: Any
    missing_labels: int
    #: Labels of the first rows (at most 5) whose class label is missing.
    missing_label_rows: tuple[Any, ...]
    dropped_per_class: dict[Any, int]
    non_numeric: tuple[str, ...]
    #: For each column, the first column holding the same values in every row seen (itself if none).
    same_as: npt.NDArray[np.intp]
    n_rows_input: int
    n_features_input: int
    capacity: int
    distinct_limit: int = field(default=5)
    #: The coordinates every chunk is audited in (chosen from the first chunk; see Coordinates).
    coordinates: Coordinates | None = None
    conversions: dict[str, str] = field(default_factory=dict)


def summarize(
    chunk: pd.DataFrame,
    target: str,
    config: Config,
    capacity: int,
    rng: np.random.Generator,
    features: tuple[str, ...] | None = None,
    coordinates: Coordinates | None = None,
) -> ChunkSummary:
    """Summarize one chunk (a DataFrame holding the target column).

    ``features`` fixes the feature columns (from the first chunk); a later chunk that lacks
    one raises DataError naming it. ``coordinates`` (from the first chunk) fix where every
    feature is audited, so that all summaries merge; by default they are chosen from this chunk.
    """
    frame, labels = split(chunk, None, target)
    n_features_input = frame.shape[1]
    frame, non_numeric, conversions = numeric_columns(frame, config)
    if features is not None:
        missing_cols = [f for f in features if f not in frame.columns]
        if missing_cols:
            raise DataError(f"A later chunk lacks feature columns {missing_cols[:8]} (or they are not numeric there).")
        frame = frame[list(features)]
    columns = frame_columns(frame)
    if coordinates is None:
        coordinates = choose_coordinates([exact_range(c) for c in columns])
    return summarize_values(
        audit_values(columns, coordinates),
        labels,
        tuple(str(c) for c in frame.columns),
        config,
        capacity,
        rng,
        coordinates=coordinates,
        non_numeric=tuple(non_numeric),
        n_features_input=n_features_input,
        conversions=conversions,
    )


def summarize_values(
    values: FloatArray,
    labels: pd.Series,
    features: tuple[str, ...],
    config: Config,
    capacity: int,
    rng: np.random.Generator,
    *,
    coordinates: Coordinates,
    non_numeric: tuple[str, ...] = (),
    n_features_input: int | None = None,
    conversions: dict[str, str] | None = None,
) -> ChunkSummary:
    """Summarize rows already read as a float array in the audit's ``coordinates``
    (``labels`` indexed by the rows' labels).

    What :func:`summarize` does once it has split and converted a pandas chunk; sources that read
    columns straight into arrays (Arrow batches, Polars frames) call it without building a DataFrame.
    """
    index = labels.index
    screen = screen_missing(values, labels, index)
    dropped = labels[screen.bad_rows & ~screen.missing_label].value_counts().to_dict()
    keep = screen.keep
    n_rows_input = values.shape[0]
    values, labels, kept_index = values[keep], labels[keep], index[keep]
    codes, class_list = label_codes(labels)
    classes = tuple(class_list)
    col_min, col_max = column_range(values)
    check_magnitude(np.maximum(-col_min, col_max), list(features))  # before any square is formed
    moments = ClassMoments.from_arrays(values, codes, classes)
    row_labels = np.asarray(kept_index, dtype=object)
    reservoirs = {
        c: Reservoir.of(values[codes == k], row_labels[codes == k], capacity, rng) for k, c in enumerate(classes)
    }
    limit = config.few_distinct_values
    return ChunkSummary(
        features=features,
        moments=moments,
        reservoirs=reservoirs,
        col_min=col_min,
        col_max=col_max,
        distinct=tuple(distinct_values(values[:, j], limit) for j in range(values.shape[1])),
        missing_per_column=screen.missing_per_column,
        first_missing_row=screen.first_bad_row,
        missing_labels=int(screen.missing_label.sum()),
        missing_label_rows=tuple(label(r) for r in index[screen.missing_label][:5]),
        dropped_per_class={label(k): int(v) for k, v in dropped.items()},
        non_numeric=non_numeric,
        same_as=identical_columns(values),
        n_rows_input=n_rows_input,
        n_features_input=len(features) if n_features_input is None else n_features_input,
        capacity=capacity,
        distinct_limit=limit,
        coordinates=coordinates,
        conversions=dict(conversions or {}),
    )


def _refine(a: npt.NDArray[np.intp], b: npt.NDArray[np.intp]) -> npt.NDArray[np.intp]:
    """Columns identical on two sets of rows: identical on each (groups named by first member)."""
    first: dict[tuple[int, int], int] = {}
    return np.array([first.setdefault((int(x), int(y)), j) for j, (x, y) in enumerate(zip(a, b, strict=True))], np.intp)


def merge(a: ChunkSummary, b: ChunkSummary, rng: np.random.Generator) -> ChunkSummary:
    """Exact merge of two summaries of disjoint rows."""
    if a.features != b.features:
        raise DataError(f"Chunks disagree on the feature columns: {list(a.features)[:5]} vs {list(b.features)[:5]}.")
    if a.coordinates != b.coordinates:  # pragma: no cover - every source passes the first chunk's
        raise ValueError("chunk summaries in different coordinates cannot be merged")
    reservoirs = dict(a.reservoirs)
    for c, r in b.reservoirs.items():
        reservoirs[c] = reservoirs[c].merge(r, a.capacity, rng) if c in reservoirs else r
    distinct = tuple(
        None if x is None or y is None or len(x | y) > a.distinct_limit else x | y
        for x, y in zip(a.distinct, b.distinct, strict=True)
    )
    dropped = dict(a.dropped_per_class)
    for c, n in b.dropped_per_class.items():
        dropped[c] = dropped.get(c, 0) + n
    return ChunkSummary(
        features=a.features,
        moments=a.moments.merge(b.moments),
        reservoirs=reservoirs,
        col_min=np.minimum(a.col_min, b.col_min),
        col_max=np.maximum(a.col_max, b.col_max),
        distinct=distinct,
        missing_per_column=a.missing_per_column + b.missing_per_column,
        first_missing_row=a.first_missing_row if a.first_missing_row is not None else b.first_missing_row,
        missing_labels=a.missing_labels + b.missing_labels,
        missing_label_rows=(a.missing_label_rows + b.missing_label_rows)[:5],
        dropped_per_class=dropped,
        non_numeric=a.non_numeric,
        same_as=_refine(a.same_as, b.same_as),
        n_rows_input=a.n_rows_input + b.n_rows_input,
        n_features_input=a.n_features_input,
        capacity=a.capacity,
        distinct_limit=a.distinct_limit,
        coordinates=a.coordinates,
        conversions={**a.conversions, **b.conversions},
    )


def to_audit_data(
    summary: ChunkSummary, config: Config, random_state: int | None, all_rows: RowPass | None = None
) -> AuditData:
    """Validate the merged summary and turn it into AuditData (exact moments, sampled rows).

    ``all_rows`` is the source's pass over every row (see :func:`block_reader`), if it has one.

    Raises
    ------
    DataError
        As :func:`discaudit.sources.memory.load` does, for the whole input.
    """
    features = list(summary.features)
    if config.missing == "error":
        raise_for_missing(
            summary.missing_per_column,
            summary.first_missing_row,
            summary.missing_labels,
            features,
            summary.missing_label_rows,
        )
    summary = _unify_label_types(summary, random_state)
    classes = ordered_unique(list(summary.moments.classes))
    moments = _reorder(summary.moments, classes)
    check_classes(classes, moments.counts)
    screen = screen_columns(summary.col_min, summary.col_max, summary.same_as, features)
    keep = screen.keep
    idx = np.flatnonzero(keep)
    moments = moments.subset(idx)
    parts = [summary.reservoirs[c] for c in classes]
    values = np.ascontiguousarray(np.vstack([r.values[:, idx] for r in parts]))
    codes = np.repeat(np.arange(len(classes)), [len(r.values) for r in parts]).astype(np.intp)
    row_labels = pd.Index(np.concatenate([r.labels for r in parts]))
    kept_features = tuple(features[j] for j in idx)
    distinct = {features[j]: len(summary.distinct[j]) for j in idx if summary.distinct[j] is not None}  # type: ignore[arg-type]
    record = IntakeRecord(
        n_rows_input=summary.n_rows_input,
        n_features_input=summary.n_features_input,
        dropped_rows_per_class=summary.dropped_per_class if config.missing == "drop_rows" else {},
        dropped_rows_unlabelled=summary.missing_labels if config.missing == "drop_rows" else 0,
        non_numeric_dropped=summary.non_numeric,
        constant_columns=screen.constant,
        duplicate_columns=screen.duplicates,
        conversions=summary.conversions,
    )
    sample = SampleInfo(
        n_total=moments.n_total,
        per_class={c: len(r.values) for c, r in zip(classes, parts, strict=True)},
        capacity=summary.capacity,
        random_state=random_state,
    )
    coordinates = None if summary.coordinates is None else summary.coordinates.take(idx.tolist())
    return AuditData(
        values,
        codes,
        tuple(classes),
        kept_features,
        row_labels,
        moments,
        record,
        distinct,
        sample,
        all_rows,
        None if coordinates is None or coordinates.trivial else coordinates,
    )


def _unify_label_types(summary: ChunkSummary, random_state: int | None) -> ChunkSummary:
    """Read as text where chunks disagreed on the target's type, as a whole-file reader does.

    Each chunk infers the target's type on its own, so a label can arrive as 5 in one chunk
    and '5' in another; when text and non-text labels meet, every label becomes text and the
    classes that then coincide are merged exactly.
    """
    labels = summary.moments.classes
    if all(isinstance(c, str) for c in labels) or not any(isinstance(c, str) for c in labels):
        return summary
    rng = stream_rng(random_state, LABEL_UNIFY)
    m = summary.moments
    merged: ClassMoments | None = None
    reservoirs: dict[Any, Reservoir] = {}
    for k, c in enumerate(labels):
        text = str(c)
        part = m.take_classes([k], (text,))
        merged = part if merged is None else merged.merge(part)
        r = summary.reservoirs[c]
        reservoirs[text] = reservoirs[text].merge(r, summary.capacity, rng) if text in reservoirs else r
    assert merged is not None
    dropped: dict[Any, int] = {}
    for c, n in summary.dropped_per_class.items():
        dropped[str(c)] = dropped.get(str(c), 0) + n
    return dataclasses.replace(summary, moments=merged, reservoirs=reservoirs, dropped_per_class=dropped)


def _reorder(moments: ClassMoments, classes: list[Any]) -> ClassMoments:
    return moments.take_classes([moments.classes.index(c) for c in classes], tuple(classes))


def summarize_chunks(
    chunks: Iterable[pd.DataFrame],
    target: str,
    config: Config,
    random_state: int | None,
    progress: Callable[[int], None] | None = None,
) -> ChunkSummary:
    """Fold the summaries of all chunks (pass 1)."""
    total: ChunkSummary | None = None
    for i, chunk in enumerate(chunks):
        part = summarize(
            chunk,
            target,
            config,
            config.sample_rows_per_class,
            stream_rng(random_state, CHUNK_SAMPLE, i),
            None if total is None else total.features,
            None if total is None else total.coordinates,
        )
        total = part if total is None else merge(total, part, stream_rng(random_state, CHUNK_MERGE, i))
        if progress is not None:
            progress(len(chunk))
    if total is None or total.n_rows_input == 0:
        raise DataError("The input has no data rows.")
    return total


@dataclass(frozen=True)
class BlockSpec:
    """How to turn a raw chunk into a :class:`~discaudit.dataset.RowBlock` of audited rows.

    The same rules as pass 1: rows with a missing label or a non-finite value in any numeric
    feature column are left out, labels become the class codes of the audit, and only the
    audited columns are kept.
    """

    target: str
    columns: tuple[str, ...]
    kept: npt.NDArray[np.intp]
    codes: dict[Any, int]
    text_labels: bool
    coordinates: Coordinates | None = None
    config: Config | None = None

    def block(self, chunk: pd.DataFrame) -> RowBlock:
        frame = named_columns(chunk.drop(columns=[self.target]))[list(self.columns)]
        if self.config is not None:  # the same conversions as pass 1 (e.g. categorical codes)
            frame = numeric_columns(frame, self.config)[0]
        columns = frame_columns(frame)
        values = audit_values(columns, self.coordinates or Coordinates.plain(len(columns)))
        return self.block_values(values, chunk[self.target])

    def block_values(self, values: FloatArray, labels: pd.Series) -> RowBlock:
        """The same for rows already read as floats in the audit's coordinates, in ``columns``
        order (labels indexed by row label)."""
        screen = screen_missing(values, labels, labels.index)
        raw = labels.to_numpy(dtype=object)
        codes = np.array(
            [self.codes.get(str(v) if self.text_labels else v, -1) if ok else -1 for v, ok in zip(raw, screen.keep)],
            dtype=np.intp,
        )
        rows = np.flatnonzero(codes >= 0)
        return RowBlock(np.ascontiguousarray(values[np.ix_(rows, self.kept)]), codes[rows], labels.index[rows])


def block_spec(summary: ChunkSummary, data: AuditData, target: str, config: Config | None = None) -> BlockSpec:
    """The :class:`BlockSpec` that maps raw chunks onto ``data``'s columns and classes."""
    position = {name: j for j, name in enumerate(summary.features)}
    kept = np.array([position[f] for f in data.features], dtype=np.intp)
    text = all(isinstance(c, str) for c in data.classes)
    return BlockSpec(
        target, summary.features, kept, {c: k for k, c in enumerate(data.classes)}, text, summary.coordinates, config
    )


@dataclass(frozen=True)
class ChunkRows:
    """A :class:`~discaudit.dataset.RowPass` that reads the chunks again, one at a time."""

    source: Callable[[], Iterable[pd.DataFrame]]
    spec: BlockSpec

    def map_reduce(self, fn: Callable[[RowBlock], T], combine: Callable[[T, T], T]) -> T:
        out: T | None = None
        for block in read_ahead(self.spec.block(chunk) for chunk in self.source()):
            part = fn(block)
            out = part if out is None else combine(out, part)
        if out is None:
            raise DataError("The input had no rows when it was read the second time.")
        return out


def load_chunks(
    chunks: ChunkSource,
    target: str,
    config: Config,
    random_state: int | None,
    progress: Callable[[int], None] | None = None,
) -> AuditData:
    """Validate chunked input: pass 1 now; ``all_rows`` reads the chunks again when it is a function."""
    source = chunks if callable(chunks) else None
    first = source() if source is not None else chunks
    summary = summarize_chunks(first, target, config, random_state, progress)  # type: ignore[arg-type]
    data = to_audit_data(summary, config, random_state)
    if source is None:
        return data
    return dataclasses.replace(data, all_rows=ChunkRows(source, block_spec(summary, data, target, config)))
