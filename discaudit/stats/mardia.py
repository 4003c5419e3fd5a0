"""Mardia's multivariate skewness and kurtosis.

The seeded row subsample, the whitening and the pass over the pairs of rows are shared with the
Henze-Zirkler statistic (:mod:`discaudit.stats._sampling`), so both see the same rows and the same
definition of the covariance.
"""

from __future__ import annotations

from dataclasses import dataclass
from typing import Any

import numpy as np
from scipy import stats as sp_stats

from discaudit.stats._inputs import FloatMatrix, as_matrix
from discaudit.stats._sampling import pair_sums, subsample_rows, whiten

__all__ = ["MardiaResult", "mardia"]


@dataclass(frozen=True)
class MardiaResult:
    """Mardia's multivariate skewness and kurtosis with their large-sample tests.

    Attributes
    ----------
    skewness : float
        b1,p = (1/n^2) sum_i sum_j g_ij^3 with g_ij = (x_i - xbar)' S^-1 (x_j - xbar).
    kurtosis : float
        b2,p = (1/n) sum_i g_ii^2, the mean of the squared Mahalanobis distances squared.
    skew_statistic : float
        n b1,p / 6, approximately chi-square with ``skew_df`` degrees of freedom under normality.
    skew_df : int
        p (p + 1) (p + 2) / 6.
    skew_p_value : float
        Upper-tail chi-square p-value of ``skew_statistic``.
    kurt_statistic : float
        (b2,p - p (p + 2)) / sqrt(8 p (p + 2) / n), approximately standard normal.
    kurt_p_value : float
        Two-sided normal p-value of ``kurt_statistic``.
    kurt_expected : float
        p (p + 2), the large-sample value of b2,p under normality.
    n_used : int
        Rows the statistics were computed on.
    n_total : int
        Rows passed in.
    n_features : int
        p.
    random_state : int or None
        Seed of the row subsample, or None when all rows were used.
    max_rows : int
        The subsampling threshold that was in force.
    covariance_divisor : str
        Always ``"n"`` (maximum-likelihood covariance, as in Mardia 1970).
    """

    skewness: float
    kurtosis: float
    skew_statistic: float
    skew_df: int
    skew_p_value: float
    kurt_statistic: float
    kurt_p_value: float
    kurt_expected: float
    n_used: int
    n_total: int
    n_features: int
    random_state: int | None
    max_rows: int
    covariance_divisor: str = "n"

    @property
    def subsampled(self) -> bool:
        """True when the statistics were computed on a random subsample of the rows."""
        return self.n_used < self.n_total


def mardia(X: Any, *, max_rows: int = 5000, random_state: int | None = None) -> MardiaResult:
    """Mardia's multivariate skewness and kurtosis tests of multivariate normality.

    Null hypothesis: the rows of ``X`` are an independent sample from a p-variate normal
    distribution (each statistic tests one consequence of it: zero skewness, normal kurtosis).

    Parameters
    ----------
    X : array-like or DataFrame, shape (n, p)
        Numeric data of one group (for an audit: one class). DataFrame column names are used
        in error messages.
    max_rows : int, default 5000
        Above this many rows the statistics are computed on a seeded random subsample of
        ``max_rows`` rows (drawn without replacement), because the skewness needs a sum over
        all pairs of rows.
    random_state : int or None, default None
        Seed of the subsample. Only used when ``n > max_rows``; if it is None then a fresh seed
        is drawn and recorded in the result so the computation can be repeated.

    Returns
    -------
    MardiaResult
        ``skewness``, ``kurtosis``, ``skew_statistic``, ``skew_df``, ``skew_p_value``,
        ``kurt_statistic``, ``kurt_p_value``, ``kurt_expected``, ``n_used``, ``n_total``,
        ``n_features``, ``random_state`` (subsample seed or None), ``max_rows`` and
        ``covariance_divisor``.

    Raises
    ------
    DataError
        If ``X`` is not finite numeric data, has no more rows than columns (n <= p), has a
        constant column, or has (numerically) collinear columns: the sample covariance is then
        singular and the statistics are undefined. The message names the columns involved.

    See Also
    --------
    henze_zirkler : An omnibus test, consistent against all alternatives; prefer it when one
        p-value is wanted. Mardia's statistics say *how* the data depart from normality
        (asymmetry versus tails), which is what matters for choosing a discriminant model.

    Notes
    -----
    With xbar the sample mean and S = (1/n) sum_i (x_i - xbar)(x_i - xbar)' (divisor n, the
    maximum-likelihood covariance), g_ij = (x_i - xbar)' S^-1 (x_j - xbar) and

    * b1,p = (1/n^2) sum_{i,j} g_ij^3, with n b1,p / 6 ~ chi-square(p (p + 1) (p + 2) / 6);
    * b2,p = (1/n) sum_i g_ii^2, with (b2,p - p (p + 2)) / sqrt(8 p (p + 2) / n) ~ N(0, 1),
      tested two-sided.

    Both are large-sample approximations. In small samples the skewness test is conservative
    and b2,p is biased downwards (its exact null mean is p (p + 2) (n - 1) / (n + 1)); no
    small-sample correction is applied here.

    The data are centred, scaled to unit variance and whitened by the thin singular value
    decomposition of the centred data (Z = sqrt(n) U, so that Z'Z / n = I and g_ij = z_i' z_j);
    the pairwise sum of g_ij^3 is accumulated in blocks of rows, never as an n x n matrix.
    Both statistics are invariant under nonsingular affine maps X A + b.

    Above ``max_rows`` rows a seeded subsample of exactly ``max_rows`` rows is used; its size
    and seed are recorded in ``n_used`` and ``random_state``.

    Checked against an explicit double sum over pairs with the covariance inverse applied by
    a linear solve, against the third-moment-tensor identity
    b1,p = sum_{r,s,t} (mean_i z_ir z_is z_it)^2, and against squared Mahalanobis distances
    from :func:`scipy.spatial.distance.mahalanobis` (tests/test_normality_stats.py).

    References
    ----------
    .. [1] Mardia, K. V. (1970). Measures of multivariate skewness and kurtosis with
       applications. Biometrika, 57(3), 519-530.

    Examples
    --------
    >>> import numpy as np
    >>> from discaudit.stats.mardia import mardia
    >>> X = np.random.default_rng(0).normal(size=(200, 3))
    >>> res = mardia(X)
    >>> res.skew_df, res.n_used
    (10, 200)
    >>> bool(res.skew_p_value > 0.05 and res.kurt_p_value > 0.05)
    True

    Neither skewness nor kurtosis contradicts normality for this Gaussian sample.
    """
    values, names = as_matrix(X, min_rows=2)
    n_total, p = values.shape
    rows, seed = subsample_rows(n_total, max_rows, random_state, min_rows=p + 1)
    data = values if rows is None else values[rows]
    Z = whiten(data, names, statistic="Mardia's statistics", subsampled=rows is not None)
    cubed, _ = pair_sums(Z, cubes=True, kernel_b2=None)
    return mardia_from_whitened(Z, cubed, n_total=n_total, random_state=seed, max_rows=max_rows)


def mardia_from_whitened(
    Z: FloatMatrix, cubed_sum: float, *, n_total: int, random_state: int | None, max_rows: int
) -> MardiaResult:
    """Mardia's statistics from whitened rows ``Z`` and sum_{i,j} (z_i' z_j)^3 over their pairs.

    ``Z`` as :func:`discaudit.stats._sampling.whiten` returns it (mean 0, Z'Z / n = I);
    ``cubed_sum`` from :func:`discaudit.stats._sampling.pair_sums`. The rest describe the rows
    ``Z`` came from (as :func:`mardia` records them).
    """
    n, p = Z.shape
    sq_dist = np.einsum("ij,ij->i", Z, Z)
    skewness = cubed_sum / n**2
    kurtosis = float(np.mean(sq_dist**2))

    skew_df = p * (p + 1) * (p + 2) // 6
    skew_statistic = n * skewness / 6.0
    kurt_expected = float(p * (p + 2))
    kurt_statistic = (kurtosis - kurt_expected) / np.sqrt(8.0 * p * (p + 2) / n)
    return MardiaResult(
        skewness=float(skewness),
        kurtosis=kurtosis,
        skew_statistic=float(skew_statistic),
        skew_df=int(skew_df),
        skew_p_value=float(sp_stats.chi2.sf(skew_statistic, skew_df)),
        kurt_statistic=float(kurt_statistic),
        kurt_p_value=float(min(1.0, 2.0 * sp_stats.norm.sf(abs(kurt_statistic)))),
        kurt_expected=kurt_expected,
        n_used=int(n),
        n_total=int(n_total),
        n_features=int(p),
        random_state=random_state,
        max_rows=int(max_rows),
    )
