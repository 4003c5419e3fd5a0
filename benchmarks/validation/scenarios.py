"""Seeded simulated scenarios for the validation study.

Each :class:`Scenario` is a recipe for a population of labelled rows. ``make(seed)`` draws
the population's parameters (means, covariances, thresholds, scales) from ``seed``, then a
large independent test set and a training set (what the audit sees) from it::

    X_train, y_train, X_test, y_test = SCENARIOS["tidy_trio"].make(seed=0)

``make(seed, train_seed=j)`` keeps the population and the test set of ``seed`` and re-draws
only the training set; the study uses it to see which scenarios are draw-sensitive.

Random streams: ``np.random.SeedSequence(seed)`` is split into three children, used for the
population, the test set and the training set in that order; a re-draw uses
``SeedSequence([seed, train_seed])`` for its training set. Nothing else is random.

Gross outliers (two scenarios) contaminate training rows only: they stand for data-entry
errors, so the models are scored on clean future rows.

The names are our own. No scenario is tuned to any rule of the audit: each describes a
territory a user meets (see ``Scenario.territory``).
"""

from __future__ import annotations

from collections.abc import Callable, Sequence
from dataclasses import dataclass, field

import numpy as np
from scipy.linalg import expm

Transform = Callable[[np.ndarray, np.random.Generator], np.ndarray]

TEST_ROWS = 20_000
TEST_ROWS_WIDE = 10_000  # p >= 50


# ----------------------------------------------------------------------------------------
# Building blocks
# ----------------------------------------------------------------------------------------


@dataclass(frozen=True)
class Component:
    """A Gaussian or multivariate-t cloud: ``mean + chol @ z`` (``z / sqrt(w / df)`` for t)."""

    mean: np.ndarray
    chol: np.ndarray
    weight: float = 1.0
    df: float = np.inf


@dataclass(frozen=True)
class Population:
    """Classes as mixtures of components, an optional transform, optional training outliers.

    ``outliers`` is ``(fraction, magnitude, mode, classes)``: in each listed class a
    ``fraction`` of training rows is moved ``magnitude`` pooled standard deviations away
    from its class mean, along its own random direction (``mode="scattered"``) or along one
    shared direction with little spread (``mode="clustered"``).
    """

    classes: tuple[tuple[Component, ...], ...]
    transform: Transform | None = None
    outliers: tuple[float, float, str, tuple[int, ...]] | None = None

    @property
    def n_features(self) -> int:
        return self.classes[0][0].mean.shape[0]

    def sample(
        self, rng: np.random.Generator, counts: Sequence[int], contaminate: bool
    ) -> tuple[np.ndarray, np.ndarray]:
        p = self.n_features
        blocks, labels = [], []
        for k, (comps, n_k) in enumerate(zip(self.classes, counts)):
            weights = np.array([c.weight for c in comps], dtype=float)
            which = rng.choice(len(comps), size=n_k, p=weights / weights.sum())
            X = np.empty((n_k, p))
            for j, c in enumerate(comps):
                rows = which == j
                m = int(rows.sum())
                z = rng.standard_normal((m, p))
                if np.isfinite(c.df):
                    z /= np.sqrt(rng.chisquare(c.df, m) / c.df)[:, None]
                X[rows] = c.mean + z @ c.chol.T
            blocks.append(X)
            labels.append(np.full(n_k, k))
        X, y = np.vstack(blocks), np.concatenate(labels)
        if self.transform is not None:
            X = self.transform(X, rng)
        if contaminate and self.outliers is not None:
            X = _contaminate(X, y, rng, *self.outliers)
        order = rng.permutation(len(y))
        return X[order], y[order]


def _contaminate(X, y, rng, fraction, magnitude, mode, classes):
    X = X.copy()
    sd = X.std(axis=0)
    shared = rng.standard_normal(X.shape[1])
    for k in classes:
        rows = np.flatnonzero(y == k)
        m = max(1, int(round(fraction * rows.size)))
        bad = rng.choice(rows, size=m, replace=False)
        centre = X[rows].mean(axis=0)
        if mode == "clustered":
            u = shared + 0.05 * rng.standard_normal((m, X.shape[1]))
        else:
            u = rng.standard_normal((m, X.shape[1]))
        u /= np.linalg.norm(u, axis=1, keepdims=True)
        X[bad] = centre + magnitude * np.sqrt(X.shape[1]) * u * sd
    return X


def random_correlation(rng: np.random.Generator, p: int, strength: float) -> np.ndarray:
    """A random correlation matrix; ``strength`` 0 gives identity, larger gives stronger correlation."""
    A = rng.standard_normal((p, p))
    S = np.eye(p) + strength * (A @ A.T) / p
    d = np.sqrt(np.diag(S))
    return S / np.outer(d, d)


def random_rotation(rng: np.random.Generator, p: int) -> np.ndarray:
    Q, R = np.linalg.qr(rng.standard_normal((p, p)))
    return Q * np.sign(np.diag(R))


def chain_correlation(p: int, rho: float) -> np.ndarray:
    idx = np.arange(p)
    return rho ** np.abs(idx[:, None] - idx[None, :])


def spread_means(rng: np.random.Generator, cov: np.ndarray, K: int, delta: float) -> np.ndarray:
    """K class means whose mean pairwise Mahalanobis distance under ``cov`` is ``delta``."""
    p = cov.shape[0]
    L = np.linalg.cholesky(cov)
    if K == 2:
        u = rng.standard_normal(p)
        Z = np.vstack([-u, u]) / (2 * np.linalg.norm(u))
    else:
        Z = rng.standard_normal((K, p))
    Z = Z - Z.mean(axis=0)
    dists = np.linalg.norm(Z[:, None, :] - Z[None, :, :], axis=2)[np.triu_indices(K, 1)]
    Z *= delta / dists.mean()
    return Z @ L.T


def perturbed_covariances(
    rng: np.random.Generator, base: np.ndarray, K: int, spread: float, turn: float
) -> list[np.ndarray]:
    """K covariances around ``base``: log-scales with SD ``spread``, a random rotation of size ``turn``."""
    p = base.shape[0]
    L = np.linalg.cholesky(base)
    out = []
    for _ in range(K):
        scales = np.exp(spread * rng.standard_normal(p))
        G = rng.standard_normal((p, p))
        R = expm(turn * (G - G.T) / 2)  # exponential of a skew-symmetric matrix: a rotation
        M = L @ R @ np.diag(scales)
        out.append(M @ M.T)
    return out


def gaussian_classes(
    means: np.ndarray, covs: Sequence[np.ndarray], df: float = np.inf
) -> tuple[tuple[Component, ...], ...]:
    return tuple((Component(np.asarray(m, float), np.linalg.cholesky(c), 1.0, df),) for m, c in zip(means, covs))


# ----------------------------------------------------------------------------------------
# The scenario record
# ----------------------------------------------------------------------------------------


@dataclass(frozen=True)
class Scenario:
    """A named population recipe with default training sizes.

    Attributes
    ----------
    name : str
    territory : str
        What it covers, in a few words (shown in the report).
    build : callable
        ``build(rng) -> Population``.
    n_per_class : tuple of int
        Default training rows per class.
    n_test : int
        Test rows, split over classes in the training proportions.
    """

    name: str
    territory: str
    build: Callable[[np.random.Generator], Population]
    n_per_class: tuple[int, ...]
    n_test: int = TEST_ROWS
    tags: tuple[str, ...] = field(default_factory=tuple)

    @property
    def n_classes(self) -> int:
        return len(self.n_per_class)

    def make(
        self,
        seed: int,
        n_train_per_class: int | Sequence[int] | None = None,
        *,
        train_seed: int | None = None,
    ) -> tuple[np.ndarray, np.ndarray, np.ndarray, np.ndarray]:
        """Draw ``(X_train, y_train, X_test, y_test)`` for one seed.

        Parameters
        ----------
        seed : int
            Seeds the population, the test set and (unless ``train_seed``) the training set.
        n_train_per_class : int or sequence of int, optional
            Training rows per class; defaults to ``n_per_class``.
        train_seed : int, optional
            Re-draw only the training set (same population and test set).
        """
        if n_train_per_class is None:
            counts = self.n_per_class
        elif np.isscalar(n_train_per_class):
            counts = (int(n_train_per_class),) * self.n_classes
        else:
            counts = tuple(int(c) for c in n_train_per_class)
        pop_ss, test_ss, train_ss = np.random.SeedSequence(seed).spawn(3)
        if train_seed is not None:
            train_ss = np.random.SeedSequence([seed, train_seed])
        population = self.build(np.random.default_rng(pop_ss))
        share = np.asarray(self.n_per_class, float) / sum(self.n_per_class)
        test_counts = np.maximum(1, np.round(share * self.n_test)).astype(int)
        X_test, y_test = population.sample(np.random.default_rng(test_ss), test_counts, contaminate=False)
        X_train, y_train = population.sample(np.random.default_rng(train_ss), counts, contaminate=True)
        return X_train, y_train, X_test, y_test


# ----------------------------------------------------------------------------------------
# Population builders (one per scenario)
# ----------------------------------------------------------------------------------------


def _shared(p: int, K: int, delta: float, strength: float = 1.0, df: float = np.inf) -> Callable:
    def build(rng):
        cov = random_correlation(rng, p, strength)
        means = spread_means(rng, cov, K, delta)
        return Population(gaussian_classes(means, [cov] * K, df))

    return build


def _spread(p: int, K: int, delta: float, spread: float, turn: float, strength: float = 1.0) -> Callable:
    def build(rng):
        base = random_correlation(rng, p, strength)
        means = spread_means(rng, base, K, delta)
        covs = perturbed_covariances(rng, base, K, spread, turn)
        return Population(gaussian_classes(means, covs))

    return build


def _same_centre(rng):
    p = 4
    base = random_correlation(rng, p, 0.5)
    Q = random_rotation(rng, p)
    other = 3.0 * Q @ base @ Q.T
    covs = [base, (other + other.T) / 2]
    means = np.zeros((2, p)) + 0.2 * rng.standard_normal(p) * np.array([[0.0], [1.0]])
    return Population(gaussian_classes(means, covs))


def _crowded(p: int, K: int, delta: float) -> Callable:
    def build(rng):
        cov = random_correlation(rng, p, 2.0)
        return Population(gaussian_classes(spread_means(rng, cov, K, delta), [cov] * K))

    return build


def _factor_cov(rng, p, n_factors, loading, noise):
    B = rng.standard_normal((p, n_factors)) * loading
    cov = B @ B.T + noise * np.eye(p)
    return cov


def _factor_signal(loud: bool) -> Callable:
    """Strongly collinear features (3 dominant factors); the class difference lies along the
    leading eigen-directions (``loud``) or along the trailing ones."""

    def build(rng):
        p = 20
        cov = _factor_cov(rng, p, 3, 3.0, 0.05)
        w, V = np.linalg.eigh(cov)  # ascending
        dirs = V[:, -3:] if loud else V[:, :3]
        coef = rng.standard_normal(3)
        d = dirs @ coef
        maha = np.sqrt(d @ np.linalg.solve(cov, d))
        d *= 2.5 / maha
        return Population(gaussian_classes(np.vstack([-d / 2, d / 2]), [cov, cov]))

    return build


def _chain(rng):
    p = 15
    cov = chain_correlation(p, 0.97)
    return Population(gaussian_classes(spread_means(rng, cov, 2, 2.0), [cov, cov]))


def _lognormal(K: int, p: int, delta: float, sd: float) -> Callable:
    def build(rng):
        cov = random_correlation(rng, p, 0.7)
        means = spread_means(rng, cov, K, delta)
        covs = [sd**2 * cov * np.exp(0.3 * (k - (K - 1) / 2)) for k in range(K)]
        return Population(gaussian_classes(means, covs), transform=lambda X, r: np.exp(X))

    return build


def _binary(rng):
    p = 15
    cov = random_correlation(rng, p, 1.0)
    means = spread_means(rng, cov, 2, 1.5)
    cuts = rng.normal(0.0, 0.6, p)
    return Population(gaussian_classes(means, [cov, cov]), transform=lambda X, r: (cuts < X).astype(float))


def _likert(rng):
    p = 8
    cov = random_correlation(rng, p, 1.0)
    means = spread_means(rng, cov, 3, 2.0)
    cuts = np.sort(rng.normal(0.0, 0.8, (p, 4)), axis=1)

    def to_levels(X, r):
        return 1.0 + (X[:, :, None] > cuts[None, :, :]).sum(axis=2)

    return Population(gaussian_classes(means, [cov] * 3), transform=to_levels)


def _counts(rng):
    p = 6
    cov = 0.3 * random_correlation(rng, p, 0.5)
    means = spread_means(rng, cov, 2, 2.0) + rng.uniform(0.0, 1.5, p)
    return Population(gaussian_classes(means, [cov, cov]), transform=lambda X, r: r.poisson(np.exp(X)).astype(float))


def _mixed_types(rng):
    p = 12
    cov = random_correlation(rng, p, 1.0)
    means = spread_means(rng, cov, 2, 1.2)
    cuts = rng.normal(0.0, 0.5, 4)

    def mix(X, r):
        out = X.copy()
        out[:, 6:10] = (X[:, 6:10] > cuts).astype(float)
        out[:, 10:12] = r.poisson(np.exp(0.5 * X[:, 10:12] + 1.0)).astype(float)
        return out

    return Population(gaussian_classes(means, [cov, cov]), transform=mix)


def _split_class(rng):
    p = 4
    cov = random_correlation(rng, p, 0.5)
    L = np.linalg.cholesky(cov)
    u = L @ rng.standard_normal(p)
    u *= 2.5 / np.sqrt(u @ np.linalg.solve(cov, u))
    centre = Component(np.zeros(p), L)
    sides = (Component(u, L, 0.5), Component(-u, L, 0.5))
    return Population(((centre,), sides))


def _lopsided_mixture(rng):
    p = 6
    cov = random_correlation(rng, p, 1.0)
    L = np.linalg.cholesky(cov)
    means = spread_means(rng, cov, 3, 2.5)
    far = means[2] + L @ rng.standard_normal(p) * 1.5
    classes = (
        (Component(means[0], L),),
        (Component(means[1], L),),
        (Component(means[2], L, 0.8), Component(far, 0.6 * L, 0.2)),
    )
    return Population(classes)


def _outlying(K: int, p: int, fraction: float, magnitude: float, mode: str, classes: tuple[int, ...]) -> Callable:
    def build(rng):
        cov = random_correlation(rng, p, 1.0)
        means = spread_means(rng, cov, K, 2.0)
        return Population(gaussian_classes(means, [cov] * K), outliers=(fraction, magnitude, mode, classes))

    return build


def _wild_scales(K: int, p: int, spread: float, turn: float) -> Callable:
    def build(rng):
        base = random_correlation(rng, p, 1.0)
        means = spread_means(rng, base, K, 2.0)
        covs = perturbed_covariances(rng, base, K, spread, turn) if spread > 0 else [base] * K
        scales = 10.0 ** rng.uniform(-4, 4, p)
        scales[0], scales[-1] = 1e-4, 1e4
        return Population(gaussian_classes(means, covs), transform=lambda X, r: X * scales)

    return build


# ----------------------------------------------------------------------------------------
# The scenarios
# ----------------------------------------------------------------------------------------

_LIST = [
    # equal covariances, Gaussian
    Scenario("tidy_pair_small", "equal covariances, K=2, p=4, 40 per class", _shared(4, 2, 2.0), (40, 40)),
    Scenario("tidy_trio", "equal covariances, K=3, p=8, 150 per class", _shared(8, 3, 2.5), (150,) * 3),
    Scenario(
        "tidy_pair_huge",
        "equal covariances, K=2, p=8, 20k per class",
        _shared(8, 2, 1.5),
        (20_000,) * 2,
        tags=("large",),
    ),
    Scenario("tidy_six", "equal covariances, K=6, p=10, 60 per class", _shared(10, 6, 3.0), (60,) * 6),
    Scenario("faint_signal", "equal covariances, weak signal, K=2, p=10", _shared(10, 2, 0.6), (100, 100)),
    # unequal covariances
    Scenario(
        "spread_pair_large", "unequal covariances, K=2, p=6, 5000 per class", _spread(6, 2, 1.0, 0.5, 0.6), (5000,) * 2
    ),
    Scenario(
        "spread_trio_huge",
        "unequal covariances, K=3, p=5, 10k per class",
        _spread(5, 3, 1.5, 0.6, 0.8),
        (10_000,) * 3,
        tags=("large",),
    ),
    Scenario(
        "spread_pair_few",
        "unequal covariances, few rows: K=2, p=12, 30 per class",
        _spread(12, 2, 2.0, 0.3, 0.3),
        (30, 30),
    ),
    Scenario(
        "spread_pair_medium",
        "moderately unequal covariances, K=2, p=6, 300 per class",
        _spread(6, 2, 1.5, 0.35, 0.3),
        (300, 300),
    ),
    Scenario("same_centre_spread", "equal means, covariances differ only, K=2, p=4", _same_centre, (400, 400)),
    Scenario("spread_five", "unequal covariances, K=5, p=4, 800 per class", _spread(4, 5, 2.0, 0.5, 0.8), (800,) * 5),
    # dimensionality
    Scenario("crowded_pair", "p near N-K: K=2, p=45, 25 per class", _crowded(45, 2, 3.0), (25, 25), TEST_ROWS_WIDE),
    Scenario(
        "crowded_trio_wide", "p > N-K: K=3, p=100, 30 per class", _crowded(100, 3, 4.0), (30,) * 3, TEST_ROWS_WIDE
    ),
    Scenario("wide_moderate", "p=100 with 250 per class, K=2", _crowded(100, 2, 3.0), (250, 250), TEST_ROWS_WIDE),
    # collinearity
    Scenario(
        "factor_signal_loud",
        "collinear, class difference along high-variance directions, p=20",
        _factor_signal(True),
        (50, 50),
    ),
    Scenario(
        "factor_signal_quiet",
        "collinear, class difference along low-variance directions, p=20",
        _factor_signal(False),
        (100, 100),
    ),
    Scenario("chain_correlated", "AR(1) correlation 0.97, K=2, p=15, 200 per class", _chain, (200, 200)),
    # shape
    Scenario("heavy_tails_mild", "multivariate t, df=4, K=2, p=6", _shared(6, 2, 2.0, df=4.0), (200, 200)),
    Scenario("heavy_tails_wild", "multivariate t, df=1.5, K=3, p=5", _shared(5, 3, 2.5, df=1.5), (300,) * 3),
    Scenario("skewed_lognormal", "log-normal features, K=2, p=5", _lognormal(2, 5, 1.5, 1.0), (300, 300)),
    Scenario(
        "skewed_lognormal_trio",
        "log-normal features, unequal spreads, K=3, p=4",
        _lognormal(3, 4, 2.0, 0.8),
        (500,) * 3,
    ),
    Scenario("binary_answers", "15 binary features, K=2", _binary, (150, 150)),
    Scenario("likert_scores", "8 five-level ordinal features, K=3", _likert, (200,) * 3),
    Scenario("count_features", "6 Poisson count features, K=2", _counts, (250, 250)),
    Scenario(
        "mixed_types_huge",
        "continuous + binary + counts, K=2, 15k per class",
        _mixed_types,
        (15_000,) * 2,
        tags=("large",),
    ),
    Scenario("split_class", "one class is two clusters either side of the other, p=4", _split_class, (400, 400)),
    Scenario("lopsided_mixture", "one class is an 80/20 mix of two clusters, K=3, p=6", _lopsided_mixture, (250,) * 3),
    # outliers
    Scenario(
        "scattered_outliers",
        "4% gross outliers in each class, scattered, K=2, p=6",
        _outlying(2, 6, 0.04, 8.0, "scattered", (0, 1)),
        (150, 150),
    ),
    Scenario(
        "clustered_outliers",
        "5% of one class replaced by a far cluster, K=3, p=8",
        _outlying(3, 8, 0.05, 6.0, "clustered", (0,)),
        (200,) * 3,
    ),
    # separation
    Scenario(
        "near_separable", "classes 7 Mahalanobis units apart, K=2, p=5, 60 per class", _shared(5, 2, 7.0), (60, 60)
    ),
    Scenario(
        "separable_wide", "completely separable training set, K=2, p=20, 40 per class", _shared(20, 2, 6.0), (40, 40)
    ),
    # scales
    Scenario(
        "wild_scales",
        "feature scales from 1e-4 to 1e4, equal covariances, K=3, p=6",
        _wild_scales(3, 6, 0.0, 0.0),
        (200,) * 3,
    ),
    Scenario(
        "wild_scales_spread",
        "feature scales from 1e-4 to 1e4, unequal covariances, K=2, p=5",
        _wild_scales(2, 5, 0.6, 0.8),
        (2000, 2000),
    ),
    # imbalance
    Scenario("lopsided_pair", "imbalanced 1500 vs 60, equal covariances, p=6", _shared(6, 2, 2.5), (1500, 60)),
    Scenario(
        "lopsided_spread",
        "imbalanced 2000/400/80, unequal covariances, p=5",
        _spread(5, 3, 2.0, 0.5, 0.6),
        (2000, 400, 80),
    ),
]

SCENARIOS: dict[str, Scenario] = {s.name: s for s in _LIST}
if len(SCENARIOS) != len(_LIST):  # pragma: no cover - guards against a duplicated name
    raise RuntimeError("duplicate scenario name")
