"""The Yeo-Johnson power transformation and its maximum-likelihood exponent (Yeo & Johnson 2000).

    psi(x, l) = ((x + 1)^l - 1) / l                 x >= 0, l != 0
                log(x + 1)                          x >= 0, l == 0
                -((1 - x)^(2 - l) - 1) / (2 - l)    x < 0,  l != 2
                -log(1 - x)                         x < 0,  l == 2

It is continuous in x and l, strictly increasing in x (so it keeps distinct values distinct), and
reduces to the Box-Cox transformation of x + 1 for x >= 0. The exponent is chosen by maximizing
the normal profile log-likelihood of the transformed values,

    l(lambda) = -(n / 2) log sigma^2(lambda) + (lambda - 1) sum_i sign(x_i) log(1 + |x_i|),

where the second term is the log-Jacobian. With class codes given, sigma^2 is the pooled
within-class variance (divisor n) of the transformed values about their class means: the model
is then "normal within each class with a shared variance", which is what LDA assumes of each
feature, and differences between class means do not pull the exponent.
"""

from __future__ import annotations

from dataclasses import dataclass

import numpy as np
import numpy.typing as npt
from scipy import optimize

from discaudit.errors import DataError

FloatArray = npt.NDArray[np.float64]

#: Search interval of the exponent (design choice). The transform acts on the values as given, so
#: features on a small scale (reflectances in [0, 1], say) need exponents far from 1 to change their
#: shape; beyond +-12 the powers of values in the thousands near float64's range, and exponents
#: at which the transform overflows score minus infinity. scipy's yeojohnson_normmax searches from
#: a (-2, 2) bracket outwards.
LAMBDA_BOUNDS = (-12.0, 12.0)
_EXACT = 1e-12
#: Transformed values beyond this magnitude would overflow when squared: such exponents are ruled out.
_LARGEST = 1e150
#: The score of an exponent ruled out: finite, so the optimizer's arithmetic stays finite (no warnings).
_PENALTY = 1e300


def yeo_johnson(x: npt.ArrayLike, lmbda: float) -> FloatArray:
    """The Yeo-Johnson transform of ``x`` with exponent ``lmbda`` (see the module docstring).

    Uses ``expm1`` and ``log1p`` so values near 0 and exponents near 0 or 2 lose no precision.
    """
    x = np.asarray(x, dtype=np.float64)
    out = np.empty_like(x)
    pos = x >= 0
    xp, xn = x[pos], x[~pos]
    with np.errstate(over="ignore"):  # beyond float64 the transform is inf, which callers test for
        if abs(lmbda) < _EXACT:
            out[pos] = np.log1p(xp)
        else:
            out[pos] = np.expm1(lmbda * np.log1p(xp)) / lmbda
        if abs(lmbda - 2.0) < _EXACT:
            out[~pos] = -np.log1p(-xn)
        else:
            out[~pos] = -np.expm1((2.0 - lmbda) * np.log1p(-xn)) / (2.0 - lmbda)
    return out


@dataclass(frozen=True)
class YeoJohnsonFit:
    """The maximum-likelihood exponent of one feature.

    Attributes
    ----------
    lmbda : float
        The exponent.
    log_likelihood : float
        Profile log-likelihood at ``lmbda`` (additive constants dropped).
    log_likelihood_identity : float
        The same at lambda = 1 (no transformation), for a likelihood-ratio comparison.
    n_used : int
        Rows the exponent was estimated on.
    variance : str
        ``"pooled within-class"`` or ``"total"``: which variance the likelihood used.
    """

    lmbda: float
    log_likelihood: float
    log_likelihood_identity: float
    n_used: int
    variance: str


def _log_likelihood(x: FloatArray, codes: npt.NDArray[np.intp] | None, jacobian: float, lmbda: float) -> float:
    t = yeo_johnson(x, lmbda)
    if not np.all(np.isfinite(t)) or not np.all(np.abs(t) < _LARGEST):
        return -_PENALTY
    if codes is None:
        resid = t - t.mean()
        var = float(np.mean(resid * resid))
    else:
        # Per-class sums (each in the rows' sorted order), added in sorted order: no sum depends on how
        # the classes are numbered or the rows ordered.
        sums = np.bincount(codes, weights=t)
        counts = np.bincount(codes)
        resid = t - (sums / np.maximum(counts, 1))[codes]
        var = float(np.sort(np.bincount(codes, weights=resid * resid)).sum() / x.size)
    if not 0 < var < np.inf:
        return -_PENALTY
    return float(-0.5 * x.size * np.log(var) + (lmbda - 1.0) * jacobian)


def yeo_johnson_lambda(x: npt.ArrayLike, codes: npt.ArrayLike | None = None) -> YeoJohnsonFit:
    """Maximum-likelihood Yeo-Johnson exponent of one feature.

    Parameters
    ----------
    x : array-like, shape (n,)
        Finite values of one feature.
    codes : array-like of int, shape (n,), optional
        Class codes 0..K-1. When given, the likelihood is that of normal classes with their own
        means and one shared variance (pooled within-class, divisor n); otherwise of one normal
        sample (total variance, divisor n), as ``scipy.stats.yeojohnson_normmax``.

    Returns
    -------
    YeoJohnsonFit

    Raises
    ------
    DataError
        If the values are not finite or do not vary (within classes, when codes are given).

    Notes
    -----
    Bounded Brent search over :data:`LAMBDA_BOUNDS` (``scipy.optimize.minimize_scalar``, absolute
    tolerance 1e-8); exponents at which the transform overflows (or its squares would) are ruled out.

    References
    ----------
    Yeo, I.-K. & Johnson, R. A. (2000). A new family of power transformations to improve normality
    or symmetry. Biometrika 87, 954-959.
    """
    values = np.asarray(x, dtype=np.float64).ravel()
    if not np.all(np.isfinite(values)):
        raise DataError("The Yeo-Johnson exponent needs finite values.")
    c = None if codes is None else np.asarray(codes, dtype=np.intp).ravel()
    if c is not None and c.size != values.size:
        raise DataError(f"codes has {c.size} entries for {values.size} values; they must match.")
    # Sums in a canonical order (by value): the exponent, an optimizer's output that rounding moves in its
    # eighth digit, is then the same whatever the order of the rows and the numbering of the classes.
    order = np.argsort(values, kind="stable")
    values = values[order]
    c = None if c is None else c[order]
    jacobian = float(np.sum(np.sign(values) * np.log1p(np.abs(values))))
    if not _log_likelihood(values, c, jacobian, 1.0) > -_PENALTY:
        raise DataError("The values do not vary, so no Yeo-Johnson exponent can be estimated.")
    result = optimize.minimize_scalar(
        lambda lam: -_log_likelihood(values, c, jacobian, float(lam)),
        bounds=LAMBDA_BOUNDS,
        method="bounded",
        options={"xatol": 1e-8},
    )
    lmbda = float(result.x)
    return YeoJohnsonFit(
        lmbda=lmbda,
        log_likelihood=_log_likelihood(values, c, jacobian, lmbda),
        log_likelihood_identity=_log_likelihood(values, c, jacobian, 1.0),
        n_used=int(values.size),
        variance="total" if c is None else "pooled within-class",
    )
