"""Hotelling's T^2 between every pair of class means, with the pooled within-class covariance of all classes.

For classes i and j with n_i and n_j rows and the pooled within-class covariance S = W / (N - K)
of all K classes (nu = N - K degrees of freedom),

    D^2 = (m_i - m_j)' S^-1 (m_i - m_j)                 (squared Mahalanobis distance)
    T^2 = n_i n_j / (n_i + n_j) D^2
    F   = T^2 (nu - p + 1) / (nu p)  ~  F(p, nu - p + 1) when the two means are equal,

the two-sample Hotelling test with the covariance pooled over every class, as in the pairwise
comparisons that follow a significant MANOVA (Rencher & Christensen, Methods of Multivariate
Analysis). With K = 2 it is Hotelling's two-sample test itself, which tests/test_remedy_stats.py
checks against pingouin's ``multivariate_ttest``. The p-values of the K(K-1)/2 pairs are adjusted by Holm's step-down
method (Holm 1979, Scand. J. Statistics 6:65-70), which controls the family-wise error rate.
Everything follows from the class moments.
"""

from __future__ import annotations

from dataclasses import dataclass

import numpy as np
import numpy.typing as npt
from scipy import linalg
from scipy import stats as sps

from discaudit.errors import DataError
from discaudit.stats.moments import ClassMoments

FloatArray = npt.NDArray[np.float64]


@dataclass(frozen=True)
class PairwiseHotellingResult:
    """Hotelling's T^2 of every pair of classes (codes i < j, in order (0, 1), (0, 2), ...).

    Attributes
    ----------
    pairs : tuple of (int, int)
        Class codes of each pair.
    mahalanobis_sq : ndarray
        Squared Mahalanobis distance between the two means under the pooled covariance.
    t2, f, p_value : ndarray
        Hotelling's T^2, its F transform and the F(df1, df2) upper-tail p-value.
    df1, df2 : float
        p and N - K - p + 1.
    p_adjusted : ndarray
        Holm-adjusted p-values (monotone, capped at 1).
    """

    pairs: tuple[tuple[int, int], ...]
    mahalanobis_sq: FloatArray
    t2: FloatArray
    f: FloatArray
    df1: float
    df2: float
    p_value: FloatArray
    p_adjusted: FloatArray


def holm(p_values: npt.ArrayLike) -> FloatArray:
    """Holm's step-down adjusted p-values: max over k <= rank of min(1, (m - k + 1) p_(k))."""
    p = np.asarray(p_values, dtype=np.float64)
    m = p.size
    order = np.argsort(p, kind="stable")
    stepped = np.minimum(1.0, (m - np.arange(m)) * p[order])
    adjusted = np.empty(m)
    adjusted[order] = np.maximum.accumulate(stepped)
    return adjusted


def pairwise_hotelling(moments: ClassMoments) -> PairwiseHotellingResult:
    """Hotelling's T^2 between every pair of class means from the class moments.

    Raises
    ------
    DataError
        If the pooled within-class covariance is singular or N - K <= p (no F reference).
    """
    counts = moments.counts.astype(np.float64)
    K, p = moments.n_classes, moments.n_features
    nu = float(moments.n_total - K)
    if nu - p + 1 <= 0:
        raise DataError(f"N - K = {int(nu)} is not above p = {p}: the pairwise Hotelling tests have no F reference.")
    try:
        L = linalg.cholesky(moments.pooled_covariance, lower=True, check_finite=False)
    except linalg.LinAlgError:
        raise DataError("The pooled within-class covariance is singular; pairwise distances are undefined.") from None
    pairs = tuple((i, j) for i in range(K) for j in range(i + 1, K))
    # Differences of the means first (they do not depend on where the features are centred), then whitened.
    diffs = np.array([moments.means[i] - moments.means[j] for i, j in pairs]).reshape(len(pairs), p)
    z = linalg.solve_triangular(L, diffs.T, lower=True, check_finite=False)
    d2 = np.einsum("ij,ij->j", z, z)
    t2 = np.array([counts[i] * counts[j] / (counts[i] + counts[j]) for i, j in pairs]) * d2
    df1, df2 = float(p), nu - p + 1.0
    f = t2 * df2 / (nu * p)
    p_value = sps.f.sf(f, df1, df2)
    return PairwiseHotellingResult(pairs, d2, t2, f, df1, df2, p_value, holm(p_value))
