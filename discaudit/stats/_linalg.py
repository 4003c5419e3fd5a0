"""Small, well-conditioned linear-algebra helpers shared by the statistics."""

from __future__ import annotations

import numpy as np
import numpy.typing as npt
from scipy import linalg

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
