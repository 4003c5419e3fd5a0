"""Two-sample comparisons from moments: one class in an accepted batch against the same class in a new one.

Each function takes the counts, means and unbiased covariances of the two samples (what a JSON
report stores), never rows, and returns a significance test with an effect size, so a caller can
require both: at a million rows a test rejects a shift nobody would notice, and at twenty rows a
large effect may be noise.

* :func:`hotelling_two_sample`: Hotelling's T^2 for equal means under a common covariance, with
  the Mahalanobis distance of the shift in units of the pooled standard deviation.
* :func:`covariance_two_sample`: the likelihood-ratio (Box's M) test for equal covariances with
  Box's chi-square correction, with the log-determinant ratio and the typical variance ratio
  along the eigen-directions of ``S_a^-1 S_b``.
* :func:`shares_two_sample`: the chi-square test that two batches have the same class shares,
  with the largest absolute change of a share.
"""

from __future__ import annotations

from dataclasses import dataclass
from typing import Any

import numpy as np
import numpy.typing as npt
from scipy import linalg
from scipy import stats as sps

from discaudit.errors import DataError
from discaudit.stats._linalg import logdet_spd

FloatArray = npt.NDArray[np.float64]


def _as_moments(n: int, mean: Any, cov: Any, p: int | None = None) -> tuple[int, FloatArray, FloatArray]:
    m = np.asarray(mean, dtype=np.float64).reshape(-1)
    S = np.asarray(cov, dtype=np.float64)
    if S.size == m.size * m.size:  # a 0-d variance for one feature, as numpy's cov returns it
        S = S.reshape(m.size, m.size)
    if S.shape != (m.size, m.size):
        raise DataError(f"a covariance of shape {S.shape} does not match a mean of {m.size} features.")
    if p is not None and m.size != p:
        raise DataError(f"the two samples have {p} and {m.size} features; compare the same features.")
    if int(n) < 2:
        raise DataError(f"a sample of {int(n)} row cannot be compared; each needs at least two rows.")
    return int(n), m, (S + S.T) / 2.0


@dataclass(frozen=True)
class HotellingResult:
    """Hotelling's two-sample T^2 test of equal means.

    Attributes
    ----------
    statistic : float
        T^2 = n_a n_b / (n_a + n_b) d' S^-1 d, d the difference of the means and S the pooled
        covariance ((n_a - 1) S_a + (n_b - 1) S_b) / (n_a + n_b - 2).
    f, df1, df2, p_value : float
        F = (n_a + n_b - p - 1) / (p (n_a + n_b - 2)) T^2 on (p, n_a + n_b - p - 1) degrees of freedom.
    mahalanobis : float
        sqrt(d' S^-1 d): the shift in units of the pooled standard deviation (for one feature,
        the absolute standardized mean difference, Cohen's d).
    n_used : tuple of int
        (n_a, n_b).
    """

    statistic: float
    f: float
    df1: float
    df2: float
    p_value: float
    mahalanobis: float
    n_used: tuple[int, int]


def hotelling_two_sample(n_a: int, mean_a: Any, cov_a: Any, n_b: int, mean_b: Any, cov_b: Any) -> HotellingResult:
    """Hotelling's T^2 test that two samples share one mean, from their moments.

    Null hypothesis: the two samples come from multivariate normal populations with equal
    means and a common covariance.

    Parameters
    ----------
    n_a, n_b : int
        Rows in each sample (at least two each, and n_a + n_b - 2 >= p).
    mean_a, mean_b : array-like, shape (p,)
    cov_a, cov_b : array-like, shape (p, p)
        Unbiased (divisor n - 1) covariances.

    Returns
    -------
    HotellingResult

    Raises
    ------
    DataError
        When the shapes differ, a sample has fewer than two rows, n_a + n_b - 2 < p + 1, or the
        pooled covariance is singular.

    Notes
    -----
    Checked against pingouin's ``multivariate_ttest`` on rows and against the definition
    (tests). T^2 and the distance are invariant to any nonsingular affine map of the features.

    References
    ----------
    Hotelling, H. (1931). The generalization of Student's ratio. Annals of Mathematical
    Statistics 2, 360-378.
    """
    n_a, m_a, S_a = _as_moments(n_a, mean_a, cov_a)
    n_b, m_b, S_b = _as_moments(n_b, mean_b, cov_b, m_a.size)
    p = m_a.size
    dof = n_a + n_b - 2
    if dof - p + 1 < 1:
        raise DataError(f"Hotelling's T^2 needs n_a + n_b - p - 1 >= 1; got {n_a} + {n_b} rows for {p} features.")
    S = ((n_a - 1) * S_a + (n_b - 1) * S_b) / dof
    d = m_b - m_a
    try:
        L = linalg.cholesky(S, lower=True, check_finite=True)
    except (linalg.LinAlgError, ValueError):
        raise DataError("the pooled covariance of the two samples is singular; T^2 is undefined.") from None
    z = linalg.solve_triangular(L, d, lower=True)
    d2 = float(z @ z)
    t2 = n_a * n_b / (n_a + n_b) * d2
    df1, df2 = float(p), float(dof - p + 1)
    f = df2 / (p * dof) * t2
    return HotellingResult(
        statistic=float(t2),
        f=float(f),
        df1=df1,
        df2=df2,
        p_value=float(sps.f.sf(f, df1, df2)),
        mahalanobis=float(np.sqrt(d2)),
        n_used=(n_a, n_b),
    )


@dataclass(frozen=True)
class CovarianceComparison:
    """Likelihood-ratio (Box's M) test that two samples share one covariance.

    Attributes
    ----------
    statistic : float
        M = (n_a + n_b - 2) ln det S - (n_a - 1) ln det S_a - (n_b - 1) ln det S_b, S pooled.
    chi2, df, p_value : float
        Box's approximation: chi2 = M (1 - c1) on df = p (p + 1) / 2, with
        c1 = (1/(n_a - 1) + 1/(n_b - 1) - 1/(n_a + n_b - 2)) (2p^2 + 3p - 1) / (6 (p + 1)).
    log_det_ratio : float
        ln det S_b - ln det S_a (0 when the generalized variances agree; p ln 2 when S_b = 2 S_a).
    spread_ratio : float
        exp(sqrt(mean_i (ln l_i)^2)), l_i the eigenvalues of S_a^-1 S_b: the factor by which the
        variance changed along a typical direction (1 when equal, 2 when S_b = 2 S_a). Unlike the
        determinant ratio it also registers a change of shape that keeps the volume.
    variance_ratios : tuple of float
        The eigenvalues l_i, ascending: the variance ratios along the directions that changed least
        and most.
    n_used : tuple of int
        (n_a, n_b).
    """

    statistic: float
    chi2: float
    df: float
    p_value: float
    log_det_ratio: float
    spread_ratio: float
    variance_ratios: tuple[float, ...]
    n_used: tuple[int, int]


def covariance_two_sample(n_a: int, cov_a: Any, n_b: int, cov_b: Any) -> CovarianceComparison:
    """Box's M test that two samples share one covariance, from their covariances.

    Null hypothesis: the two samples come from multivariate normal populations with equal
    covariance matrices. Like every test of covariances it is sensitive to heavy tails; read the
    effect sizes beside it.

    Parameters
    ----------
    n_a, n_b : int
        Rows in each sample; each must exceed p for its covariance to be nonsingular.
    cov_a, cov_b : array-like, shape (p, p)
        Unbiased (divisor n - 1) covariances.

    Returns
    -------
    CovarianceComparison

    Raises
    ------
    DataError
        When the shapes differ or a covariance is singular.

    Notes
    -----
    M is Box's statistic for K = 2 groups (:func:`discaudit.stats.box_m` for K groups; checked
    against pingouin's ``box_m`` on rows in the tests). M, the ratios and the eigenvalues are
    invariant to any nonsingular linear map of the features.

    References
    ----------
    Box, G. E. P. (1949). A general distribution theory for a class of likelihood criteria.
    Biometrika 36, 317-346.
    """
    p = int(round(np.sqrt(np.size(cov_a))))
    n_a, _, S_a = _as_moments(n_a, np.zeros(p), cov_a)
    n_b, _, S_b = _as_moments(n_b, np.zeros(int(round(np.sqrt(np.size(cov_b))))), cov_b, p)
    ld_a, ld_b = logdet_spd(S_a), logdet_spd(S_b)
    if not (np.isfinite(ld_a) and np.isfinite(ld_b)) or min(n_a, n_b) <= p:
        raise DataError(
            f"each covariance must be nonsingular (more than p = {p} rows, no constant or collinear column) to be "
            "compared."
        )
    dof = n_a + n_b - 2
    S = ((n_a - 1) * S_a + (n_b - 1) * S_b) / dof
    ld = logdet_spd(S)
    M = dof * ld - (n_a - 1) * ld_a - (n_b - 1) * ld_b
    c1 = (1.0 / (n_a - 1) + 1.0 / (n_b - 1) - 1.0 / dof) * (2 * p * p + 3 * p - 1) / (6.0 * (p + 1))
    df = p * (p + 1) / 2.0
    chi2 = max(M, 0.0) * (1.0 - c1)
    # Eigenvalues of S_a^-1 S_b as those of the symmetric L^-1 S_b L^-T (L L' = S_a).
    L = linalg.cholesky(S_a, lower=True)
    W = linalg.solve_triangular(L, linalg.solve_triangular(L, S_b, lower=True).T, lower=True)
    ratios = np.clip(np.linalg.eigvalsh((W + W.T) / 2.0), np.finfo(np.float64).tiny, None)
    spread = float(np.exp(np.sqrt(np.mean(np.log(ratios) ** 2))))
    return CovarianceComparison(
        statistic=float(M),
        chi2=float(chi2),
        df=float(df),
        p_value=float(sps.chi2.sf(chi2, df)),
        log_det_ratio=float(ld_b - ld_a),
        spread_ratio=spread,
        variance_ratios=tuple(float(r) for r in ratios),
        n_used=(n_a, n_b),
    )


@dataclass(frozen=True)
class SharesComparison:
    """Chi-square test that two batches have the same class shares.

    Attributes
    ----------
    statistic, df, p_value : float
        Pearson's chi-square of the 2 x K table of counts, on K - 1 degrees of freedom.
    shares_a, shares_b : tuple of float
        Each class's share of its batch.
    largest_change : float
        max_k |share_b - share_a|.
    """

    statistic: float
    df: float
    p_value: float
    shares_a: tuple[float, ...]
    shares_b: tuple[float, ...]
    largest_change: float


def shares_two_sample(counts_a: Any, counts_b: Any) -> SharesComparison:
    """Pearson's chi-square test of homogeneity of two count vectors over the same classes.

    Null hypothesis: both batches are drawn with the same class probabilities.

    Parameters
    ----------
    counts_a, counts_b : array-like of int, shape (K,)
        Rows per class in each batch, classes in the same order (a class absent from one batch
        has count 0 there).

    Returns
    -------
    SharesComparison

    Notes
    -----
    The statistic equals ``scipy.stats.chi2_contingency`` without the continuity correction
    (tests). Classes with no rows in either batch are left out.

    References
    ----------
    Pearson, K. (1900). On the criterion that a given system of deviations from the probable
    ... Philosophical Magazine 50, 157-175.
    """
    a = np.asarray(counts_a, dtype=np.float64).reshape(-1)
    b = np.asarray(counts_b, dtype=np.float64).reshape(-1)
    if a.shape != b.shape or a.sum() <= 0 or b.sum() <= 0:
        raise DataError("class counts must cover the same classes and each batch must have rows.")
    share_a, share_b = a / a.sum(), b / b.sum()
    keep = (a + b) > 0
    table = np.vstack([a[keep], b[keep]])
    expected = table.sum(axis=1, keepdims=True) * table.sum(axis=0, keepdims=True) / table.sum()
    stat = float(((table - expected) ** 2 / expected).sum())
    df = float(keep.sum() - 1)
    return SharesComparison(
        statistic=stat,
        df=df,
        p_value=float(sps.chi2.sf(stat, df)) if df > 0 else 1.0,
        shares_a=tuple(float(v) for v in share_a),
        shares_b=tuple(float(v) for v in share_b),
        largest_change=float(np.max(np.abs(share_b - share_a))),
    )
