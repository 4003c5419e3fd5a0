"""Condition indices and variance-decomposition proportions (Belsley, Kuh & Welsch 1980)."""

from __future__ import annotations

from dataclasses import dataclass
from typing import Any

import numpy as np
import numpy.typing as npt
import pandas as pd

from discaudit.errors import DataError
from discaudit.stats._inputs import as_matrix, power_of_two_scaled
from discaudit.stats._linalg import correlation_from_covariance, symmetric_eigh

FloatArray = npt.NDArray[np.float64]


@dataclass(frozen=True)
class ConditionIndicesResult:
    """Belsley-Kuh-Welsch collinearity diagnostics.

    Attributes
    ----------
    condition_number : float
        sqrt(largest / smallest eigenvalue) of the correlation matrix (``inf`` if singular).
    indices : ndarray, shape (p,)
        Condition index of each dimension, ascending (the first is 1).
    variance_proportions : pandas.DataFrame, shape (p, p)
        Row k, column j: share of the variance of coefficient j that is due to dimension k;
        each column sums to 1. Rows follow ``indices``.
    eigenvalues : ndarray, shape (p,)
        Eigenvalues of the correlation matrix, descending.
    eigenvectors : ndarray, shape (p, p)
        Matching eigenvectors (columns).
    scaling : str
        The scaling used: centred, unit-variance columns (the correlation matrix).
    """

    condition_number: float
    indices: FloatArray
    variance_proportions: pd.DataFrame
    eigenvalues: FloatArray
    eigenvectors: FloatArray
    scaling: str = "centred, unit-variance columns (correlation matrix)"


def _spectrum(S: FloatArray) -> tuple[FloatArray, FloatArray, FloatArray, FloatArray]:
    """Eigenvalues (descending), eigenvectors, eigenvalues with rounding-level ones set to 0, and the
    condition indices sqrt(l_max / l_k) of the correlation matrix of the covariance S."""
    R = correlation_from_covariance(S)
    values, vectors = symmetric_eigh(R)
    floor = np.finfo(np.float64).eps * R.shape[0] * values[0]
    clipped = np.where(values > floor, values, 0.0)
    with np.errstate(divide="ignore", invalid="ignore"):
        indices = np.sqrt(values[0] / clipped)
    return values, vectors, clipped, indices


def condition_number_from_covariance(S: FloatArray) -> float:
    """The largest condition index of the correlation matrix of S (inf when it is singular)."""
    return float(_spectrum(S)[3][-1])


def condition_indices_from_covariance(S: FloatArray, names: list[str]) -> ConditionIndicesResult:
    """Diagnostics from a covariance matrix with a positive diagonal; see :func:`condition_indices`."""
    values, vectors, clipped, indices = _spectrum(S)
    with np.errstate(divide="ignore", invalid="ignore"):
        squares = vectors**2
        phi = np.where(squares > 0, squares / clipped[None, :], 0.0)
    # A zero eigenvalue carries all of the (unbounded) variance of every coefficient it touches.
    unbounded = ~np.isfinite(phi)
    if unbounded.any():
        phi = np.where(np.any(unbounded, axis=1, keepdims=True), np.where(unbounded, 1.0, 0.0), phi)
    proportions = (phi / phi.sum(axis=1, keepdims=True)).T
    frame = pd.DataFrame(proportions, columns=names)
    frame.index.name = "dimension"
    return ConditionIndicesResult(
        condition_number=float(indices[-1]),
        indices=indices,
        variance_proportions=frame,
        eigenvalues=values,
        eigenvectors=vectors,
    )


def condition_indices(X: Any) -> ConditionIndicesResult:
    """Condition indices and variance-decomposition proportions of the columns of X.

    Parameters
    ----------
    X : array-like, shape (n, p)
        Numeric features; DataFrame column names label the proportions.

    Returns
    -------
    ConditionIndicesResult

    Raises
    ------
    DataError
        If a column is constant or the input is not numeric.

    See Also
    --------
    vif : one number per feature; condition indices say which features share a dependency.

    Notes
    -----
    The columns are centred and scaled to unit variance, so the decomposition is that of
    the correlation matrix R = V diag(l) V' (Belsley, Kuh & Welsch use unit-length columns,
    with the intercept; centring removes the intercept's dimension). Index k is
    sqrt(l_max / l_k); proportion (k, j) = (v_jk^2 / l_k) / sum_m (v_jm^2 / l_m). Common
    practice: an index above 30 signals a strong dependency, 10-30 a moderate one, and the
    features with proportion above 0.5 on that index are the ones involved. Checked against
    the singular values of the standardized data matrix (tests).

    References
    ----------
    Belsley, D. A., Kuh, E. & Welsch, R. E. (1980). Regression Diagnostics: Identifying
    Influential Data and Sources of Collinearity. Wiley, chapter 3.

    Examples
    --------
    >>> from sklearn.datasets import load_diabetes  # doctest: +SKIP
    >>> condition_indices(load_diabetes(as_frame=True).data).condition_number > 30  # doctest: +SKIP
    True

    The serum measurements s1, s2 (and s3, s5) share a strong near dependency.
    """
    values, names = as_matrix(X)
    values = power_of_two_scaled(values)  # the decomposition of the correlation matrix is unit free
    centred = values - values.mean(axis=0)
    S = centred.T @ centred / (values.shape[0] - 1)
    constant = [names[j] for j in np.flatnonzero(np.diag(S) <= 0)]
    if constant:
        raise DataError(f"Condition indices are undefined with constant columns {constant}; drop them first.")
    return condition_indices_from_covariance(S, names)
