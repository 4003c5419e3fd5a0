"""Variance inflation factors (Marquardt 1970)."""

from __future__ import annotations

from typing import Any

import numpy as np
import numpy.typing as npt
import pandas as pd
from scipy import linalg

from discaudit.errors import DataError
from discaudit.stats._inputs import as_matrix, power_of_two_scaled
from discaudit.stats._linalg import correlation_from_covariance

FloatArray = npt.NDArray[np.float64]


def vif_from_covariance(S: FloatArray) -> FloatArray:
    """VIF of each variable from a covariance matrix: the diagonal of the inverse correlation.

    Computed from the Cholesky factor L of the correlation matrix R (``diag(R^-1)`` is the
    column sums of squares of ``L^-1``, obtained by a triangular solve). Variables involved
    in an exact linear dependency get ``inf``.
    """
    p = S.shape[0]
    if p == 1:
        return np.ones(1)
    R = correlation_from_covariance(S)
    try:
        L = linalg.cholesky(R, lower=True, check_finite=False)
        Linv = linalg.solve_triangular(L, np.eye(p), lower=True, check_finite=False)
        vifs = np.einsum("ij,ij->j", Linv, Linv)
        if np.all(np.isfinite(vifs)) and np.min(np.abs(np.diag(L))) > 1e-7:
            return np.asarray(vifs, dtype=np.float64)
    except linalg.LinAlgError:
        pass
    return _vif_near_singular(R)


def _vif_near_singular(R: FloatArray) -> FloatArray:
    """VIFs through the eigen-decomposition when R is (nearly) singular.

    diag(R^-1) = sum_k v_jk^2 / l_k; a variable with weight on a zero eigenvalue has an
    unbounded VIF and is reported as ``inf``.
    """
    values, vectors = np.linalg.eigh(R)
    zero = values <= R.shape[0] * np.finfo(np.float64).eps * max(values.max(), 1.0) * 10
    with np.errstate(divide="ignore"):
        finite_part = (vectors[:, ~zero] ** 2 / values[~zero]).sum(axis=1)
    involved = (vectors[:, zero] ** 2).sum(axis=1) > 1e-12
    return np.where(involved, np.inf, finite_part)


def vif(X: Any) -> pd.Series:
    """Variance inflation factor of each column.

    VIF_j = 1 / (1 - R_j^2), where R_j^2 comes from regressing column j on all the other
    columns *with an intercept*; equivalently the j-th diagonal element of the inverse of
    the correlation matrix.

    Parameters
    ----------
    X : array-like, shape (n, p)
        Numeric features; DataFrame column names label the result.

    Returns
    -------
    pandas.Series
        VIF per column (``inf`` for a column in an exact linear dependency).

    Raises
    ------
    DataError
        If a column is constant (its VIF is undefined: the column is named) or the input
        is not numeric.

    See Also
    --------
    condition_indices : locates each near dependency and the features involved in it.

    Notes
    -----
    Leaving the intercept out of the auxiliary regressions (a common pitfall with
    general-purpose functions that expect the caller to add a constant) gives uncentred,
    wrong values. Thresholds: VIF > 10 serious (Kutner et al.), > 5 worth a look (common
    practice). Checked against statsmodels' ``variance_inflation_factor`` on a design with
    a constant column (tests).

    References
    ----------
    Marquardt, D. W. (1970). Generalized inverses, ridge regression, biased linear estimation,
    and nonlinear estimation. Technometrics 12, 591-612.

    Examples
    --------
    >>> from sklearn.datasets import load_iris  # doctest: +SKIP
    >>> import pandas as pd  # doctest: +SKIP
    >>> vif(load_iris(as_frame=True).data).round(1).max() > 10  # doctest: +SKIP
    True

    Petal length and width are nearly collinear over the whole data set.
    """
    values, names = as_matrix(X)
    values = power_of_two_scaled(values)  # VIF is unit free
    centred = values - values.mean(axis=0)
    S = centred.T @ centred / (values.shape[0] - 1)
    constant = [names[j] for j in np.flatnonzero(np.diag(S) <= 0)]
    if constant:
        raise DataError(f"VIF is undefined for constant columns {constant}; drop them first.")
    return pd.Series(vif_from_covariance(S), index=names, name="vif")
