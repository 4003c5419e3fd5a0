"""Squared Mahalanobis distances under two metrics in one pass, against scipy's cdist.

Reference: ``scipy.spatial.distance.cdist(..., "mahalanobis", VI=inverse covariance)``, squared,
a computation of its own (the quadratic form with the inverse, no Cholesky factor).
"""

from __future__ import annotations

import numpy as np
import pytest
from scipy.spatial.distance import cdist

from discaudit.stats._linalg import cholesky_or_none, sq_distances_two_metrics
from discaudit.stats.blocks import ROW_BLOCK


def _spd(rng: np.random.Generator, p: int, scale: float) -> np.ndarray:
    A = rng.normal(size=(p, p))
    return scale * (A @ A.T / p + 0.5 * np.eye(p))


def _reference(X: np.ndarray, centre: np.ndarray, cov: np.ndarray) -> np.ndarray:
    return cdist(X, centre[None, :], "mahalanobis", VI=np.linalg.inv(cov))[:, 0] ** 2


@pytest.mark.parametrize("columns", [None, np.array([0, 2, 3, 5], dtype=np.intp)])
def test_both_metrics_match_scipy_on_chosen_rows_and_columns(columns: np.ndarray | None) -> None:
    rng = np.random.default_rng(21)
    n, p = ROW_BLOCK + 1500, 6  # more than one block of rows
    X = rng.normal(size=(n, p)) * rng.uniform(0.1, 50.0, size=p) + rng.normal(scale=100.0, size=p)
    rows = np.sort(rng.choice(n, size=ROW_BLOCK + 700, replace=False)).astype(np.intp)
    q = p if columns is None else columns.size
    on = X[rows] if columns is None else X[rows][:, columns]
    c1, c2 = on.mean(axis=0), np.median(on, axis=0) + 0.3
    S1, S2 = np.cov(on.T) * 0.8, _spd(rng, q, 40.0)
    L1, L2 = cholesky_or_none(S1), cholesky_or_none(S2)
    assert L1 is not None and L2 is not None
    d1, d2 = sq_distances_two_metrics(X, rows, columns, (c1, L1), (c2, L2))
    np.testing.assert_allclose(d1, _reference(on, c1, S1), rtol=1e-9)
    np.testing.assert_allclose(d2, _reference(on, c2, S2), rtol=1e-9)


def test_cholesky_or_none_refuses_a_singular_matrix() -> None:
    v = np.array([1.0, 2.0, 3.0])
    assert cholesky_or_none(np.outer(v, v)) is None
    L = cholesky_or_none(np.diag([4.0, 9.0]))
    assert L is not None
    np.testing.assert_allclose(L, np.diag([2.0, 3.0]))
