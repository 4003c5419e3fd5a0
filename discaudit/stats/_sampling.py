"""Seeded subsampling, blocked pairwise work and whitening shared by the pairwise statistics."""

from __future__ import annotations

from typing import cast

import numpy as np
import numpy.typing as npt

from discaudit.errors import DataError
from discaudit.stats._inputs import FloatMatrix

#: Elements of one block of pairwise products (8 MiB of float64); blocks never grow to n x n.
_BLOCK_ELEMENTS = 1 << 20

#: Smallest singular-value ratio of the standardized data still treated as full rank.
_RANK_RATIO = 1e-10


def row_blocks(n: int) -> list[tuple[int, int]]:
    """Consecutive row ranges such that one block times all rows stays near 8 MiB."""
    size = max(1, min(n, _BLOCK_ELEMENTS // max(n, 1)))
    return [(start, min(start + size, n)) for start in range(0, n, size)]


def pair_sums(Z: FloatMatrix, *, cubes: bool, kernel_b2: float | None) -> tuple[float, float]:
    """Sums over all ordered pairs (i, j) of rows of whitened data, from one pass over the Gram blocks.

    ``cubes``: sum (z_i' z_j)^3 (Mardia's skewness times n^2). ``kernel_b2``: with b2 given,
    sum exp(-b2/2 ||z_i - z_j||^2) (the pair term of the Henze-Zirkler statistic). Each block of
    the upper triangle of Z Z' is formed once and serves both; off-diagonal blocks count twice.
    A sum not asked for is NaN.
    """
    n = Z.shape[0]
    sq_norm = np.einsum("ij,ij->i", Z, Z)
    cubed, kernel = 0.0, 0.0
    for start, stop in row_blocks(n):
        G = Z[start:stop] @ Z[start:].T
        width = stop - start
        if cubes:
            C = G * G
            C *= G
            cubed += float(C[:, :width].sum()) + 2.0 * float(C[:, width:].sum())
        if kernel_b2 is not None:
            G *= -2.0
            G += sq_norm[start:stop, None]
            G += sq_norm[None, start:]
            np.maximum(G, 0.0, out=G)
            G *= -0.5 * kernel_b2
            np.exp(G, out=G)
            kernel += float(G[:, :width].sum()) + 2.0 * float(G[:, width:].sum())
    return (cubed if cubes else float("nan"), kernel if kernel_b2 is not None else float("nan"))


def subsample_rows(
    n: int, max_rows: int, random_state: int | None, *, min_rows: int
) -> tuple[npt.NDArray[np.intp] | None, int | None]:
    """Sorted positions of a seeded subsample of ``max_rows`` rows, or None if n <= max_rows.

    Returns the positions and the seed actually used (None when nothing was drawn).
    """
    if isinstance(max_rows, bool) or not isinstance(max_rows, (int, np.integer)):
        raise DataError(f"max_rows must be an integer; got {max_rows!r}.")
    if max_rows < min_rows:
        raise DataError(
            f"max_rows={max_rows} is too small: the statistic needs more rows than features, "
            f"so max_rows must be at least {min_rows}. Raise max_rows."
        )
    if n <= max_rows:
        return None, None
    seed = resolve_seed(random_state)
    rng = np.random.default_rng(seed)
    rows = np.sort(rng.choice(n, size=int(max_rows), replace=False))
    return rows, seed


def resolve_seed(random_state: int | None) -> int:
    """The seed to record: ``random_state`` itself, or a freshly drawn one if it is None."""
    if random_state is None:
        # A fresh 32-bit seed from OS entropy: small enough to print and to store in JSON.
        return int(np.random.SeedSequence().generate_state(1)[0])
    if isinstance(random_state, bool) or not isinstance(random_state, (int, np.integer)):
        raise DataError(
            f"random_state must be a non-negative integer or None; got {random_state!r}. "
            "Pass an integer seed so the subsample is recorded and repeatable."
        )
    if random_state < 0:
        raise DataError(f"random_state must be non-negative; got {random_state}.")
    return int(random_state)


def whiten(data: FloatMatrix, names: list[str], *, statistic: str, subsampled: bool) -> FloatMatrix:
    """Centred data whitened by the divisor-n covariance: Z with Z'Z/n = I and mean 0.

    Z = sqrt(n) U from the thin SVD of the centred, unit-variance data. Raises DataError
    when that covariance is singular (n <= p, a constant column, collinear columns).
    """
    n, p = data.shape
    where = " in the random subsample (raise max_rows or set another random_state)" if subsampled else ""
    if n <= p:
        raise DataError(
            f"{statistic} need more rows than features: got {n} rows and {p} features{where}, so "
            "the sample covariance is singular. Drop features or add rows."
        )
    # Shift by a location first (the first row: an offset of 1e15 then keeps the digits that
    # vary), then divide by each column's range (exact for the statistics, which are scale free),
    # so squares of tiny or huge values neither underflow nor overflow.
    shifted = data - data[0]
    centred = shifted - shifted.mean(axis=0)
    spread = np.ptp(data, axis=0)
    with np.errstate(divide="ignore", invalid="ignore"):
        centred = np.where(spread > 0, centred / np.where(spread > 0, spread, 1.0), 0.0)
    sd = np.sqrt(np.einsum("ij,ij->j", centred, centred) / n)
    constant = spread == 0  # an exact fact: a column that takes two values varies, however little
    if constant.any():
        cols = [names[j] for j in np.flatnonzero(constant)]
        raise DataError(
            f"{statistic} are undefined: column(s) {_list(cols)} are constant{where}, so the "
            "covariance matrix is singular. Drop those columns."
        )
    scaled = centred / sd
    U, s, Vt = np.linalg.svd(scaled / np.sqrt(n), full_matrices=False)
    if s[-1] <= _RANK_RATIO * s[0]:
        raise DataError(
            f"{statistic} are undefined: the columns are (nearly) collinear{where}; the "
            f"standardized combination {_combination(Vt[-1], names)} is constant up to rounding "
            f"(smallest/largest singular value {s[-1] / s[0]:.2e}), so the covariance matrix is "
            "singular. Drop one of the columns named."
        )
    return cast(FloatMatrix, np.sqrt(n) * U)  # numpy's einsum (behind sd) returns Any


def _combination(v: npt.NDArray[np.float64], names: list[str]) -> str:
    """Readable linear combination of the columns with a material weight."""
    v = v / np.max(np.abs(v))
    order = np.argsort(-np.abs(v))
    text = ""
    for j in [j for j in order if abs(v[j]) >= 0.01][:8]:
        sign = "-" if v[j] < 0 else "+"
        text += f" {sign} {abs(v[j]):.3g}*{names[j]}" if text else f"{v[j]:.3g}*{names[j]}"
    return text


def _list(items: list[str], limit: int = 6) -> str:
    shown = ", ".join(items[:limit])
    more = f" and {len(items) - limit} more" if len(items) > limit else ""
    return f"[{shown}{more}]"
