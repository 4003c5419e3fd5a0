"""Ties within a class before a robust fit: features with few distinct values, and exact-fit risk.

A high-breakdown fit such as the MCD rests on the h rows of a class whose covariance has the
smallest determinant, h = floor((n + p + 1) / 2) (Rousseeuw & Van Driessen 1999). When at least
h rows share one value of a feature they lie on a hyperplane, the smallest determinant is 0 and
the fit is *exact* on that hyperplane: every row off it gets an unbounded distance, which says
nothing about outlyingness (Rousseeuw & Leroy 1987, the exact-fit property). A feature with only
a handful of distinct values puts the rows on a few parallel hyperplanes and drives the fit
towards the same collapse. :func:`screen_ties` finds both, per feature, so that a caller can
fit on the continuous part and report the rest.

References
----------
Rousseeuw, P. J. & Leroy, A. M. (1987). Robust Regression and Outlier Detection. Wiley.

Rousseeuw, P. J. & Van Driessen, K. (1999). A fast algorithm for the minimum covariance
determinant estimator. Technometrics 41, 212-223.
"""

from __future__ import annotations

from dataclasses import dataclass

import numpy as np
import numpy.typing as npt

__all__ = ["TieScreen", "mcd_subset_size", "screen_ties"]


def mcd_subset_size(n: int, p: int) -> int:
    """h = floor((n + p + 1) / 2), the MCD subset size with the highest breakdown point."""
    return (n + p + 1) // 2


@dataclass(frozen=True)
class TieScreen:
    """Distinct values and modal shares of each feature within one class.

    Attributes
    ----------
    n : int
        Rows of the class.
    distinct : ndarray of int, shape (p,)
        Distinct values of each feature.
    modal_value, modal_count : ndarray, shape (p,)
        The most frequent value of each feature (the smallest, on a tie) and how many rows hold it.
    few_values : ndarray of bool, shape (p,)
        Fewer than ``min(min_distinct, ceil(n / 2))`` distinct values (a class of fewer than
        2 ``min_distinct`` rows cannot show ``min_distinct`` values without being continuous,
        so there a feature counts as few-valued when fewer than half its values are distinct).
    exact_fit : ndarray of bool, shape (p,)
        The modal value is held by at least h rows, h the subset size of a fit on the kept features
        (set for few-valued features too: it is the stronger reason to leave them out).
    kept : ndarray of bool, shape (p,)
        Neither (nor excluded by the caller): the continuous part a robust fit may use.
    h : int
        ``mcd_subset_size(n, kept.sum())``; 0 when nothing is kept.
    """

    n: int
    distinct: npt.NDArray[np.int64]
    modal_value: npt.NDArray[np.float64]
    modal_count: npt.NDArray[np.int64]
    few_values: npt.NDArray[np.bool_]
    exact_fit: npt.NDArray[np.bool_]
    kept: npt.NDArray[np.bool_]
    h: int


def screen_ties(
    X: npt.NDArray[np.float64], min_distinct: int, exclude: npt.NDArray[np.bool_] | None = None
) -> TieScreen:
    """Which features of one class can enter a high-breakdown fit.

    Parameters
    ----------
    X : ndarray, shape (n, p)
        The rows of one class.
    min_distinct : int
        A feature with fewer distinct values than this (or than half the rows, in a small class)
        is left out (``few_values``).
    exclude : ndarray of bool, shape (p,), optional
        Features the caller leaves out for its own reasons; they count neither as kept nor for h.

    Returns
    -------
    TieScreen

    Notes
    -----
    The exact-fit rule depends on h, and h on how many features are kept, so it is applied
    until nothing changes: leaving a feature out lowers h, which can put another modal value
    at or above h. At most p rounds.
    """
    n, p = X.shape
    distinct = np.zeros(p, dtype=np.int64)
    modal_value = np.zeros(p)
    modal_count = np.zeros(p, dtype=np.int64)
    for j in range(p):
        values, counts = np.unique(X[:, j], return_counts=True)
        distinct[j] = values.size
        top = int(np.argmax(counts))  # first maximum: the smallest modal value
        modal_value[j], modal_count[j] = float(values[top]), int(counts[top])
    few = distinct < min(min_distinct, -(-n // 2))
    kept = ~few if exclude is None else ~few & ~np.asarray(exclude, dtype=bool)
    exact = np.zeros(p, dtype=bool)
    for _ in range(p + 1):
        h = mcd_subset_size(n, int(kept.sum()))
        new_exact = kept & (modal_count >= h)
        if not new_exact.any():
            break
        exact |= new_exact
        kept &= ~new_exact
    h = mcd_subset_size(n, int(kept.sum())) if kept.any() else 0
    exact |= few & (modal_count >= mcd_subset_size(n, int(kept.sum())))
    return TieScreen(n, distinct, modal_value, modal_count, few, exact, kept, h)
