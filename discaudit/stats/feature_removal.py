"""Which features to remove to break a near dependency: VIFs after removing a feature, from one inverse.

Let R be the correlation matrix of p features and P = R^-1, so VIF_i = P_ii (Marquardt 1970).
Removing feature j leaves the correlation matrix R_{-j,-j}, whose inverse is the Schur complement
P_{-j,-j} - P_{-j,j} P_{j,-j} / P_jj (the inverse of a partitioned matrix; e.g. Golub & Van Loan,
Matrix Computations). tests/test_remedy_stats.py checks the result of every single removal against
statsmodels' ``variance_inflation_factor`` on the remaining columns. Hence the VIF of feature i once j is
gone is

    VIF_i^(-j) = P_ii - P_ij^2 / P_jj,

and the VIFs after every single removal follow from one inverse in O(p^2). Greedy backward
elimination removes, at each step, the candidate whose removal lowers the largest remaining VIF
most, until the largest VIF and the condition number are within the limits given.
"""

from __future__ import annotations

from collections.abc import Sequence
from dataclasses import dataclass

import numpy as np
import numpy.typing as npt
from scipy import linalg

from discaudit.stats._linalg import correlation_from_covariance
from discaudit.stats.condition_indices import condition_number_from_covariance
from discaudit.stats.vif import vif_from_covariance

FloatArray = npt.NDArray[np.float64]

#: Smallest Cholesky pivot of the correlation matrix for which the one-inverse formula is used; below it
#: (a near-exact dependency, VIFs near 1e14) every removal is evaluated by recomputing the VIFs.
_PIVOT_FLOOR = 1e-7


def vif_after_each_removal(S: FloatArray) -> FloatArray:
    """VIFs of every feature after removing each single feature, from a covariance matrix.

    Parameters
    ----------
    S : ndarray, shape (p, p)
        Covariance matrix with a positive diagonal (any scale: VIFs depend only on correlations).

    Returns
    -------
    ndarray, shape (p, p)
        Entry ``[j, i]``: VIF of feature i once feature j is removed; ``nan`` on the diagonal and
        ``inf`` for a feature still in an exact linear dependency.

    Notes
    -----
    From P = R^-1 by the Schur complement (module docstring) when the correlation matrix is
    comfortably positive definite; otherwise each removal is recomputed from its submatrix (so an
    exact dependency broken by the removal gives finite VIFs).
    """
    S = np.asarray(S, dtype=np.float64)
    p = S.shape[0]
    out = np.full((p, p), np.nan)
    if p == 1:
        return out
    if p == 2:
        out[0, 1] = out[1, 0] = 1.0
        return out
    R = correlation_from_covariance(S)
    try:
        L = linalg.cholesky(R, lower=True, check_finite=False)
        ok = bool(np.min(np.diag(L)) > _PIVOT_FLOOR)
    except linalg.LinAlgError:
        ok = False
    if ok:
        P = linalg.cho_solve((L, True), np.eye(p), check_finite=False)
        P = (P + P.T) / 2.0
        d = np.diag(P)
        after = d[None, :] - P * P / d[:, None]
        np.fill_diagonal(after, np.nan)
        return np.asarray(after, dtype=np.float64)
    for j in range(p):
        keep = np.flatnonzero(np.arange(p) != j)
        out[j, keep] = vif_from_covariance(S[np.ix_(keep, keep)])
    return out


@dataclass(frozen=True)
class BackwardElimination:
    """Features removed one at a time, each lowering the largest VIF most.

    Attributes
    ----------
    removed : tuple of str
        Features removed, in order.
    max_vif : tuple of float
        Largest VIF of the remaining features after each removal (``inf`` while an exact
        dependency remains).
    condition_number : tuple of float
        Condition number (largest condition index, Belsley, Kuh & Welsch) of the remaining
        features' correlation matrix after each removal.
    max_vif_before, condition_number_before : float
        The same before any removal.
    reached : bool
        Whether the last removal brought both within the limits (True with nothing removed
        when they already were).
    vif_limit, condition_limit : float
        The limits aimed at.
    """

    removed: tuple[str, ...]
    max_vif: tuple[float, ...]
    condition_number: tuple[float, ...]
    max_vif_before: float
    condition_number_before: float
    reached: bool
    vif_limit: float
    condition_limit: float


def _max_vif(S: FloatArray) -> float:
    if S.shape[0] < 2:
        return 1.0
    return float(np.max(vif_from_covariance(S)))


def _condition_number(S: FloatArray) -> float:
    if S.shape[0] < 2:
        return 1.0
    return condition_number_from_covariance(S)


def backward_elimination(
    S: FloatArray,
    names: Sequence[str],
    candidates: Sequence[str],
    vif_limit: float,
    condition_limit: float,
) -> BackwardElimination:
    """Remove candidates one at a time until the largest VIF and the condition number are within limits.

    Parameters
    ----------
    S : ndarray, shape (p, p)
        Covariance matrix of the features ``names`` (the pooled within-class covariance for LDA).
    names : sequence of str
        Feature names, in the order of ``S``.
    candidates : sequence of str
        Features that may be removed (e.g. those of a near dependency); ties go to the first listed.
    vif_limit, condition_limit : float
        Stop once the largest VIF is at most ``vif_limit`` and the condition number at most
        ``condition_limit``, or when no candidate is left (``reached`` is then False).

    Returns
    -------
    BackwardElimination

    Notes
    -----
    Each step scores every remaining candidate by the largest VIF left after removing it
    (:func:`vif_after_each_removal`, an infinite VIF counting as the largest) and removes the
    lowest. The figures reported after each removal are recomputed from the remaining submatrix
    (Cholesky of its correlation matrix), not carried through the update, so rounding does not
    accumulate over the steps.
    """
    names = list(names)
    keep = list(range(len(names)))
    pool = [names.index(c) for c in candidates if c in names]
    sub = S[np.ix_(keep, keep)]
    vif0, cond0 = _max_vif(sub), _condition_number(sub)
    removed: list[str] = []
    vifs: list[float] = []
    conds: list[float] = []
    current_vif, current_cond = vif0, cond0
    while (current_vif > vif_limit or current_cond > condition_limit) and pool and len(keep) > 1:
        after = vif_after_each_removal(S[np.ix_(keep, keep)])
        worst = np.where(np.isnan(after), -np.inf, after).max(axis=1)
        scored = [(float(worst[keep.index(j)]), rank, j) for rank, j in enumerate(pool)]
        _, _, chosen = min(scored)
        keep.remove(chosen)
        pool.remove(chosen)
        removed.append(names[chosen])
        sub = S[np.ix_(keep, keep)]
        current_vif, current_cond = _max_vif(sub), _condition_number(sub)
        vifs.append(current_vif)
        conds.append(current_cond)
    reached = current_vif <= vif_limit and current_cond <= condition_limit
    return BackwardElimination(
        tuple(removed), tuple(vifs), tuple(conds), vif0, cond0, bool(reached), float(vif_limit), float(condition_limit)
    )
