"""A canonical order of rows and of classes that depends on the data only, never on labels or row order.

Random steps of the audit (robust-fit subsets, test subsamples) pick rows by position and give
each class its own seed. For the result not to change when the rows are shuffled or the classes
renamed, the positions are taken in a *canonical* order of a class's rows, and each class's seed
comes from its place in a canonical order of the classes:

* :func:`row_keys`: a 64-bit content key of each row, derived from the row's content hash
  (:mod:`discaudit.stats.row_keys`) with the seed fixed at 0 and the salt ``CANONICAL`` (so the
  order is the same whatever the audit's seed is; the seed enters through
  :func:`discaudit.stats.seeds.class_seeds`); equal rows get equal keys;
* :func:`canonical_order`: the rows sorted by key (stable), so identical rows stay together and
  any shuffle of the input gives the same sequence of row *values*;
* :func:`content_digest`: the wrapped sum of the keys of a class's rows: exact and independent of
  the order of the rows;
* :func:`canonical_ranks`: the place of each class when classes are sorted by (row count,
  digest); two classes tie only when they hold the same multiset of rows, and then every
  figure computed from them is the same whichever gets which seed.

A collision of two different rows' keys could only swap their places in the order.
"""

from __future__ import annotations

import numpy as np
import numpy.typing as npt

from discaudit.stats.row_keys import derive_keys
from discaudit.stats.seeds import CANONICAL

__all__ = ["canonical_order", "canonical_ranks", "content_digest", "row_keys"]

U64 = npt.NDArray[np.uint64]


def row_keys(hashes: U64) -> U64:
    """The canonical key of each row from its content hash (:func:`discaudit.stats.row_keys.content_hashes`).

    Hashes taken about each column's minimum make the keys, and hence the order, unchanged by an
    exact shift of a column.
    """
    return derive_keys(hashes, 0, CANONICAL)


def canonical_order(keys: U64) -> npt.NDArray[np.intp]:
    """Positions that sort the rows by content key (stable: identical rows keep their input order)."""
    return np.argsort(keys, kind="stable").astype(np.intp)


def content_digest(keys: U64) -> int:
    """Order-free digest of a set of rows: the wrapped sum of their keys."""
    return int(np.asarray(keys, dtype=np.uint64).sum(dtype=np.uint64))


def canonical_ranks(counts: npt.ArrayLike, digests: list[int]) -> list[int]:
    """Rank of each class (0 first) when classes are ordered by (row count, content digest)."""
    order = sorted(range(len(digests)), key=lambda k: (int(np.asarray(counts)[k]), digests[k]))
    ranks = [0] * len(digests)
    for rank, k in enumerate(order):
        ranks[k] = rank
    return ranks
