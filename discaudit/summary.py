"""Mergeable summaries of chunks of rows: exact moments plus a uniform per-class sample.

A chunk (a pandas DataFrame with the target column) becomes a :class:`ChunkSummary`;
summaries merge exactly (moments by Chan et al.'s formula, column ranges and distinct
values by union, groups of identical columns by refinement, per-class reservoir samples
by a hypergeometric split that keeps each merged sample uniform over all rows). Streaming folds chunks one by one; Dask reduces
partition summaries in a tree. The result becomes :class:`~discaudit.intake.AuditData`
whose moments are exact and whose rows are the sample.
"""

from __future__ import annotations

import dataclasses
import hashlib
from dataclasses import dataclass, field
from typing import Any

import numpy as np
import numpy.typing as npt
import pandas as pd

from discaudit._plain import label
from discaudit.config import Config
from discaudit.errors import DataError
from discaudit.intake import (
    AuditData,
    IntakeRecord,
    SampleInfo,
    check_classes,
    check_magnitude,
    numeric_columns,
    split,
)
from discaudit.moments import ClassMoments
from discaudit.stats._inputs import ordered_unique

FloatArray = npt.NDArray[np.float64]


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
    dropped_per_class: dict[Any, int]
    non_numeric: tuple[str, ...]
    #: For each column, the first column holding the same values in every row seen (itself if none).
    same_as: npt.NDArray[np.intp]
    n_rows_input: int
    n_features_input: int
    capacity: int
    distinct_limit: int = field(default=5)


def summarize(
    chunk: pd.DataFrame,
    target: str,
    config: Config,
    capacity: int,
    rng: np.random.Generator,
    features: tuple[str, ...] | None = None,
) -> ChunkSummary:
    """Summarize one chunk (a DataFrame holding the target column).

    ``features`` fixes the feature columns (from the first chunk); a later chunk that lacks
    one raises DataError naming it.
    """
    frame, labels = split(chunk, None, target)
    n_features_input = frame.shape[1]
    frame, non_numeric = numeric_columns(frame, config)
    if features is not None:
        missing_cols = [f for f in features if f not in frame.columns]
        if missing_cols:
            raise DataError(f"A later chunk lacks feature columns {missing_cols[:8]} (or they are not numeric there).")
        frame = frame[list(features)]
    with np.errstate(invalid="ignore"):
        values = np.ascontiguousarray(frame.to_numpy(dtype=np.float64, na_value=np.nan))
    bad = ~np.isfinite(values)
    bad_rows = bad.any(axis=1)
    missing_label = labels.isna().to_numpy()
    first_missing = label(frame.index[np.flatnonzero(bad_rows)[0]]) if bad_rows.any() else None
    keep = ~(bad_rows | missing_label)
    dropped = labels[bad_rows & ~missing_label].value_counts().to_dict()
    values, labels, index = values[keep], labels[keep], frame.index[keep]
    classes = ordered_unique(labels.tolist())
    lookup = {c: k for k, c in enumerate(classes)}
    codes = np.fromiter((lookup[v] for v in labels.tolist()), dtype=np.intp, count=len(labels))
    if values.size:  # before any square is formed, as intake does for in-memory data
        check_magnitude(np.maximum(-values.min(axis=0), values.max(axis=0)), list(frame.columns))
    moments = ClassMoments.from_arrays(values, codes, tuple(classes))
    row_labels = np.asarray(index, dtype=object)
    reservoirs = {
        c: Reservoir.of(values[codes == k], row_labels[codes == k], capacity, rng) for k, c in enumerate(classes)
    }
    limit = config.few_distinct_values
    distinct = tuple(_distinct(values[:, j], limit) for j in range(values.shape[1]))
    p = values.shape[1]
    return ChunkSummary(
        features=tuple(str(c) for c in frame.columns),
        moments=moments,
        reservoirs=reservoirs,
        col_min=values.min(axis=0) if len(values) else np.full(p, np.inf),
        col_max=values.max(axis=0) if len(values) else np.full(p, -np.inf),
        distinct=distinct,
        missing_per_column=bad.sum(axis=0).astype(np.int64),
        first_missing_row=first_missing,
        missing_labels=int(missing_label.sum()),
        dropped_per_class={label(k): int(v) for k, v in dropped.items()},
        non_numeric=tuple(non_numeric),
        same_as=_identical_columns(values),
        n_rows_input=len(chunk),
        n_features_input=n_features_input,
        capacity=capacity,
        distinct_limit=limit,
    )


def _distinct(column: FloatArray, limit: int) -> frozenset[float] | None:
    values = np.unique(column[:1000])
    if values.size > limit:
        return None
    values = np.unique(column)
    return frozenset(values.tolist()) if values.size <= limit else None


def _identical_columns(values: FloatArray) -> npt.NDArray[np.intp]:
    """For each column, the first column with exactly the same values in these rows."""
    columns = np.ascontiguousarray(values.T)
    out = np.arange(columns.shape[0], dtype=np.intp)
    by_content: dict[bytes, list[int]] = {}
    for j, column in enumerate(columns):
        key = hashlib.blake2b((column + 0.0).tobytes(), digest_size=16).digest()  # + 0.0: -0.0 == 0.0
        candidates = by_content.setdefault(key, [])
        match = next((i for i in candidates if np.array_equal(columns[i], column)), None)
        if match is None:
            candidates.append(j)
        else:
            out[j] = match
    return out


def _refine(a: npt.NDArray[np.intp], b: npt.NDArray[np.intp]) -> npt.NDArray[np.intp]:
    """Columns identical on two sets of rows: identical on each (groups named by first member)."""
    first: dict[tuple[int, int], int] = {}
    return np.array([first.setdefault((int(x), int(y)), j) for j, (x, y) in enumerate(zip(a, b, strict=True))], np.intp)


def merge(a: ChunkSummary, b: ChunkSummary, rng: np.random.Generator) -> ChunkSummary:
    """Exact merge of two summaries of disjoint rows."""
    if a.features != b.features:
        raise DataError(f"Chunks disagree on the feature columns: {list(a.features)[:5]} vs {list(b.features)[:5]}.")
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
        dropped_per_class=dropped,
        non_numeric=a.non_numeric,
        same_as=_refine(a.same_as, b.same_as),
        n_rows_input=a.n_rows_input + b.n_rows_input,
        n_features_input=a.n_features_input,
        capacity=a.capacity,
        distinct_limit=a.distinct_limit,
    )


def to_audit_data(summary: ChunkSummary, config: Config, random_state: int | None) -> AuditData:
    """Validate the merged summary and turn it into AuditData (exact moments, sampled rows).

    Raises
    ------
    DataError
        As :func:`discaudit.intake.load` does, for the whole input.
    """
    features = list(summary.features)
    if config.missing == "error":
        if summary.missing_labels:
            raise DataError(
                f"The target has {summary.missing_labels} missing labels; label or drop them, "
                "or pass Config(missing='drop_rows')."
            )
        counts = summary.missing_per_column
        if counts.any():
            cols = [f"{features[j]} ({int(counts[j])})" for j in np.flatnonzero(counts)]
            raise DataError(
                f"NaN or infinite values in columns {', '.join(cols[:8])} (first at row "
                f"{summary.first_missing_row}); impute or drop them, or pass Config(missing='drop_rows')."
            )
    summary = _unify_label_types(summary, random_state)
    classes = ordered_unique(list(summary.moments.classes))
    moments = _reorder(summary.moments, classes)
    check_classes(classes, moments.counts)
    check_magnitude(np.maximum(np.abs(summary.col_min), np.abs(summary.col_max)), features)
    constant = summary.col_min == summary.col_max
    duplicate_of = np.where(~constant & (summary.same_as != np.arange(len(features))), summary.same_as, -1)
    keep = ~constant & (duplicate_of < 0)
    if not keep.any():
        raise DataError("No usable feature: every numeric column is constant or a duplicate.")
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
        constant_columns=tuple(features[j] for j in np.flatnonzero(constant)),
        duplicate_columns=tuple((features[j], features[i]) for j, i in enumerate(duplicate_of) if i >= 0),
    )
    sample = SampleInfo(
        n_total=moments.n_total,
        per_class={c: len(r.values) for c, r in zip(classes, parts, strict=True)},
        capacity=summary.capacity,
        random_state=random_state,
    )
    return AuditData(values, codes, tuple(classes), kept_features, row_labels, moments, record, distinct, sample)


def _unify_label_types(summary: ChunkSummary, random_state: int | None) -> ChunkSummary:
    """Read as text where chunks disagreed on the target's type, as a whole-file reader does.

    Each chunk infers the target's type on its own, so a label can arrive as 5 in one chunk
    and '5' in another; when text and non-text labels meet, every label becomes text and the
    classes that then coincide are merged exactly.
    """
    labels = summary.moments.classes
    if all(isinstance(c, str) for c in labels) or not any(isinstance(c, str) for c in labels):
        return summary
    rng = np.random.default_rng(np.random.SeedSequence(None if random_state is None else [int(random_state), 7]))
    m = summary.moments
    merged: ClassMoments | None = None
    reservoirs: dict[Any, Reservoir] = {}
    for k, c in enumerate(labels):
        text = str(c)
        part = ClassMoments((text,), m.counts[k : k + 1], m.means[k : k + 1], m.scatter[k : k + 1])
        merged = part if merged is None else merged.merge(part)
        r = summary.reservoirs[c]
        reservoirs[text] = reservoirs[text].merge(r, summary.capacity, rng) if text in reservoirs else r
    assert merged is not None
    dropped: dict[Any, int] = {}
    for c, n in summary.dropped_per_class.items():
        dropped[str(c)] = dropped.get(str(c), 0) + n
    return dataclasses.replace(summary, moments=merged, reservoirs=reservoirs, dropped_per_class=dropped)


def _reorder(moments: ClassMoments, classes: list[Any]) -> ClassMoments:
    order = [moments.classes.index(c) for c in classes]
    return ClassMoments(tuple(classes), moments.counts[order], moments.means[order], moments.scatter[order])
