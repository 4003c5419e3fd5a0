"""Mardia's tests and the Henze-Zirkler test of one sample, from one whitening and one pass over its pairs.

Both statistics are sums over all pairs of whitened rows: Mardia's skewness of (z_i' z_j)^3, the
Henze-Zirkler statistic of a Gaussian kernel of ||z_i - z_j||^2 = z_i'z_i + z_j'z_j - 2 z_i'z_j. The
Gram blocks z_i' z_j are formed once for both (:func:`discaudit.stats._sampling.pair_sums`), which
is what an audit's normality check needs per class; the results equal those of :func:`mardia` and
:func:`henze_zirkler` called one after the other.
"""

from __future__ import annotations

from typing import Any

from discaudit.stats._inputs import as_matrix
from discaudit.stats._sampling import pair_sums, subsample_rows, whiten
from discaudit.stats.henze_zirkler import HenzeZirklerResult, henze_zirkler_from_whitened, smoothing
from discaudit.stats.mardia import MardiaResult, mardia_from_whitened

__all__ = ["mardia_and_henze_zirkler"]


def mardia_and_henze_zirkler(
    X: Any, *, max_rows: int = 5000, random_state: int | None = None
) -> tuple[MardiaResult, HenzeZirklerResult]:
    """Mardia's skewness and kurtosis tests and the Henze-Zirkler test on the same rows.

    Parameters
    ----------
    X : array-like or DataFrame, shape (n, p)
        Numeric data of one group (for an audit: one class); DataFrame column names are used in
        error messages.
    max_rows : int, default 5000
        Above this many rows both tests use one seeded random subsample of ``max_rows`` rows.
    random_state : int or None, default None
        Seed of the subsample (used only when n > ``max_rows``; None draws a fresh one, recorded
        in both results).

    Returns
    -------
    tuple of MardiaResult and HenzeZirklerResult
        Equal to ``mardia(X, ...)`` and ``henze_zirkler(X, ...)`` with the same arguments.

    Raises
    ------
    DataError
        As :func:`discaudit.stats.mardia.mardia`: non-numeric or non-finite data, n <= p, a
        constant column or collinear columns.

    References
    ----------
    .. [1] Mardia, K. V. (1970). Measures of multivariate skewness and kurtosis with
       applications. Biometrika, 57(3), 519-530.
    .. [2] Henze, N. and Zirkler, B. (1990). A class of invariant consistent tests for
       multivariate normality. Communications in Statistics - Theory and Methods, 19(10),
       3595-3617.
    """
    values, names = as_matrix(X, min_rows=2)
    n_total, p = values.shape
    rows, seed = subsample_rows(n_total, max_rows, random_state, min_rows=p + 1)
    data = values if rows is None else values[rows]
    Z = whiten(data, names, statistic="Mardia's and the Henze-Zirkler statistics", subsampled=rows is not None)
    cubed, kernel = pair_sums(Z, cubes=True, kernel_b2=smoothing(Z.shape[0], p) ** 2)
    return (
        mardia_from_whitened(Z, cubed, n_total=n_total, random_state=seed, max_rows=max_rows),
        henze_zirkler_from_whitened(Z, kernel, n_total=n_total, random_state=seed, max_rows=max_rows),
    )
