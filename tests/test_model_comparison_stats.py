"""The BIC/AIC covariance comparison and the shrinkage-retention measure, against independent routes."""

from __future__ import annotations

import numpy as np
import pytest
from scipy import stats as sps

from discaudit.stats.gaussian_bic import covariance_bic
from discaudit.stats.moments import ClassMoments
from discaudit.stats.shrinkage_retention import shrinkage_retention


def _moments(X: np.ndarray, y: np.ndarray) -> ClassMoments:
    classes = tuple(np.unique(y))
    codes = np.searchsorted(classes, y)
    return ClassMoments.from_arrays(X, codes, classes)


def test_log_likelihoods_match_scipy_multivariate_normal(iris) -> None:
    # Reference: scipy.stats.multivariate_normal log-densities at the MLE (divisor n) estimates.
    X, y = iris[0].to_numpy(), iris[1].to_numpy()
    res = covariance_bic(_moments(X, y))
    shared_cov = sum(np.cov(X[y == c], rowvar=False, bias=True) * (y == c).sum() for c in np.unique(y)) / len(y)
    ll_shared = sum(
        sps.multivariate_normal(X[y == c].mean(0), shared_cov).logpdf(X[y == c]).sum() for c in np.unique(y)
    )
    ll_sep = sum(
        sps.multivariate_normal(X[y == c].mean(0), np.cov(X[y == c], rowvar=False, bias=True)).logpdf(X[y == c]).sum()
        for c in np.unique(y)
    )
    assert res.loglik_shared == pytest.approx(ll_shared, rel=1e-10)
    assert res.loglik_separate == pytest.approx(ll_sep, rel=1e-10)
    k_extra = 2 * 4 * 5 // 2  # (K-1) p (p+1) / 2 extra covariance parameters for K = 3, p = 4
    assert res.delta_bic == pytest.approx(2 * (ll_sep - ll_shared) - k_extra * np.log(150), rel=1e-10)
    assert res.delta_aic == pytest.approx(2 * (ll_sep - ll_shared) - 2 * k_extra, rel=1e-10)


def _population_retained(delta: np.ndarray, R: np.ndarray, a: float) -> float:
    """Independent formula in the original coordinates: (w'd)^2 / (w'R w) / d'R^-1 d."""
    w = np.linalg.solve((1 - a) * R + a * np.eye(len(R)), delta)
    return float((w @ delta) ** 2 / (w @ R @ w) / (delta @ np.linalg.solve(R, delta)))


@pytest.mark.parametrize("a", [0.0, 0.2, 0.6])
def test_retention_matches_the_population_formula_at_large_n(a: float) -> None:
    rng = np.random.default_rng(1)
    p = 4
    A = rng.normal(size=(p, p))
    C = A @ A.T + np.eye(p)
    R = C / np.sqrt(np.outer(np.diag(C), np.diag(C)))  # a population correlation matrix
    L = np.linalg.cholesky(R)
    delta = np.array([0.6, -0.2, 0.3, 0.1])
    n = 200_000
    X = np.vstack([rng.normal(size=(n, p)) @ L.T, rng.normal(size=(n, p)) @ L.T + delta])
    y = np.repeat([0, 1], n)
    res = shrinkage_retention(_moments(X, y), a)
    assert res is not None
    assert res.retained == pytest.approx(_population_retained(delta, R, a), abs=0.01)


def test_retention_is_one_without_shrinkage_and_falls_when_signal_is_low_variance() -> None:
    rng = np.random.default_rng(2)
    n, p = 3000, 3
    R = np.array([[1.0, 0.95, 0.0], [0.95, 1.0, 0.0], [0.0, 0.0, 1.0]])
    L = np.linalg.cholesky(R)
    values, vectors = np.linalg.eigh(R)
    low, mid, high = vectors[:, 0], vectors[:, 1], vectors[:, 2]  # eigenvalues 0.05, 1, 1.95
    # The class difference has equal parts along two directions; shrinkage reweighs them, which
    # costs separation when one of them is the low-variance direction (population value about
    # 0.34 at a = 0.5) and hardly any when it is the high-variance one (about 0.98).
    for direction, expect_low in ((low, True), (high, False)):
        delta = 0.3 * direction + 0.3 * mid
        X = np.vstack([rng.normal(size=(n, p)) @ L.T, rng.normal(size=(n, p)) @ L.T + delta])
        m = _moments(X, np.repeat([0, 1], n))
        assert shrinkage_retention(m, 0.0).retained == pytest.approx(1.0, abs=1e-12)
        kept = shrinkage_retention(m, 0.5).retained
        assert kept == pytest.approx(_population_retained(delta, R, 0.5), abs=0.03)
        assert (kept < 0.5) if expect_low else (kept > 0.9)
