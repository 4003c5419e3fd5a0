"""The six deterministic starts of DetMCD (Hubert, Rousseeuw & Verdonck 2012) and the tau-scale.

DetMCD replaces the random (p+1)-subsets of FAST-MCD by six robust, affine-nonequivariant but
deterministic estimates of the correlation structure of the robustly standardized data. Each
is turned into an initial subset of the h0 = ceil(n/2) most central rows; the caller improves
those subsets by C-steps (:mod:`discaudit.stats.mcd`). Everything here is a symmetric function
of the rows (medians, ranks, sums), so the starts do not depend on the row order.

This module needs only numpy and scipy.
"""

from __future__ import annotations

import math
from dataclasses import dataclass

import numpy as np
import numpy.typing as npt
from scipy import special
from scipy import stats as sp_stats

from discaudit.stats._inputs import FloatMatrix

__all__ = ["DetStarts", "detmcd_starts", "tau_consistency", "tau_scale"]

FloatVector = npt.NDArray[np.float64]
IndexVector = npt.NDArray[np.intp]

#: Tuning constants of the tau-scale: c1 for the bisquare location weights, c2 for the
#: truncated squares (Yohai & Zamar 1988; the values used by Maronna & Zamar 2002).
#: Second source: the defaults c1 = 4.5, c2 = 3 of robustbase's ``scaleTau2``; our scale is
#: checked against its values in tests/test_detmcd.py (tests/reference/mcd_robustbase.json).
TAU_C1 = 4.5
TAU_C2 = 3.0
#: Phi^{-1}(3/4): the median absolute deviation of N(0, 1), computed (not a typed constant).
_MAD_NORMAL = float(sp_stats.norm.ppf(0.75))
#: Offset of the normal scores Phi^{-1}((R - 1/3) / (n + 1/3)) of start 3 (Hubert, Rousseeuw &
#: Verdonck 2012). Source: robustbase 0.95.0's ``r6pack``, which computes the DetMCD starts:
#: ``y3 <- qnorm((apply(x, 2L, rank) - 1/3)/(n + 1/3))`` (print ``robustbase:::r6pack`` in R);
#: tests/test_detmcd.py checks our normal scores against values R computed with that line.
_NORMAL_SCORE_OFFSET = 1.0 / 3.0
#: Elements of the temporary (n, pairs) arrays of the OGK pairwise scales.
_PAIR_BLOCK_ELEMENTS = 1 << 22

#: Names of the six starts, in the order of the paper.
START_NAMES = (
    "tanh correlation",
    "Spearman correlation",
    "normal scores correlation",
    "spatial sign covariance",
    "BACON start",
    "raw OGK",
)


def tau_consistency(c: float) -> float:
    """E[min(X^2, c^2)] for X ~ N(0, 1): 2 ((1 - c^2) Phi(c) - c phi(c) + c^2) - 1.

    From E[X^2; |X| <= c] = 2 Phi(c) - 1 - 2 c phi(c) and P(|X| > c) = 2 (1 - Phi(c)).
    tests/test_detmcd.py checks it against numerical integration.
    """
    phi = math.exp(-0.5 * c * c) / math.sqrt(2.0 * math.pi)
    big_phi = float(special.ndtr(c))
    return 2.0 * ((1.0 - c * c) * big_phi - c * phi + c * c) - 1.0


#: The tau-scale with the raw MAD s0 estimates sqrt(E[min(X^2, (c2 q)^2)]) sigma at the normal,
#: q = Phi^{-1}(3/4) (s0 tends to q sigma); dividing by it makes the scale consistent for sigma.
_TAU_NORMAL = math.sqrt(tau_consistency(TAU_C2 * _MAD_NORMAL))


def tau_scale(X: FloatMatrix, *, consistent: bool = True) -> FloatVector:
    """Column-wise tau-scale of Yohai & Zamar (1988), one step from the median and the MAD.

    With mu0 the median and s0 the (raw) median absolute deviation of a column, the bisquare
    weights w_i = (1 - ((x_i - mu0) / (c1 s0))^2)^2 (zero beyond c1 s0) give the location
    mu = sum w_i x_i / sum w_i, and the scale is
    s0 * sqrt(mean(min(((x_i - mu) / s0)^2, c2^2))), with c1 = 4.5 and c2 = 3 (the version
    used by Maronna & Zamar 2002). ``consistent=True`` divides it by its value at N(0, 1)
    so that it estimates the standard deviation of normal data.

    Parameters
    ----------
    X : ndarray of shape (n, m)
        Columns to measure.
    consistent : bool, default True
        Divide by the asymptotic value at the standard normal.

    Returns
    -------
    ndarray of shape (m,)
        The scales; 0 for a column whose MAD is 0 (at least half its values equal).

    References
    ----------
    Yohai, V. J. and Zamar, R. H. (1988). High breakdown-point estimates of regression by
    means of the minimization of an efficient scale. Journal of the American Statistical
    Association 83, 406-413.

    Maronna, R. A. and Zamar, R. H. (2002). Robust estimates of location and dispersion for
    high-dimensional datasets. Technometrics 44, 307-317.
    """
    scale = _tau_rows(np.ascontiguousarray(np.asarray(X, dtype=np.float64).T))
    return scale / _TAU_NORMAL if consistent else scale


def _row_medians(A: FloatMatrix) -> FloatVector:
    """Median of each row (the mean of the two middle values for an even length)."""
    n = A.shape[1]
    k = n // 2
    P = np.partition(A, k, axis=1)
    if n % 2:
        return np.asarray(P[:, k], dtype=np.float64)
    return np.asarray((P[:, k] + P[:, :k].max(axis=1)) / 2.0, dtype=np.float64)


def _tau_rows(Y: FloatMatrix) -> FloatVector:
    """Tau-scale (not divided by its normal value) of each row of a C-contiguous (m, n) array."""
    med = _row_medians(Y)
    D = Y - med[:, None]
    A = np.abs(D)
    s0 = _row_medians(A)
    ok = s0 > 0
    safe = np.where(ok, s0, 1.0)
    # In place: A becomes the bisquare weights (1 - (|d| / (c1 s0))^2)_+^2.
    A /= (TAU_C1 * safe)[:, None]
    np.minimum(A, 1.0, out=A)  # beyond c1 s0 the weight is 0 either way; clipping keeps squares finite
    np.square(A, out=A)
    np.subtract(1.0, A, out=A)
    np.maximum(A, 0.0, out=A)
    np.square(A, out=A)
    shift = np.einsum("ij,ij->i", A, D) / A.sum(axis=1)  # mu - mu0
    D -= shift[:, None]
    D /= safe[:, None]
    np.abs(D, out=D)
    np.minimum(D, TAU_C2, out=D)  # min(d^2, c2^2) as min(|d|, c2)^2: no square can overflow
    np.square(D, out=D)
    return np.where(ok, safe * np.sqrt(D.mean(axis=1)), 0.0)


@dataclass(frozen=True)
class DetStarts:
    """The initial h0-subsets of DetMCD.

    Attributes
    ----------
    names : tuple of str
        Names of the starts that could be formed (see ``START_NAMES``).
    subsets : ndarray of int, shape (k, h0)
        Row indices (sorted) of the h0 most central rows of each start.
    skipped : tuple of str
        Starts that could not be formed, with the reason (a projection with zero scale).
    """

    names: tuple[str, ...]
    subsets: IndexVector
    skipped: tuple[str, ...]


def detmcd_starts(X: FloatMatrix, h0: int, fit_rows: IndexVector | None = None) -> DetStarts | None:
    """The six DetMCD starts as subsets of the h0 most central rows.

    Steps (Hubert, Rousseeuw & Verdonck 2012; the same six starts as robustbase 0.95.0's ``r6pack``):

    1. Standardize each column by its median and robust scale: z_ij = (x_ij - med_j) / s_j.
    2. Six estimates S_k of the shape of Z:
       (1) the correlation matrix of tanh(Z) (Pearson correlation of the transformed columns);
       (2) the Spearman correlation (of the column ranks, ties averaged);
       (3) the correlation of the normal scores Phi^{-1}((R_ij - 1/3) / (n + 1/3));
       (4) the spatial sign covariance (1/n) sum k_i k_i' with k_i = z_i / ||z_i|| (Visuri,
       Koivunen & Oja 2000);
       (5) the covariance of the ceil(n/2) rows of Z with the smallest Euclidean norm (the
       first step of BACON, Billor, Hadi & Velleman 2000);
       (6) the raw OGK estimate (Maronna & Zamar 2002): the Gnanadesikan-Kettenring matrix
       u_jk = (s(z_j + z_k)^2 - s(z_j - z_k)^2) / 4.
    3. For each S_k: with E its eigenvectors and B = Z E, the scatter
       Sigma_k = E diag(s(B_1)^2, ..., s(B_p)^2) E' (for start 6 this is the raw OGK scatter)
       and the location mu_k = Sigma_k^{1/2} med(Z Sigma_k^{-1/2}) (coordinate-wise median of
       the sphered data); the start is the h0 = ceil(n/2) rows with the smallest distances
       from (mu_k, Sigma_k).

    The scale s is the tau-scale (:func:`tau_scale`). The paper recommends Qn (Rousseeuw &
    Croux 1993) for n < 1000 and the tau-scale for larger n (so does the documentation of
    robustbase's ``covMcd``, rule "hrv2012"); we use the tau-scale at every n
    because it costs O(n) and is vectorized over columns, while an exact Qn costs
    O(n log n) per column and the starts need 7p + p(p-1) scales.

    Parameters
    ----------
    X : ndarray of shape (n, p)
        Data without constant columns.
    h0 : int
        Rows in each initial subset (ceil(n/2) in the paper).
    fit_rows : ndarray of int or None, default None
        Compute the standardization and the six estimates from these rows only (all rows if
        None); the subsets are still the h0 most central of all rows. The paper uses all rows;
        :func:`discaudit.stats.mcd.mcd` passes a subsample when n is large, to bound the cost.

    Returns
    -------
    DetStarts or None
        None when a column has zero robust scale (at least half its values are equal): the
        standardization is undefined and the caller falls back to random starts.

    References
    ----------
    Hubert, M., Rousseeuw, P. J. and Verdonck, T. (2012). A deterministic algorithm for robust
    location and scatter. Journal of Computational and Graphical Statistics 21, 618-637.

    Visuri, S., Koivunen, V. and Oja, H. (2000). Sign and rank covariance matrices. Journal of
    Statistical Planning and Inference 91, 557-575.

    Billor, N., Hadi, A. S. and Velleman, P. F. (2000). BACON: blocked adaptive
    computationally efficient outlier nominators. Computational Statistics & Data Analysis
    34, 279-298.

    Maronna, R. A. and Zamar, R. H. (2002). Robust estimates of location and dispersion for
    high-dimensional datasets. Technometrics 44, 307-317.

    Rousseeuw, P. J. and Croux, C. (1993). Alternatives to the median absolute deviation.
    Journal of the American Statistical Association 88, 1273-1283.
    """
    Xt = np.ascontiguousarray(X.T)
    Ft = Xt if fit_rows is None else np.ascontiguousarray(Xt[:, fit_rows])
    m = Ft.shape[1]
    s = _tau_rows(Ft) / _TAU_NORMAL
    if not (s > 0).all():
        return None
    med = _row_medians(Ft)[:, None]
    Zt = (Xt - med) / s[:, None]
    Zf = Zt if fit_rows is None else (Ft - med) / s[:, None]
    Z = Zf.T
    ranks = _ranks(Z)
    estimates = (
        _correlation(np.tanh(Z)),
        _correlation(ranks),
        _correlation(special.ndtri((ranks - _NORMAL_SCORE_OFFSET) / (m + _NORMAL_SCORE_OFFSET))),
        _spatial_sign_covariance(Z),
        _bacon_covariance(Z, -(-m // 2)),
        _gnanadesikan_kettenring(Zf),
    )
    names: list[str] = []
    subsets: list[IndexVector] = []
    skipped: list[str] = []
    for name, S in zip(START_NAMES, estimates, strict=True):
        subset = _central_subset(Zf, Zt, S, h0)
        if subset is None:
            skipped.append(f"{name}: a principal direction has zero robust scale")
            continue
        names.append(name)
        subsets.append(subset)
    stacked = np.array(subsets, dtype=np.intp).reshape(len(subsets), h0)
    return DetStarts(tuple(names), stacked, tuple(skipped))


def _ranks(Z: FloatMatrix) -> FloatMatrix:
    """Column ranks 1..n, ties averaged."""
    return np.asarray(sp_stats.rankdata(Z, axis=0), dtype=np.float64)


def _correlation(Y: FloatMatrix) -> FloatMatrix:
    """Pearson correlation matrix of the columns (centred sums; a zero-variance column gets 0)."""
    C = Y - Y.mean(axis=0)
    S = C.T @ C
    sd = np.sqrt(np.diag(S))
    sd = np.where(sd > 0, sd, 1.0)
    R = S / np.outer(sd, sd)
    return np.asarray((R + R.T) / 2.0, dtype=np.float64)


def _spatial_sign_covariance(Z: FloatMatrix) -> FloatMatrix:
    """(1/n) sum k_i k_i' with k_i = z_i / ||z_i|| (k_i = 0 for z_i = 0)."""
    norm = np.sqrt(np.einsum("ij,ij->i", Z, Z))
    K = Z / np.where(norm > 0, norm, 1.0)[:, None]
    return np.asarray(K.T @ K / Z.shape[0], dtype=np.float64)


def _bacon_covariance(Z: FloatMatrix, h0: int) -> FloatMatrix:
    """Covariance (centred) of the h0 rows of Z closest to the origin (the coordinate-wise median)."""
    norm2 = np.einsum("ij,ij->i", Z, Z)
    rows = np.argpartition(norm2, h0 - 1)[:h0]
    C = Z[rows] - Z[rows].mean(axis=0)
    return np.asarray(C.T @ C / h0, dtype=np.float64)


def _gnanadesikan_kettenring(Zt: FloatMatrix) -> FloatMatrix:
    """u_jk = (s(z_j + z_k)^2 - s(z_j - z_k)^2) / 4, u_jj = s(z_j)^2 (Maronna & Zamar 2002).

    ``Zt`` holds the standardized columns as rows (p, n).
    """
    p, n = Zt.shape
    U = np.diag(np.square(_tau_rows(Zt) / _TAU_NORMAL))
    j, k = np.triu_indices(p, 1)
    step = max(1, _PAIR_BLOCK_ELEMENTS // max(1, 2 * n))
    for a in range(0, j.size, step):
        jj, kk = j[a : a + step], k[a : a + step]
        plus = _tau_rows(Zt[jj] + Zt[kk]) / _TAU_NORMAL
        minus = _tau_rows(Zt[jj] - Zt[kk]) / _TAU_NORMAL
        U[jj, kk] = U[kk, jj] = (plus * plus - minus * minus) / 4.0
    return np.asarray(U, dtype=np.float64)


def _central_subset(Zf: FloatMatrix, Zt: FloatMatrix, S: FloatMatrix, h0: int) -> IndexVector | None:
    """The h0 rows of ``Zt`` closest to (mu, Sigma) built from S and the rows ``Zf``.

    ``Zf`` (the rows the estimates came from) and ``Zt`` (all rows) hold standardized data
    transposed, (p, m) and (p, n). Sigma and mu come from the projections of ``Zf`` on the
    eigenvectors of S (see detmcd_starts). None when a projection has zero robust scale.
    """
    _, E = np.linalg.eigh((S + S.T) / 2.0)
    Bt = E.T @ Zf
    scale = _tau_rows(Bt) / _TAU_NORMAL
    if not (scale > 0).all():
        return None
    # (Z Sigma^{-1/2})' with the symmetric root Sigma^{-1/2} = E diag(1/scale) E'.
    root = (E / scale) @ E.T
    centre = _row_medians(root @ Zf)
    Wt = root @ Zt
    Wt -= centre[:, None]
    d = np.einsum("ij,ij->j", Wt, Wt)
    return np.sort(np.argpartition(d, h0 - 1)[:h0]).astype(np.intp)
