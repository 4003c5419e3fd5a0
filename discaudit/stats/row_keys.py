"""Pseudo-random 64-bit keys of rows from their values and a seed, not their position.

Selecting rows by key (the smallest keys, or keys below a threshold) gives a seeded subsample that
does not change when the rows are reordered, split into chunks differently, or their classes renamed:
the same rows are chosen wherever they sit. Identical rows get identical keys.
"""

from __future__ import annotations

import numpy as np
import numpy.typing as npt

from discaudit.stats.blocks import ROW_BLOCK
from discaudit.stats.seeds import stream_rng

FloatArray = npt.NDArray[np.float64]
UIntArray = npt.NDArray[np.uint64]

#: Shifts and multipliers of the splitmix64 output function (Steele, Lea & Flood 2014, "Fast splittable
#: pseudorandom number generators", OOPSLA), which mixes the bits of the keys.
_MIX_SHIFTS = (np.uint64(30), np.uint64(27), np.uint64(31))
_MIX_MULTIPLIERS = (np.uint64(0xBF58476D1CE4E5B9), np.uint64(0x94D049BB133111EB))
#: 2**64 as a float, for turning keys into uniform numbers on [0, 1).
_TWO_64 = float(2**64)


def _mix(x: UIntArray) -> UIntArray:
    """splitmix64's output function, elementwise (wrapping uint64 arithmetic)."""
    x = x ^ (x >> _MIX_SHIFTS[0])
    x = x * _MIX_MULTIPLIERS[0]
    x = x ^ (x >> _MIX_SHIFTS[1])
    x = x * _MIX_MULTIPLIERS[1]
    return np.asarray(x ^ (x >> _MIX_SHIFTS[2]), dtype=np.uint64)


def row_keys(X: FloatArray, seed: int, salt: int, origin: npt.ArrayLike | None = None) -> UIntArray:
    """A 64-bit key per row from its values, the seed and the salt naming the step (see ``seeds``).

    ``origin`` (one value per column) is subtracted first: with each column's minimum, a shift of a
    column that float64 represents exactly (integer data) leaves every key unchanged.
    """
    n, p = X.shape
    base = np.zeros(p) if origin is None else np.asarray(origin, dtype=np.float64)
    mask = stream_rng(seed, salt).integers(0, 2**64, size=p + 1, dtype=np.uint64, endpoint=False)
    keys = np.empty(n, dtype=np.uint64)
    for a in range(0, n, ROW_BLOCK):
        block = np.ascontiguousarray(X[a : a + ROW_BLOCK], dtype=np.float64) - base
        bits = (block + 0.0).view(np.uint64)  # + 0.0: -0.0 and 0.0 get one key
        mixed = _mix(bits ^ mask[:p])
        keys[a : a + ROW_BLOCK] = _mix(mixed.sum(axis=1, dtype=np.uint64) ^ mask[p])
    return keys


def keep_share(
    X: FloatArray, share: float, seed: int, salt: int, origin: npt.ArrayLike | None = None
) -> npt.NDArray[np.bool_]:
    """Rows whose key falls in the lowest ``share`` of the key range: a seeded Bernoulli(share) sample."""
    if share >= 1.0:
        return np.ones(X.shape[0], dtype=np.bool_)
    return np.asarray(row_keys(X, seed, salt, origin).astype(np.float64) < share * _TWO_64)
