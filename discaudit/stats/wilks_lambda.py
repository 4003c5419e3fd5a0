"""Wilks' Lambda with Rao's F approximation, and the discriminant eigenvalues."""

from __future__ import annotations

from dataclasses import dataclass
from typing import Any

import numpy as np
import numpy.typing as npt
from scipy import linalg
from scipy import stats as sps

from discaudit.errors import DataError
from discaudit.stats._inputs import as_labels, as_matrix, power_of_two_scaled
from discaudit.stats.moments import ClassMoments

FloatArray = npt.NDArray[np.float64]


@dataclass(frozen=True)
class WilksLambdaResult:
    """Wilks' Lambda test of equal class means.

    Attributes
    ----------
    statistic : float
        Lambda = det W / det(W + B) = prod 1 / (1 + l_i).
    f, df1, df2, p_value : float
        Rao's F approximation.
    eigenvalues : ndarray
        Eigenvalues l_i of W^-1 B (Fisher's criterion of each discriminant direction),
        the top min(p, K-1), descending.
    canonical_correlations : ndarray
        sqrt(l_i / (1 + l_i)).
    directions : ndarray, shape (p, min(p, K-1))
        Discriminant directions (W-orthonormal eigenvectors), matching ``eigenvalues``.
    """

    statistic: float
    f: float
    df1: float
    df2: float
    p_value: float
    eigenvalues: FloatArray
    canonical_correlations: FloatArray
    directions: FloatArray


def wilks_lambda_from_moments(moments: ClassMoments) -> WilksLambdaResult:
    """Wilks' Lambda from per-class moments; see :func:`wilks_lambda`.

    Raises
    ------
    DataError
        If the within-class scatter W is singular.
    """
    W, B = moments.within_scatter, moments.between_scatter
    p, K, N = moments.n_features, moments.n_classes, moments.n_total
    try:
        values, vectors = linalg.eigh(B, W, check_finite=False)
    except linalg.LinAlgError:
        raise DataError(
            "Wilks' Lambda needs a nonsingular pooled within-class covariance; drop constant or "
            f"collinear columns, or add rows (N - K = {N - K} for p = {p} features)."
        ) from None
    s = min(p, K - 1)
    order = np.argsort(values)[::-1][:s]
    eig = np.clip(values[order], 0.0, None)
    lam = float(np.exp(-np.log1p(eig).sum()))
    q = K - 1
    df1 = p * q
    w = N - 1 - (p + K) / 2.0
    denom = p**2 + q**2 - 5
    t = np.sqrt((p**2 * q**2 - 4) / denom) if denom > 0 else 1.0
    df2 = w * t - (p * q - 2) / 2.0
    root = lam ** (1.0 / t)
    f = (1.0 - root) / root * df2 / df1 if root > 0 else np.inf
    p_value = float(sps.f.sf(f, df1, df2)) if df2 > 0 else float("nan")
    return WilksLambdaResult(
        statistic=lam,
        f=float(f),
        df1=float(df1),
        df2=float(df2),
        p_value=p_value,
        eigenvalues=eig,
        canonical_correlations=np.sqrt(eig / (1.0 + eig)),
        directions=vectors[:, order],
    )


def wilks_lambda(X: Any, y: Any) -> WilksLambdaResult:
    """Wilks' Lambda test that all class means are equal, with Rao's F approximation.

    Null hypothesis: the K class mean vectors are equal (no discriminant signal).

    Parameters
    ----------
    X : array-like, shape (n, p)
        Numeric features.
    y : array-like, shape (n,)
        Class labels (at least two classes).

    Returns
    -------
    WilksLambdaResult

    Raises
    ------
    DataError
        If the input is not numeric, lengths differ, or W is singular.

    See Also
    --------
    box_m : tests the covariance half of LDA's model.

    Notes
    -----
    With q = K - 1 and w = N - 1 - (p + K)/2, Rao's F uses t = sqrt((p^2 q^2 - 4) /
    (p^2 + q^2 - 5)) (t = 1 when the denominator is not positive), df1 = pq,
    df2 = w t - (pq - 2)/2 and F = (1 - Lambda^(1/t)) / Lambda^(1/t) * df2/df1. The
    eigenvalues come from the symmetric-definite problem B v = l W v, so W is never
    inverted. The result is invariant to any nonsingular affine map of the features.
    Checked against statsmodels' MANOVA on the iris and wine data (tests).

    References
    ----------
    Wilks, S. S. (1932). Certain generalizations in the analysis of variance. Biometrika 24,
    471-494.
    Rao, C. R. (1951). An asymptotic expansion of the distribution of Wilks' criterion.
    Bulletin of the International Statistical Institute 33, 177-180.

    Examples
    --------
    >>> from sklearn.datasets import load_iris  # doctest: +SKIP
    >>> X, y = load_iris(return_X_y=True)  # doctest: +SKIP
    >>> wilks_lambda(X, y).statistic < 0.05  # doctest: +SKIP
    True

    Most of the variation in iris measurements lies between species.
    """
    values, _ = as_matrix(X)
    values = power_of_two_scaled(values)  # Lambda is invariant to rescaling a feature
    codes, classes = as_labels(y, values.shape[0])
    if len(classes) < 2:
        raise DataError(f"Wilks' Lambda needs at least two classes; y has {len(classes)}.")
    return wilks_lambda_from_moments(ClassMoments.from_arrays(values, codes, tuple(classes)))
