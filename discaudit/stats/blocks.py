"""The one row-block size: work over many rows goes by blocks of this many rows.

8,192 rows of 50 float64 features are 3.2 MB, so a block and a few temporaries of its size stay
in the cache-friendly range while the per-block overhead of BLAS calls stays negligible
(benchmarks/RESULTS.md: the blocked passes at (1e6, 50)). Pairwise statistics bound the
elements of a block of pairs instead (``discaudit.stats._sampling``).
"""

from __future__ import annotations

ROW_BLOCK = 1 << 13


def block_starts(n: int) -> range:
    """Start positions of consecutive blocks of at most ``ROW_BLOCK`` rows covering 0 .. n - 1."""
    return range(0, n, ROW_BLOCK)
