"""Quantile skewness: a robust, bounded measure of asymmetry from three quantiles.

For 0 < alpha < 1/2, the quantile skewness of a distribution with quantile function Q is

    (Q(1 - alpha) + Q(alpha) - 2 Q(1/2)) / (Q(1 - alpha) - Q(alpha)),

which lies in [-1, 1], is 0 for a symmetric distribution, does not change under a change of
location or a positive rescaling, and is unaffected by a share alpha of arbitrarily large values
on either side (Hinkley 1975; with alpha = 1/4 it is Bowley's coefficient). With alpha = 1/8 (the
*octile skewness*, used by Brys, Hubert & Struyf 2004 as a robust benchmark) it reads the shape
of the central 75% of a feature, where a robust fit looks.

References
----------
Hinkley, D. V. (1975). On power transformations to symmetry. Biometrika 62, 101-111.

Brys, G., Hubert, M. & Struyf, A. (2004). A robust measure of skewness. Journal of Computational
and Graphical Statistics 13, 996-1017.
"""

from __future__ import annotations

import numpy as np
import numpy.typing as npt

__all__ = ["quantile_skewness"]


def quantile_skewness(X: npt.ArrayLike, alpha: float = 0.125) -> npt.NDArray[np.float64]:
    """Quantile skewness of each column of ``X`` (NaN for a column whose two outer quantiles coincide).

    Parameters
    ----------
    X : array-like, shape (n,) or (n, p)
        Finite values.
    alpha : float in (0, 1/2), default 1/8
        The outer quantiles are alpha and 1 - alpha.

    Returns
    -------
    ndarray, shape (p,) (a 0-d array for a one-dimensional input)

    Notes
    -----
    Quantiles are numpy's default (linear interpolation between order statistics, R's type 7).
    """
    if not 0.0 < alpha < 0.5:
        raise ValueError(f"alpha must lie in (0, 1/2); got {alpha!r}")
    low, mid, high = np.quantile(np.asarray(X, dtype=np.float64), [alpha, 0.5, 1.0 - alpha], axis=0)
    width = high - low
    with np.errstate(invalid="ignore", divide="ignore"):
        out = np.where(width > 0, (high + low - 2.0 * mid) / np.where(width > 0, width, 1.0), np.nan)
    return np.asarray(out, dtype=np.float64)
