"""A canonical order of rows and of classes that depends on the data only, never on labels or row order.

Random steps of the audit (robust-fit subsets, test subsamples) pick rows by position and give
each class its own seed. For the result not to change when the rows are shuffled or the classes
renamed, the positions are taken in a *canonical* order of a class's rows, and each class's seed
comes from its place in a canonical order of the classes:

* :func:`row_keys`: a 64-bit content hash of each row (its float64 bit patterns, column by
  column), computed block by block; equal rows get equal keys.
* :func:`canonical_order`: the rows sorted by key (stable), so identical rows stay together and
  any shuffle of the input gives the same sequence of row *values*.
* :func:`content_digest`: the wrapped sum of the mixed keys of a class's rows: exact and
  independent of the order of the rows.
* :func:`canonical_ranks`: the place of each class when classes are sorted by (row count,
  digest); two classes tie only when they hold the same multiset of rows, and then every
  figure computed from them is the same whichever gets which seed.

The hash is the finalizer of SplitMix64 (Steele, Lea & Flood 2014), applied to each entry's bits
plus a per-column constant; it is not cryptographic and need not be: a collision between two
different rows of one class could only swap their places in the order.

References
----------
Steele, G. L., Lea, D. & Flood, C. H. (2014). Fast splittable pseudorandom number generators.
OOPSLA 2014, 453-472.
"""

from __future__ import annotations

import numpy as np
import numpy.typing as npt

from discaudit.stats.blocks import ROW_BLOCK

__all__ = ["canonical_order", "canonical_ranks", "content_digest", "row_keys"]

U64 = npt.NDArray[np.uint64]
_GOLDEN = np.uint64(0x9E3779B97F4A7C15)
_M1 = np.uint64(0xBF58476D1CE4E5B9)
_M2 = np.uint64(0x94D049BB133111EB)


def _mix(z: U64) -> U64:
    """SplitMix64's finalizer, elementwise (wrapping uint64 arithmetic)."""
    z = (z ^ (z >> np.uint64(30))) * _M1
    z = (z ^ (z >> np.uint64(27))) * _M2
    return np.asarray(z ^ (z >> np.uint64(31)), dtype=np.uint64)


def row_keys(X: npt.NDArray[np.float64], rows: npt.NDArray[np.intp] | None = None) -> U64:
    """A 64-bit content hash of each row of ``X[rows]`` (all rows if None), block by block.

    ``-0.0`` is hashed as ``0.0`` (they compare equal), so the key depends on the values only.
    """
    n = X.shape[0] if rows is None else rows.size
    p = X.shape[1]
    salts = _mix(_GOLDEN * np.arange(1, p + 1, dtype=np.uint64))
    out = np.empty(n, dtype=np.uint64)
    with np.errstate(over="ignore"):
        for a in range(0, n, ROW_BLOCK):
            block = X[a : a + ROW_BLOCK] if rows is None else np.take(X, rows[a : a + ROW_BLOCK], axis=0)
            bits = np.ascontiguousarray(block + 0.0, dtype=np.float64).view(np.uint64)  # + 0.0 maps -0.0 to 0.0
            out[a : a + block.shape[0]] = _mix(_mix(bits + salts).sum(axis=1, dtype=np.uint64))
    return out


def canonical_order(keys: U64) -> npt.NDArray[np.intp]:
    """Positions that sort the rows by content key (stable: identical rows keep their input order)."""
    return np.argsort(keys, kind="stable").astype(np.intp)


def content_digest(keys: U64) -> int:
    """Order-free digest of a set of rows: the wrapped sum of their mixed keys."""
    with np.errstate(over="ignore"):
        return int(_mix(keys ^ _GOLDEN).sum(dtype=np.uint64))


def canonical_ranks(counts: npt.ArrayLike, digests: list[int]) -> list[int]:
    """Rank of each class (0 first) when classes are ordered by (row count, content digest)."""
    order = sorted(range(len(digests)), key=lambda k: (int(np.asarray(counts)[k]), digests[k]))
    ranks = [0] * len(digests)
    for rank, k in enumerate(order):
        ranks[k] = rank
    return ranks
