"""Small, well-conditioned linear-algebra helpers shared by the statistics."""

from __future__ import annotations

from collections.abc import Iterator

import numpy as np
import numpy.typing as npt
from scipy import linalg

from discaudit.stats.blocks import ROW_BLOCK

FloatArray = npt.NDArray[np.float64]


def logdet_spd(A: FloatArray) -> float:
    """log det of a symmetric positive-definite matrix via Cholesky; ``-inf`` if not PD or not finite."""
    if not np.all(np.isfinite(A)):
        return float("-inf")
    try:
        L = linalg.cholesky(A, lower=True, check_finite=False)
    except linalg.LinAlgError:
        return float("-inf")
    diag = np.diag(L)
    if not np.all(diag > 0):
        return float("-inf")
    return float(2.0 * np.log(diag).sum())


def row_log_sum_exp(scores: FloatArray) -> FloatArray:
    """log sum_k exp(scores[i, k]) of every row, shifted by the row's largest score so nothing overflows.

    Rows of -inf give -inf and a row with +inf gives +inf, as ``scipy.special.logsumexp(scores,
    axis=1)`` does (tests/test_leave_one_out.py compares them); without scipy's input handling it
    costs a third as much on the audit's blocks of a few thousand rows.
    """
    top = scores.max(axis=1)
    top = np.where(np.isfinite(top), top, 0.0)
    with np.errstate(divide="ignore"):
        total: FloatArray = np.log(np.exp(scores - top[:, None]).sum(axis=1)) + top
    return total


def correlation_from_covariance(S: FloatArray) -> FloatArray:
    """Correlation matrix of a covariance matrix with a positive diagonal."""
    sd = np.sqrt(np.diag(S))
    R = S / np.outer(sd, sd)
    np.fill_diagonal(R, 1.0)
    return np.asarray(R, dtype=np.float64)


def symmetric_eigh(A: FloatArray) -> tuple[FloatArray, FloatArray]:
    """Eigenvalues (descending) and eigenvectors (columns) of a symmetric matrix."""
    values, vectors = np.linalg.eigh((A + A.T) / 2.0)
    order = np.argsort(values)[::-1]
    return values[order], vectors[:, order]


def numerical_rank_tolerance(values: FloatArray, size: int) -> float:
    """Threshold below which an eigenvalue counts as zero (as in numpy's matrix_rank)."""
    return float(np.max(np.abs(values)) * size * np.finfo(np.float64).eps)


def _whitened_blocks(
    X: FloatArray,
    centre: FloatArray,
    L: FloatArray,
    rows: npt.NDArray[np.intp] | None = None,
    columns: npt.NDArray[np.intp] | None = None,
) -> Iterator[tuple[slice, FloatArray]]:
    """Blocks Z = L^-1 (x - centre)' (p x block) of the rows of X (``rows`` of them, on ``columns``), with
    their place among the rows scored; temporaries stay at a block of ROW_BLOCK rows."""
    trsm = linalg.get_blas_funcs("trsm", (L,))
    n = X.shape[0] if rows is None else rows.size
    for a in range(0, n, ROW_BLOCK):
        block = X[a : a + ROW_BLOCK] if rows is None else X[rows[a : a + ROW_BLOCK]]
        if columns is not None:
            block = block[:, columns]
        # (block - centre).T is Fortran-ordered (p, rows): BLAS solves L Z = C in place, no copy.
        yield (
            slice(a, a + ROW_BLOCK),
            trsm(1.0, L, (block - centre).T, side=0, lower=1, trans_a=0, diag=0, overwrite_b=1),
        )


def sq_distances_cholesky(
    X: FloatArray, centre: FloatArray, L: FloatArray, rows: npt.NDArray[np.intp] | None = None
) -> FloatArray:
    """Squared Mahalanobis distances ||L^-1 (x - centre)||^2 of the rows of X, in row blocks.

    ``L`` is the lower Cholesky factor of the covariance. ``rows`` (optional) selects the rows
    of X to score without copying them all at once. Temporaries stay at a block of rows.
    """
    out = np.empty(X.shape[0] if rows is None else rows.size)
    for place, Z in _whitened_blocks(X, centre, L, rows):
        out[place] = np.einsum("ij,ij->j", Z, Z)
    return out


def sq_distances_two_metrics(
    X: FloatArray,
    rows: npt.NDArray[np.intp],
    columns: npt.NDArray[np.intp] | None,
    first: tuple[FloatArray, FloatArray],
    second: tuple[FloatArray, FloatArray],
) -> tuple[FloatArray, FloatArray]:
    """Squared Mahalanobis distances of ``X[rows][:, columns]`` under two (centre, Cholesky factor) pairs, one pass.

    With z = L1^-1 (x - c1) from a triangular solve, L2^-1 (x - c2) = M z + v where M = L2^-1 L1
    and v = L2^-1 (c1 - c2) come from two p x p triangular solves (no inverse is formed): the second
    metric costs a matrix product on the rows already read and whitened, not a second read and
    solve. ``columns`` None means every column. Temporaries stay at a block of rows.
    """
    c1, L1 = first
    c2, L2 = second
    M = linalg.solve_triangular(L2, L1, lower=True, check_finite=False)
    v = linalg.solve_triangular(L2, c1 - c2, lower=True, check_finite=False)
    out1, out2 = np.empty(rows.size), np.empty(rows.size)
    for place, Z in _whitened_blocks(X, c1, L1, rows, columns):
        out1[place] = np.einsum("ij,ij->j", Z, Z)
        W = M @ Z
        W += v[:, None]
        out2[place] = np.einsum("ij,ij->j", W, W)
    return out1, out2


def mahalanobis_sq(
    X: FloatArray, centre: FloatArray, cov: FloatArray, rows: npt.NDArray[np.intp] | None = None
) -> FloatArray | None:
    """Squared Mahalanobis distances from ``centre`` under ``cov``; None if cov is not positive definite."""
    L = cholesky_or_none(cov)
    return None if L is None else sq_distances_cholesky(X, centre, L, rows)


def cholesky_or_none(cov: FloatArray) -> FloatArray | None:
    """The lower Cholesky factor of ``cov``, or None if it is not positive definite."""
    try:
        return np.asarray(linalg.cholesky(cov, lower=True, check_finite=False), dtype=np.float64)
    except linalg.LinAlgError:
        return None
