"""What-if input: an audited data set with some changes applied, handed to the core like any other source.

:func:`apply` turns an :class:`~discaudit.dataset.AuditData` and a :class:`Change` into the
:class:`~discaudit.dataset.AuditData` a source would have produced from the changed data, updating
the per-class moments exactly instead of re-reading the input where it can:

==================  =========================================================================
change              how the moments are updated
==================  =========================================================================
``drop_rows``       the rows are collected in one block pass (``all_rows.map_reduce``) and their
                    count, mean and scatter are subtracted per class (the downdate of Chan, Golub
                    & LeVeque's merge); recomputed from the rows held when the subtraction
                    cancels (a feature left constant within a class)
``drop_features``   the rows and columns of the moments are dropped
``merge_classes``   the classes' moments are merged exactly (``ClassMoments.merge``)
``transform``       Yeo-Johnson (Yeo & Johnson 2000) of the named features, exponents by maximum
                    likelihood on the rows held (all rows in memory, the per-class sample when the
                    source is sampled); the moments need **a pass over the rows** (recomputed from
                    the rows in memory; else the transformed columns' moments in two passes, O(n p t)),
                    the only change that does
``standardize``     the moments are rescaled: centre and scale of a StandardScaler (total mean,
                    total standard deviation with divisor N), from the moments
==================  =========================================================================

Several changes apply in that order (rows first, so every later estimate uses the rows that are
kept; the power transform before standardizing, as scikit-learn's PowerTransformer does). The
rows held (``values``), the row pass and the intake record change with the moments, so every
check, the moment-based ones and the ones that read rows, sees what a fresh audit of the changed
input would see. ``rows_per_class`` caps the rows held to a seeded sample per class (moments stay
exact over every row): what the remedy ranking uses to keep row work bounded.

Names are the data's own: column names, class labels and row labels (text matching a number is
read as that number, as in ``drop_rows=12,40``).
"""

from __future__ import annotations

import contextlib
import dataclasses
from collections.abc import Callable, Iterable, Mapping
from dataclasses import dataclass
from typing import Any, TypeVar

import numpy as np
import numpy.typing as npt
import pandas as pd

from discaudit.dataset import ArrayRows, AuditData, Coordinates, RowBlock, RowPass, SampleInfo
from discaudit.errors import DataError
from discaudit.jsonable import label
from discaudit.sources.screening import check_magnitude, choose_coordinates, column_range, distinct_values
from discaudit.stats._inputs import ordered_unique
from discaudit.stats.moments import ClassMoments
from discaudit.stats.row_keys import derive_keys, smallest_keys
from discaudit.stats.seeds import WHAT_IF_SAMPLE
from discaudit.stats.yeo_johnson import yeo_johnson, yeo_johnson_lambda

FloatArray = npt.NDArray[np.float64]
T = TypeVar("T")

__all__ = ["ORDER", "Change", "apply", "cap_rows", "estimate_transform", "subsample"]

#: The order in which the parts of a change are applied.
ORDER = ("drop_rows", "drop_features", "merge_classes", "transform", "standardize")
_SPEC_KEYS = {
    "drop": "drop_features",
    "drop_features": "drop_features",
    "drop_rows": "drop_rows",
    "merge": "merge_classes",
    "merge_classes": "merge_classes",
    "standardize": "standardize",
    "transform": "transform",
}
_SHOWN = 8


@dataclass(frozen=True)
class Change:
    """Changes to audit "what if": each part in the data's own names; empty parts change nothing.

    Attributes
    ----------
    drop_rows : tuple
        Row labels to remove.
    drop_features : tuple of str
        Columns to remove.
    merge_classes : tuple of tuple
        Groups of class labels, each merged into one class labelled by its labels joined with
        ``"+"`` (e.g. ``"PET+PP"``), unless ``merge_labels`` names it.
    merge_labels : tuple
        The label of each merged group (same length as ``merge_classes``) or empty.
    transform : tuple of (str, float or None)
        Features to transform by Yeo-Johnson, each with a fixed exponent or None (estimated).
    standardize : tuple of str or True
        Features to centre and scale (``True``: every feature).
    """

    drop_rows: tuple[Any, ...] = ()
    drop_features: tuple[str, ...] = ()
    merge_classes: tuple[tuple[Any, ...], ...] = ()
    merge_labels: tuple[Any, ...] = ()
    transform: tuple[tuple[str, float | None], ...] = ()
    standardize: tuple[str, ...] | bool = False

    @classmethod
    def of(
        cls,
        drop_features: Any = None,
        drop_rows: Any = None,
        merge_classes: Any = None,
        standardize: Any = None,
        transform: Any = None,
    ) -> Change:
        """A change from the keyword arguments of ``Verdict.what_if`` (see there for the forms accepted)."""
        groups, labels = _groups(merge_classes)
        if standardize is None or standardize is False:
            scaled: tuple[str, ...] | bool = False
        elif standardize is True:
            scaled = True
        else:
            scaled = _names(standardize)
        return cls(
            drop_rows=_items(drop_rows),
            drop_features=_names(drop_features),
            merge_classes=groups,
            merge_labels=labels,
            transform=_transforms(transform),
            standardize=scaled,
        )

    @classmethod
    def parse(cls, spec: str) -> Change:
        """A change from the command line's spec.

        Grammar: parts separated by ``;``, each ``key`` or ``key=value``::

            drop=a,b             drop features a and b (also drop_features=)
            drop_rows=12,40      drop the rows labelled 12 and 40
            merge=x+y            merge classes x and y (several groups: merge=x+y,u+v)
            standardize          standardize every feature (standardize=a,b: only those)
            transform=a,b        Yeo-Johnson of a and b, exponents estimated (a:0.5 fixes a's)

        Names cannot contain ``;``, ``,``, ``+`` or ``=``.

        Raises
        ------
        DataError
            For an unknown key or an empty value, naming it.
        """
        parts: dict[str, Any] = {}
        for raw in spec.split(";"):
            item = raw.strip()
            if not item:
                continue
            key, sep, value = item.partition("=")
            key = key.strip().lower()
            if key not in _SPEC_KEYS:
                raise DataError(
                    f"Unknown what-if key {key!r} in {spec!r}; use drop=, drop_rows=, merge=, standardize or transform=."
                )
            name = _SPEC_KEYS[key]
            values = [v.strip() for v in value.split(",") if v.strip()]
            if name == "standardize":
                parts[name] = True if not sep else values
                continue
            if not values:
                raise DataError(f"What-if key {key!r} needs a value, e.g. {key}=a,b.")
            if name == "merge_classes":
                groups = [[g.strip() for g in v.split("+") if g.strip()] for v in values]
                parts[name] = [*parts.get(name, []), *groups]
            elif name == "transform":
                fixed: dict[str, float | None] = dict(parts.get(name, {}))
                for v in values:
                    feature, colon, lam = v.partition(":")
                    fixed[feature.strip()] = _number(lam, v) if colon else None
                parts[name] = fixed
            else:
                parts[name] = [*parts.get(name, []), *values]
        return cls.of(**parts)

    def is_empty(self) -> bool:
        return not (
            self.drop_rows
            or self.drop_features
            or self.merge_classes
            or self.transform
            or self.standardize is not False
        )

    @property
    def needs_row_pass(self) -> bool:
        """Whether the moments need a pass over the rows (dropping rows, or a transform)."""
        return bool(self.drop_rows or self.transform)

    def to_kwargs(self) -> dict[str, Any]:
        """The change as plain keyword arguments of ``Verdict.what_if`` (JSON-able)."""
        out: dict[str, Any] = {}
        if self.drop_features:
            out["drop_features"] = list(self.drop_features)
        if self.drop_rows:
            out["drop_rows"] = [label(r) for r in self.drop_rows]
        if self.merge_classes:
            if self.merge_labels:
                out["merge_classes"] = {
                    str(label(n)): [label(c) for c in g]
                    for n, g in zip(self.merge_labels, self.merge_classes, strict=True)
                }
            else:
                out["merge_classes"] = [[label(c) for c in g] for g in self.merge_classes]
        if self.standardize is not False:
            out["standardize"] = True if self.standardize is True else list(self.standardize)
        if self.transform:
            if any(lam is not None for _, lam in self.transform):
                out["transform"] = {f: lam for f, lam in self.transform}
            else:
                out["transform"] = [f for f, _ in self.transform]
        return out

    def to_spec(self) -> str:
        """The change in the command line's spec grammar (see :meth:`parse`)."""
        parts = []
        if self.drop_rows:
            parts.append("drop_rows=" + ",".join(str(label(r)) for r in self.drop_rows))
        if self.drop_features:
            parts.append("drop=" + ",".join(self.drop_features))
        if self.merge_classes:
            parts.append("merge=" + ",".join("+".join(str(label(c)) for c in g) for g in self.merge_classes))
        if self.transform:
            parts.append(
                "transform=" + ",".join(f if lam is None else f"{f}:{float(lam)!r}" for f, lam in self.transform)
            )
        if self.standardize is True:
            parts.append("standardize")
        elif self.standardize:
            parts.append("standardize=" + ",".join(self.standardize))
        return ";".join(parts)


def _items(value: Any) -> tuple[Any, ...]:
    if value is None:
        return ()
    if isinstance(value, (str, bytes)) or not isinstance(value, Iterable):
        return (value,)
    return tuple(value)


def _names(value: Any) -> tuple[str, ...]:
    return tuple(str(v) for v in _items(value))


def _number(text: str, item: str) -> float:
    try:
        return float(text)
    except ValueError:
        raise DataError(f"Transform exponent in {item!r} is not a number; write feature:0.5.") from None


def _groups(value: Any) -> tuple[tuple[tuple[Any, ...], ...], tuple[Any, ...]]:
    """Merge groups and their labels from a list of labels (one group), a list of groups, or a mapping."""
    if value is None:
        return (), ()
    if isinstance(value, Mapping):
        groups = tuple(_items(g) for g in value.values())
        return groups, tuple(value.keys())
    items = _items(value)
    if items and all(not isinstance(g, (str, bytes)) and isinstance(g, Iterable) for g in items):
        return tuple(tuple(g) for g in items), ()
    return (items,), ()


def _transforms(value: Any) -> tuple[tuple[str, float | None], ...]:
    if value is None:
        return ()
    if isinstance(value, Mapping):
        return tuple((str(f), None if lam is None else float(lam)) for f, lam in value.items())
    return tuple((f, None) for f in _names(value))


def _shown(items: Iterable[Any]) -> str:
    items = [str(i) for i in items]
    return ", ".join(items[:_SHOWN]) + (f" and {len(items) - _SHOWN} more" if len(items) > _SHOWN else "")


# --- Row passes over changed data -------------------------------------------------------------


@dataclass(frozen=True)
class ChangedRows:
    """A :class:`~discaudit.dataset.RowPass` that applies ``step`` to every block of ``inner``."""

    inner: RowPass
    step: Callable[[RowBlock], RowBlock]

    def map_reduce(self, fn: Callable[[RowBlock], T], combine: Callable[[T, T], T]) -> T:
        return self.inner.map_reduce(lambda block: fn(self.step(block)), combine)


def _rows_like(
    data: AuditData,
    values: FloatArray,
    codes: npt.NDArray[np.intp],
    row_labels: pd.Index,
    step: Callable[[RowBlock], RowBlock],
) -> RowPass | None:
    """The row pass of changed data: the new arrays when they hold every row, else the old pass with ``step``."""
    if data.sample is None:
        return ArrayRows(values, codes, row_labels)
    return None if data.all_rows is None else ChangedRows(data.all_rows, step)


def _coordinates(data: AuditData) -> Coordinates:
    return data.coordinates if data.coordinates is not None else Coordinates.plain(data.p)


def _replace_coordinates(coords: Coordinates, columns: dict[int, tuple[int | float, int]]) -> Coordinates | None:
    """``coords`` with new (location, exponent) for some columns; None when every column is plain."""
    locations, exponents = list(coords.locations), list(coords.exponents)
    for j, (location, exponent) in columns.items():
        locations[j], exponents[j] = location, exponent
    out = Coordinates(tuple(locations), tuple(exponents))
    return None if out.trivial else out


def _raw(values: FloatArray, location: int | float, exponent: int) -> FloatArray:
    """Values in the source's units from the audit's coordinates (exact when the location is 0)."""
    out = np.ldexp(values, exponent) if exponent else np.array(values, dtype=np.float64)
    return out + float(location) if location else out


# --- The changes, one function each ----------------------------------------------------------


def _label_candidates(requested: Iterable[Any]) -> list[Any]:
    """Each requested row label, plus the number it spells (or the text of a number)."""
    out: list[Any] = []
    for r in requested:
        out.append(r)
        if isinstance(r, str):
            with contextlib.suppress(ValueError):
                out.append(int(r))
        elif isinstance(r, (int, np.integer)):
            out.append(str(r))
    return out


@dataclass(frozen=True)
class _Collected:
    """Rows found in a pass: their values, codes and labels."""

    values: FloatArray
    codes: npt.NDArray[np.intp]
    labels: list[Any]

    def __add__(self, other: _Collected) -> _Collected:
        return _Collected(
            np.vstack([self.values, other.values]),
            np.concatenate([self.codes, other.codes]),
            self.labels + other.labels,
        )


def _collect(candidates: list[Any], block: RowBlock) -> _Collected:
    hit = np.asarray(block.row_labels.isin(candidates), dtype=bool)
    return _Collected(block.values[hit], block.codes[hit], list(block.row_labels[hit]))


@dataclass(frozen=True)
class _Ranges:
    """Per-class minimum and maximum of some columns over some rows (+inf and -inf where none)."""

    low: FloatArray
    high: FloatArray

    def __add__(self, other: _Ranges) -> _Ranges:
        return _Ranges(np.minimum(self.low, other.low), np.maximum(self.high, other.high))


def _kept_ranges(candidates: list[Any], K: int, columns: npt.NDArray[np.intp], block: RowBlock) -> _Ranges:
    """Per-class ranges of ``columns`` over the rows of a block that are not dropped."""
    keep = ~np.asarray(block.row_labels.isin(candidates), dtype=bool)
    values, codes = block.values[keep][:, columns], block.codes[keep]
    low, high = np.full((K, columns.size), np.inf), np.full((K, columns.size), -np.inf)
    for k in np.unique(codes):
        part = values[codes == k]
        low[k], high[k] = part.min(axis=0), part.max(axis=0)
    return _Ranges(low, high)


def _ranges_after(data: AuditData, removed: _Collected, candidates: list[Any]) -> tuple[FloatArray, FloatArray]:
    """Per-class ranges of the rows kept: those before, except where a removed row held an extreme.

    Only the columns where a removed row equals its class's minimum or maximum can change; their
    ranges are found again over the rows kept (from the rows held in memory, else in one more pass).
    """
    m = data.moments
    assert m.minimum is not None and m.maximum is not None
    low, high = m.minimum.copy(), m.maximum.copy()
    at_edge = (removed.values == m.minimum[removed.codes]) | (removed.values == m.maximum[removed.codes])
    columns = np.flatnonzero(at_edge.any(axis=0))
    if columns.size == 0:
        return low, high
    K = len(data.classes)
    if data.sample is None:
        found = _kept_ranges(candidates, K, columns, RowBlock(data.values, data.codes, data.row_labels))
    else:
        assert data.all_rows is not None
        found = data.all_rows.map_reduce(lambda b: _kept_ranges(candidates, K, columns, b), lambda a, b: a + b)
    low[:, columns], high[:, columns] = found.low, found.high
    return low, high


#: A downdated variance below this share of the variance before is dominated by rounding (the
#: subtraction cancels about -log10 of it of the 16 digits): the moments are then recomputed from
#: the rows when they are held, as a fresh audit would (a feature left constant within a class,
#: whose variance must come out exactly zero, is the common case).
_CANCELLATION = 1e-6


def _cancels(m: ClassMoments, kept: ClassMoments) -> bool:
    """Whether a downdated variance lost most of its digits to cancellation."""
    before = np.diagonal(m.scatter, axis1=1, axis2=2)
    after = np.diagonal(kept.scatter, axis1=1, axis2=2)
    return bool(np.any((kept.counts[:, None] > 0) & (after <= _CANCELLATION * before)))


def _drop_rows(data: AuditData, requested: tuple[Any, ...], few_distinct: int) -> AuditData:
    if data.all_rows is None:
        raise DataError(
            "Dropping rows needs a pass over every row, and this input was a one-shot iterable of chunks; "
            "pass a function returning the chunks instead."
        )
    candidates = _label_candidates(requested)
    found = data.all_rows.map_reduce(lambda b: _collect(candidates, b), lambda a, b: a + b)
    seen = {str(label(v)) for v in found.labels}
    missing = [r for r in requested if str(label(r)) not in seen]
    if missing:
        raise DataError(f"Rows {_shown(missing)} are not among the audited rows; check the row labels (the index).")
    removed = ClassMoments.from_arrays(found.values, found.codes, data.classes)
    if data.moments.minimum is not None and data.moments.maximum is not None:
        moments = data.moments.downdate(removed, *_ranges_after(data, found, candidates))
    else:
        moments = data.moments.downdate(removed)
    held = np.asarray(data.row_labels.isin(candidates), dtype=bool)
    keep = ~held
    values = np.ascontiguousarray(data.values[keep])
    codes = data.codes[keep]
    row_labels = data.row_labels[keep]
    if data.sample is None and _cancels(data.moments, moments):
        moments = ClassMoments.from_arrays(values, codes, data.classes)
    one = [f"{label(c)!r} ({int(n)} row)" for c, n in zip(data.classes, moments.counts, strict=True) if n == 1]
    if one:
        raise DataError(
            f"Dropping those rows leaves class {', '.join(one)}; a class needs at least two rows. Drop or merge it too."
        )
    record = dataclasses.replace(data.record, n_rows_input=data.record.n_rows_input - len(found.labels))
    sample = data.sample
    if sample is not None:
        per_class = {c: int((codes == k).sum()) for k, c in enumerate(data.classes)}
        sample = dataclasses.replace(sample, n_total=moments.n_total, per_class=per_class)
    distinct = data.distinct_counts
    if data.sample is None:
        _raise_for_constant(values, data.features, "dropping those rows")
        distinct = _distinct(values, data.features, few_distinct)

    def step(block: RowBlock) -> RowBlock:
        keep_b = ~np.asarray(block.row_labels.isin(candidates), dtype=bool)
        return RowBlock(block.values[keep_b], block.codes[keep_b], block.row_labels[keep_b])

    out = dataclasses.replace(
        data,
        values=values,
        codes=codes,
        row_labels=row_labels,
        moments=moments,
        record=record,
        sample=sample,
        distinct_counts=distinct,
        all_rows=_rows_like(data, values, codes, row_labels, step),
    )
    empty = [k for k in range(len(data.classes)) if moments.counts[k] == 0]
    return _remove_classes(out, empty) if empty else out


def _distinct(values: FloatArray, features: tuple[str, ...], limit: int) -> dict[str, int]:
    """Features with at most ``limit`` distinct values over the rows now held (every row, in memory)."""
    out = {}
    for j, name in enumerate(features):
        found = distinct_values(values[:, j], limit)
        if found is not None:
            out[name] = len(found)
    return out


def _raise_for_constant(values: FloatArray, features: tuple[str, ...], what: str) -> None:
    low, high = column_range(values)
    constant = [features[j] for j in np.flatnonzero(low == high)]
    if constant:
        raise DataError(
            f"After {what}, {_shown(constant)} no longer vary; a fresh audit would set them aside. Drop them too."
        )


def _remove_classes(data: AuditData, gone: list[int]) -> AuditData:
    """Data without classes that have no rows left (codes renumbered; the order of the rest is kept)."""
    keep = [k for k in range(len(data.classes)) if k not in gone]
    new_code = np.full(len(data.classes), -1, dtype=np.intp)
    new_code[keep] = np.arange(len(keep))
    m = data.moments
    moments = m.take_classes(keep)
    classes = tuple(data.classes[k] for k in keep)
    if len(classes) < 2:
        raise DataError(f"The change leaves only class {classes[0]!r}; an audit needs at least two classes.")
    codes = new_code[data.codes]
    sample = data.sample
    if sample is not None:
        sample = dataclasses.replace(sample, per_class={c: n for c, n in sample.per_class.items() if c in classes})

    def step(block: RowBlock) -> RowBlock:
        return RowBlock(block.values, new_code[block.codes], block.row_labels)

    return dataclasses.replace(
        data,
        classes=classes,
        codes=codes,
        moments=moments,
        sample=sample,
        all_rows=_rows_like(data, data.values, codes, data.row_labels, step),
    )


def _drop_features(data: AuditData, requested: tuple[str, ...]) -> AuditData:
    rec = data.record
    twins = {b: a for a, b in rec.duplicate_columns}
    set_aside = set(rec.constant_columns) | {a for a, _ in rec.duplicate_columns} | set(rec.non_numeric_dropped)
    unknown = [f for f in requested if f not in data.features and f not in set_aside]
    if unknown:
        raise DataError(
            f"Columns {_shown(unknown)} are not features of the audited data; they are: {_shown(data.features)}."
        )
    kept_twin = [f"{f} (duplicated by {twins[f]})" for f in requested if f in twins and twins[f] not in requested]
    if kept_twin:
        raise DataError(
            f"Columns {_shown(kept_twin)} have an exact duplicate set aside at intake, which a fresh audit would then "
            "keep in their place; drop both or neither."
        )
    gone = set(requested)
    keep = np.array([j for j, f in enumerate(data.features) if f not in gone], dtype=np.intp)
    if keep.size == 0:
        raise DataError("The change drops every feature; an audit needs at least one.")
    record = dataclasses.replace(
        rec,
        n_features_input=rec.n_features_input - len(gone),
        non_numeric_dropped=tuple(c for c in rec.non_numeric_dropped if c not in gone),
        constant_columns=tuple(c for c in rec.constant_columns if c not in gone),
        duplicate_columns=tuple((a, b) for a, b in rec.duplicate_columns if a not in gone),
    )
    values = np.ascontiguousarray(data.values[:, keep])

    def step(block: RowBlock) -> RowBlock:
        return RowBlock(np.ascontiguousarray(block.values[:, keep]), block.codes, block.row_labels)

    features = tuple(data.features[j] for j in keep)
    return dataclasses.replace(
        data,
        values=values,
        features=features,
        moments=data.moments.subset(keep),
        record=record,
        distinct_counts={f: n for f, n in data.distinct_counts.items() if f not in gone},
        all_rows=_rows_like(data, values, data.codes, data.row_labels, step),
        coordinates=None
        if data.coordinates is None
        else _replace_coordinates(data.coordinates.take(keep.tolist()), {}),
    )


def _resolve_class(data: AuditData, requested: Any) -> int:
    for k, c in enumerate(data.classes):
        if c == requested or str(label(c)) == str(label(requested)):
            return k
    raise DataError(f"Class {requested!r} is not a class of the data; the classes are: {_shown(data.classes)}.")


def _merge_classes(data: AuditData, groups: tuple[tuple[Any, ...], ...], labels: tuple[Any, ...]) -> AuditData:
    target: dict[int, Any] = {}
    for i, group in enumerate(groups):
        members = [_resolve_class(data, c) for c in group]
        if len(set(members)) < 2:
            raise DataError(f"Merging needs at least two different classes; got {list(group)!r}.")
        taken = [data.classes[k] for k in members if k in target]
        if taken:
            raise DataError(f"Class {taken[0]!r} is in more than one merge group; merge it once.")
        new = labels[i] if labels else "+".join(str(label(data.classes[k])) for k in members)
        for k in members:
            target[k] = new
    final = [target.get(k, c) for k, c in enumerate(data.classes)]
    untouched = {c for k, c in enumerate(data.classes) if k not in target}
    clash = [n for n in set(target.values()) if n in untouched]
    if clash:
        raise DataError(f"The merged class label {clash[0]!r} is already a class; name the merged class differently.")
    classes = tuple(ordered_unique(final))
    new_code = np.array([classes.index(c) for c in final], dtype=np.intp)
    m = data.moments
    merged: list[ClassMoments] = []
    for c in classes:
        part: ClassMoments | None = None
        for j in np.flatnonzero(new_code == classes.index(c)):
            one = m.take_classes([int(j)], (c,))
            part = one if part is None else part.merge(one)
        assert part is not None
        merged.append(part)
    moments = merged[0]
    for part in merged[1:]:
        moments = moments.merge(part)  # new classes are appended: the order of ``classes`` is kept
    codes = new_code[data.codes]
    rec = data.record
    by_text = {str(label(c)): final[k] for k, c in enumerate(data.classes)}
    dropped: dict[Any, int] = {}
    for c, n in rec.dropped_rows_per_class.items():
        key = label(by_text.get(str(label(c)), c))
        dropped[key] = dropped.get(key, 0) + n
    sample = data.sample
    if sample is not None:
        per_class: dict[Any, int] = {}
        for k, c in enumerate(data.classes):
            per_class[final[k]] = per_class.get(final[k], 0) + sample.per_class.get(c, 0)
        sample = dataclasses.replace(sample, per_class=per_class)

    def step(block: RowBlock) -> RowBlock:
        return RowBlock(block.values, new_code[block.codes], block.row_labels)

    return dataclasses.replace(
        data,
        classes=classes,
        codes=codes,
        moments=moments,
        record=dataclasses.replace(rec, dropped_rows_per_class=dropped),
        sample=sample,
        all_rows=_rows_like(data, data.values, codes, data.row_labels, step),
    )


def _standardize(data: AuditData, which: tuple[str, ...] | bool) -> tuple[AuditData, dict[str, Any]]:
    names = list(data.features) if which is True else list(which)  # type: ignore[arg-type]
    unknown = [f for f in names if f not in data.features]
    if unknown:
        raise DataError(
            f"Columns {_shown(unknown)} are not features of the audited data; they are: {_shown(data.features)}."
        )
    idx = np.array([data.features.index(f) for f in names], dtype=np.intp)
    m = data.moments
    centre_all = m.grand_mean
    scale_all = np.sqrt(np.diag(m.within_scatter + m.between_scatter) / m.n_total)
    centre = np.zeros(data.p)
    scale = np.ones(data.p)
    centre[idx], scale[idx] = centre_all[idx], scale_all[idx]
    moments = m.affine(centre, scale)
    values = np.array(data.values, dtype=np.float64)
    values[:, idx] = (values[:, idx] - centre[idx]) / scale[idx]

    def step(block: RowBlock) -> RowBlock:
        v = np.array(block.values, dtype=np.float64)
        v[:, idx] = (v[:, idx] - centre[idx]) / scale[idx]
        return RowBlock(v, block.codes, block.row_labels)

    rows = _rows_like(data, values, data.codes, data.row_labels, step)
    coords = _coordinates(data)
    # Standardized values have mean 0 and SD 1: neither offset-dominated nor tiny, so they are audited as
    # they are (plain coordinates), as a fresh audit of them would.
    out = dataclasses.replace(
        data,
        values=values,
        moments=moments,
        all_rows=rows,
        coordinates=_replace_coordinates(coords, {int(j): (0, 0) for j in idx}),
    )
    units = {int(j): (coords.locations[j], coords.exponents[j]) for j in idx}
    record = {
        "standardize": {
            "features": names,
            "centre": {data.features[j]: float(_raw(np.array([centre[j]]), *units[int(j)])[0]) for j in idx},
            "scale": {data.features[j]: float(np.ldexp(scale[j], units[int(j)][1])) for j in idx},
            "definition": "x -> (x - mean) / sd with the total mean and the total standard deviation (divisor N) "
            "over every row, as scikit-learn's StandardScaler; from the class moments; centre and scale in the "
            "data's own units",
        }
    }
    return out, record


@dataclass(frozen=True)
class _ColumnSums:
    """Per-class sums and ranges of some columns over some rows."""

    sums: FloatArray
    low: FloatArray
    high: FloatArray

    def __add__(self, other: _ColumnSums) -> _ColumnSums:
        return _ColumnSums(self.sums + other.sums, np.minimum(self.low, other.low), np.maximum(self.high, other.high))


@dataclass(frozen=True)
class _CrossSums:
    """Per-class sums of (new columns - their means)(all columns - their means)' and of the deviations."""

    cross: FloatArray
    dev_new: FloatArray
    dev_all: FloatArray

    def __add__(self, other: _CrossSums) -> _CrossSums:
        return _CrossSums(self.cross + other.cross, self.dev_new + other.dev_new, self.dev_all + other.dev_all)


def _replace_columns(rows: RowPass, old: ClassMoments, columns: npt.NDArray[np.intp]) -> ClassMoments:
    """The moments after the values of ``columns`` changed, from two passes that touch those columns only.

    Every row and column of the means and scatter that does not involve ``columns`` is unchanged; the rest is
    found about the new class means (two passes, with the first-order correction of the two-pass formula),
    O(n p t) for t changed columns instead of the O(n p^2) of recomputing all moments.
    """
    K, t = old.n_classes, columns.size
    n = np.maximum(old.counts, 1).astype(np.float64)

    def sums(b: RowBlock) -> _ColumnSums:
        low, high = np.full((K, t), np.inf), np.full((K, t), -np.inf)
        out = np.zeros((K, t))
        v = b.values[:, columns]
        for k in np.unique(b.codes):
            part = v[b.codes == k]
            out[k], low[k], high[k] = part.sum(axis=0), part.min(axis=0), part.max(axis=0)
        return _ColumnSums(out, low, high)

    first = rows.map_reduce(sums, lambda a, b: a + b)
    means = old.means.copy()
    means[:, columns] = first.sums / n[:, None]

    def cross(b: RowBlock) -> _CrossSums:
        out = np.zeros((K, t, old.n_features))
        dev_new, dev_all = np.zeros((K, t)), np.zeros((K, old.n_features))
        for k in np.unique(b.codes):
            d = b.values[b.codes == k] - means[k]
            out[k] = d[:, columns].T @ d
            dev_new[k], dev_all[k] = d[:, columns].sum(axis=0), d.sum(axis=0)
        return _CrossSums(out, dev_new, dev_all)

    second = rows.map_reduce(cross, lambda a, b: a + b)
    block = second.cross - second.dev_new[:, :, None] * second.dev_all[:, None, :] / n[:, None, None]
    scatter = old.scatter.copy()
    scatter[:, columns, :] = block
    scatter[:, :, columns] = block.transpose(0, 2, 1)
    scatter[:, columns[:, None], columns[None, :]] = (
        block[:, :, columns] + block[:, :, columns].transpose(0, 2, 1)
    ) / 2
    low = high = None
    if old.minimum is not None and old.maximum is not None:
        low, high = old.minimum.copy(), old.maximum.copy()
        low[:, columns], high[:, columns] = first.low, first.high
        flat = (low[:, columns] == high[:, columns]) & (old.counts[:, None] > 0)  # constant in a class: exact
        for k, j in zip(*np.nonzero(flat), strict=True):
            col = columns[j]
            means[k, col] = low[k, col]
            scatter[k, col, :] = scatter[k, :, col] = 0.0
    return ClassMoments(old.classes, old.counts, means, scatter, low, high)


def estimate_transform(data: AuditData, features: Iterable[str]) -> dict[str, float]:
    """Maximum-likelihood Yeo-Johnson exponents of ``features`` on the rows held (every row in memory, else
    the per-class sample), within classes; see :func:`discaudit.stats.yeo_johnson.yeo_johnson_lambda`."""
    out = {}
    coords = _coordinates(data)
    for f in features:
        if f not in data.features:
            raise DataError(f"Column {f!r} is not a feature of the audited data; they are: {_shown(data.features)}.")
        j = data.features.index(f)
        raw = _raw(data.values[:, j], coords.locations[j], coords.exponents[j])
        out[f] = yeo_johnson_lambda(raw, data.codes).lmbda
    return out


def _transform(data: AuditData, requested: tuple[tuple[str, float | None], ...]) -> tuple[AuditData, dict[str, Any]]:
    names = [f for f, _ in requested]
    unknown = [f for f in names if f not in data.features]
    if unknown:
        raise DataError(
            f"Columns {_shown(unknown)} are not features of the audited data; they are: {_shown(data.features)}."
        )
    coords = _coordinates(data)
    lambdas: dict[str, float] = {}
    estimated: list[str] = []
    for f, lam in requested:
        j = data.features.index(f)
        if lam is None:
            raw = _raw(data.values[:, j], coords.locations[j], coords.exponents[j])
            lam = yeo_johnson_lambda(raw, data.codes).lmbda
            estimated.append(f)
        lambdas[f] = float(lam)
    idx = np.array([data.features.index(f) for f in names], dtype=np.intp)
    lam_of = [lambdas[f] for f in names]
    # The transform is monotone, so the range of each transformed column follows from the range of the
    # column (the moments' per-class ranges): its coordinates are chosen before any row is read, by the
    # rule a fresh audit applies to the transformed data.
    if data.moments.minimum is not None and data.moments.maximum is not None:
        lows, highs = data.moments.minimum.min(axis=0), data.moments.maximum.max(axis=0)
    else:
        lows, highs = column_range(data.values)
    chosen: dict[int, tuple[int | float, int]] = {}
    for col, lam in zip(idx, lam_of, strict=True):
        ends = yeo_johnson(_raw(np.array([lows[col], highs[col]]), coords.locations[col], coords.exponents[col]), lam)
        new = choose_coordinates([(float(ends[0]), float(ends[1]))]) if np.all(np.isfinite(ends)) else None
        chosen[int(col)] = (new.locations[0], new.exponents[0]) if new is not None else (0, 0)

    def transformed(v: FloatArray) -> FloatArray:
        out = np.array(v, dtype=np.float64)
        for col, lam in zip(idx, lam_of, strict=True):
            t = yeo_johnson(_raw(v[:, col], coords.locations[col], coords.exponents[col]), lam)
            location, exponent = chosen[int(col)]
            if location:
                t = t - float(location)
            out[:, col] = np.ldexp(t, -exponent) if exponent else t
        return out

    values = transformed(data.values)
    bad = [data.features[j] for j in idx if not np.all(np.isfinite(values[:, j]))]
    if bad:
        raise DataError(
            f"The Yeo-Johnson transform of {_shown(bad)} overflows; rescale them first (e.g. divide by 1000)."
        )
    low, high = column_range(values[:, idx])
    check_magnitude(np.maximum(-low, high), [data.features[j] for j in idx])

    def step(block: RowBlock) -> RowBlock:
        return RowBlock(transformed(block.values), block.codes, block.row_labels)

    rows = _rows_like(data, values, data.codes, data.row_labels, step)
    if data.sample is None:
        moments = ClassMoments.from_arrays(values, data.codes, data.classes)
        pass_note = "moments recomputed from every row (held in memory)"
    elif rows is not None:
        moments = _replace_columns(rows, data.moments, idx)
        pass_note = "moments of the transformed columns recomputed in two passes over every row of the input"
    else:
        raise DataError(
            "A transform needs a pass over every row for exact moments, and this input was a one-shot iterable of "
            "chunks; pass a function returning the chunks instead."
        )
    out = dataclasses.replace(
        data, values=values, moments=moments, all_rows=rows, coordinates=_replace_coordinates(coords, chosen)
    )
    record = {
        "transform": {
            "method": "Yeo-Johnson (Yeo & Johnson 2000, Biometrika 87:954-959)",
            "lambdas": lambdas,
            "estimated": estimated,
            "estimated_on": "the per-class sample" if data.sample is not None else "every row",
            "rows_used": int(data.n),
            "likelihood": "normal within classes with a shared variance per feature (pooled within-class)",
            "row_pass": pass_note,
        }
    }
    return out, record


# --- Public entry points ---------------------------------------------------------------------


def apply(
    data: AuditData,
    change: Change,
    *,
    few_distinct_values: int = 5,
    rows_per_class: int | None = None,
    random_state: int | None = 0,
) -> AuditData:
    """The data a source would hand the core after ``change``, moments updated exactly.

    Parameters
    ----------
    data : AuditData
        Data as audited (or as changed by an earlier what-if).
    change : Change
        What to change; the parts apply in the order of :data:`ORDER`.
    few_distinct_values : int
        ``Config.few_distinct_values`` of the audit: after dropping rows, features with at most this
        many distinct values left are discrete, as a fresh audit would find.
    rows_per_class : int, optional
        Cap the rows held (``values``) at a seeded sample of this many rows per class; the moments
        stay exact over every row and the row pass still reads every row. None holds every row the
        source held.
    random_state : int or None
        Seed of that sample.

    Returns
    -------
    AuditData
        With ``changes`` extended by a plain record of what was done (the exponents of a
        transform, the centre and scale of a standardization).

    Raises
    ------
    DataError
        Naming the column, class or row that cannot be changed, and one fix.
    """
    records: list[dict[str, Any]] = []
    if rows_per_class is not None:  # the rows kept follow from the data as given (and the hashes they hold)
        data = _cap_rows(data, rows_per_class, random_state)
    # Changed data are new data: nothing a check shared on the old (robust fits, say) may carry over.
    data = dataclasses.replace(data, memo={})
    if change.drop_rows:
        data = _drop_rows(data, change.drop_rows, few_distinct_values)
        records.append({"drop_rows": [label(r) for r in change.drop_rows]})
    if change.drop_features:
        data = _drop_features(data, change.drop_features)
        records.append({"drop_features": list(change.drop_features)})
    if change.merge_classes:
        data = _merge_classes(data, change.merge_classes, change.merge_labels)
        records.append(
            {
                "merge_classes": [[label(c) for c in g] for g in change.merge_classes],
                "into": [label(c) for c in data.classes],
            }
        )
    if change.transform:
        data, record = _transform(data, change.transform)
        records.append(record)
    if change.standardize is not False:
        data, record = _standardize(data, change.standardize)
        records.append(record)
    return dataclasses.replace(data, changes=(*data.changes, *records))


def _cap_rows(data: AuditData, rows_per_class: int, random_state: int | None) -> AuditData:
    """Hold at most ``rows_per_class`` rows per class (seeded, in row order); moments and row pass unchanged."""
    seed = 0 if random_state is None else int(random_state)
    idx = data.shared(("capped_rows", rows_per_class, seed), lambda: _capped_positions(data, rows_per_class, seed))
    if idx is None:
        return data
    codes = data.codes[idx]
    data = dataclasses.replace(data, memo={})
    per_class = {c: int((codes == k).sum()) for k, c in enumerate(data.classes)}
    sample = SampleInfo(
        n_total=data.moments.n_total,
        per_class=per_class,
        capacity=rows_per_class,
        random_state=random_state,
        method="seeded uniform sample per class of the rows held, for a what-if with capped rows",
    )
    rows_pass = data.all_rows if data.all_rows is not None else ArrayRows(data.values, data.codes, data.row_labels)
    return dataclasses.replace(
        data,
        values=np.ascontiguousarray(data.values[idx]),
        codes=codes,
        row_labels=data.row_labels[idx],
        sample=sample,
        all_rows=rows_pass,
    )


def _capped_positions(data: AuditData, rows_per_class: int, seed: int) -> npt.NDArray[np.intp] | None:
    """Positions of the rows a cap keeps, in row order: per class, the rows with the smallest seeded keys
    (derived from the rows' content hashes), so the same rows whatever their order or class names; None
    when no class holds more."""
    hashes = data.row_hashes().hashes
    positions = []
    capped = False
    for k in range(len(data.classes)):
        rows = data.class_rows(k)
        if rows.size > rows_per_class:
            rows = rows[smallest_keys(derive_keys(hashes[rows], seed, WHAT_IF_SAMPLE), rows_per_class)]
            capped = True
        positions.append(rows)
    return np.sort(np.concatenate(positions)) if capped else None


def cap_rows(data: AuditData, rows_per_class: int, random_state: int | None) -> AuditData:
    """The data holding at most ``rows_per_class`` rows per class (a seeded sample, in row order); the moments
    and the row pass still cover every row (the data itself when no class holds more)."""
    return _cap_rows(data, rows_per_class, random_state)


def subsample(data: AuditData, rows_per_class: int, random_state: int | None) -> AuditData:
    """The data restricted to a seeded sample of at most ``rows_per_class`` rows per class, as data of its own.

    Moments, row pass and intake counts are those of the sampled rows (unlike ``apply``'s cap),
    so an audit of it is an audit of a smaller data set; the data itself when it holds every row and no
    class is larger.
    """
    capped = _cap_rows(data, rows_per_class, random_state)
    if capped is data and data.sample is None:
        return data
    moments = ClassMoments.from_arrays(capped.values, capped.codes, capped.classes)
    record = dataclasses.replace(capped.record, n_rows_input=capped.n)
    return dataclasses.replace(
        capped,
        memo={},
        moments=moments,
        record=record,
        sample=None,
        all_rows=ArrayRows(capped.values, capped.codes, capped.row_labels),
        changes=(*capped.changes, {"subsample": {"rows_per_class": rows_per_class, "random_state": random_state}}),
    )
