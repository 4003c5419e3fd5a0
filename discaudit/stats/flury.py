"""Flury's hierarchy of covariance models: equal, proportional, common principal components, unrelated.

Between "one covariance for every class" (LDA's model) and "a free covariance per class" (QDA's)
lie two models that say *how* the classes differ (Flury 1988):

* **proportional**: Sigma_k = rho_k Sigma, the classes differ in size only;
* **common principal components (CPC)**: Sigma_k = B Lambda_k B' with one orthogonal B and
  diagonal Lambda_k, the classes share their principal axes (orientation) and differ in the
  spread along them (shape and size);
* **unrelated**: the axes differ too (orientation).

Every model is fitted by maximum likelihood from the class scatter matrices alone; the
likelihood-ratio statistics of the nested steps and a BIC for each model locate the difference.

References
----------
Flury, B. (1988). Common Principal Components and Related Multivariate Models. Wiley.

Flury, B. N. & Gautschi, W. (1986). An algorithm for simultaneous orthogonal transformation of
several positive definite symmetric matrices to nearly diagonal form. SIAM Journal on Scientific
and Statistical Computing 7, 169-184.

Schwarz, G. (1978). Estimating the dimension of a model. Annals of Statistics 6, 461-464.
"""

from __future__ import annotations

from dataclasses import dataclass

import numpy as np
import numpy.typing as npt
from scipy import stats as sps

from discaudit.errors import DataError
from discaudit.stats._linalg import logdet_spd
from discaudit.stats.moments import ClassMoments

__all__ = ["MODELS", "FluryResult", "cpc_axes", "flury_hierarchy", "proportional_fit"]

FloatArray = npt.NDArray[np.float64]

#: The models, simplest first.
MODELS = ("equal", "proportional", "cpc", "unrelated")
#: FG sweeps stop when the CPC objective changes by less than this (relative) ...
_TOL = 1e-12
#: ... or after this many sweeps over all pairs of axes.
_MAX_SWEEPS = 200
#: Iterations of the 2 x 2 G-step and of the proportional fit.
_MAX_INNER = 100


@dataclass(frozen=True)
class FluryResult:
    """Maximized log-likelihoods, nested likelihood-ratio tests and BICs of the four models.

    Attributes
    ----------
    loglik : dict
        Model -> maximized Gaussian log-likelihood (MLE convention, divisor n_k; class means free).
    n_params : dict
        Model -> free covariance parameters: p(p+1)/2, p(p+1)/2 + K - 1, p(p-1)/2 + K p, K p(p+1)/2.
    bic : dict
        Model -> -2 loglik + (n_params + K p) ln N (the K p mean parameters are the same in every model).
    steps : list of dict
        The three nested tests, each ``{"simpler", "richer", "statistic", "df", "p_value"}``:
        equal within proportional, proportional within CPC, CPC within unrelated.
    best : str
        The model with the lowest BIC.
    proportional_factors : ndarray, shape (K,)
        rho_k of the proportional fit, scaled so that their n-weighted geometric mean is 1.
    cpc_axes : ndarray, shape (p, p)
        Columns: the common principal axes B of the CPC fit.
    cpc_variances : ndarray, shape (K, p)
        Lambda_k: each class's variance along each common axis.
    cpc_sweeps : int
        FG sweeps used.
    """

    loglik: dict[str, float]
    n_params: dict[str, int]
    bic: dict[str, float]
    steps: list[dict[str, float | str | int]]
    best: str
    proportional_factors: FloatArray
    cpc_axes: FloatArray
    cpc_variances: FloatArray
    cpc_sweeps: int


def _g_step(T: FloatArray, weights: FloatArray) -> FloatArray:
    """The 2 x 2 rotation Q that maximizes the diagonality of every Q' T_k Q (Flury & Gautschi's G-algorithm).

    ``T`` has shape (K, 2, 2). Iterates Q <- eigenvectors of sum_k w_k (d_k1 - d_k2) / (d_k1 d_k2) T_k,
    with d_kj = q_j' T_k q_j, until Q stops changing.
    """
    Q = np.eye(2)
    for _ in range(_MAX_INNER):
        d = np.einsum("ji,kjl,li->ki", Q, T, Q)  # (K, 2): q_j' T_k q_j
        coef = weights * (1.0 / d[:, 1] - 1.0 / d[:, 0])  # (d1 - d2) / (d1 d2), without overflowing the product
        M = np.einsum("k,kij->ij", coef, T)
        _, vectors = np.linalg.eigh((M + M.T) / 2.0)
        # keep the column order closest to the current Q, so the iteration can settle
        if abs(vectors[:, 0] @ Q[:, 0]) < abs(vectors[:, 1] @ Q[:, 0]):
            vectors = vectors[:, ::-1]
        vectors = vectors * np.sign(np.sum(vectors * Q, axis=0) + 1e-300)
        if np.max(np.abs(vectors - Q)) < 1e-14:
            return np.asarray(vectors, dtype=np.float64)
        Q = np.asarray(vectors, dtype=np.float64)
    return Q


def _cpc_objective(B: FloatArray, S: FloatArray, weights: FloatArray) -> float:
    """sum_k w_k sum_j log(b_j' S_k b_j): the CPC part of -2 loglik (up to constants)."""
    diag = np.einsum("ji,kjl,li->ki", B, S, B)
    return float(np.sum(weights[:, None] * np.log(diag)))


def cpc_axes(S: FloatArray, weights: FloatArray) -> tuple[FloatArray, int]:
    """Maximum-likelihood common principal axes of K covariance matrices (the FG algorithm).

    Parameters
    ----------
    S : ndarray, shape (K, p, p)
        Positive definite covariance matrices.
    weights : ndarray, shape (K,)
        Their weights in the likelihood (the class sizes).

    Returns
    -------
    B : ndarray, shape (p, p)
        Orthogonal; column j is the j-th common axis. Ordered by decreasing weighted variance.
    sweeps : int
        Sweeps over all pairs of axes used.

    Notes
    -----
    The F-step of Flury & Gautschi (1986) sweeps over every pair of columns (j, l) of B and
    rotates that pair by the G-step's 2 x 2 solution for the matrices [b_j b_l]' S_k [b_j b_l];
    each rotation lowers sum_k w_k sum_j log(b_j' S_k b_j), which the ML solution minimizes.
    Starts from the eigenvectors of the weighted mean of the S_k; stops when a sweep changes the
    objective by less than 1e-12 relative (at most 200 sweeps).
    """
    K, p, _ = S.shape
    w = np.asarray(weights, dtype=np.float64)
    # One common factor changes no axis: bring the matrices to unit geometric-mean variance first.
    diag = np.einsum("kii->ki", S)
    S = S / float(np.exp(np.mean(np.log(diag[diag > 0])))) if np.any(diag > 0) else S
    mean = np.einsum("k,kij->ij", w / w.sum(), S)
    _, B = np.linalg.eigh((mean + mean.T) / 2.0)
    B = B[:, ::-1].copy()
    previous = _cpc_objective(B, S, w)
    sweeps = 0
    for sweeps in range(1, _MAX_SWEEPS + 1):  # noqa: B007 (the count is returned)
        for j in range(p - 1):
            for m in range(j + 1, p):
                pair = B[:, [j, m]]
                T = np.einsum("ai,kab,bj->kij", pair, S, pair)
                B[:, [j, m]] = pair @ _g_step(T, w)
        current = _cpc_objective(B, S, w)
        if abs(previous - current) <= _TOL * max(1.0, abs(current)):
            break
        previous = current
    variance = np.einsum("k,ki->i", w, np.einsum("ji,kjl,li->ki", B, S, B))
    order = np.argsort(-variance, kind="stable")
    B = B[:, order]
    B = B * np.where(B[np.argmax(np.abs(B), axis=0), np.arange(p)] < 0, -1.0, 1.0)  # largest entry positive
    return B, sweeps


def proportional_fit(S: FloatArray, weights: FloatArray) -> tuple[FloatArray, FloatArray]:
    """Maximum-likelihood fit of Sigma_k = rho_k Sigma (Flury 1988, ch. 5).

    Alternates Sigma = sum_k w_k S_k / rho_k / sum_k w_k and rho_k = tr(Sigma^-1 S_k) / p, the two
    likelihood equations, until the rho_k settle; returns (rho, Sigma) with rho scaled so that its
    w-weighted geometric mean is 1 (Sigma absorbs the scale).
    """
    K, p, _ = S.shape
    w = np.asarray(weights, dtype=np.float64)
    rho = np.ones(K)
    Sigma = np.einsum("k,kij->ij", w / w.sum(), S)
    for _ in range(_MAX_INNER * 10):
        Sigma = np.einsum("k,kij->ij", w / rho, S) / w.sum()
        L = np.linalg.cholesky((Sigma + Sigma.T) / 2.0)
        new = np.array([np.trace(np.linalg.solve(L.T, np.linalg.solve(L, S[k]))) / p for k in range(K)])
        if np.max(np.abs(np.log(new / rho))) < 1e-13:
            rho = new
            break
        rho = new
    scale = float(np.exp(np.sum(w * np.log(rho)) / w.sum()))
    return rho / scale, Sigma * scale


def flury_hierarchy(moments: ClassMoments) -> FluryResult:
    """Fit the four covariance models to per-class moments and test each step of the hierarchy.

    Parameters
    ----------
    moments : ClassMoments
        At least two classes, every class covariance nonsingular (n_k > p).

    Returns
    -------
    FluryResult

    Raises
    ------
    DataError
        With fewer than two classes or a singular class covariance.

    Notes
    -----
    Likelihoods use the maximum-likelihood covariances S_k = scatter_k / n_k with weights n_k, the
    convention of :func:`discaudit.stats.gaussian_bic.covariance_bic`, so the equal-versus-unrelated
    comparison here is the same number as its ``delta_bic``. Up to constants, the maximized
    log-likelihood of a model with fitted Sigma_k is -1/2 sum_k n_k (ln det Sigma_k + tr(Sigma_k^-1 S_k));
    at each model's maximum the trace term is p. Nested statistics (Flury 1988, ch. 7) are twice
    the log-likelihood gains, referred to chi-square with K - 1 (equal within proportional),
    (K - 1)(p - 1) (proportional within CPC) and (K - 1) p (p - 1) / 2 (CPC within unrelated)
    degrees of freedom; they add up to the equal-versus-unrelated statistic on (K - 1) p (p + 1) / 2.
    The BIC adds the K p class means to every model, which leaves the comparison unchanged.
    """
    K, p = moments.n_classes, moments.n_features
    if K < 2:
        raise DataError("Flury's hierarchy compares at least two classes.")
    n = moments.counts.astype(np.float64)
    S = moments.scatter / n[:, None, None]
    logdets = np.array([logdet_spd(s) for s in S])
    if not np.all(np.isfinite(logdets)):
        raise DataError("Every class covariance must be nonsingular for Flury's hierarchy.")
    N = float(n.sum())
    const = p * np.log(2.0 * np.pi) + p
    pooled = np.einsum("k,kij->ij", n, S) / N
    rho, Sigma = proportional_fit(S, n)
    B, sweeps = cpc_axes(S, n)
    lam = np.einsum("ji,kjl,li->ki", B, S, B)
    neg2 = {
        "equal": N * (const + logdet_spd(pooled)),
        "proportional": float(np.sum(n * (const + p * np.log(rho))) + N * logdet_spd(Sigma)),
        "cpc": float(np.sum(n * (const + np.log(lam).sum(axis=1)))),
        "unrelated": float(np.sum(n * (const + logdets))),
    }
    # The proportional model's trace term equals p only at its maximum; keep the exact value.
    traces = np.array([np.trace(np.linalg.solve(rho[k] * Sigma, S[k])) for k in range(K)])
    neg2["proportional"] += float(np.sum(n * (traces - p)))
    q = p * (p + 1) // 2
    n_params = {"equal": q, "proportional": q + K - 1, "cpc": p * (p - 1) // 2 + K * p, "unrelated": K * q}
    loglik = {m: -v / 2.0 for m, v in neg2.items()}
    bic = {m: neg2[m] + (n_params[m] + K * p) * np.log(N) for m in MODELS}
    steps: list[dict[str, float | str | int]] = []
    for simpler, richer in zip(MODELS[:-1], MODELS[1:], strict=True):
        statistic = max(0.0, 2.0 * (loglik[richer] - loglik[simpler]))
        df = n_params[richer] - n_params[simpler]
        steps.append(
            {
                "simpler": simpler,
                "richer": richer,
                "statistic": statistic,
                "df": df,
                "p_value": float(sps.chi2.sf(statistic, df)) if df > 0 else 1.0,
            }
        )
    best = min(MODELS, key=lambda m: (bic[m], MODELS.index(m)))
    return FluryResult(loglik, n_params, bic, steps, best, rho, B, lam, sweeps)
