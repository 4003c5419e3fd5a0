"""What every input source hands the core: validated per-class moments, rows, and a way to re-read them.

A source (:mod:`discaudit.sources`) validates its input once and returns an :class:`AuditData`:

* ``moments``: exact per-class counts, means and centred scatter over **all** rows;
* ``values`` / ``codes`` / ``row_labels``: all rows when the input fits in memory, else a seeded
  per-class sample (``sample`` says so);
* ``all_rows``: a :class:`RowPass` that maps a function over every row in blocks and combines the
  results (in memory: blocks of the array; chunked input: the chunks read again; Dask: the
  partitions, where they live). A check that must see every row (outlier scoring) uses it, so no
  source ever calls into a check.

A check that reads every row states what it computes as a :class:`RowTask`; when several checks
do, the core runs them in one read of the rows (:meth:`AuditData.run_tasks`) and each check finds
its result there (:meth:`AuditData.pass_result`), so a streamed input is read once for all of them.
"""

from __future__ import annotations

from collections.abc import Callable, Sequence
from dataclasses import dataclass, field
from typing import Any, Generic, Protocol, TypeVar

import numpy as np
import numpy.typing as npt
import pandas as pd

from discaudit.stats.blocks import ROW_BLOCK
from discaudit.stats.moments import ClassMoments
from discaudit.stats.row_keys import RowHashes

FloatArray = npt.NDArray[np.float64]
T = TypeVar("T")


@dataclass(frozen=True)
class Coordinates:
    """Where each feature is audited: ``(x - location) * 2**-exponent``, per column.

    Every statistic of the audit is unchanged by shifting a feature, and all but the scale
    comparisons by rescaling it; those read ``exponents`` to put the units back. A location is
    0 unless the feature is offset-dominated (its spread below ``screening.OFFSET_FRACTION`` of its
    magnitude) or an integer column beyond 2**53 that varies (then the location is an ``int`` and
    the shift is done in integer arithmetic, before any float conversion). An exponent is 0
    unless the centred magnitude is below ``screening.SMALLEST_SQUARABLE``. The rules that choose them live
    in :func:`discaudit.sources.screening.choose_coordinates`.
    """

    locations: tuple[int | float, ...]
    exponents: tuple[int, ...]

    @classmethod
    def plain(cls, p: int) -> Coordinates:
        return cls((0,) * p, (0,) * p)

    @property
    def trivial(self) -> bool:
        return not any(self.locations) and not any(self.exponents)

    def take(self, columns: Sequence[int]) -> Coordinates:
        return Coordinates(tuple(self.locations[j] for j in columns), tuple(self.exponents[j] for j in columns))


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
    #: Conversions made on the way in (column or input -> what was done), e.g. masked -> missing.
    conversions: dict[str, str] = field(default_factory=dict)


@dataclass(frozen=True)
class SampleInfo:
    """How the rows in ``AuditData.values`` were sampled from a larger input."""

    n_total: int
    per_class: dict[Any, int]
    capacity: int
    random_state: int | None
    method: str = "seeded uniform reservoir sample per class, merged exactly across chunks"


@dataclass(frozen=True)
class RowBlock:
    """Some validated rows: the audited features, class codes and row labels."""

    values: FloatArray
    codes: npt.NDArray[np.intp]
    row_labels: pd.Index


class RowPass(Protocol):
    """Every row of the input, once, in blocks."""

    def map_reduce(self, fn: Callable[[RowBlock], T], combine: Callable[[T, T], T]) -> T:
        """``combine`` of ``fn(block)`` over all blocks, in input order."""
        ...


@dataclass(frozen=True)
class RowTask(Generic[T]):
    """What one check computes over every row: ``combine`` of ``fn(block)`` over the blocks.

    ``key`` names everything the result depends on besides the data (the check, its settings,
    the seed): two tasks with one key compute the same thing.
    """

    key: Any
    fn: Callable[[RowBlock], T]
    combine: Callable[[T, T], T]


@dataclass(frozen=True)
class _Together:
    """Several tasks as one: a tuple of their block results, combined position by position (a
    module-level class, so engines that ship the function to workers can pickle it)."""

    tasks: tuple[RowTask[Any], ...]

    def fn(self, block: RowBlock) -> tuple[Any, ...]:
        return tuple(task.fn(block) for task in self.tasks)

    def combine(self, a: tuple[Any, ...], b: tuple[Any, ...]) -> tuple[Any, ...]:
        return tuple(task.combine(x, y) for task, x, y in zip(self.tasks, a, b, strict=True))


@dataclass(frozen=True)
class ArrayRows:
    """A :class:`RowPass` over arrays held in memory, in blocks of ``ROW_BLOCK`` rows."""

    values: FloatArray
    codes: npt.NDArray[np.intp]
    row_labels: pd.Index

    def map_reduce(self, fn: Callable[[RowBlock], T], combine: Callable[[T, T], T]) -> T:
        out: T | None = None
        for a in range(0, max(self.values.shape[0], 1), ROW_BLOCK):
            part = fn(
                RowBlock(
                    self.values[a : a + ROW_BLOCK], self.codes[a : a + ROW_BLOCK], self.row_labels[a : a + ROW_BLOCK]
                )
            )
            out = part if out is None else combine(out, part)
        assert out is not None  # the loop runs at least once
        return out


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
        Per-class counts, means and scatter matrices over all rows, computed once.
    record : IntakeRecord
        What intake dropped or set aside.
    distinct_counts : dict
        Features with at most ``Config.few_distinct_values`` distinct values (over all rows),
        with their number of distinct values.
    sample : SampleInfo or None
        Set when ``values`` is a per-class random sample of a larger (streamed) input; the
        moments are then still exact over all rows.
    all_rows : RowPass or None
        Every row of the input in blocks; None when the input cannot be read again (a
        one-shot iterable of chunks).
    coordinates : Coordinates or None
        Per audited feature, the location subtracted and the power of two divided out before
        the audit (``values`` and ``moments`` are in those coordinates); None means none.
    memo : dict
        Intermediate results that more than one check computes from these data (the per-class
        robust fits, the rows' content hashes), filled by :meth:`shared` on first use; never part
        of any output.
    changes : tuple of dict
        What-if changes applied to the source's data (:mod:`discaudit.sources.what_if`), in the
        order applied, as plain values; empty for data as the source read them.
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
    all_rows: RowPass | None = field(default=None, repr=False, compare=False)
    coordinates: Coordinates | None = None
    memo: dict[Any, Any] = field(default_factory=dict, repr=False, compare=False)
    changes: tuple[dict[str, Any], ...] = ()

    @property
    def n(self) -> int:
        return int(self.values.shape[0])

    @property
    def p(self) -> int:
        return int(self.values.shape[1])

    def key_origin(self) -> FloatArray:
        """Each column's smallest value over every row, from the moments' ranges (zeros when they carry
        none): what row keys subtract, so an exact shift of a column changes no key. Taken over every
        row, not the rows held, so keys of the same rows agree however a sample was drawn."""
        m = self.moments
        if m.minimum is None or not m.n_total:
            return np.zeros(self.p)
        return np.asarray(m.minimum.min(axis=0), dtype=np.float64)

    def row_hashes(self) -> RowHashes:
        """The content hashes of the rows held about :meth:`key_origin`, computed once for these data.

        Every keyed step (the canonical row order, a what-if's sample of rows, the rows leave-one-out
        scores, the logistic subsample) derives its keys from them in O(1) per row
        (:mod:`discaudit.stats.row_keys`), so the values are hashed once per data set.
        """
        return self.shared("row_hashes", lambda: RowHashes.of(self.values, self.key_origin()))

    def class_rows(self, k: int) -> npt.NDArray[np.intp]:
        """Positions of the rows of class code ``k``."""
        return np.flatnonzero(self.codes == k)

    def shared(self, key: Any, compute: Callable[[], T]) -> T:
        """``compute()`` once per key for these data; later calls return the same object.

        For work two checks need (e.g. the robust fits the outlier and normality checks both
        use): neither reads the other's finding, and the work is done once. ``key`` must name
        everything the result depends on besides the data (settings, seed).
        """
        if key not in self.memo:
            self.memo[key] = compute()
        return self.memo[key]  # type: ignore[no-any-return]

    def pass_result(self, task: RowTask[T]) -> T:
        """The task's result over every row: from an earlier :meth:`run_tasks`, else a read of its own.

        Raises
        ------
        ValueError
            When the data have no row pass (a one-shot stream).
        """
        if self.all_rows is None:
            raise ValueError("these data cannot be read again: there is no pass over every row")
        rows = self.all_rows
        return self.shared(("row_task", task.key), lambda: rows.map_reduce(task.fn, task.combine))

    def run_tasks(self, tasks: Sequence[RowTask[Any]]) -> None:
        """Compute the tasks not yet computed in one read of the rows, for :meth:`pass_result`.

        Each block is handed to every task in turn, so the results are those of separate reads.
        """
        pending = tuple({task.key: task for task in tasks if ("row_task", task.key) not in self.memo}.values())
        if self.all_rows is None or len(pending) < 2:
            return
        together = _Together(pending)
        results: tuple[Any, ...] = self.all_rows.map_reduce(together.fn, together.combine)
        for task, result in zip(pending, results, strict=True):
            self.memo[("row_task", task.key)] = result
