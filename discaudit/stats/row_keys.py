"""Pseudo-random 64-bit keys of rows from their values and a seed, not their position.

Selecting rows by key (the smallest keys, or keys below a threshold) gives a seeded subsample that
does not change when the rows are reordered, split into chunks differently, or their classes renamed:
the same rows are chosen wherever they sit.

A key is made in two steps. :func:`content_hashes` hashes each row's values once, without any
seed; :func:`derive_keys` turns those hashes into the keys of one seed and salt (the salt names the
step, see :mod:`discaudit.stats.seeds`) in O(1) per row. The many keyed steps of an audit therefore
hash the data once: :class:`RowHashes` holds the hashes of one matrix, and :func:`row_keys` and
:func:`keep_share` take it in place of an origin and look its hashes up when they are given rows of
that matrix.

Notes
-----
* A row's hash mixes the 64 bits of each value (minus the column's ``origin``, with ``-0.0`` read as
  ``0.0``) with a constant of its column by the splitmix64 output function, sums the results
  (wrapping) and mixes the sum again: it depends on the values and the column order, never on the
  row's position or class.
* Identical rows get identical hashes and keys. For a fixed seed and salt a key is a bijection of
  the hash (an exclusive or with a seeded 64-bit mask, then the splitmix64 output function), so two
  rows share a key exactly when they share a hash: for different rows, a 64-bit collision (about
  ``2**-64`` per pair for hashes that behave as random).
* The same seed and salt give the same keys; other seeds or salts give unrelated ones.
* ``origin`` (one value per column) is subtracted before hashing: with each column's minimum, a shift
  of a column that float64 represents exactly (integer data) leaves every hash and key unchanged.
* Cost: hashing is O(n p) (about ten integer passes over each block of rows); deriving keys is O(n).

References
----------
Steele, G. L., Lea, D. & Flood, C. H. (2014). Fast splittable pseudorandom number generators.
Proceedings of OOPSLA 2014, 453-472 (the splitmix64 output function).
"""

from __future__ import annotations

from dataclasses import dataclass
from typing import Any

import numpy as np
import numpy.typing as npt

from discaudit.stats.blocks import ROW_BLOCK
from discaudit.stats.seeds import ROW_CONTENT, stream_rng

FloatArray = npt.NDArray[np.float64]
UIntArray = npt.NDArray[np.uint64]

__all__ = ["RowHashes", "content_hashes", "derive_keys", "keep_share", "row_keys", "smallest_keys"]

#: Shifts and multipliers of the splitmix64 output function (Steele, Lea & Flood 2014), which mixes
#: the bits of the keys.
_MIX_SHIFTS = (np.uint64(30), np.uint64(27), np.uint64(31))
_MIX_MULTIPLIERS = (np.uint64(0xBF58476D1CE4E5B9), np.uint64(0x94D049BB133111EB))
#: 2**64 as a float, for turning keys into uniform numbers on [0, 1).
_TWO_64 = float(2**64)
#: Rows hashed at a time. The hash makes about ten passes over its block, in place; a block of
#: ROW_BLOCK / 8 rows (400 KB at 50 features) stays in a core's cache, and hashed (1e6, 50) in
#: 0.20 s against 0.32 s for blocks of ROW_BLOCK rows (measured on the benchmark machine).
HASH_BLOCK = ROW_BLOCK // 8


def _mix(x: UIntArray, tmp: UIntArray | None = None) -> UIntArray:
    """splitmix64's output function, elementwise and in place (wrapping uint64 arithmetic); returns ``x``.

    ``tmp`` is scratch space of the shape of ``x`` (made when not given).
    """
    tmp = np.empty_like(x) if tmp is None else tmp
    np.right_shift(x, _MIX_SHIFTS[0], out=tmp)
    x ^= tmp
    x *= _MIX_MULTIPLIERS[0]
    np.right_shift(x, _MIX_SHIFTS[1], out=tmp)
    x ^= tmp
    x *= _MIX_MULTIPLIERS[1]
    np.right_shift(x, _MIX_SHIFTS[2], out=tmp)
    x ^= tmp
    return x


def content_hashes(X: FloatArray, origin: npt.ArrayLike | None = None) -> UIntArray:
    """A seed-free 64-bit hash of each row of ``X`` (n, p) minus ``origin`` (see the module Notes).

    Temporaries stay at a block of :data:`HASH_BLOCK` rows.
    """
    n, p = X.shape
    base = np.zeros(p) if origin is None else np.asarray(origin, dtype=np.float64)
    constants = stream_rng(0, ROW_CONTENT).integers(0, 2**64, size=p + 1, dtype=np.uint64, endpoint=False)
    out = np.empty(n, dtype=np.uint64)
    block = np.empty((min(n, HASH_BLOCK), p))
    bits = block.view(np.uint64)
    tmp = np.empty_like(bits)
    for a in range(0, n, HASH_BLOCK):
        m = min(HASH_BLOCK, n - a)
        np.subtract(X[a : a + m], base, out=block[:m])
        block[:m] += 0.0  # -0.0 and 0.0 get one hash
        bits[:m] ^= constants[:p]
        _mix(bits[:m], tmp[:m])
        out[a : a + m] = bits[:m].sum(axis=1, dtype=np.uint64)
    out ^= constants[p]
    return _mix(out)


def derive_keys(hashes: UIntArray, seed: int | None, salt: int) -> UIntArray:
    """The keys of rows with content ``hashes`` for one seed and salt: O(1) per row, no pass over the values."""
    mask = stream_rng(seed, salt).integers(0, 2**64, dtype=np.uint64, endpoint=False)
    return _mix(np.bitwise_xor(np.asarray(hashes, dtype=np.uint64), mask))


@dataclass(frozen=True)
class RowHashes:
    """The content hashes of the rows of one matrix about one origin, so keys need no second hash.

    It stands for its ``origin`` wherever an origin is expected (``np.asarray`` gives the origin), and
    :func:`row_keys` and :func:`keep_share` use its hashes for any consecutive rows of ``source``
    (found by their place in memory, not by their values; the audit's arrays are read-only views).

    Attributes
    ----------
    source : ndarray, shape (n, p)
        The matrix whose rows were hashed.
    origin : ndarray, shape (p,)
        What was subtracted from each column before hashing.
    hashes : ndarray of uint64, shape (n,)
        :func:`content_hashes` of ``source`` about ``origin``.
    """

    source: FloatArray
    origin: FloatArray
    hashes: UIntArray

    @classmethod
    def of(cls, X: FloatArray, origin: npt.ArrayLike | None = None) -> RowHashes:
        base = np.zeros(X.shape[1]) if origin is None else np.asarray(origin, dtype=np.float64)
        return cls(X, base, content_hashes(X, base))

    def __array__(self, dtype: Any = None, copy: bool | None = None) -> FloatArray:
        return np.asarray(self.origin, dtype=dtype)

    def rows_of(self, X: FloatArray) -> slice | None:
        """The positions in ``source`` of the rows of ``X`` when ``X`` is a view of consecutive rows of it."""
        src = self.source
        if not isinstance(X, np.ndarray) or X.ndim != 2 or X.dtype != src.dtype or X.shape[1] != src.shape[1]:
            return None
        if X.shape[0] == 0:
            return slice(0, 0)
        if X.strides != src.strides or src.strides[0] <= 0:
            return None
        offset = X.__array_interface__["data"][0] - src.__array_interface__["data"][0]
        start, rest = divmod(offset, src.strides[0])
        if rest or start < 0 or start + X.shape[0] > src.shape[0]:
            return None
        return slice(start, start + X.shape[0])

    def hashes_of(self, X: FloatArray) -> UIntArray:
        """The content hashes of the rows of ``X`` about ``origin``: looked up for rows of ``source``, else computed."""
        span = self.rows_of(X)
        return self.hashes[span] if span is not None else content_hashes(X, self.origin)


def _hashes(X: FloatArray, origin: npt.ArrayLike | RowHashes | None) -> UIntArray:
    return origin.hashes_of(X) if isinstance(origin, RowHashes) else content_hashes(X, origin)


def row_keys(X: FloatArray, seed: int | None, salt: int, origin: npt.ArrayLike | RowHashes | None = None) -> UIntArray:
    """A 64-bit key per row of ``X`` from its values, the seed and the salt naming the step.

    ``origin`` (one value per column) is subtracted first: with each column's minimum, a shift of a
    column that float64 represents exactly (integer data) leaves every key unchanged. A
    :class:`RowHashes` given as ``origin`` supplies the hashes of rows of its matrix.
    """
    return derive_keys(_hashes(X, origin), seed, salt)


def keep_share(
    X: FloatArray, share: float, seed: int | None, salt: int, origin: npt.ArrayLike | RowHashes | None = None
) -> npt.NDArray[np.bool_]:
    """Rows whose key falls in the lowest ``share`` of the key range: a seeded Bernoulli(share) sample."""
    if share >= 1.0:
        return np.ones(X.shape[0], dtype=np.bool_)
    return np.asarray(row_keys(X, seed, salt, origin).astype(np.float64) < share * _TWO_64)


def smallest_keys(keys: UIntArray, m: int) -> npt.NDArray[np.intp]:
    """Positions of the ``m`` smallest keys, ties broken by position, in increasing position order.

    The same set as ``np.argsort(keys, kind="stable")[:m]``, in O(n) (a partition, not a sort).
    """
    keys = np.asarray(keys, dtype=np.uint64)
    if m >= keys.size:
        return np.arange(keys.size, dtype=np.intp)
    if m <= 0:
        return np.zeros(0, dtype=np.intp)
    kth = np.partition(keys, m - 1)[m - 1]
    below = np.flatnonzero(keys < kth)
    at = np.flatnonzero(keys == kth)[: m - below.size]
    return np.sort(np.concatenate([below, at])).astype(np.intp)
