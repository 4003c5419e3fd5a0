"""Ledoit-Wolf shrinkage intensity for the pooled within-class covariance (Ledoit & Wolf 2004)."""

from __future__ import annotations

from typing import Any

import numpy as np
import numpy.typing as npt

from discaudit.errors import DataError
from discaudit.stats._inputs import as_labels, as_matrix
from discaudit.stats.moments import ClassMoments, class_centred_blocks

FloatArray = npt.NDArray[np.float64]


def class_centred_fourth_sums(
    X: FloatArray, codes: npt.NDArray[np.intp], means: FloatArray, scales: FloatArray
) -> FloatArray:
    """sum_i ||z_i||^4 for the class-centred rows z_i = (x_i - m_{k(i)}) / scale, for each scale.

    ``scales`` has one row per scale (S, p); the result has S sums, from one pass over X in
    blocks of rows (no second full copy of X): ||z_i||^2 = sum_j (x_ij - m_kj)^2 / scale_j^2.
    """
    inv_sq = (1.0 / np.atleast_2d(scales)) ** 2  # invert first: a scale of 2**996 squared overflows
    total = np.zeros(inv_sq.shape[0])
    for _, part in class_centred_blocks(X, codes, means):
        part *= part
        norms_sq = part @ inv_sq.T
        total += np.einsum("is,is->s", norms_sq, norms_sq)
    return total


def ledoit_wolf_intensity(within_scatter: FloatArray, n: int, fourth_sum: float) -> float:
    """Ledoit-Wolf intensity from the pooled scatter W, the row count and sum ||z_i||^4.

    The target is mu I with mu = trace(W/n)/p; the sample covariance has divisor n, as in
    Ledoit & Wolf (2004, lemma 3.2 and section 3.3) and scikit-learn's implementation.
    """
    p = within_scatter.shape[0]
    if p == 1:
        return 0.0
    emp = within_scatter / n
    mu = np.trace(emp) / p
    emp_norm2 = float(np.sum(emp**2))
    beta = (fourth_sum / n - emp_norm2) / (p * n)
    delta = (emp_norm2 - 2.0 * mu * np.trace(emp) + p * mu**2) / p
    beta = min(beta, delta)
    if beta <= 0.0 or delta <= 0.0:
        return 0.0
    return float(np.clip(beta / delta, 0.0, 1.0))


def shrinkage_intensity(X: Any, y: Any, *, standardize: bool = False) -> float:
    """Ledoit-Wolf shrinkage intensity of the pooled within-class covariance.

    Parameters
    ----------
    X : array-like, shape (n, p)
        Numeric features.
    y : array-like, shape (n,)
        Class labels.
    standardize : bool, default False
        False: the features as given (the CONTRACT's definition). True: each feature first
        divided by its pooled within-class standard deviation, the scale a shrinkage LDA
        that standardizes (as scikit-learn's does internally) works on.

    Returns
    -------
    float
        Intensity in [0, 1]: the weight on the scaled-identity target mu I in
        (1 - a) S + a mu I.

    Raises
    ------
    DataError
        If the input is not numeric or lengths differ.

    See Also
    --------
    discaudit.stats.condition_indices : whether the pooled covariance needs shrinking at all.

    Notes
    -----
    Each row is centred at its class mean; the pooled rows z_i give the sample covariance
    S = W / N (divisor N, as in Ledoit & Wolf and scikit-learn). With mu = tr(S)/p,
    d^2 = ||S - mu I||_F^2 / p and b^2 = (sum_i ||z_i||^4 / N - ||S||_F^2) / (p N), the
    intensity is min(b^2, d^2) / d^2. The intensity is not scale invariant: state which
    scale an estimator uses. Checked against scikit-learn's ``ledoit_wolf_shrinkage`` on
    class-centred iris and wine data (tests).

    References
    ----------
    Ledoit, O. & Wolf, M. (2004). A well-conditioned estimator for large-dimensional
    covariance matrices. Journal of Multivariate Analysis 88, 365-411.

    Examples
    --------
    >>> from sklearn.datasets import load_wine  # doctest: +SKIP
    >>> X, y = load_wine(return_X_y=True)  # doctest: +SKIP
    >>> 0 <= shrinkage_intensity(X, y, standardize=True) <= 1  # doctest: +SKIP
    True
    """
    values, _ = as_matrix(X)
    codes, classes = as_labels(y, values.shape[0])
    if len(classes) < 1:
        raise DataError("shrinkage_intensity needs at least one class.")
    moments = ClassMoments.from_arrays(values, codes, tuple(classes))
    return pooled_ledoit_wolf(values, codes, moments, standardize=standardize)


def pooled_ledoit_wolf(
    X: FloatArray, codes: npt.NDArray[np.intp], moments: ClassMoments, *, standardize: bool
) -> float:
    """Ledoit-Wolf intensity of the pooled within-class covariance from data and its moments.

    See :func:`pooled_ledoit_wolf_intensities`, which gives both variants in one pass.
    """
    return pooled_ledoit_wolf_intensities(X, codes, moments, (standardize,))[0]


def pooled_ledoit_wolf_intensities(
    X: FloatArray,
    codes: npt.NDArray[np.intp],
    moments: ClassMoments,
    standardize: tuple[bool, ...],
    exponents: npt.ArrayLike | None = None,
) -> tuple[float, ...]:
    """Intensities for each ``standardize`` flag, from one pass over the rows.

    The scales are :func:`ledoit_wolf_scales`'s; the intensities :func:`intensities_from_sums`'s.

    Raises
    ------
    DataError
        If a flag is True and a feature does not vary within classes.
    """
    scales = ledoit_wolf_scales(moments, standardize, exponents)
    if scales is None:
        return tuple(0.0 for _ in standardize)
    return intensities_from_sums(moments, scales, class_centred_fourth_sums(X, codes, moments.means, scales))


def ledoit_wolf_scales(
    moments: ClassMoments, standardize: tuple[bool, ...], exponents: npt.ArrayLike | None = None
) -> FloatArray | None:
    """The per-feature scale of each ``standardize`` flag, one row each; None when no feature varies.

    A True flag divides each feature by its pooled within-class standard deviation (divisor N).
    Without standardizing, all features are divided by one common power-of-two scale: the
    intensity is invariant to a common rescaling (numerator and denominator both scale by c^4),
    and fourth powers of large values would otherwise overflow. ``exponents`` says that feature j
    of the rows is ``x_j * 2**-exponents[j]`` (an exact rescaling of tiny values): the
    unstandardized intensity is then that of the x_j, in their own units.

    Raises
    ------
    DataError
        If a flag is True and a feature does not vary within classes.
    """
    W = moments.within_scatter
    sd = np.sqrt(np.diag(W) / moments.n_total)
    if any(standardize) and np.any(sd <= 0):
        raise DataError("standardize=True needs every feature to vary within classes.")
    if not sd.max() > 0:
        return None
    power = np.zeros(sd.shape, dtype=np.intp) if exponents is None else np.asarray(exponents, dtype=np.intp)
    with np.errstate(divide="ignore"):
        largest_log2 = float(np.max(np.log2(sd) + power))  # of the features in their own units
    with np.errstate(over="ignore"):  # a feature more than 2**1023 below the largest: scale inf, weight 0
        common = np.ldexp(1.0, int(np.round(largest_log2)) - power)
    return np.array([sd if flag else common for flag in standardize])


def intensities_from_sums(moments: ClassMoments, scales: FloatArray, fourth: FloatArray) -> tuple[float, ...]:
    """Ledoit-Wolf intensity for each row of ``scales``, given its sum of fourth powers ``fourth``."""
    W, N = moments.within_scatter, moments.n_total
    return tuple(
        # (W / s_i) / s_j, not W / (s_i s_j): that product overflows for a rescaled tiny feature
        ledoit_wolf_intensity(W / scale[:, None] / scale[None, :], N, float(f))
        for scale, f in zip(scales, fourth, strict=True)
    )
