"""Three small seeded scenarios whose best model is not in doubt, for a fast end-to-end test.

>>> from benchmarks.validation.quick import unambiguous_scenarios   # doctest: +SKIP
>>> for name, X, y, expected in unambiguous_scenarios():           # doctest: +SKIP
...     assert discaudit.preflight(X, y).recommendation.model == expected

``clean_equal_gaussian`` -> ``"lda"``
    Four Gaussian classes with one shared AR(1) correlation (rho = 0.6, p = 10, 50 rows per
    class, 20 rows per feature); the class means differ along the covariance's low-variance
    directions (mean pairwise Mahalanobis distance 3.5), so shrinkage towards a spherical
    target costs a little, logistic regression is less efficient, and QDA pays for 3 x 55
    covariance parameters it does not need.
``crowded_equal_gaussian`` -> ``"regularized_lda"`` or ``"logistic_regression"``
    Two Gaussian classes, p = 40 features, 25 rows per class (N - K = 48, just above p):
    plain LDA inverts a nearly singular pooled covariance; QDA cannot be fit at all.
``large_unequal_covariance`` -> ``"qda"``
    Two Gaussian classes, p = 4, 1500 rows per class, nearly equal means but covariances
    that differ in scale (about 4-fold) and orientation: only a quadratic boundary separates them.

This module depends on numpy only, so a test can import it without the rest of the study.
Every case is seeded: the population from ``_POPULATION_SEED``, the training rows from
``seed`` (default 0), the test rows (``unambiguous_cases``) from ``seed + 10_000``. The
study (``study.py``) checks each answer against the truth and reports the numbers.
"""

from __future__ import annotations

from collections.abc import Callable

import numpy as np

_POPULATION_SEED = 20240


def _correlation(rng: np.random.Generator, p: int, strength: float) -> np.ndarray:
    A = rng.standard_normal((p, p))
    S = np.eye(p) + strength * (A @ A.T) / p
    d = np.sqrt(np.diag(S))
    return S / np.outer(d, d)


def _draw(rng, means, covs, counts):
    X = np.vstack([rng.multivariate_normal(m, c, size=n, method="cholesky") for m, c, n in zip(means, covs, counts)])
    y = np.repeat(np.arange(len(counts)), counts)
    order = rng.permutation(len(y))
    return X[order], y[order]


def _clean_equal(rng):
    p, K, rho = 10, 4, 0.6
    idx = np.arange(p)
    cov = rho ** np.abs(idx[:, None] - idx[None, :])  # AR(1) correlation, largest VIF about 2.3
    w, V = np.linalg.eigh(cov)
    low = V[:, :4] * np.sqrt(w[:4])  # the four lowest-variance directions, whitened
    Z = rng.standard_normal((K, 4))
    Z -= Z.mean(axis=0)
    Z *= 3.5 / np.mean([np.linalg.norm(Z[i] - Z[j]) for i in range(K) for j in range(i + 1, K)])
    return Z @ low.T, [cov] * K, 50


def _crowded(rng):
    p = 40
    cov = _correlation(rng, p, 0.5)
    d = rng.standard_normal(p)
    d *= 3.0 / np.sqrt(d @ np.linalg.solve(cov, d))
    return np.vstack([-d / 2, d / 2]), [cov, cov], 25


def _unequal(rng):
    p = 4
    base = _correlation(rng, p, 0.5)
    Q, R = np.linalg.qr(rng.standard_normal((p, p)))
    Q *= np.sign(np.diag(R))
    other = (
        4.0 * Q @ np.diag(np.exp(rng.uniform(-0.7, 0.7, p))) @ base @ np.diag(np.exp(rng.uniform(-0.7, 0.7, p))) @ Q.T
    )
    other = (other + other.T) / 2
    means = np.vstack([np.zeros(p), 0.3 * rng.standard_normal(p)])
    return means, [base, other], 1500


_CASES: tuple[tuple[str, Callable, str | tuple[str, ...]], ...] = (
    ("clean_equal_gaussian", _clean_equal, "lda"),
    ("crowded_equal_gaussian", _crowded, ("regularized_lda", "logistic_regression")),
    ("large_unequal_covariance", _unequal, "qda"),
)


def unambiguous_cases(seed: int = 0, n_test_per_class: int = 10_000):
    """``(name, X_train, y_train, X_test, y_test, expected_model)`` for each case."""
    out = []
    for i, (name, build, expected) in enumerate(_CASES):
        means, covs, n = build(np.random.default_rng([_POPULATION_SEED, i]))
        X, y = _draw(np.random.default_rng([seed, i]), means, covs, [n] * len(means))
        X_test, y_test = _draw(np.random.default_rng([seed + 10_000, i]), means, covs, [n_test_per_class] * len(means))
        out.append((name, X, y, X_test, y_test, expected))
    return out


def unambiguous_scenarios(seed: int = 0) -> list[tuple[str, np.ndarray, np.ndarray, str]]:
    """``(name, X, y, expected_model)`` for each of the three cases (training rows only)."""
    out = []
    for i, (name, build, expected) in enumerate(_CASES):
        means, covs, n = build(np.random.default_rng([_POPULATION_SEED, i]))
        X, y = _draw(np.random.default_rng([seed, i]), means, covs, [n] * len(means))
        out.append((name, X, y, expected))
    return out
