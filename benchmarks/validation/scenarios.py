"""Seeded scenario families for the validation study.

A :class:`Family` is a *kind* of population ("two Gaussian classes whose covariances differ in
orientation only", "labels from a logistic model on log-normal features", ...). Its ``draw``
function turns a random generator into one concrete population: the number of features, of
classes and of training rows, the means, covariances, thresholds, contamination, all drawn
from ranges that describe the kind. Different seeds of a family are therefore different
populations of the same kind, and the family, not the seed, is the unit of generalization:
the split into tuning and held-out families is in ``split.py``.

::

    X_train, y_train, X_test, y_test = FAMILIES["tidy_trio"].make(seed=0)

``make(seed, train_seed=j)`` keeps the population and the test set of ``seed`` and re-draws
only the training rows (draw sensitivity). ``make(seed, n_train_per_class=n)`` overrides the
drawn training size.

Random streams: ``np.random.SeedSequence([family_number, seed])`` is split into three
children, used for the population (its parameters and sizes), the test set and the training
set in that order; ``family_number`` is a fixed number derived from the family's name (so
two families with the same seed do not share draws). A re-draw uses
``SeedSequence([family_number, seed, train_seed])`` for its training set. Nothing else is
random.

Contamination (the ``outliers`` families) touches training rows only: it stands for
data-entry errors, so the models are scored on clean future rows.

The names are our own plain words; ``Family.category`` places each family in one of the
``CATEGORIES`` (the territories the study must cover), ``Family.kept`` marks the families
carried over (with new per-seed parameter ranges) from the earlier design of the study.
"""

from __future__ import annotations

import hashlib
from collections.abc import Callable, Sequence
from dataclasses import dataclass, field

import numpy as np
from scipy.linalg import expm

Transform = Callable[[np.ndarray, np.random.Generator], np.ndarray]

TEST_ROWS = 20_000
TEST_ROWS_WIDE = 10_000  # p >= 45

CATEGORIES: dict[str, str] = {
    "equal_gaussian": "Gaussian classes with one shared covariance (LDA's home ground)",
    "quiet_signal": "strongly correlated features; class difference along low- or high-variance directions, "
    "few rows per feature",
    "small_class_spread": "strongly unequal covariances with one small class",
    "orientation_only": "class covariances with the same eigenvalues, turned differently",
    "size_only": "class covariances proportional to each other (same shape, different size)",
    "unequal_general": "class covariances that differ in size and orientation",
    "heavy_tails": "multivariate t classes",
    "discrete": "binary, ordinal and count features",
    "many_classes": "many classes with few rows each",
    "imbalance": "strongly unequal class sizes",
    "outliers": "training rows contaminated by gross errors",
    "dimension": "many features for the rows: p/N from about 0.05 to near 1",
    "logit_only": "labels from a logistic model on non-Gaussian features (only logistic regression is right)",
    "shape_other": "skewed features, classes made of clusters, near separation, wild feature scales",
}


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


def _draw_component(rng: np.random.Generator, c: Component, m: int) -> np.ndarray:
    z = rng.standard_normal((m, c.mean.shape[0]))
    if np.isfinite(c.df):
        z /= np.sqrt(rng.chisquare(c.df, m) / c.df)[:, None]
    return c.mean + z @ c.chol.T


def _draw_mixture(rng: np.random.Generator, comps: Sequence[Component], m: int) -> np.ndarray:
    weights = np.array([c.weight for c in comps], dtype=float)
    which = rng.choice(len(comps), size=m, p=weights / weights.sum())
    X = np.empty((m, comps[0].mean.shape[0]))
    for j, c in enumerate(comps):
        rows = which == j
        X[rows] = _draw_component(rng, c, int(rows.sum()))
    return X


@dataclass(frozen=True)
class Population:
    """Classes as mixtures of components, an optional transform, optional training outliers.

    ``outliers`` is ``(fraction, magnitude, mode, classes)``: in each listed class a
    ``fraction`` of training rows is moved ``magnitude`` pooled standard deviations (times
    sqrt(p)) away from its class mean, along its own random direction (``mode="scattered"``)
    or along one shared direction with little spread (``mode="clustered"``); with
    ``mode="cells"`` a ``fraction`` of the single entries of those classes' rows is shifted by
    ``magnitude`` standard deviations of its column, up or down at random; with
    ``mode="sentinel"`` the first feature of a ``fraction`` of those rows is replaced by one fixed
    value ``magnitude`` standard deviations above that column's mean (a code such as 999 typed
    for a missing value).
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
        blocks = [_draw_mixture(rng, comps, int(n_k)) for comps, n_k in zip(self.classes, counts)]
        y = np.concatenate([np.full(int(n_k), k) for k, n_k in enumerate(counts)])
        X = np.vstack(blocks)
        if self.transform is not None:
            X = self.transform(X, rng)
        if contaminate and self.outliers is not None:
            X = _contaminate(X, y, rng, *self.outliers)
        order = rng.permutation(len(y))
        return X[order], y[order]


@dataclass(frozen=True)
class LogitPopulation:
    """Features from a (non-Gaussian) distribution, labels from a multinomial logistic model.

    ``features(rng, m)`` draws ``m`` feature rows; ``coef`` (p x K) and ``intercept`` (K) give
    the class log-odds. Class counts are random (``counts`` only sets the total).
    """

    features: Callable[[np.random.Generator, int], np.ndarray]
    coef: np.ndarray
    intercept: np.ndarray

    @property
    def n_features(self) -> int:
        return self.coef.shape[0]

    def sample(
        self, rng: np.random.Generator, counts: Sequence[int], contaminate: bool
    ) -> tuple[np.ndarray, np.ndarray]:
        m = int(sum(counts))
        X = self.features(rng, m)
        eta = X @ self.coef + self.intercept
        eta -= eta.max(axis=1, keepdims=True)
        prob = np.exp(eta)
        prob /= prob.sum(axis=1, keepdims=True)
        u = rng.random(m)
        y = (u[:, None] > np.cumsum(prob, axis=1)).sum(axis=1)
        y = np.minimum(y, prob.shape[1] - 1)
        return X, y


@dataclass(frozen=True)
class ClassSampler:
    """Classes drawn by a function of their own: ``draw_class(rng, k, m)`` returns ``m`` rows of class
    ``k`` (for class shapes a mixture of components cannot express); optional training outliers
    as in :class:`Population`."""

    draw_class: Callable[[np.random.Generator, int, int], np.ndarray]
    p: int
    outliers: tuple[float, float, str, tuple[int, ...]] | None = None

    @property
    def n_features(self) -> int:
        return self.p

    def sample(
        self, rng: np.random.Generator, counts: Sequence[int], contaminate: bool
    ) -> tuple[np.ndarray, np.ndarray]:
        X = np.vstack([self.draw_class(rng, k, int(n_k)) for k, n_k in enumerate(counts)])
        y = np.concatenate([np.full(int(n_k), k) for k, n_k in enumerate(counts)])
        if contaminate and self.outliers is not None:
            X = _contaminate(X, y, rng, *self.outliers)
        order = rng.permutation(len(y))
        return X[order], y[order]


def _contaminate(X, y, rng, fraction, magnitude, mode, classes):
    X = X.copy()
    sd = X.std(axis=0)
    if mode == "sentinel":  # the first feature of a fraction of the rows set to one fixed far value
        rows = np.flatnonzero(np.isin(y, classes))
        bad = rows[rng.random(rows.size) < fraction]
        X[bad, 0] = X[:, 0].mean() + magnitude * sd[0]
        return X
    if mode == "cells":  # single entries shifted by magnitude SD of their column, random sign
        rows = np.isin(y, classes)
        hit = (rng.random(X.shape) < fraction) & rows[:, None]
        X[hit] += (magnitude * np.where(rng.random(X.shape) < 0.5, -1.0, 1.0) * sd)[hit]
        return X
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


def small_rotation(rng: np.random.Generator, p: int, size: float) -> np.ndarray:
    """A random rotation near the identity: the exponential of a skew-symmetric matrix."""
    G = rng.standard_normal((p, p))
    return expm(size * (G - G.T) / 2)


def chain_correlation(p: int, rho: float) -> np.ndarray:
    idx = np.arange(p)
    return rho ** np.abs(idx[:, None] - idx[None, :])


def spectrum_cov(rng: np.random.Generator, p: int, ratio: float) -> np.ndarray:
    """A random-orientation covariance whose eigenvalues spread log-evenly over [1/ratio, ratio]^(1/2)."""
    lam = np.exp(np.linspace(-0.5, 0.5, p) * np.log(ratio))
    Q = random_rotation(rng, p)
    return (Q * lam) @ Q.T


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


def means_along(rng: np.random.Generator, cov: np.ndarray, dirs: np.ndarray, K: int, delta: float) -> np.ndarray:
    """K class means differing only within the span of ``dirs`` (p x r), mean Mahalanobis distance ``delta``."""
    Z = rng.standard_normal((K, dirs.shape[1]))
    if K == 2:
        Z = np.vstack([-Z[0], Z[0]])
    M = Z @ dirs.T
    M -= M.mean(axis=0)
    P = np.linalg.inv(cov)
    dists = [np.sqrt((M[i] - M[j]) @ P @ (M[i] - M[j])) for i in range(K) for j in range(i + 1, K)]
    return M * (delta / np.mean(dists))


def perturbed_covariances(
    rng: np.random.Generator, base: np.ndarray, K: int, spread: float, turn: float
) -> list[np.ndarray]:
    """K covariances around ``base``: log-scales with SD ``spread``, a random rotation of size ``turn``."""
    p = base.shape[0]
    L = np.linalg.cholesky(base)
    out = []
    for _ in range(K):
        scales = np.exp(spread * rng.standard_normal(p))
        M = L @ small_rotation(rng, p, turn) @ np.diag(scales)
        out.append(M @ M.T)
    return out


def turned_covariances(rng: np.random.Generator, base: np.ndarray, K: int, turn: float | None) -> list[np.ndarray]:
    """K covariances with exactly the eigenvalues of ``base``: ``R base R'`` for random rotations R
    (near the identity with size ``turn``, or uniformly random when ``turn`` is None)."""
    p = base.shape[0]
    out = []
    for _ in range(K):
        R = random_rotation(rng, p) if turn is None else small_rotation(rng, p, turn)
        S = R @ base @ R.T
        out.append((S + S.T) / 2)
    return out


def gaussian_classes(
    means: np.ndarray, covs: Sequence[np.ndarray], df: float = np.inf
) -> tuple[tuple[Component, ...], ...]:
    return tuple((Component(np.asarray(m, float), np.linalg.cholesky(c), 1.0, df),) for m, c in zip(means, covs))


# ranges ---------------------------------------------------------------------------------


def U(rng: np.random.Generator, a: float, b: float) -> float:
    return float(rng.uniform(a, b))


def LU(rng: np.random.Generator, a: float, b: float) -> float:
    """Log-uniform on [a, b]."""
    return float(np.exp(rng.uniform(np.log(a), np.log(b))))


def I(rng: np.random.Generator, a: int, b: int) -> int:  # noqa: E743 - a short name reads best in the tables below
    """Integer uniform on [a, b] inclusive."""
    return int(rng.integers(a, b + 1))


def LI(rng: np.random.Generator, a: int, b: int) -> int:
    """Integer log-uniform on [a, b]."""
    return int(round(LU(rng, a, b)))


# ----------------------------------------------------------------------------------------
# The family record
# ----------------------------------------------------------------------------------------


@dataclass(frozen=True)
class Design:
    """One concrete population with its training class sizes and test size."""

    population: Population | LogitPopulation | ClassSampler
    counts: tuple[int, ...]
    n_test: int = 0  # 0: TEST_ROWS, or TEST_ROWS_WIDE when p >= 45


@dataclass(frozen=True)
class Family:
    """A named kind of population.

    Attributes
    ----------
    name, category : str
        ``category`` is a key of ``CATEGORIES``.
    territory : str
        What it covers and the ranges its parameters are drawn from (shown in the report).
    draw : callable
        ``draw(rng) -> Design``.
    kept : bool
        Carried over from the earlier design of the study (seen while earlier rules were tuned).
    """

    name: str
    category: str
    territory: str
    draw: Callable[[np.random.Generator], Design]
    kept: bool = False
    tags: tuple[str, ...] = field(default_factory=tuple)

    @property
    def number(self) -> int:
        return int(hashlib.sha256(self.name.encode()).hexdigest()[:8], 16)

    def design(self, seed: int) -> Design:
        pop_ss = np.random.SeedSequence([self.number, seed]).spawn(3)[0]
        return self.draw(np.random.default_rng(pop_ss))

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
            Training rows per class; defaults to the drawn sizes.
        train_seed : int, optional
            Re-draw only the training set (same population and test set).
        """
        pop_ss, test_ss, train_ss = np.random.SeedSequence([self.number, seed]).spawn(3)
        if train_seed is not None:
            train_ss = np.random.SeedSequence([self.number, seed, train_seed])
        d = self.draw(np.random.default_rng(pop_ss))
        if n_train_per_class is None:
            counts = d.counts
        elif np.isscalar(n_train_per_class):
            counts = (int(n_train_per_class),) * len(d.counts)
        else:
            counts = tuple(int(c) for c in n_train_per_class)
        p = d.population.n_features
        n_test = d.n_test or (TEST_ROWS_WIDE if p >= 45 else TEST_ROWS)
        share = np.asarray(d.counts, float) / sum(d.counts)
        test_counts = np.maximum(1, np.round(share * n_test)).astype(int)
        X_test, y_test = d.population.sample(np.random.default_rng(test_ss), test_counts, contaminate=False)
        X_train, y_train = d.population.sample(np.random.default_rng(train_ss), counts, contaminate=True)
        return X_train, y_train, X_test, y_test


_LIST: list[Family] = []


def family(name: str, category: str, territory: str, *, kept: bool = False, tags: tuple[str, ...] = ()):
    def register(fn: Callable[[np.random.Generator], Design]) -> Callable[[np.random.Generator], Design]:
        _LIST.append(Family(name, category, territory, fn, kept, tags))
        return fn

    return register


def _gauss(means, covs, counts, df=np.inf, **kw) -> Design:
    return Design(Population(gaussian_classes(means, covs, df), **kw), tuple(int(c) for c in counts))


def _equal(rng, K, p, n_k, delta, strength, df=np.inf, **kw) -> Design:
    cov = random_correlation(rng, p, strength)
    counts = n_k if isinstance(n_k, (tuple, list)) else (n_k,) * K
    return _gauss(spread_means(rng, cov, K, delta), [cov] * K, counts, df, **kw)


def _unequal(rng, K, p, n_k, delta, spread, turn, strength=1.0, df=np.inf, **kw) -> Design:
    base = random_correlation(rng, p, strength)
    counts = n_k if isinstance(n_k, (tuple, list)) else (n_k,) * K
    covs = perturbed_covariances(rng, base, K, spread, turn)
    return _gauss(spread_means(rng, base, K, delta), covs, counts, df, **kw)


# ----------------------------------------------------------------------------------------
# equal_gaussian
# ----------------------------------------------------------------------------------------


@family("tidy_pair_small", "equal_gaussian", "K=2, p 3-6, 30-60 rows per class, distance 1.5-2.8", kept=True)
def _tidy_pair_small(rng):
    return _equal(rng, 2, I(rng, 3, 6), I(rng, 30, 60), U(rng, 1.5, 2.8), U(rng, 0.2, 1.5))


@family("tidy_trio", "equal_gaussian", "K=3, p 6-10, 100-250 rows per class, distance 2-3", kept=True)
def _tidy_trio(rng):
    return _equal(rng, 3, I(rng, 6, 10), I(rng, 100, 250), U(rng, 2.0, 3.0), U(rng, 0.5, 1.5))


@family(
    "tidy_pair_huge",
    "equal_gaussian",
    "K=2, p 5-10, 8k-20k rows per class, distance 1-2",
    kept=True,
    tags=("large",),
)
def _tidy_pair_huge(rng):
    return _equal(rng, 2, I(rng, 5, 10), LI(rng, 8000, 20000), U(rng, 1.0, 2.0), U(rng, 0.5, 2.0))


@family("equal_varied", "equal_gaussian", "K 2-4, p 3-15, 60-600 rows per class, distance 1.2-3.5")
def _equal_varied(rng):
    return _equal(rng, I(rng, 2, 4), I(rng, 3, 15), LI(rng, 60, 600), U(rng, 1.2, 3.5), U(rng, 0.0, 3.0))


@family(
    "equal_correlated_large",
    "equal_gaussian",
    "K 2-3, p 5-12, strong correlation, 1000-5000 rows per class, distance 1-2.5",
)
def _equal_correlated_large(rng):
    return _equal(rng, I(rng, 2, 3), I(rng, 5, 12), LI(rng, 1000, 5000), U(rng, 1.0, 2.5), U(rng, 3.0, 8.0))


@family("equal_modest_rows", "equal_gaussian", "K 2-3, p 8-20, 4-8 rows per class per feature, distance 2-3.5")
def _equal_modest_rows(rng):
    p = I(rng, 8, 20)
    return _equal(rng, I(rng, 2, 3), p, int(round(U(rng, 4, 8) * p)), U(rng, 2.0, 3.5), U(rng, 0.3, 2.0))


# ----------------------------------------------------------------------------------------
# quiet_signal
# ----------------------------------------------------------------------------------------


def _factor_cov(rng, p, n_factors, loading, noise):
    B = rng.standard_normal((p, n_factors)) * loading
    return B @ B.T + noise * np.eye(p)


def _along_eigen(rng, cov, n_dirs, trailing, K, delta):
    w, V = np.linalg.eigh(cov)  # ascending
    dirs = V[:, :n_dirs] if trailing else V[:, -n_dirs:]
    return means_along(rng, cov, dirs, K, delta)


@family(
    "factor_signal_quiet",
    "quiet_signal",
    "2-4 dominant factors, p 12-30, difference along the lowest-variance directions, 3-6 rows per class per feature",
    kept=True,
)
def _factor_signal_quiet(rng):
    p, f = I(rng, 12, 30), I(rng, 2, 4)
    cov = _factor_cov(rng, p, f, U(rng, 2.0, 4.0), U(rng, 0.02, 0.1))
    means = _along_eigen(rng, cov, f, True, 2, U(rng, 2.0, 3.0))
    return _gauss(means, [cov, cov], (int(round(U(rng, 3, 6) * p)),) * 2)


@family(
    "factor_signal_loud",
    "quiet_signal",
    "2-4 dominant factors, p 12-30, difference along the highest-variance directions, 1.5-4 rows per class per feature",
    kept=True,
)
def _factor_signal_loud(rng):
    p, f = I(rng, 12, 30), I(rng, 2, 4)
    cov = _factor_cov(rng, p, f, U(rng, 2.0, 4.0), U(rng, 0.02, 0.1))
    means = _along_eigen(rng, cov, f, False, 2, U(rng, 2.0, 3.0))
    return _gauss(means, [cov, cov], (int(round(U(rng, 1.5, 4) * p)),) * 2)


@family(
    "quiet_few_rows",
    "quiet_signal",
    "decaying spectrum (condition 30-3000), p 10-30, difference along the lowest-variance third, "
    "1.3-3 rows per class per feature",
)
def _quiet_few_rows(rng):
    p = I(rng, 10, 30)
    cov = spectrum_cov(rng, p, LU(rng, 30, 3000))
    means = _along_eigen(rng, cov, max(2, p // 3), True, 2, U(rng, 2.0, 3.5))
    return _gauss(means, [cov, cov], (int(round(U(rng, 1.3, 3) * p)),) * 2)


@family(
    "quiet_chain_trio",
    "quiet_signal",
    "K=3, AR(1) correlation 0.8-0.97, p 8-24, difference mostly along the lowest-variance directions, "
    "2-5 rows per class per feature",
)
def _quiet_chain_trio(rng):
    p = I(rng, 8, 24)
    cov = chain_correlation(p, U(rng, 0.8, 0.97))
    w, V = np.linalg.eigh(cov)
    mix = U(rng, 0.0, 0.3)
    dirs = np.hstack([V[:, : max(2, p // 4)], mix * rng.standard_normal((p, 1))])
    means = means_along(rng, cov, dirs, 3, U(rng, 2.0, 3.5))
    return _gauss(means, [cov] * 3, (int(round(U(rng, 2, 5) * p)),) * 3)


# ----------------------------------------------------------------------------------------
# small_class_spread
# ----------------------------------------------------------------------------------------


@family(
    "lopsided_spread",
    "small_class_spread",
    "K=3, sizes 800-2500 / 200-500 / 50-100, p 4-7, unequal covariances",
    kept=True,
)
def _lopsided_spread(rng):
    counts = (LI(rng, 800, 2500), LI(rng, 200, 500), LI(rng, 50, 100))
    return _unequal(rng, 3, I(rng, 4, 7), counts, U(rng, 1.5, 2.5), U(rng, 0.4, 0.7), U(rng, 0.4, 1.0))


@family(
    "small_class_scaled",
    "small_class_spread",
    "K=2, sizes 300-1000 vs 30-100, p 3-8, the small class 3-12 times more (or less) spread and turned",
)
def _small_class_scaled(rng):
    p = I(rng, 3, 8)
    base = random_correlation(rng, p, U(rng, 0.3, 1.5))
    c = LU(rng, 3.0, 12.0) ** (1 if rng.random() < 0.5 else -1)
    R = small_rotation(rng, p, U(rng, 0.5, 1.5))
    other = c * R @ base @ R.T
    means = spread_means(rng, base, 2, U(rng, 1.5, 3.0))
    return _gauss(means, [base, (other + other.T) / 2], (LI(rng, 300, 1000), LI(rng, 30, 100)))


@family(
    "small_class_trio",
    "small_class_spread",
    "K=3, two classes of 300-1000 rows and one of 2-5 rows per feature, p 4-10, strongly unequal covariances",
)
def _small_class_trio(rng):
    p = I(rng, 4, 10)
    counts = (LI(rng, 300, 1000), LI(rng, 300, 1000), int(round(U(rng, 2, 5) * p)))
    return _unequal(rng, 3, p, counts, U(rng, 1.5, 3.0), U(rng, 0.7, 1.0), U(rng, 0.6, 1.2))


@family(
    "small_class_elongated",
    "small_class_spread",
    "K=2, sizes 300-1000 vs 40-120, p 3-8, the small class elongated (condition 10-50) along its own axes",
)
def _small_class_elongated(rng):
    p = I(rng, 3, 8)
    base = random_correlation(rng, p, U(rng, 0.2, 1.0))
    small = spectrum_cov(rng, p, LU(rng, 10, 50))
    means = spread_means(rng, base, 2, U(rng, 1.5, 3.0))
    return _gauss(means, [base, small], (LI(rng, 300, 1000), LI(rng, 40, 120)))


# ----------------------------------------------------------------------------------------
# orientation_only
# ----------------------------------------------------------------------------------------


@family(
    "turned_pair",
    "orientation_only",
    "K=2, p 3-8, same eigenvalues (condition 3-30), independent random orientations, distance 0.5-2, "
    "150-1000 rows per class",
)
def _turned_pair(rng):
    p = I(rng, 3, 8)
    base = spectrum_cov(rng, p, LU(rng, 3, 30))
    covs = turned_covariances(rng, base, 2, None)
    return _gauss(spread_means(rng, base, 2, U(rng, 0.5, 2.0)), covs, (LI(rng, 150, 1000),) * 2)


@family(
    "turned_trio",
    "orientation_only",
    "K=3, p 3-7, same eigenvalues (condition 5-50), rotations of size 0.5-1.5, distance 1-2.5, 100-600 rows per class",
)
def _turned_trio(rng):
    p = I(rng, 3, 7)
    base = spectrum_cov(rng, p, LU(rng, 5, 50))
    covs = turned_covariances(rng, base, 3, U(rng, 0.5, 1.5))
    return _gauss(spread_means(rng, base, 3, U(rng, 1.0, 2.5)), covs, (LI(rng, 100, 600),) * 3)


@family(
    "turned_few_rows",
    "orientation_only",
    "K=2, p 6-14, same eigenvalues (condition 5-40), random orientations, 3-8 rows per class per feature",
)
def _turned_few_rows(rng):
    p = I(rng, 6, 14)
    base = spectrum_cov(rng, p, LU(rng, 5, 40))
    covs = turned_covariances(rng, base, 2, None)
    n = int(round(U(rng, 3, 8) * p))
    return _gauss(spread_means(rng, base, 2, U(rng, 1.0, 2.5)), covs, (n, n))


# ----------------------------------------------------------------------------------------
# size_only
# ----------------------------------------------------------------------------------------


def _scaled(rng, K, p, n_k, delta, factors) -> Design:
    base = random_correlation(rng, p, U(rng, 0.2, 2.0))
    return _gauss(spread_means(rng, base, K, delta), [f * base for f in factors], (n_k,) * K)


@family(
    "scaled_pair",
    "size_only",
    "K=2, p 3-10, second covariance 1.5-6 times the first, distance 1-2.5, 150-1000 rows per class",
)
def _scaled_pair(rng):
    return _scaled(rng, 2, I(rng, 3, 10), LI(rng, 150, 1000), U(rng, 1.0, 2.5), (1.0, LU(rng, 1.5, 6.0)))


@family(
    "scaled_trio",
    "size_only",
    "K=3, p 3-8, covariances scaled by exp(+-0.9), distance 1.5-3, 100-600 rows per class",
)
def _scaled_trio(rng):
    factors = tuple(np.exp(rng.uniform(-0.9, 0.9, 3)))
    return _scaled(rng, 3, I(rng, 3, 8), LI(rng, 100, 600), U(rng, 1.5, 3.0), factors)


@family(
    "scaled_few_rows",
    "size_only",
    "K=2, p 8-16, second covariance 2-5 times the first, 3-6 rows per class per feature",
)
def _scaled_few_rows(rng):
    p = I(rng, 8, 16)
    return _scaled(rng, 2, p, int(round(U(rng, 3, 6) * p)), U(rng, 1.5, 3.0), (1.0, LU(rng, 2.0, 5.0)))


# ----------------------------------------------------------------------------------------
# unequal_general
# ----------------------------------------------------------------------------------------


@family(
    "spread_pair_medium",
    "unequal_general",
    "K=2, p 4-8, 200-500 rows per class, moderately unequal covariances",
    kept=True,
)
def _spread_pair_medium(rng):
    return _unequal(rng, 2, I(rng, 4, 8), LI(rng, 200, 500), U(rng, 1.0, 2.0), U(rng, 0.25, 0.5), U(rng, 0.2, 0.5))


@family(
    "same_centre_spread",
    "unequal_general",
    "K=2, p 3-6, nearly equal means, one covariance 2-4 times the other and turned, 200-600 rows per class",
    kept=True,
)
def _same_centre_spread(rng):
    p = I(rng, 3, 6)
    base = random_correlation(rng, p, 0.5)
    Q = random_rotation(rng, p)
    other = U(rng, 2.0, 4.0) * Q @ base @ Q.T
    means = np.vstack([np.zeros(p), 0.2 * rng.standard_normal(p)])
    return _gauss(means, [base, (other + other.T) / 2], (LI(rng, 200, 600),) * 2)


@family(
    "spread_varied",
    "unequal_general",
    "K 2-4, p 3-12, 80-2000 rows per class, log-scale spread 0.1-0.8, turn 0-1",
)
def _spread_varied(rng):
    K, p = I(rng, 2, 4), I(rng, 3, 12)
    return _unequal(rng, K, p, LI(rng, 80, 2000), U(rng, 1.0, 3.0), U(rng, 0.1, 0.8), U(rng, 0.0, 1.0))


@family(
    "spread_many_rows",
    "unequal_general",
    "K 2-3, p 4-10, 3000-8000 rows per class, log-scale spread 0.2-0.6",
    tags=("large",),
)
def _spread_many_rows(rng):
    K, p = I(rng, 2, 3), I(rng, 4, 10)
    return _unequal(rng, K, p, LI(rng, 3000, 8000), U(rng, 1.0, 2.0), U(rng, 0.2, 0.6), U(rng, 0.2, 0.8))


# ----------------------------------------------------------------------------------------
# heavy_tails
# ----------------------------------------------------------------------------------------


@family(
    "heavy_tails_wild",
    "heavy_tails",
    "multivariate t with 1.2-2 degrees of freedom, K=3, p 4-7, 200-400 rows per class",
    kept=True,
)
def _heavy_tails_wild(rng):
    return _equal(rng, 3, I(rng, 4, 7), I(rng, 200, 400), U(rng, 2.0, 3.0), 1.0, df=U(rng, 1.2, 2.0))


@family(
    "heavy_tails_varied",
    "heavy_tails",
    "multivariate t with 1.5-8 degrees of freedom, shared scatter, K 2-4, p 3-10, 100-800 rows per class",
)
def _heavy_tails_varied(rng):
    K, p = I(rng, 2, 4), I(rng, 3, 10)
    return _equal(rng, K, p, LI(rng, 100, 800), U(rng, 1.5, 3.0), U(rng, 0.2, 2.0), df=LU(rng, 1.5, 8.0))


@family(
    "heavy_tails_spread",
    "heavy_tails",
    "multivariate t with 2-5 degrees of freedom, unequal scatter, K 2-3, p 3-8, 150-800 rows per class",
)
def _heavy_tails_spread(rng):
    K, p = I(rng, 2, 3), I(rng, 3, 8)
    return _unequal(
        rng, K, p, LI(rng, 150, 800), U(rng, 1.5, 3.0), U(rng, 0.4, 0.7), U(rng, 0.3, 1.0), df=U(rng, 2.0, 5.0)
    )


@family(
    "heavy_tails_few_rows",
    "heavy_tails",
    "multivariate t with 2-4 degrees of freedom, K=2, p 8-16, 2.5-5 rows per class per feature",
)
def _heavy_tails_few_rows(rng):
    p = I(rng, 8, 16)
    return _equal(rng, 2, p, int(round(U(rng, 2.5, 5) * p)), U(rng, 2.0, 3.5), U(rng, 0.3, 1.5), df=U(rng, 2.0, 4.0))


# ----------------------------------------------------------------------------------------
# discrete
# ----------------------------------------------------------------------------------------


@family(
    "likert_scores",
    "discrete",
    "K=3, p 5-10 five-level ordinal features (latent Gaussian, random cut points), 150-300 rows per class",
    kept=True,
)
def _likert_scores(rng):
    p = I(rng, 5, 10)
    cov = random_correlation(rng, p, 1.0)
    means = spread_means(rng, cov, 3, U(rng, 1.5, 2.5))
    cuts = np.sort(rng.normal(0.0, 0.8, (p, 4)), axis=1)

    def to_levels(X, r):
        return 1.0 + (X[:, :, None] > cuts[None, :, :]).sum(axis=2)

    return Design(Population(gaussian_classes(means, [cov] * 3), transform=to_levels), (I(rng, 150, 300),) * 3)


@family(
    "ordinal_binary_mix",
    "discrete",
    "K 2-3, p 6-16: ordinal features with 3-7 levels, binary features and a few continuous ones, "
    "150-600 rows per class",
)
def _ordinal_binary_mix(rng):
    K, p = I(rng, 2, 3), I(rng, 6, 16)
    cov = random_correlation(rng, p, U(rng, 0.5, 2.0))
    means = spread_means(rng, cov, K, U(rng, 1.5, 3.0))
    kind = rng.choice(3, size=p, p=[0.45, 0.4, 0.15])  # 0 ordinal, 1 binary, 2 continuous
    levels = rng.integers(3, 8, size=p)
    cuts = [np.sort(rng.normal(0.0, 0.9, levels[j] - 1)) for j in range(p)]
    bin_cut = rng.normal(0.0, 0.7, p)

    def mix(X, r):
        out = X.copy()
        for j in range(p):
            if kind[j] == 0:
                out[:, j] = 1.0 + (X[:, j, None] > cuts[j][None, :]).sum(axis=1)
            elif kind[j] == 1:
                out[:, j] = (X[:, j] > bin_cut[j]).astype(float)
        return out

    return Design(Population(gaussian_classes(means, [cov] * K), transform=mix), (LI(rng, 150, 600),) * K)


@family(
    "binary_sparse",
    "discrete",
    "K=2, p 10-30 binary features, most of them rare (prevalence 3-30%), 150-500 rows per class",
)
def _binary_sparse(rng):
    p = I(rng, 10, 30)
    cov = random_correlation(rng, p, U(rng, 0.3, 1.5))
    means = spread_means(rng, cov, 2, U(rng, 1.5, 3.0))
    cuts = rng.uniform(0.5, 1.9, p)

    def to_bits(X, r):
        return (cuts < X).astype(float)

    return Design(Population(gaussian_classes(means, [cov, cov]), transform=to_bits), (LI(rng, 150, 500),) * 2)


@family(
    "count_mix",
    "discrete",
    "K 2-3, p 5-12: Poisson counts (log-means from a latent Gaussian) and binary features, 150-600 rows per class",
)
def _count_mix(rng):
    K, p = I(rng, 2, 3), I(rng, 5, 12)
    cov = 0.3 * random_correlation(rng, p, U(rng, 0.3, 1.5))
    means = spread_means(rng, cov, K, U(rng, 1.5, 3.0)) + rng.uniform(0.0, 2.0, p)
    is_bin = rng.random(p) < 0.3
    cut = means.mean(axis=0)

    def to_counts(X, r):
        out = r.poisson(np.exp(X)).astype(float)
        out[:, is_bin] = (X[:, is_bin] > cut[is_bin]).astype(float)
        return out

    return Design(Population(gaussian_classes(means, [cov] * K), transform=to_counts), (LI(rng, 150, 600),) * K)


# ----------------------------------------------------------------------------------------
# many_classes
# ----------------------------------------------------------------------------------------


@family("tidy_six", "many_classes", "K=6, p 6-10, equal covariances, 40-80 rows per class", kept=True)
def _tidy_six(rng):
    return _equal(rng, 6, I(rng, 6, 10), I(rng, 40, 80), U(rng, 2.5, 3.5), 1.0)


@family(
    "many_small_classes",
    "many_classes",
    "K 8-15, p 3-10, equal covariances, 15-40 rows per class (at least p + 5)",
)
def _many_small_classes(rng):
    K, p = I(rng, 8, 15), I(rng, 3, 10)
    return _equal(rng, K, p, max(p + 5, I(rng, 15, 40)), U(rng, 2.5, 4.0), U(rng, 0.3, 2.0))


@family(
    "many_classes_spread",
    "many_classes",
    "K 6-10, p 3-8, unequal covariances (spread 0.4-0.7), 40-100 rows per class",
)
def _many_classes_spread(rng):
    K, p = I(rng, 6, 10), I(rng, 3, 8)
    return _unequal(rng, K, p, LI(rng, 40, 100), U(rng, 2.5, 4.0), U(rng, 0.4, 0.7), U(rng, 0.3, 1.0))


@family(
    "many_classes_few_features",
    "many_classes",
    "K 8-12, p 2-4, mildly unequal covariances, 30-150 rows per class",
)
def _many_classes_few_features(rng):
    K, p = I(rng, 8, 12), I(rng, 2, 4)
    return _unequal(rng, K, p, LI(rng, 30, 150), U(rng, 2.5, 4.0), U(rng, 0.0, 0.4), U(rng, 0.0, 0.6))


# ----------------------------------------------------------------------------------------
# imbalance
# ----------------------------------------------------------------------------------------


@family(
    "lopsided_pair",
    "imbalance",
    "K=2, 800-2000 vs 60-150 rows, p 4-8, equal covariances, distance 1.5-2.5",
    kept=True,
)
def _lopsided_pair(rng):
    return _equal(rng, 2, I(rng, 4, 8), (LI(rng, 800, 2000), LI(rng, 60, 150)), U(rng, 1.5, 2.5), 1.0)


@family(
    "rare_class_pair",
    "imbalance",
    "K=2, ratio 10:1 to 30:1 (rare class 40-100 rows), p 3-10, equal covariances, distance 2-3.5",
)
def _rare_class_pair(rng):
    small = LI(rng, 40, 100)
    counts = (int(small * LU(rng, 10, 30)), small)
    return _equal(rng, 2, I(rng, 3, 10), counts, U(rng, 2.0, 3.5), U(rng, 0.2, 1.5))


@family(
    "rare_classes_multi",
    "imbalance",
    "K=4, two common classes and two rare ones (10-40 times fewer rows, at least p + 10), p 3-8, equal covariances",
)
def _rare_classes_multi(rng):
    p = I(rng, 3, 8)
    big = LI(rng, 600, 2000)
    rare = [max(p + 10, int(big / LU(rng, 10, 40))) for _ in range(2)]
    return _equal(rng, 4, p, (big, LI(rng, 400, big), *rare), U(rng, 2.0, 3.5), U(rng, 0.2, 1.5))


@family(
    "rare_class_faint",
    "imbalance",
    "K=2, ratio 5:1 to 15:1, weak signal (distance 1.2-2.2), p 3-8, mildly unequal covariances",
)
def _rare_class_faint(rng):
    small = LI(rng, 40, 120)
    counts = (int(small * LU(rng, 5, 15)), small)
    return _unequal(rng, 2, I(rng, 3, 8), counts, U(rng, 1.2, 2.2), U(rng, 0.1, 0.3), U(rng, 0.0, 0.4))


# ----------------------------------------------------------------------------------------
# outliers
# ----------------------------------------------------------------------------------------


@family(
    "scattered_outliers",
    "outliers",
    "K=2, p 4-8, 2-6% of each class moved 6-10 SD in random directions, 100-300 rows per class",
    kept=True,
)
def _scattered_outliers(rng):
    out = (U(rng, 0.02, 0.06), U(rng, 6.0, 10.0), "scattered", (0, 1))
    return _equal(rng, 2, I(rng, 4, 8), I(rng, 100, 300), U(rng, 1.5, 2.5), 1.0, outliers=out)


@family(
    "contaminated_varied",
    "outliers",
    "K 2-3, p 3-10, 2-15% of some classes moved 3-12 SD (scattered or clustered), 100-600 rows per class",
)
def _contaminated_varied(rng):
    K = I(rng, 2, 3)
    hit = tuple(int(k) for k in np.flatnonzero(rng.random(K) < 0.6)) or (0,)
    mode = "clustered" if rng.random() < 0.5 else "scattered"
    out = (U(rng, 0.02, 0.15), U(rng, 3.0, 12.0), mode, hit)
    return _equal(rng, K, I(rng, 3, 10), LI(rng, 100, 600), U(rng, 1.5, 3.0), U(rng, 0.2, 2.0), outliers=out)


@family(
    "contaminated_spread",
    "outliers",
    "K=2, p 3-8, unequal covariances, 3-8% of each class moved 5-10 SD at random, 150-800 rows per class",
)
def _contaminated_spread(rng):
    out = (U(rng, 0.03, 0.08), U(rng, 5.0, 10.0), "scattered", (0, 1))
    return _unequal(
        rng, 2, I(rng, 3, 8), LI(rng, 150, 800), U(rng, 1.5, 2.5), U(rng, 0.3, 0.6), U(rng, 0.3, 0.8), outliers=out
    )


@family(
    "contaminated_cluster",
    "outliers",
    "K 2-4, p 4-10, 5-12% of one class replaced by a tight far cluster (4-8 SD), 150-500 rows per class",
)
def _contaminated_cluster(rng):
    K = I(rng, 2, 4)
    out = (U(rng, 0.05, 0.12), U(rng, 4.0, 8.0), "clustered", (I(rng, 0, K - 1),))
    return _equal(rng, K, I(rng, 4, 10), LI(rng, 150, 500), U(rng, 2.0, 3.0), U(rng, 0.3, 1.5), outliers=out)


# ----------------------------------------------------------------------------------------
# dimension
# ----------------------------------------------------------------------------------------


@family(
    "crowded_pair",
    "dimension",
    "K=2, p 30-50, rows per class p/2 + 3-10 (p near N - K), equal covariances",
    kept=True,
)
def _crowded_pair(rng):
    p = I(rng, 30, 50)
    return _equal(rng, 2, p, p // 2 + I(rng, 3, 10), U(rng, 2.5, 3.5), 2.0)


@family(
    "wide_moderate",
    "dimension",
    "K=2, p 60-100, 200-300 rows per class, equal covariances",
    kept=True,
)
def _wide_moderate(rng):
    return _equal(rng, 2, I(rng, 60, 100), I(rng, 200, 300), U(rng, 2.5, 3.5), 2.0)


def _ratio_sizes(rng, K):
    ratio = LU(rng, 0.05, 0.8)  # p / N
    p = I(rng, 5, 60)
    n_k = int(np.clip(round(p / ratio / K), 8, 1500))
    return p, n_k


@family(
    "ratio_sweep_equal",
    "dimension",
    "K 2-3, p 5-60 with p/N log-uniform on 0.05-0.8, equal covariances, distance 2-4",
)
def _ratio_sweep_equal(rng):
    K = I(rng, 2, 3)
    p, n_k = _ratio_sizes(rng, K)
    return _equal(rng, K, p, n_k, U(rng, 2.0, 4.0), U(rng, 0.3, 3.0))


@family(
    "ratio_sweep_spread",
    "dimension",
    "K 2-3, p 5-60 with p/N log-uniform on 0.05-0.8, unequal covariances (spread 0.2-0.5), distance 2-4",
)
def _ratio_sweep_spread(rng):
    K = I(rng, 2, 3)
    p, n_k = _ratio_sizes(rng, K)
    return _unequal(rng, K, p, n_k, U(rng, 2.0, 4.0), U(rng, 0.2, 0.5), U(rng, 0.2, 0.6), U(rng, 0.3, 2.0))


# ----------------------------------------------------------------------------------------
# logit_only
# ----------------------------------------------------------------------------------------


def _logit(rng, features, p, K, slope) -> LogitPopulation:
    """Coefficients scaled so the sd of each linear predictor over the feature distribution is
    ``slope``; each intercept puts the class's log-odds against class 0 at zero at a random
    quantile (0.3-0.7) of its linear predictor, so no class is very rare."""
    X = features(rng, 20_000)
    coef = rng.standard_normal((p, K))
    coef[:, 0] = 0.0
    eta = X @ coef
    sd = eta[:, 1:].std(axis=0)
    coef[:, 1:] *= slope / sd
    eta = X @ coef
    intercept = np.zeros(K)
    intercept[1:] = -np.quantile(eta[:, 1:], rng.uniform(0.3, 0.7, K - 1), axis=0).diagonal()
    return LogitPopulation(features, coef, intercept)


def _logit_rows(rng, p) -> tuple[int, ...]:
    return (LI(rng, 300, 1500),)  # total training rows; class counts are random


@family(
    "logit_lognormal",
    "logit_only",
    "K 2-3, p 3-8 correlated log-normal features (log-sd 0.8-1.2), labels from a logistic model "
    "(linear-predictor sd 3-8), 300-1500 rows",
)
def _logit_lognormal(rng):
    p, K = I(rng, 3, 8), (2 if rng.random() < 0.7 else 3)
    L = np.linalg.cholesky(random_correlation(rng, p, 1.0))
    sd = U(rng, 0.8, 1.2)

    def features(r, m):
        return np.exp(sd * r.standard_normal((m, p)) @ L.T)

    return Design(_logit(rng, features, p, K, U(rng, 3.0, 8.0)), _logit_rows(rng, p))


@family(
    "logit_gamma",
    "logit_only",
    "K=2, p 3-8 independent gamma features (shapes 0.5-2), labels from a logistic model "
    "(linear-predictor sd 3-8), 300-1500 rows",
)
def _logit_gamma(rng):
    p = I(rng, 3, 8)
    shape = rng.uniform(0.5, 2.0, p)

    def features(r, m):
        return r.gamma(shape, 1.0, (m, p))

    return Design(_logit(rng, features, p, 2, U(rng, 3.0, 8.0)), _logit_rows(rng, p))


@family(
    "logit_clusters",
    "logit_only",
    "K=2, p 3-8 features from a mixture of 2-4 Gaussian clusters, labels from a logistic model "
    "(linear-predictor sd 3-8), 300-1500 rows",
)
def _logit_clusters(rng):
    p, M = I(rng, 3, 8), I(rng, 2, 4)
    comps = tuple(
        Component(rng.normal(0.0, 2.5, p), np.diag(np.exp(rng.uniform(-1.0, 0.5, p))), float(w))
        for w in rng.dirichlet(2.0 * np.ones(M))
    )

    def features(r, m):
        return _draw_mixture(r, comps, m)

    return Design(_logit(rng, features, p, 2, U(rng, 3.0, 8.0)), _logit_rows(rng, p))


# ----------------------------------------------------------------------------------------
# shape_other
# ----------------------------------------------------------------------------------------


@family(
    "skewed_lognormal",
    "shape_other",
    "log-normal features from Gaussian classes (log-sd 0.7-1.1, slightly unequal), K 2-3, p 3-6, 200-500 rows per class",
    kept=True,
)
def _skewed_lognormal(rng):
    K, p = I(rng, 2, 3), I(rng, 3, 6)
    cov = random_correlation(rng, p, 0.7)
    means = spread_means(rng, cov, K, U(rng, 1.5, 2.5))
    sd = U(rng, 0.7, 1.1)
    covs = [sd**2 * cov * np.exp(0.3 * (k - (K - 1) / 2)) for k in range(K)]
    return Design(Population(gaussian_classes(means, covs), transform=lambda X, r: np.exp(X)), (LI(rng, 200, 500),) * K)


@family(
    "split_class",
    "shape_other",
    "K=2, p 3-6: one class is two clusters either side of the other (offset 2-3.5), 200-600 rows per class",
    kept=True,
)
def _split_class(rng):
    p = I(rng, 3, 6)
    cov = random_correlation(rng, p, 0.5)
    L = np.linalg.cholesky(cov)
    u = L @ rng.standard_normal(p)
    u *= U(rng, 2.0, 3.5) / np.sqrt(u @ np.linalg.solve(cov, u))
    centre = Component(np.zeros(p), L)
    sides = (Component(u, L, 0.5), Component(-u, L, 0.5))
    return Design(Population(((centre,), sides)), (LI(rng, 200, 600),) * 2)


@family(
    "near_separable",
    "shape_other",
    "K=2, p 3-8, classes 4-6 Mahalanobis units apart, 40-100 rows per class",
    kept=True,
)
def _near_separable(rng):
    return _equal(rng, 2, I(rng, 3, 8), I(rng, 40, 100), U(rng, 4.0, 6.0), 1.0)


@family(
    "wild_scales",
    "shape_other",
    "feature scales from 1e-4 to 1e4, K 2-3, p 4-8, equal or mildly unequal covariances, 150-400 rows per class",
    kept=True,
)
def _wild_scales(rng):
    K, p = I(rng, 2, 3), I(rng, 4, 8)
    base = random_correlation(rng, p, 1.0)
    means = spread_means(rng, base, K, U(rng, 1.5, 2.5))
    covs = perturbed_covariances(rng, base, K, U(rng, 0.0, 0.3), U(rng, 0.0, 0.3))
    scales = 10.0 ** rng.uniform(-4, 4, p)
    scales[0], scales[-1] = 1e-4, 1e4
    pop = Population(gaussian_classes(means, covs), transform=lambda X, r: X * scales)
    return Design(pop, (LI(rng, 150, 400),) * K)


@family(
    "cluster_classes",
    "shape_other",
    "K 2-3, p 3-8, every class a mixture of 1-3 Gaussian clusters (random weights, offsets 1.5-3.5), "
    "200-800 rows per class",
)
def _cluster_classes(rng):
    K, p = I(rng, 2, 3), I(rng, 3, 8)
    cov = random_correlation(rng, p, U(rng, 0.3, 1.5))
    L = np.linalg.cholesky(cov)
    centres = spread_means(rng, cov, K, U(rng, 2.0, 3.5))
    classes = []
    for k in range(K):
        M = I(rng, 1, 3)
        w = rng.dirichlet(2.0 * np.ones(M))
        comps = []
        for j in range(M):
            off = L @ rng.standard_normal(p)
            off *= (U(rng, 1.5, 3.5) if j else 0.0) / max(1e-9, np.sqrt(off @ np.linalg.solve(cov, off)))
            comps.append(Component(centres[k] + off, U(rng, 0.6, 1.2) * L, float(w[j])))
        classes.append(tuple(comps))
    return Design(Population(tuple(classes)), (LI(rng, 200, 800),) * K)


@family(
    "separable_varied",
    "shape_other",
    "K 2-3, p 5-25, classes 4-7 Mahalanobis units apart, 25-100 rows per class (often completely separable)",
)
def _separable_varied(rng):
    K, p = I(rng, 2, 3), I(rng, 5, 25)
    return _equal(rng, K, p, max(p + 3, LI(rng, 25, 100)), U(rng, 4.0, 7.0), U(rng, 0.3, 2.0))


# ========================================================================================
# Second batch (written 2026-12-03, held out when written: split.SECOND_BATCH)
#
# New generators or clearly different parameterisations of the gap territories, written after the
# first batch's held-out families were retired into tuning and before any tuning run or audit
# touched these. Two per category, so every category keeps families on both sides.
# ========================================================================================


def _block_cov(rng: np.random.Generator, p: int, low: int, high: int, rho_low: float, rho_high: float) -> np.ndarray:
    """Block-diagonal equicorrelation: blocks of ``low``-``high`` features, each with its own correlation."""
    cov = np.eye(p)
    start = 0
    while start < p:
        size = min(p - start, I(rng, low, high))
        rho = U(rng, rho_low, rho_high)
        block = slice(start, start + size)
        cov[block, block] = rho + (1.0 - rho) * np.eye(size)
        start += size
    return cov


def _on_features(rng: np.random.Generator, p: int, k: int) -> np.ndarray:
    """The p x k matrix of ``k`` randomly chosen coordinate directions."""
    return np.eye(p)[:, rng.choice(p, size=k, replace=False)]


# equal_gaussian -------------------------------------------------------------------------


@family(
    "equal_block_sparse",
    "equal_gaussian",
    "K 2-3, p 6-24 in correlated blocks of 2-6 features (within-block correlation 0.3-0.9), mean difference "
    "on 2-5 features only, distance 1.5-3.5, 40-400 rows per class",
)
def _equal_block_sparse(rng):
    K, p = I(rng, 2, 3), I(rng, 6, 24)
    cov = _block_cov(rng, p, 2, 6, 0.3, 0.9)
    means = means_along(rng, cov, _on_features(rng, p, min(p, I(rng, 2, 5))), K, U(rng, 1.5, 3.5))
    return _gauss(means, [cov] * K, (LI(rng, 40, 400),) * K)


@family(
    "equal_noise_features",
    "equal_gaussian",
    "K=2, 1-3 informative features among p 10-40 independent ones of unequal variance (sd ratio up to 7), "
    "distance 1.5-3, 20-120 rows per class",
)
def _equal_noise_features(rng):
    p = I(rng, 10, 40)
    cov = np.diag(np.exp(rng.uniform(-1.0, 1.0, p)) ** 2)
    means = means_along(rng, cov, _on_features(rng, p, I(rng, 1, 3)), 2, U(rng, 1.5, 3.0))
    return _gauss(means, [cov, cov], (LI(rng, 20, 120),) * 2)


# quiet_signal ---------------------------------------------------------------------------


@family(
    "quiet_smallest_direction",
    "quiet_signal",
    "K=2, p 6-20, random-orientation covariance of condition 100-10000, difference along the single "
    "lowest-variance direction (tilted 0-20% towards a random one), distance 2-4, 1.5-4 rows per class per feature",
)
def _quiet_smallest_direction(rng):
    p = I(rng, 6, 20)
    cov = spectrum_cov(rng, p, LU(rng, 100, 10_000))
    w, V = np.linalg.eigh(cov)
    tilt = rng.standard_normal(p)
    direction = V[:, 0] + U(rng, 0.0, 0.2) * tilt / np.linalg.norm(tilt)
    means = means_along(rng, cov, direction[:, None], 2, U(rng, 2.0, 4.0))
    return _gauss(means, [cov, cov], (int(round(U(rng, 1.5, 4) * p)),) * 2)


@family(
    "quiet_factor_multi",
    "quiet_signal",
    "K 3-4, 1-3 strong factors (loadings 2-4, noise 0.05-0.2), p 10-24, class means spread over the "
    "lowest-variance and the highest-variance direction, distance 2-3.5, 2-6 rows per class per feature",
)
def _quiet_factor_multi(rng):
    K, p = I(rng, 3, 4), I(rng, 10, 24)
    cov = _factor_cov(rng, p, I(rng, 1, 3), U(rng, 2.0, 4.0), U(rng, 0.05, 0.2))
    w, V = np.linalg.eigh(cov)
    means = means_along(rng, cov, np.column_stack([V[:, 0], V[:, -1]]), K, U(rng, 2.0, 3.5))
    return _gauss(means, [cov] * K, (int(round(U(rng, 2, 6) * p)),) * K)


# small_class_spread ---------------------------------------------------------------------


@family(
    "small_class_tight",
    "small_class_spread",
    "K=2, a large diffuse class (500-3000 rows) and a small tight one (20-80 rows, covariance 1/20-1/4 of the "
    "other's and turned at random), centres 0-1.5 apart, p 2-6",
)
def _small_class_tight(rng):
    p = I(rng, 2, 6)
    base = random_correlation(rng, p, U(rng, 0.3, 1.5))
    R = random_rotation(rng, p)
    small = R @ base @ R.T / LU(rng, 4.0, 20.0)
    means = spread_means(rng, base, 2, U(rng, 0.0, 1.5))
    return _gauss(means, [base, (small + small.T) / 2], (LI(rng, 500, 3000), LI(rng, 20, 80)))


@family(
    "small_class_wide_few",
    "small_class_spread",
    "K=2, p 5-12, a large class (400-1500 rows) and a small one of 1.5-4 rows per feature whose covariance "
    "is 2-8 times larger and turned, distance 1.5-3",
)
def _small_class_wide_few(rng):
    p = I(rng, 5, 12)
    base = random_correlation(rng, p, U(rng, 0.3, 1.5))
    R = small_rotation(rng, p, U(rng, 0.5, 1.5))
    big = LU(rng, 2.0, 8.0) * R @ base @ R.T
    means = spread_means(rng, base, 2, U(rng, 1.5, 3.0))
    return _gauss(means, [base, (big + big.T) / 2], (LI(rng, 400, 1500), int(round(U(rng, 1.5, 4) * p))))


# orientation_only -----------------------------------------------------------------------


@family(
    "turned_mirror",
    "orientation_only",
    "K=2, p 2-6, strongly correlated features; the second covariance is the first with the signs of half the "
    "features flipped (same eigenvalues, correlations of opposite sign), distance 0-1.5, 100-800 rows per class",
)
def _turned_mirror(rng):
    p = I(rng, 2, 6)
    base = random_correlation(rng, p, U(rng, 2.0, 6.0))
    flip = np.ones(p)
    flip[rng.choice(p, size=max(1, p // 2), replace=False)] = -1.0
    means = spread_means(rng, base, 2, U(rng, 0.0, 1.5))
    return _gauss(means, [base, base * np.outer(flip, flip)], (LI(rng, 100, 800),) * 2)


@family(
    "turned_many",
    "orientation_only",
    "K 4-6, p 3-6, every class a uniformly random rotation of one elongated covariance (condition 5-30), "
    "distance 1.5-3, 60-300 rows per class",
)
def _turned_many(rng):
    K, p = I(rng, 4, 6), I(rng, 3, 6)
    base = spectrum_cov(rng, p, LU(rng, 5, 30))
    covs = turned_covariances(rng, base, K, None)
    return _gauss(spread_means(rng, base, K, U(rng, 1.5, 3.0)), covs, (LI(rng, 60, 300),) * K)


# size_only ------------------------------------------------------------------------------


@family(
    "scaled_many",
    "size_only",
    "K 4-6, p 3-8, covariances c_k times one shared shape with c_k spread log-uniformly over a range of "
    "ratio 2-8, distance 1.5-3, 60-300 rows per class",
)
def _scaled_many(rng):
    K, p = I(rng, 4, 6), I(rng, 3, 8)
    factors = tuple(np.exp(rng.uniform(0.0, np.log(LU(rng, 2.0, 8.0)), K)))
    return _scaled(rng, K, p, LI(rng, 60, 300), U(rng, 1.5, 3.0), factors)


@family(
    "scaled_same_centre",
    "size_only",
    "K=2, p 5-20, the second covariance 1.3-3 times the first, centres 0-0.8 apart, 100-600 rows per class",
)
def _scaled_same_centre(rng):
    return _scaled(rng, 2, I(rng, 5, 20), LI(rng, 100, 600), U(rng, 0.0, 0.8), (1.0, LU(rng, 1.3, 3.0)))


# unequal_general ------------------------------------------------------------------------


@family(
    "spread_moderate_rows",
    "unequal_general",
    "K=2, p 10-25, 5-12 rows per class per feature, log-scale spread 0.3-0.6 and turn 0.3-0.8, distance 1.5-3",
)
def _spread_moderate_rows(rng):
    p = I(rng, 10, 25)
    n = int(round(U(rng, 5, 12) * p))
    return _unequal(rng, 2, p, n, U(rng, 1.5, 3.0), U(rng, 0.3, 0.6), U(rng, 0.3, 0.8), U(rng, 0.3, 2.0))


@family(
    "spread_low_rank",
    "unequal_general",
    "K 2-3, p 4-12, a shared covariance plus a class-specific factor of rank 1-2 (variance 1-9 along it), "
    "distance 1-2.5, 150-800 rows per class",
)
def _spread_low_rank(rng):
    K, p = I(rng, 2, 3), I(rng, 4, 12)
    base = random_correlation(rng, p, U(rng, 0.3, 1.5))
    covs = []
    for _ in range(K):
        B = rng.standard_normal((p, I(rng, 1, 2)))
        B *= U(rng, 1.0, 3.0) / np.linalg.norm(B, axis=0)
        covs.append(base + B @ B.T)
    return _gauss(spread_means(rng, base, K, U(rng, 1.0, 2.5)), covs, (LI(rng, 150, 800),) * K)


# heavy_tails ----------------------------------------------------------------------------


@family(
    "heavy_tails_independent",
    "heavy_tails",
    "independent t coordinates (1.5-4 degrees of freedom each, not elliptical) mixed by one random matrix, "
    "K 2-3, p 3-10, distance 1.5-3, 100-600 rows per class",
)
def _heavy_tails_independent(rng):
    K, p = I(rng, 2, 3), I(rng, 3, 10)
    df = rng.uniform(1.5, 4.0, p)
    A = np.linalg.cholesky(random_correlation(rng, p, U(rng, 0.3, 2.0)))
    means = spread_means(rng, A @ A.T, K, U(rng, 1.5, 3.0))

    def draw_class(r, k, m):
        return means[k] + r.standard_t(df, size=(m, p)) @ A.T

    return Design(ClassSampler(draw_class, p), (LI(rng, 100, 600),) * K)


@family(
    "heavy_tails_scale_mixture",
    "heavy_tails",
    "Gaussian scale mixture in training and test rows alike: each row from N(mu_k, S) with probability "
    "0.8-0.95, else from N(mu_k, c S) with c 9-50; K 2-3, p 3-8, distance 1.5-3, 150-800 rows per class",
)
def _heavy_tails_scale_mixture(rng):
    K, p = I(rng, 2, 3), I(rng, 3, 8)
    cov = random_correlation(rng, p, U(rng, 0.3, 2.0))
    L = np.linalg.cholesky(cov)
    means = spread_means(rng, cov, K, U(rng, 1.5, 3.0))
    w, c = U(rng, 0.8, 0.95), LU(rng, 9.0, 50.0)
    classes = tuple((Component(m, L, w), Component(m, np.sqrt(c) * L, 1.0 - w)) for m in means)
    return Design(Population(classes), (LI(rng, 150, 800),) * K)


# discrete -------------------------------------------------------------------------------


@family(
    "ordinal_unequal",
    "discrete",
    "K 2-3, p 4-10 ordinal features with 2-4 levels cut from latent Gaussian classes with unequal covariances "
    "(spread 0.3-0.6), distance 1.5-3, 100-500 rows per class",
)
def _ordinal_unequal(rng):
    K, p = I(rng, 2, 3), I(rng, 4, 10)
    d = _unequal(rng, K, p, LI(rng, 100, 500), U(rng, 1.5, 3.0), U(rng, 0.3, 0.6), U(rng, 0.2, 0.8))
    levels = rng.integers(2, 5, size=p)
    cuts = [np.sort(rng.normal(0.0, 0.8, levels[j] - 1)) for j in range(p)]

    def to_levels(X, r):
        return np.column_stack([(X[:, j, None] > cuts[j][None, :]).sum(axis=1) for j in range(p)]).astype(float)

    assert isinstance(d.population, Population)
    return Design(Population(d.population.classes, transform=to_levels), d.counts)


@family(
    "binary_independent_mix",
    "discrete",
    "K=2, p 6-16: half independent binary features whose prevalence differs by class (log-odds difference "
    "0.3-1.5), half continuous Gaussian with a shared covariance, 60-400 rows per class",
)
def _binary_independent_mix(rng):
    p = I(rng, 6, 16)
    n_bin = p // 2
    n_con = p - n_bin
    base = rng.normal(0.0, 1.2, n_bin)
    shift = rng.uniform(0.3, 1.5, n_bin) * rng.choice([-1.0, 1.0], n_bin)
    prev = [1.0 / (1.0 + np.exp(-(base + s * shift / 2))) for s in (-1.0, 1.0)]
    cov = random_correlation(rng, n_con, U(rng, 0.3, 1.5))
    L = np.linalg.cholesky(cov)
    means = spread_means(rng, cov, 2, U(rng, 0.8, 2.0))

    def draw_class(r, k, m):
        bits = (r.random((m, n_bin)) < prev[k]).astype(float)
        return np.hstack([bits, means[k] + r.standard_normal((m, n_con)) @ L.T])

    return Design(ClassSampler(draw_class, p), (LI(rng, 60, 400),) * 2)


# many_classes ---------------------------------------------------------------------------


@family(
    "many_classes_wide",
    "many_classes",
    "K 10-20, p 8-20, equal covariances, 1-3 rows per class per feature (at least 10), distance 3-5",
)
def _many_classes_wide(rng):
    K, p = I(rng, 10, 20), I(rng, 8, 20)
    return _equal(rng, K, p, max(10, int(round(U(rng, 1, 3) * p))), U(rng, 3.0, 5.0), U(rng, 0.3, 2.0))


@family(
    "many_classes_uneven",
    "many_classes",
    "K 6-12, p 3-8, class sizes log-uniform on 15-300 (at least p + 5), mildly unequal covariances "
    "(spread 0-0.3), distance 2.5-4",
)
def _many_classes_uneven(rng):
    K, p = I(rng, 6, 12), I(rng, 3, 8)
    counts = tuple(max(p + 5, LI(rng, 15, 300)) for _ in range(K))
    return _unequal(rng, K, p, counts, U(rng, 2.5, 4.0), U(rng, 0.0, 0.3), U(rng, 0.0, 0.5))


# imbalance ------------------------------------------------------------------------------


@family(
    "rare_class_spread",
    "imbalance",
    "K=2, ratio 20:1 to 80:1 (rare class 15-60 rows, at least p + 5), the rare class's covariance 2-5 times "
    "larger, p 3-8, distance 2-3.5",
)
def _rare_class_spread(rng):
    p = I(rng, 3, 8)
    small = max(p + 5, LI(rng, 15, 60))
    base = random_correlation(rng, p, U(rng, 0.3, 1.5))
    means = spread_means(rng, base, 2, U(rng, 2.0, 3.5))
    return _gauss(means, [base, LU(rng, 2.0, 5.0) * base], (int(small * LU(rng, 20, 80)), small))


@family(
    "rare_classes_several",
    "imbalance",
    "K 5-7, one class of 800-3000 rows and the others of 10-40 rows (at least p + 3), p 3-6, equal "
    "covariances, distance 2-4",
)
def _rare_classes_several(rng):
    K, p = I(rng, 5, 7), I(rng, 3, 6)
    counts = (LI(rng, 800, 3000), *(max(p + 3, LI(rng, 10, 40)) for _ in range(K - 1)))
    return _equal(rng, K, p, counts, U(rng, 2.0, 4.0), U(rng, 0.3, 1.5))


# outliers -------------------------------------------------------------------------------


@family(
    "contaminated_few_rows",
    "outliers",
    "K=2, p 5-15, 3-8 rows per class per feature, 5-20% of each class moved 4-10 SD in random directions, "
    "equal covariances, distance 2-3.5",
)
def _contaminated_few_rows(rng):
    p = I(rng, 5, 15)
    out = (U(rng, 0.05, 0.20), U(rng, 4.0, 10.0), "scattered", (0, 1))
    n = int(round(U(rng, 3, 8) * p))
    return _equal(rng, 2, p, n, U(rng, 2.0, 3.5), U(rng, 0.3, 1.5), outliers=out)


@family(
    "contaminated_cells",
    "outliers",
    "K 2-3, p 3-10, 1-5% of the single training entries shifted 10-50 SD (cellwise gross errors), equal "
    "covariances, distance 1.5-3, 100-600 rows per class",
)
def _contaminated_cells(rng):
    K = I(rng, 2, 3)
    out = (U(rng, 0.01, 0.05), U(rng, 10.0, 50.0), "cells", tuple(range(K)))
    return _equal(rng, K, I(rng, 3, 10), LI(rng, 100, 600), U(rng, 1.5, 3.0), U(rng, 0.3, 2.0), outliers=out)


# dimension ------------------------------------------------------------------------------


@family(
    "ratio_sweep_factor",
    "dimension",
    "K=2, p 10-80 with p/N log-uniform on 0.05-0.8, a covariance of 2-5 factors plus noise 0.1-0.5, "
    "difference along a random direction, distance 2-4",
)
def _ratio_sweep_factor(rng):
    p = I(rng, 10, 80)
    n_k = int(np.clip(round(p / LU(rng, 0.05, 0.8) / 2), 8, 2000))
    cov = _factor_cov(rng, p, I(rng, 2, 5), 1.0, U(rng, 0.1, 0.5))
    return _gauss(spread_means(rng, cov, 2, U(rng, 2.0, 4.0)), [cov, cov], (n_k, n_k))


@family(
    "ratio_sweep_multi",
    "dimension",
    "K 4-6, p 5-40 with p/N log-uniform on 0.05-0.8, equal covariances, difference on a third of the "
    "features, distance 2.5-4",
)
def _ratio_sweep_multi(rng):
    K, p = I(rng, 4, 6), I(rng, 5, 40)
    n_k = int(np.clip(round(p / LU(rng, 0.05, 0.8) / K), 8, 1000))
    cov = random_correlation(rng, p, U(rng, 0.3, 2.0))
    means = means_along(rng, cov, _on_features(rng, p, max(2, p // 3)), K, U(rng, 2.5, 4.0))
    return _gauss(means, [cov] * K, (n_k,) * K)


# logit_only -----------------------------------------------------------------------------


@family(
    "logit_mixed_types",
    "logit_only",
    "K=2, p 4-10 independent features, each binary, exponential or uniform, labels from a logistic model "
    "(linear-predictor sd 3-8), 300-2000 rows",
)
def _logit_mixed_types(rng):
    p = I(rng, 4, 10)
    kind = rng.integers(0, 3, size=p)
    prevalence = rng.uniform(0.1, 0.6, p)

    def features(r, m):
        X = np.empty((m, p))
        for j in range(p):
            if kind[j] == 0:
                X[:, j] = r.random(m) < prevalence[j]
            elif kind[j] == 1:
                X[:, j] = r.exponential(1.0, m)
            else:
                X[:, j] = r.uniform(-1.0, 1.0, m)
        return X

    return Design(_logit(rng, features, p, 2, U(rng, 3.0, 8.0)), (LI(rng, 300, 2000),))


@family(
    "logit_beta_multi",
    "logit_only",
    "K 3-4, p 3-8 independent beta features (both shapes 0.3-3), labels from a multinomial logistic model "
    "(linear-predictor sd 3-8), 400-2000 rows",
)
def _logit_beta_multi(rng):
    K, p = I(rng, 3, 4), I(rng, 3, 8)
    a, b = rng.uniform(0.3, 3.0, p), rng.uniform(0.3, 3.0, p)

    def features(r, m):
        return r.beta(a, b, (m, p))

    return Design(_logit(rng, features, p, K, U(rng, 3.0, 8.0)), (LI(rng, 400, 2000),))


# shape_other ----------------------------------------------------------------------------


@family(
    "skewed_opposite",
    "shape_other",
    "K=2, p 2-6, centred log-normal noise (log-sd 0.5-1) skewed up in one class and mirrored (skewed down) in "
    "the other, shared correlation, centres 1-3 SD apart, 150-600 rows per class",
)
def _skewed_opposite(rng):
    p = I(rng, 2, 6)
    L = np.linalg.cholesky(random_correlation(rng, p, U(rng, 0.3, 1.5)))
    sd = U(rng, 0.5, 1.0)
    scale = np.sqrt((np.exp(sd**2) - 1.0) * np.exp(sd**2))  # sd of exp(sd * z)
    means = spread_means(rng, np.eye(p), 2, U(rng, 1.0, 3.0))

    def draw_class(r, k, m):
        noise = (np.exp(sd * r.standard_normal((m, p))) - np.exp(sd**2 / 2)) / scale
        return means[k] + (1.0 if k == 0 else -1.0) * noise @ L.T

    return Design(ClassSampler(draw_class, p), (LI(rng, 150, 600),) * 2)


@family(
    "banana_classes",
    "shape_other",
    "K=2, p 2-6, Gaussian classes bent by x2 += b (x1^2 - 1) with b 0.5-1.5 of opposite sign in the two "
    "classes, centres 1-2.5 apart, 150-600 rows per class",
)
def _banana_classes(rng):
    p = I(rng, 2, 6)
    L = np.linalg.cholesky(random_correlation(rng, p, U(rng, 0.0, 0.8)))
    b = U(rng, 0.5, 1.5)
    means = spread_means(rng, np.eye(p), 2, U(rng, 1.0, 2.5))

    def draw_class(r, k, m):
        Z = r.standard_normal((m, p))
        Z[:, 1] += (b if k == 0 else -b) * (Z[:, 0] ** 2 - 1.0)
        return means[k] + Z @ L.T

    return Design(ClassSampler(draw_class, p), (LI(rng, 150, 600),) * 2)


# ========================================================================================
# Third batch (written 2026-12-03, held out when written: split.THIRD_BATCH)
#
# Written after the second batch was retired into tuning and before any tuning run or audit
# touched these. Two per category, with generators the first two batches lack: AR(1) (Toeplitz)
# and compound-symmetry covariances, near-singular shared covariances, many noise features at
# moderate rows per feature, classes of different tail weight, multivariate Laplace classes,
# discrete features cut from classes with unequal covariances, class-specific count dispersion,
# class means in groups, cellwise errors at many features and sentinel codes, XOR and surrounding
# mixtures, heavy-tailed and count features under a logistic model.
# ========================================================================================


def _ar1_cov(p: int, rho: float, sd: np.ndarray | None = None) -> np.ndarray:
    """AR(1) (Toeplitz) covariance rho^|i-j|, optionally with feature standard deviations ``sd``."""
    C = chain_correlation(p, rho)
    return C if sd is None else C * np.outer(sd, sd)


def _feature_sd(rng: np.random.Generator, p: int, log_range: float) -> np.ndarray:
    return np.exp(rng.uniform(-log_range, log_range, p))


def _per_feature(rng: np.random.Generator, p: int, low: float, high: float) -> int:
    """Rows per class: ``low``-``high`` rows per feature."""
    return int(round(U(rng, low, high) * p))


# equal_gaussian -------------------------------------------------------------------------


@family(
    "equal_ar1_moderate",
    "equal_gaussian",
    "K 2-3, p 8-30, one AR(1) covariance (rho 0.3-0.9, feature sd ratio up to 4), mean difference along a "
    "random direction, distance 1.5-3, 3-10 rows per class per feature",
)
def _equal_ar1_moderate(rng):
    K, p = I(rng, 2, 3), I(rng, 8, 30)
    cov = _ar1_cov(p, U(rng, 0.3, 0.9), _feature_sd(rng, p, 0.7))
    return _gauss(spread_means(rng, cov, K, U(rng, 1.5, 3.0)), [cov] * K, (_per_feature(rng, p, 3, 10),) * K)


@family(
    "equal_noise_moderate",
    "equal_gaussian",
    "K 2-4, p 20-50, 3-8 informative features among weakly correlated noise features (shared covariance), "
    "distance 2-3.5, 2-6 rows per class per feature",
)
def _equal_noise_moderate(rng):
    K, p = I(rng, 2, 4), I(rng, 20, 50)
    sd = _feature_sd(rng, p, 0.5)
    cov = random_correlation(rng, p, U(rng, 0.0, 0.8)) * np.outer(sd, sd)
    means = means_along(rng, cov, _on_features(rng, p, I(rng, 3, 8)), K, U(rng, 2.0, 3.5))
    return _gauss(means, [cov] * K, (_per_feature(rng, p, 2, 6),) * K)


# quiet_signal ---------------------------------------------------------------------------


@family(
    "quiet_near_singular",
    "quiet_signal",
    "K=2, p 8-25, shared covariance of rank p/2-p-2 plus isotropic noise 0.001-0.02 (near-singular), "
    "difference along a random direction, distance 2-4, 3-8 rows per class per feature",
)
def _quiet_near_singular(rng):
    p = I(rng, 8, 25)
    r = I(rng, max(2, p // 2), p - 2)
    B = rng.standard_normal((p, r))
    cov = B @ B.T / r + LU(rng, 0.001, 0.02) * np.eye(p)
    return _gauss(spread_means(rng, cov, 2, U(rng, 2.0, 4.0)), [cov, cov], (_per_feature(rng, p, 3, 8),) * 2)


@family(
    "quiet_compound_symmetry",
    "quiet_signal",
    "K 2-3, p 10-30, equicorrelated features (rho 0.7-0.95), class means differing by contrasts (sums of "
    "zero, the low-variance directions), distance 2-3.5, 1.5-4 rows per class per feature",
)
def _quiet_compound_symmetry(rng):
    K, p = I(rng, 2, 3), I(rng, 10, 30)
    rho = U(rng, 0.7, 0.95)
    cov = rho + (1.0 - rho) * np.eye(p)
    dirs = rng.standard_normal((p, 2))
    dirs -= dirs.mean(axis=0)
    means = means_along(rng, cov, dirs, K, U(rng, 2.0, 3.5))
    return _gauss(means, [cov] * K, (_per_feature(rng, p, 1.5, 4),) * K)


# small_class_spread ---------------------------------------------------------------------


@family(
    "small_class_sign_flip",
    "small_class_spread",
    "K=3, p 4-10, two large classes (300-1500 rows) with one AR(1) covariance (rho 0.5-0.9) and a small class "
    "(3-6 rows per feature) with rho of opposite sign and 3-10 times the variance, distance 1.5-3",
)
def _small_class_sign_flip(rng):
    p = I(rng, 4, 10)
    rho = U(rng, 0.5, 0.9)
    base = _ar1_cov(p, rho)
    small = LU(rng, 3.0, 10.0) * _ar1_cov(p, -rho)
    big = LI(rng, 300, 1500)
    counts = (big, LI(rng, 300, 1500), _per_feature(rng, p, 3, 6))
    return _gauss(spread_means(rng, base, 3, U(rng, 1.5, 3.0)), [base, base, small], counts)


@family(
    "small_class_inflated_factor",
    "small_class_spread",
    "K=2, p 3-10, a large class (300-1500 rows) and a small one (15-60 rows, at least p + 5) whose covariance "
    "adds a strong rank-1 factor (variance 5-20 along it), distance 1-2.5",
)
def _small_class_inflated_factor(rng):
    p = I(rng, 3, 10)
    base = random_correlation(rng, p, U(rng, 0.3, 1.5))
    b = rng.standard_normal(p)
    b *= np.sqrt(LU(rng, 5.0, 20.0)) / np.linalg.norm(b)
    counts = (LI(rng, 300, 1500), max(p + 5, LI(rng, 15, 60)))
    return _gauss(spread_means(rng, base, 2, U(rng, 1.0, 2.5)), [base, base + np.outer(b, b)], counts)


# orientation_only -----------------------------------------------------------------------


@family(
    "turned_ar1_pair",
    "orientation_only",
    "K=2, p 3-12, AR(1) covariances with rho 0.5-0.9 in one class and -rho in the other (same eigenvalues), "
    "distance 0.5-2, 80-600 rows per class",
)
def _turned_ar1_pair(rng):
    p = I(rng, 3, 12)
    rho = U(rng, 0.5, 0.9)
    base = _ar1_cov(p, rho)
    return _gauss(spread_means(rng, base, 2, U(rng, 0.5, 2.0)), [base, _ar1_cov(p, -rho)], (LI(rng, 80, 600),) * 2)


@family(
    "turned_axes_swapped",
    "orientation_only",
    "K=2, p 2-8, one class's long axes are the other's short axes (eigenvalues reversed along the same "
    "random axes, condition 3-20), distance 0.5-2, 50-400 rows per class",
)
def _turned_axes_swapped(rng):
    p = I(rng, 2, 8)
    lam = np.exp(np.linspace(-0.5, 0.5, p) * np.log(LU(rng, 3.0, 20.0)))
    Q = random_rotation(rng, p)
    a, b = (Q * lam) @ Q.T, (Q * lam[::-1]) @ Q.T
    return _gauss(spread_means(rng, (a + b) / 2, 2, U(rng, 0.5, 2.0)), [a, b], (LI(rng, 50, 400),) * 2)


# size_only ------------------------------------------------------------------------------


@family(
    "scaled_ar1",
    "size_only",
    "K 2-3, p 4-15, AR(1) shape (rho 0.3-0.9) scaled by 1 to 1.5-4 across classes, distance 1-2.5, "
    "4-12 rows per class per feature",
)
def _scaled_ar1(rng):
    K, p = I(rng, 2, 3), I(rng, 4, 15)
    base = _ar1_cov(p, U(rng, 0.3, 0.9))
    top = LU(rng, 1.5, 4.0)
    factors = np.exp(np.linspace(0.0, np.log(top), K))
    covs = [f * base for f in factors]
    return _gauss(spread_means(rng, base, K, U(rng, 1.0, 2.5)), covs, (_per_feature(rng, p, 4, 12),) * K)


@family(
    "scaled_mild_wide",
    "size_only",
    "K=2, p 15-40, the second covariance 1.2-1.8 times the first (mild), distance 1.5-3, "
    "5-15 rows per class per feature",
)
def _scaled_mild_wide(rng):
    p = I(rng, 15, 40)
    return _scaled(rng, 2, p, _per_feature(rng, p, 5, 15), U(rng, 1.5, 3.0), (1.0, LU(rng, 1.2, 1.8)))


# unequal_general ------------------------------------------------------------------------


@family(
    "spread_toeplitz_mixed",
    "unequal_general",
    "K 2-3, p 4-12, each class an AR(1) covariance with its own rho (-0.8 to 0.9) and overall scale "
    "(0.5-2), distance 1-2.5, 100-800 rows per class",
)
def _spread_toeplitz_mixed(rng):
    K, p = I(rng, 2, 3), I(rng, 4, 12)
    covs = [LU(rng, 0.5, 2.0) * _ar1_cov(p, U(rng, -0.8, 0.9)) for _ in range(K)]
    return _gauss(spread_means(rng, sum(covs) / K, K, U(rng, 1.0, 2.5)), covs, (LI(rng, 100, 800),) * K)


@family(
    "spread_near_singular_class",
    "unequal_general",
    "K=2, p 4-10, one class's covariance of rank p-2 to p-1 plus noise 0.01-0.05, the other's a full random "
    "correlation, distance 1-2, 100-500 rows per class",
)
def _spread_near_singular_class(rng):
    p = I(rng, 4, 10)
    full = random_correlation(rng, p, U(rng, 0.3, 1.5))
    r = I(rng, p - 2, p - 1)
    B = rng.standard_normal((p, r))
    flat = B @ B.T / r + LU(rng, 0.01, 0.05) * np.eye(p)
    return _gauss(spread_means(rng, (full + flat) / 2, 2, U(rng, 1.0, 2.0)), [full, flat], (LI(rng, 100, 500),) * 2)


# heavy_tails ----------------------------------------------------------------------------


@family(
    "heavy_tails_laplace",
    "heavy_tails",
    "multivariate Laplace classes (Gaussian scale mixture with exponential mixing), one shared scatter, "
    "K 2-4, p 3-12, distance 1.5-3, 100-800 rows per class",
)
def _heavy_tails_laplace(rng):
    K, p = I(rng, 2, 4), I(rng, 3, 12)
    cov = random_correlation(rng, p, U(rng, 0.3, 2.0))
    L = np.linalg.cholesky(cov)
    means = spread_means(rng, cov, K, U(rng, 1.5, 3.0))

    def draw_class(r, k, m):
        w = r.exponential(1.0, m)
        return means[k] + np.sqrt(w)[:, None] * (r.standard_normal((m, p)) @ L.T)

    return Design(ClassSampler(draw_class, p), (LI(rng, 100, 800),) * K)


@family(
    "heavy_tails_unequal_df",
    "heavy_tails",
    "K=2, p 3-8, one shared scatter; one class multivariate t with 1.5-3 degrees of freedom, the other with "
    "20-50, distance 1-2.5, 150-800 rows per class",
)
def _heavy_tails_unequal_df(rng):
    p = I(rng, 3, 8)
    cov = random_correlation(rng, p, U(rng, 0.3, 2.0))
    L = np.linalg.cholesky(cov)
    means = spread_means(rng, cov, 2, U(rng, 1.0, 2.5))
    classes = ((Component(means[0], L, 1.0, U(rng, 1.5, 3.0)),), (Component(means[1], L, 1.0, U(rng, 20.0, 50.0)),))
    return Design(Population(classes), (LI(rng, 150, 800),) * 2)


# discrete -------------------------------------------------------------------------------


@family(
    "binary_unequal_latent",
    "discrete",
    "K=2, p 5-15 binary features cut near the middle from latent Gaussian classes with unequal covariances "
    "(spread 0.4-0.8, turn 0.5-1.2), distance 1.5-3, 150-600 rows per class",
)
def _binary_unequal_latent(rng):
    p = I(rng, 5, 15)
    d = _unequal(rng, 2, p, LI(rng, 150, 600), U(rng, 1.5, 3.0), U(rng, 0.4, 0.8), U(rng, 0.5, 1.2))
    cut = rng.normal(0.0, 0.4, p)

    def to_bits(X, r):
        return (cut < X).astype(float)

    assert isinstance(d.population, Population)
    return Design(Population(d.population.classes, transform=to_bits), d.counts)


@family(
    "counts_unequal_dispersion",
    "discrete",
    "K 2-3, p 4-10 count features; class 0 Poisson, the others negative binomial (dispersion 0.5-3) with "
    "log-means shifted 0.2-0.8 on half the features, base means 1-8, 100-500 rows per class",
)
def _counts_unequal_dispersion(rng):
    K, p = I(rng, 2, 3), I(rng, 4, 10)
    base = np.log(rng.uniform(1.0, 8.0, p))
    shifts = [np.zeros(p)] + [
        np.where(rng.random(p) < 0.5, rng.uniform(0.2, 0.8, p) * rng.choice([-1.0, 1.0], p), 0.0) for _ in range(K - 1)
    ]
    size = [np.inf] + [U(rng, 0.5, 3.0) for _ in range(K - 1)]

    def draw_class(r, k, m):
        mu = np.exp(base + shifts[k])
        if not np.isfinite(size[k]):
            return r.poisson(mu, (m, p)).astype(float)
        return r.negative_binomial(size[k], size[k] / (size[k] + mu), (m, p)).astype(float)

    return Design(ClassSampler(draw_class, p), (LI(rng, 100, 500),) * K)


# many_classes ---------------------------------------------------------------------------


@family(
    "many_classes_below_p",
    "many_classes",
    "K 6-10, p 20-40, one AR(1) covariance (rho 0.3-0.8), fewer rows per class than features (0.6-1.5 per "
    "feature, at least 10), distance 3-5",
)
def _many_classes_below_p(rng):
    K, p = I(rng, 6, 10), I(rng, 20, 40)
    cov = _ar1_cov(p, U(rng, 0.3, 0.8))
    n = max(10, _per_feature(rng, p, 0.6, 1.5))
    return _gauss(spread_means(rng, cov, K, U(rng, 3.0, 5.0)), [cov] * K, (n,) * K)


@family(
    "many_classes_grouped",
    "many_classes",
    "K 6-12 classes whose means fall in 2-3 groups (close within a group), p 4-10, mildly unequal covariances "
    "(spread 0-0.4), 30-150 rows per class",
)
def _many_classes_grouped(rng):
    K, p, G = I(rng, 6, 12), I(rng, 4, 10), I(rng, 2, 3)
    base = random_correlation(rng, p, U(rng, 0.3, 1.5))
    centres = spread_means(rng, base, G, U(rng, 4.0, 6.0))
    L = np.linalg.cholesky(base)
    within = U(rng, 0.8, 1.8)
    means = np.array([centres[k % G] + within * (L @ rng.standard_normal(p)) / np.sqrt(p) for k in range(K)])
    covs = perturbed_covariances(rng, base, K, U(rng, 0.0, 0.4), U(rng, 0.0, 0.5))
    return _gauss(means, covs, (LI(rng, 30, 150),) * K)


# imbalance ------------------------------------------------------------------------------


@family(
    "rare_class_wide",
    "imbalance",
    "K=2, p 10-30, the rare class 2-4 rows per feature, ratio 10:1 to 40:1, one shared covariance, distance 2-3.5",
)
def _rare_class_wide(rng):
    p = I(rng, 10, 30)
    small = _per_feature(rng, p, 2, 4)
    return _equal(rng, 2, p, (int(small * LU(rng, 10, 40)), small), U(rng, 2.0, 3.5), U(rng, 0.3, 1.5))


@family(
    "rare_class_tails",
    "imbalance",
    "K=3, p 3-8, two common Gaussian classes (300-1500 rows) and a rare multivariate t(3) class (15-50 rows, at "
    "least p + 5), one shared scatter, distance 2-3.5",
)
def _rare_class_tails(rng):
    p = I(rng, 3, 8)
    cov = random_correlation(rng, p, U(rng, 0.3, 1.5))
    L = np.linalg.cholesky(cov)
    means = spread_means(rng, cov, 3, U(rng, 2.0, 3.5))
    classes = (
        (Component(means[0], L),),
        (Component(means[1], L),),
        (Component(means[2], L, 1.0, 3.0),),
    )
    counts = (LI(rng, 300, 1500), LI(rng, 300, 1500), max(p + 5, LI(rng, 15, 50)))
    return Design(Population(classes), counts)


# outliers -------------------------------------------------------------------------------


@family(
    "contaminated_cells_wide",
    "outliers",
    "K 2-3, p 10-30, 0.5-2% of the single training entries shifted 5-20 SD (so 5-45% of the rows hold one), "
    "one shared covariance, distance 1.5-3, 5-15 rows per class per feature",
)
def _contaminated_cells_wide(rng):
    K, p = I(rng, 2, 3), I(rng, 10, 30)
    out = (U(rng, 0.005, 0.02), U(rng, 5.0, 20.0), "cells", tuple(range(K)))
    return _equal(rng, K, p, _per_feature(rng, p, 5, 15), U(rng, 1.5, 3.0), U(rng, 0.3, 2.0), outliers=out)


@family(
    "contaminated_sentinel",
    "outliers",
    "K 2-3, p 4-12, in 3-10% of the training rows the first feature holds one fixed code 20-60 SD above its "
    "mean (a missing-value code), one shared covariance, distance 1.5-3, 100-600 rows per class",
)
def _contaminated_sentinel(rng):
    K = I(rng, 2, 3)
    out = (U(rng, 0.03, 0.10), U(rng, 20.0, 60.0), "sentinel", tuple(range(K)))
    return _equal(rng, K, I(rng, 4, 12), LI(rng, 100, 600), U(rng, 1.5, 3.0), U(rng, 0.3, 2.0), outliers=out)


# dimension ------------------------------------------------------------------------------


@family(
    "ratio_sweep_ar1",
    "dimension",
    "K 2-3, p 10-60 with p/N log-uniform on 0.1-0.9, one AR(1) covariance (rho 0.5-0.95), difference along a "
    "random direction, distance 2-4",
)
def _ratio_sweep_ar1(rng):
    K, p = I(rng, 2, 3), I(rng, 10, 60)
    n_k = int(np.clip(round(p / LU(rng, 0.1, 0.9) / K), 8, 1500))
    cov = _ar1_cov(p, U(rng, 0.5, 0.95))
    return _gauss(spread_means(rng, cov, K, U(rng, 2.0, 4.0)), [cov] * K, (n_k,) * K)


@family(
    "ratio_sweep_sparse",
    "dimension",
    "K=2, p 20-80 with p/N log-uniform on 0.1-0.8, mean difference on 2-6 features, weakly correlated "
    "shared covariance, distance 2-3.5",
)
def _ratio_sweep_sparse(rng):
    p = I(rng, 20, 80)
    n_k = int(np.clip(round(p / LU(rng, 0.1, 0.8) / 2), 8, 2000))
    cov = random_correlation(rng, p, U(rng, 0.0, 1.0))
    means = means_along(rng, cov, _on_features(rng, p, I(rng, 2, 6)), 2, U(rng, 2.0, 3.5))
    return _gauss(means, [cov, cov], (n_k, n_k))


# logit_only -----------------------------------------------------------------------------


@family(
    "logit_heavy_features",
    "logit_only",
    "K 2-3, p 3-8 independent t features (2-5 degrees of freedom), labels from a logistic model "
    "(linear-predictor sd 3-8), 300-2000 rows",
)
def _logit_heavy_features(rng):
    K, p = I(rng, 2, 3), I(rng, 3, 8)
    df = rng.uniform(2.0, 5.0, p)

    def features(r, m):
        return r.standard_t(df, size=(m, p))

    return Design(_logit(rng, features, p, K, U(rng, 3.0, 8.0)), (LI(rng, 300, 2000),))


@family(
    "logit_count_features",
    "logit_only",
    "K=2, p 3-8 independent count features (Poisson or negative binomial, means 0.5-10), labels from a "
    "logistic model (linear-predictor sd 3-8), 300-2000 rows",
)
def _logit_count_features(rng):
    p = I(rng, 3, 8)
    mu = rng.uniform(0.5, 10.0, p)
    size = np.where(rng.random(p) < 0.5, np.inf, rng.uniform(0.5, 3.0, p))

    def features(r, m):
        X = np.empty((m, p))
        for j in range(p):
            if np.isfinite(size[j]):
                X[:, j] = r.negative_binomial(size[j], size[j] / (size[j] + mu[j]), m)
            else:
                X[:, j] = r.poisson(mu[j], m)
        return X

    return Design(_logit(rng, features, p, 2, U(rng, 3.0, 8.0)), (LI(rng, 300, 2000),))


# shape_other ----------------------------------------------------------------------------


@family(
    "xor_mixture",
    "shape_other",
    "K=2, p 2-8, each class a mixture of two Gaussian clusters at opposite corners of a square in two features "
    "(an XOR layout, corners 1.5-3 SD from the centre), the other features noise, 150-600 rows per class",
)
def _xor_mixture(rng):
    p = I(rng, 2, 8)
    a = U(rng, 1.5, 3.0) / np.sqrt(2.0)
    L = np.linalg.cholesky(random_correlation(rng, p, U(rng, 0.0, 0.5)))

    def corner(s1, s2):
        m = np.zeros(p)
        m[:2] = (s1 * a, s2 * a)
        return Component(m, L, 1.0)

    classes = ((corner(1, 1), corner(-1, -1)), (corner(1, -1), corner(-1, 1)))
    return Design(Population(classes), (LI(rng, 150, 600),) * 2)


@family(
    "surrounded_class",
    "shape_other",
    "K=2, p 2-6, one Gaussian class surrounded by the other, a mixture of 3-6 Gaussian clusters around it "
    "(2-3.5 SD away along random directions), 150-600 rows per class",
)
def _surrounded_class(rng):
    p = I(rng, 2, 6)
    L = np.linalg.cholesky(random_correlation(rng, p, U(rng, 0.0, 0.8)))
    inner = (Component(np.zeros(p), L),)
    dirs = rng.standard_normal((I(rng, 3, 6), p))
    dirs /= np.linalg.norm(dirs, axis=1, keepdims=True)
    outer = tuple(Component(U(rng, 2.0, 3.5) * (L @ d), 0.7 * L) for d in dirs)
    return Design(Population((inner, outer)), (LI(rng, 150, 600),) * 2)


FAMILIES: dict[str, Family] = {f.name: f for f in _LIST}
if len(FAMILIES) != len(_LIST):  # pragma: no cover - guards against a duplicated name
    raise RuntimeError("duplicate family name")
if any(f.category not in CATEGORIES for f in _LIST):  # pragma: no cover
    raise RuntimeError("unknown category")
SCENARIOS = FAMILIES  # the earlier name
