"""L2-penalized logistic regression and its cross-validated held-out performance at bounded cost.

:func:`fit_logistic` is the maximum of the ridge-penalized likelihood (le Cessie & van Houwelingen
1992), the model scikit-learn 1.9's ``LogisticRegression(C=C)`` fits with its default lbfgs solver:
binary logistic regression for two classes, the multinomial (softmax) model with one coefficient
vector per class for more. :func:`cross_validated_logistic` chooses C by stratified k-fold
cross-validation (Stone 1974) on a seeded stratified subsample of bounded size, and reports for the
chosen C the out-of-fold correctness and log-loss of every row used, by row position, so that a
caller can pair them with the exact leave-one-out figures of the Gaussian models
(:mod:`discaudit.stats.leave_one_out`).
"""

from __future__ import annotations

from collections.abc import Iterable
from dataclasses import dataclass
from typing import Any

import numpy as np
import numpy.typing as npt
from scipy.linalg import solve_triangular
from scipy.optimize import minimize
from scipy.special import expit

from discaudit.errors import DataError
from discaudit.stats._linalg import row_log_sum_exp
from discaudit.stats._sampling import resolve_seed
from discaudit.stats.row_keys import row_keys
from discaudit.stats.seeds import LOGISTIC_CV

FloatArray = npt.NDArray[np.float64]
IntArray = npt.NDArray[np.intp]
BoolArray = npt.NDArray[np.bool_]
UIntArray = npt.NDArray[np.uint64]

#: Grid of inverse penalty strengths C scored by default (project choice): decades on both sides of
#: scikit-learn's default C = 1, from a strong penalty to nearly none, in the features' units.
DEFAULT_C_GRID: tuple[float, ...] = (0.01, 0.1, 1.0, 10.0, 100.0)

#: Folds of the cross-validation by default: stratified 10-fold (project choice; ten folds is also the
#: default of R caret 6.0.93's ``trainControl(method = "cv")``: ``number = ifelse(grepl("cv", method),
#: 10, 25)``). Kohavi (1995) compared k-fold cross-validation with other schemes; his findings are not
#: restated here, as no second source for them was at hand.
DEFAULT_FOLDS = 10

#: Fewest folds a cross-validation may fall back to when a class has fewer rows than folds.
MIN_FOLDS = 2

#: Rows the cross-validation uses at most by default (project choice). The folds then cost about
#: 10 folds x 5 values of C fits on 3,600 rows each whatever n is (benchmarks: well under 1.5 s on one
#: core at p = 30, K = 3), and the standard error of an accuracy is at most sqrt(0.25 / 4000) = 0.008,
#: below the differences in accuracy between model families that an audit reports.
DEFAULT_MAX_ROWS = 4000

#: L-BFGS-B stops when the largest entry of the projected gradient of the mean objective falls below
#: this (scipy's ``gtol``). scikit-learn's default is its ``tol`` = 1e-4; ours is tighter (project choice):
#: on the training folds of wine and breast cancer at C = 10 and 100 the probabilities then lie within 4e-6
#: of a second-order solver's optimum (2.4e-5 at 1e-8), for about 5% more iterations.
LBFGS_GTOL = 1.0e-10

#: L-BFGS-B stops when the relative decrease of the objective falls below this (scipy's ``ftol``);
#: the value scikit-learn 1.9 passes for its lbfgs solver.
LBFGS_FTOL = 64.0 * float(np.finfo(np.float64).eps)

#: Line-search steps per L-BFGS-B iteration; the value scikit-learn 1.9 passes (scipy's default is 20).
LBFGS_MAXLS = 50

#: L-BFGS-B iterations at most (project choice; scikit-learn's default ``max_iter`` is 100). A fit that
#: stops there is kept, finite, and reported with ``converged=False``.
LBFGS_MAX_ITER = 1000


def _readonly(a: npt.ArrayLike, dtype: Any = np.float64) -> Any:
    """A read-only copy, so a frozen result cannot be changed through its arrays."""
    out = np.array(a, dtype=dtype)
    out.setflags(write=False)
    return out


# ---------------------------------------------------------------------------------------------------
# The fit


@dataclass(frozen=True)
class LogisticFit:
    """An L2-penalized logistic regression, in scikit-learn's layout.

    The model scores u = (x - centre) / scale: ``decision = intercept + u @ coef.T``.

    Attributes
    ----------
    n_classes : int
        K, the number of classes (codes 0..K-1).
    C : float
        Inverse penalty strength.
    coef : ndarray, shape (1, p) for K = 2, (K, p) for K > 2
        As scikit-learn's ``coef_``: for K = 2 the log-odds of class 1 against class 0 per unit of u;
        for K > 2 one vector per class (they sum to zero over the classes at the optimum).
    intercept : ndarray, shape (1,) for K = 2, (K,) for K > 2
        As scikit-learn's ``intercept_``; for K > 2 centred to sum to zero (see :func:`fit_logistic`).
    centre, scale : ndarray, shape (p,)
        The affine map of the features the coefficients refer to.
    feature_sd : ndarray, shape (p,)
        Standard deviation (divisor n) of each column of u over the fitted rows;
        ``coef * feature_sd`` is the change of a score per standard deviation of a feature.
    n_rows : int
        Rows fitted.
    objective : float
        The penalized negative log-likelihood at the fit, sum_i -ln p(y_i | x_i) + ||coef||^2 / (2 C).
    n_iter : int
        Iterations taken (Newton's or L-BFGS-B's, see :func:`fit_logistic`).
    converged : bool
        Whether the solver met its tolerances (``LBFGS_GTOL`` or ``LBFGS_FTOL``) within its iterations.
    """

    n_classes: int
    C: float
    coef: FloatArray
    intercept: FloatArray
    centre: FloatArray
    scale: FloatArray
    feature_sd: FloatArray
    n_rows: int
    objective: float
    n_iter: int
    converged: bool

    @property
    def n_features(self) -> int:
        """Number of features p."""
        return int(self.coef.shape[1])

    @property
    def standardized_coef(self) -> FloatArray:
        """``coef * feature_sd``: each feature's weight per standard deviation, comparable across features."""
        return np.asarray(self.coef * self.feature_sd, dtype=np.float64)

    def decision_function(self, X: npt.ArrayLike) -> FloatArray:
        """Scores of rows in the original units: shape (n,) for K = 2 (log-odds of class 1), (n, K) else."""
        Xa = _check_matrix(X, self.n_features)
        scores = self.intercept + ((Xa - self.centre) / self.scale) @ self.coef.T
        return np.asarray(scores[:, 0] if self.n_classes == 2 else scores, dtype=np.float64)

    def predict_log_proba(self, X: npt.ArrayLike) -> FloatArray:
        """ln p(k | x) of rows in the original units, shape (n, K); stable for any score."""
        return _log_proba(self.decision_function(X), self.n_classes)

    def predict(self, X: npt.ArrayLike) -> IntArray:
        """Class code of the largest score (first of ties, as numpy's argmax and scikit-learn's predict)."""
        return _predict(self.decision_function(X), self.n_classes)


def _log_proba(scores: FloatArray, n_classes: int) -> FloatArray:
    if n_classes == 2:
        return np.column_stack([-np.logaddexp(0.0, scores), -np.logaddexp(0.0, -scores)])
    return np.asarray(scores - row_log_sum_exp(scores)[:, None], dtype=np.float64)


def _predict(scores: FloatArray, n_classes: int) -> IntArray:
    # Binary: scikit-learn predicts class 1 when the log-odds are > 0, which is argmax over (0, z).
    if n_classes == 2:
        return np.asarray(scores > 0.0, dtype=np.intp)
    return np.asarray(np.argmax(scores, axis=1), dtype=np.intp)


def _row_figures(scores: FloatArray, codes: IntArray, n_classes: int) -> tuple[BoolArray, FloatArray]:
    """Correctness (argmax, first of ties) and -ln p(true class) of each row, stably."""
    correct = _predict(scores, n_classes) == codes
    if n_classes == 2:
        signed = np.where(codes == 1, -scores, scores)
        return correct, np.asarray(np.logaddexp(0.0, signed), dtype=np.float64)
    lse = row_log_sum_exp(scores)
    return correct, np.asarray(lse - scores[np.arange(codes.size), codes], dtype=np.float64)


def _check_matrix(X: npt.ArrayLike, p: int | None = None) -> FloatArray:
    Xa = np.asarray(X, dtype=np.float64)
    if Xa.ndim != 2 or Xa.shape[1] == 0:
        raise DataError(f"X must be two-dimensional (rows x features) with at least one feature; got {Xa.shape}.")
    if p is not None and Xa.shape[1] != p:
        raise DataError(f"X has {Xa.shape[1]} features; the fit has {p}.")
    # Two reductions, no n x p mask: a NaN propagates into the minimum; an infinity is the minimum or maximum.
    if Xa.size and not (np.isfinite(Xa.min()) and np.isfinite(Xa.max())):
        raise DataError("X holds NaN or infinite values; drop or impute those rows first.")
    return Xa


def _check_rows(X: npt.ArrayLike, codes: npt.ArrayLike, n_classes: int) -> tuple[FloatArray, IntArray, int]:
    if isinstance(n_classes, bool) or not isinstance(n_classes, (int, np.integer)) or n_classes < 2:
        raise DataError(f"n_classes must be an integer of at least 2; got {n_classes!r}.")
    K = int(n_classes)
    Xa = _check_matrix(X)
    ca = np.asarray(codes)
    if ca.shape != (Xa.shape[0],):
        raise DataError(f"X has {Xa.shape[0]} rows but codes have shape {ca.shape}; give one code per row.")
    if ca.size and not np.issubdtype(ca.dtype, np.integer):
        raise DataError(f"class codes must be integers 0..{K - 1}; got dtype {ca.dtype}.")
    if ca.size and (ca.min() < 0 or ca.max() >= K):
        raise DataError(f"class codes must lie in 0..{K - 1}; got {ca.min()}..{ca.max()}.")
    return Xa, ca.astype(np.intp), K


def _check_C(C: float) -> float:
    value = float(C)
    if not (np.isfinite(value) and value > 0.0):
        raise DataError(f"C must be a finite positive number; got {C!r}.")
    return value


def _affine(X: FloatArray, scale: npt.ArrayLike | None, centre: npt.ArrayLike | None) -> tuple[FloatArray, FloatArray]:
    """The (centre, scale) the coefficients refer to: see :func:`fit_logistic`."""
    p = X.shape[1]
    if scale is None:
        s = np.ones(p)
    else:
        s = np.asarray(scale, dtype=np.float64)
        if s.shape != (p,) or not np.all(np.isfinite(s)) or np.any(s <= 0.0):
            raise DataError(f"scale must hold {p} finite positive values; got shape {s.shape}.")
    if centre is None:
        c = X.mean(axis=0) if scale is not None else np.zeros(p)
    else:
        c = np.asarray(centre, dtype=np.float64)
        if c.shape != (p,) or not np.all(np.isfinite(c)):
            raise DataError(f"centre must hold {p} finite values; got shape {c.shape}.")
    return c, s


@dataclass(frozen=True)
class _Basis:
    """Centred features rotated to the eigenbasis of their covariance, for a well-conditioned optimizer.

    u = (x - centre) / scale are the features the model refers to, u_bar their mean over the fitted rows,
    Sigma = (u - u_bar)'(u - u_bar) / n = V diag(sigma) V'. ``Y = (u - u_bar) V``.
    """

    Y: FloatArray
    u_mean: FloatArray
    vectors: FloatArray
    sigma: FloatArray
    sd: FloatArray
    centre: FloatArray
    scale: FloatArray

    @classmethod
    def of(cls, X: FloatArray, centre: FloatArray, scale: FloatArray) -> _Basis:
        u_mean = (X.mean(axis=0) - centre) / scale
        U = (X - centre) / scale - u_mean
        cov = (U.T @ U) / X.shape[0]
        if not np.all(np.isfinite(cov)):
            raise DataError("a feature's spread overflows float64; rescale the features (pass scale=).")
        values, vectors = np.linalg.eigh((cov + cov.T) / 2.0)
        return cls(
            Y=U @ vectors,
            u_mean=u_mean,
            vectors=vectors,
            sigma=np.maximum(values, 0.0),
            sd=np.sqrt(np.maximum(np.diag(cov), 0.0)),
            centre=centre,
            scale=scale,
        )

    def start(self, fit: LogisticFit) -> _Params:
        """The parameters of ``fit`` (whatever centre and scale it refers to) on these features: a warm start."""
        # fit scores b0 + ((x - c0) / s0) w0, and x = centre + scale * u.
        w0, b0 = fit.coef, fit.intercept
        W = w0 * (self.scale / fit.scale)
        return W, b0 + w0 @ ((self.centre - fit.centre) / fit.scale) + W @ self.u_mean

    def external(self, params: _Params, n_classes: int) -> tuple[FloatArray, FloatArray]:
        """(coef, intercept) of u from the parameters, scores b + (u - u_bar) W'."""
        W, b = params
        intercept = b - W @ self.u_mean
        if n_classes > 2:
            intercept = intercept - intercept.mean()
        return np.asarray(W, dtype=np.float64), np.asarray(intercept, dtype=np.float64)


#: Parameters between fits: coefficients of u, shape (1 or K, p), and scores at the mean, b + (u - u_bar) W'.
_Params = tuple[FloatArray, FloatArray]

#: Curvature of the log-loss that the preconditioner assumes, p (1 - p) at p = 1/2 (its largest). It
#: sets only the optimizer's coordinates (see :func:`_solve`), never the optimum.
PRECONDITION_CURVATURE = 0.25

#: Newton's method (exact Hessian) is used where the parameters are few, d = K' (p + 1) with K' = 1 for two
#: classes and K for more, at most NEWTON_MAX_PARAMS, and a Hessian is cheap, n d^2 (its cost, up to a
#: constant) at most NEWTON_MAX_WORK. There about five Hessians and their Cholesky factors cost less
#: than the tens of L-BFGS-B iterations they replace; on more rows a well-conditioned L-BFGS-B needs few
#: iterations and is the cheaper (design choice, measured with one BLAS thread: Newton 2x to 3.5x faster
#: on iris, wine and breast cancer, even at (500, 8), 1.1x to 3x slower from (2,000, 10) to (1e5, 30)).
NEWTON_MAX_PARAMS = 160
NEWTON_MAX_WORK = 1.0e6

#: Newton iterations at most before L-BFGS-B takes over from the start (design choice: from a warm start
#: a fit takes 3 to 8, from zero on separable data up to about 25).
NEWTON_MAX_ITER = 50

#: Sufficient decrease of the Armijo condition f(x + t d) <= f(x) + ARMIJO t g'd (Nocedal & Wright's
#: usual 1e-4), and the most halvings of t tried.
ARMIJO = 1.0e-4
NEWTON_MAX_HALVINGS = 40


def _scores(basis: _Basis, rows: BoolArray, params: _Params, n_classes: int) -> FloatArray:
    """Scores b + (u - u_bar) W' = b + Y (W V)' of the selected rows: shape (n,) for K = 2, (n, K) else."""
    W, b = params
    scores = basis.Y[rows] @ (W @ basis.vectors).T + b
    return np.asarray(scores[:, 0] if n_classes == 2 else scores, dtype=np.float64)


def _binary_objective(
    theta: FloatArray, Z: FloatArray, y: FloatArray, penalty: FloatArray, strength: float
) -> tuple[float, FloatArray]:
    """Mean log-loss + strength / 2 * sum(penalty * v^2), and its gradient (intercept unpenalized)."""
    n = Z.shape[0]
    w = theta[:-1]
    z = Z @ w + theta[-1]
    loss = float(np.sum(np.logaddexp(0.0, z) - y * z)) / n
    residual = (expit(z) - y) / n  # d/dz ln(1 + e^z)
    grad = np.empty_like(theta)
    pw = penalty * w
    grad[:-1] = Z.T @ residual + strength * pw
    grad[-1] = residual.sum()
    return loss + 0.5 * strength * float(w @ pw), grad


def _multinomial_objective(
    theta: FloatArray, Z: FloatArray, own: IntArray, n_classes: int, penalty: FloatArray, strength: float
) -> tuple[float, FloatArray]:
    """Mean softmax log-loss + strength / 2 * sum_k sum_j penalty_j v_kj^2, and its gradient.

    ``own`` holds the flat positions code_i * n + i of each row's own class in the (K, n) score array
    (classes along the first axis, so the reductions over classes run along contiguous rows).
    """
    n = Z.shape[0]
    T = theta.reshape(n_classes, -1)
    W = T[:, :-1]
    S = W @ Z.T
    S += T[:, -1:]
    top = S.max(axis=0)
    S -= top
    own_score = S.ravel()[own]
    np.exp(S, out=S)
    total = S.sum(axis=0)
    loss = float(np.sum(np.log(total) - own_score)) / n
    S /= total * n  # S is now R = P / n
    S.ravel()[own] -= 1.0 / n
    PW = W * penalty
    grad = np.empty_like(T)
    grad[:, :-1] = S @ Z + strength * PW
    grad[:, -1] = S.sum(axis=1)
    return loss + 0.5 * strength * float(np.sum(W * PW)), grad.ravel()


def _binary_hessian(theta: FloatArray, Z: FloatArray, penalty: FloatArray, strength: float) -> FloatArray:
    """Hessian of :func:`_binary_objective` in theta = (v, b): Z1' diag(q (1 - q) / n) Z1 + penalty on v."""
    n, p = Z.shape
    z = Z @ theta[:-1] + theta[-1]
    weight = expit(z) * expit(-z) / n
    Zw = Z * weight[:, None]
    H = np.empty((p + 1, p + 1))
    H[:p, :p] = Zw.T @ Z
    H[:p, p] = H[p, :p] = Zw.sum(axis=0)
    H[p, p] = weight.sum()
    H[np.arange(p), np.arange(p)] += strength * penalty
    return H


def _multinomial_hessian(
    theta: FloatArray, Z1: FloatArray, n_classes: int, penalty: FloatArray, strength: float
) -> FloatArray:
    """Hessian of :func:`_multinomial_objective` in theta = (v_k, b_k) by class, plus the intercepts' common shift.

    With z1_i = (z_i, 1) and P_ik the fitted probabilities, the block of classes k, l is
    sum_i P_ik (delta_kl - P_il) z1_i z1_i' / n, the penalty adds strength * penalty on each v_k. A common
    shift of the K intercepts leaves the objective unchanged (the Hessian's null direction u, u_k = 1 on
    the intercepts); u u' / K is added, which changes no Newton step, the gradient being orthogonal to
    u (the intercepts' derivatives sum to zero over the classes), and makes the matrix positive definite.
    """
    n, q = Z1.shape
    K = n_classes
    S = theta.reshape(K, q) @ Z1.T
    S -= S.max(axis=0)
    np.exp(S, out=S)
    S /= S.sum(axis=0) * np.sqrt(n)  # S = P / sqrt(n), so each block below carries the 1 / n
    H = np.empty((K * q, K * q))
    for k in range(K):
        rows = slice(k * q, (k + 1) * q)
        for m in range(k, K):
            weight = S[k] * ((1.0 / np.sqrt(n) if m == k else 0.0) - S[m])
            block = (Z1 * weight[:, None]).T @ Z1
            H[rows, m * q : (m + 1) * q] = block
            H[m * q : (m + 1) * q, rows] = block.T
    weights = np.arange(K * q).reshape(K, q)
    diagonal = weights[:, :-1].ravel()
    H[diagonal, diagonal] += np.tile(strength * penalty, K)
    intercepts = weights[:, -1]
    H[np.ix_(intercepts, intercepts)] += 1.0 / K
    return H


def _newton(
    objective: Any, args: tuple[object, ...], hessian: Any, hessian_args: tuple[object, ...], x0: FloatArray
) -> tuple[FloatArray, float, int] | None:
    """Minimize a smooth convex objective by Newton's method with a backtracking (Armijo) line search.

    Stops, converged, when the largest entry of the gradient is at most ``LBFGS_GTOL`` (L-BFGS-B's own
    criterion) or when the decrease the Newton step promises, half the Newton decrement g'H^-1 g, is
    below ``LBFGS_FTOL`` relative to the objective (nothing further is resolvable in float64; the step
    is taken). ``objective(theta, *args)`` returns the value and the gradient, ``hessian(theta,
    *hessian_args)`` the Hessian. Returns (theta, objective, iterations), or None when the Hessian is
    not numerically positive definite, the line search fails or ``NEWTON_MAX_ITER`` is reached (the
    caller then uses L-BFGS-B).
    Nocedal & Wright (2006), Numerical Optimization, 2nd ed., sections 3.1 and 3.4.
    """
    theta = np.array(x0, dtype=np.float64)
    f, g = objective(theta, *args)
    for it in range(NEWTON_MAX_ITER):
        if float(np.max(np.abs(g))) <= LBFGS_GTOL:
            return theta, f, it
        try:
            L = np.linalg.cholesky(hessian(theta, *hessian_args))
        except np.linalg.LinAlgError:
            return None
        step = -solve_triangular(L.T, solve_triangular(L, g, lower=True), lower=False)
        slope = float(g @ step)
        if not (np.all(np.isfinite(step)) and slope < 0.0):
            return None
        small = -0.5 * slope <= LBFGS_FTOL * max(abs(f), 1.0)
        t = 1.0
        for _ in range(NEWTON_MAX_HALVINGS):
            f_new, g_new = objective(theta + t * step, *args)
            if f_new <= f + ARMIJO * t * slope:
                break
            t *= 0.5
        else:
            return (theta, f, it) if small else None
        theta = theta + t * step
        f, g = f_new, g_new
        if small:
            return theta, f, it + 1
    return None


class _Folds:
    """The training problems of every fold at one C, stacked: the fits of :func:`_solve`, solved together.

    Fold f's problem is the one :func:`_solve` poses on the rows outside fold f, in its coordinates
    (``spread`` from that fold's row count): the held-out rows enter with weight 0, so each objective is
    that fold's function, only summed over a longer array. Newton's method then runs on all folds at
    once, each fold with its own step length, and stops for each fold by :func:`_newton`'s criteria.
    """

    def __init__(self, basis: _Basis, fold: IntArray, n_folds: int, codes: IntArray, n_classes: int, C: float):
        Y = basis.Y
        m, p = Y.shape
        self.K = n_classes
        self.weight = (fold[None, :] != np.arange(n_folds)[:, None]).astype(np.float64)  # (F, m)
        self.n = self.weight.sum(axis=1)
        self.spread = np.sqrt(basis.sigma[None, :] + 1.0 / (PRECONDITION_CURVATURE * C * self.n[:, None]))
        self.Z1 = np.empty((n_folds, m, p + 1))
        self.Z1[:, :, :p] = Y[None, :, :] / self.spread[:, None, :]
        self.Z1[:, :, p] = 1.0
        self.penalty = 1.0 / (self.spread * self.spread)
        self.strength = 1.0 / (C * self.n)
        self.scaled = self.weight / self.n[:, None]  # w_fi / n_f
        if n_classes == 2:
            self.target = (codes == 1).astype(np.float64)
        else:
            self.target = (codes[None, :] == np.arange(n_classes)[:, None]).astype(np.float64)  # (K, m)

    def start(self, basis: _Basis, starts: list[_Params | None]) -> FloatArray:
        K = 1 if self.K == 2 else self.K
        p = basis.Y.shape[1]
        x0 = np.zeros((len(starts), K * (p + 1)))
        for f, start in enumerate(starts):
            if start is not None:
                W0, b0 = start
                x0[f] = np.column_stack([(W0 @ basis.vectors) * self.spread[f], b0]).ravel()
        return x0

    def objective(self, idx: IntArray, theta: FloatArray) -> tuple[FloatArray, FloatArray]:
        """Objectives (len(idx),) and gradients (len(idx), d) of the folds ``idx`` at ``theta``."""
        Z1, scaled, penalty, strength = self.Z1[idx], self.scaled[idx], self.penalty[idx], self.strength[idx]
        if self.K == 2:
            z = np.matmul(Z1, theta[:, :, None])[:, :, 0]
            loss = np.sum(scaled * (np.logaddexp(0.0, z) - self.target * z), axis=1)
            residual = (expit(z) - self.target) * scaled
            grad = np.matmul(residual[:, None, :], Z1)[:, 0, :]
            w = theta[:, :-1]
            pw = penalty * w
            grad[:, :-1] += strength[:, None] * pw
            return loss + 0.5 * strength * np.sum(w * pw, axis=1), grad
        K = self.K
        T = theta.reshape(len(idx), K, -1)
        S = np.matmul(T, Z1.transpose(0, 2, 1))  # (F, K, m)
        S -= S.max(axis=1, keepdims=True)
        own = np.sum(S * self.target, axis=1)
        np.exp(S, out=S)
        total = S.sum(axis=1)
        loss = np.sum(scaled * (np.log(total) - own), axis=1)
        S /= total[:, None, :]
        S -= self.target
        S *= scaled[:, None, :]
        grad = np.matmul(S, Z1)  # (F, K, q)
        W = T[:, :, :-1]
        PW = W * penalty[:, None, :]
        grad[:, :, :-1] += strength[:, None, None] * PW
        return loss + 0.5 * strength * np.sum(W * PW, axis=(1, 2)), grad.reshape(len(idx), -1)

    def hessian(self, idx: IntArray, theta: FloatArray) -> FloatArray:
        """Hessians (len(idx), d, d): :func:`_binary_hessian` / :func:`_multinomial_hessian` per fold."""
        Z1, scaled, penalty, strength = self.Z1[idx], self.scaled[idx], self.penalty[idx], self.strength[idx]
        F, _, q = Z1.shape
        p = q - 1
        if self.K == 2:
            z = np.matmul(Z1, theta[:, :, None])[:, :, 0]
            weight = expit(z) * expit(-z) * scaled
            H = np.matmul((Z1 * weight[:, :, None]).transpose(0, 2, 1), Z1)
            H[:, np.arange(p), np.arange(p)] += strength[:, None] * penalty
            return np.asarray(H, dtype=np.float64)
        K = self.K
        P = np.matmul(theta.reshape(F, K, q), Z1.transpose(0, 2, 1))
        P -= P.max(axis=1, keepdims=True)
        np.exp(P, out=P)
        P /= P.sum(axis=1, keepdims=True)
        H = np.empty((F, K * q, K * q))
        for k in range(K):
            rows = slice(k * q, (k + 1) * q)
            for m in range(k, K):
                weight = P[:, k] * ((1.0 if m == k else 0.0) - P[:, m]) * scaled
                block = np.matmul((Z1 * weight[:, :, None]).transpose(0, 2, 1), Z1)
                H[:, rows, m * q : (m + 1) * q] = block
                H[:, m * q : (m + 1) * q, rows] = block.transpose(0, 2, 1)
        positions = np.arange(K * q).reshape(K, q)
        diagonal = positions[:, :-1].ravel()
        H[:, diagonal, diagonal] += np.tile(strength[:, None] * penalty, (1, K))
        intercepts = positions[:, -1]
        H[:, intercepts[:, None], intercepts[None, :]] += 1.0 / K
        return H


def _newton_folds(problems: _Folds, x0: FloatArray) -> tuple[FloatArray, BoolArray]:
    """:func:`_newton` on every fold at once; returns the parameters (F, d) and which folds converged.

    A fold whose Hessian is not numerically positive definite, whose line search fails or that reaches
    ``NEWTON_MAX_ITER`` is reported as not converged (the caller solves it alone).
    """
    theta = np.array(x0, dtype=np.float64)
    F = theta.shape[0]
    everything = np.arange(F)
    f, g = problems.objective(everything, theta)
    active = np.ones(F, dtype=np.bool_)
    converged = np.zeros(F, dtype=np.bool_)
    for _ in range(NEWTON_MAX_ITER):
        done = active & (np.max(np.abs(g), axis=1) <= LBFGS_GTOL)
        converged |= done
        active &= ~done
        idx = np.flatnonzero(active)
        if idx.size == 0:
            break
        H = problems.hessian(idx, theta[idx])
        usable = np.ones(idx.size, dtype=np.bool_)
        try:
            np.linalg.cholesky(H)  # positive definite, every fold (the test of :func:`_newton`)
        except np.linalg.LinAlgError:
            for i in range(idx.size):
                try:
                    np.linalg.cholesky(H[i])
                except np.linalg.LinAlgError:
                    usable[i] = False
                    H[i] = np.eye(H.shape[1])  # a placeholder; the fold is dropped below
        step = -np.linalg.solve(H, g[idx][:, :, None])[:, :, 0]
        slope = np.einsum("ij,ij->i", g[idx], np.where(usable[:, None], step, 0.0))
        usable &= np.all(np.isfinite(step), axis=1) & (slope < 0.0)
        active[idx[~usable]] = False
        idx, step, slope = idx[usable], step[usable], slope[usable]
        small = -0.5 * slope <= LBFGS_FTOL * np.maximum(np.abs(f[idx]), 1.0)
        t = np.ones(idx.size)
        pending = np.ones(idx.size, dtype=np.bool_)
        for _ in range(NEWTON_MAX_HALVINGS):
            sel = np.flatnonzero(pending)
            trial = theta[idx[sel]] + t[sel, None] * step[sel]
            f_new, g_new = problems.objective(idx[sel], trial)
            ok = f_new <= f[idx[sel]] + ARMIJO * t[sel] * slope[sel]
            accepted = sel[ok]
            theta[idx[accepted]] = trial[ok]
            f[idx[accepted]], g[idx[accepted]] = f_new[ok], g_new[ok]
            pending[accepted] = False
            t[sel[~ok]] *= 0.5
            if not pending.any():
                break
        stuck = idx[pending]
        converged[stuck[small[pending]]] = True
        active[stuck] = False
        finished = idx[~pending & small]
        converged[finished] = True
        active[finished] = False
    return theta, converged


def _solve(
    basis: _Basis, rows: npt.NDArray[np.bool_] | None, codes: IntArray, n_classes: int, C: float, start: _Params | None
) -> tuple[_Params, float, int, bool]:
    """Minimize scikit-learn's lbfgs objective on ``basis.Y[rows]``; returns parameters, mean objective, iterations, converged.

    The optimizer's coordinates: v_k = e * (V' w_k) for the coefficients w_k of u, with
    e_j = sqrt(sigma_j + 1 / (a C n)), a = PRECONDITION_CURVATURE. Then Z = Y / e and ||w_k||^2 =
    sum_j v_kj^2 / e_j^2, so the objective, the loss of Z v + b plus the weighted penalty, is the same
    function; its Hessian is near the identity where the loss curves as a Sigma would have it.
    """
    Y = basis.Y if rows is None else basis.Y[rows]
    n, p = Y.shape
    K = 1 if n_classes == 2 else n_classes
    spread = np.sqrt(basis.sigma + 1.0 / (PRECONDITION_CURVATURE * C * n))
    Z = Y / spread
    penalty = 1.0 / (spread * spread)
    if start is None:
        x0 = np.zeros(K * (p + 1))
    else:
        W0, b0 = start
        x0 = np.column_stack([(W0 @ basis.vectors) * spread, b0]).ravel()
    strength = 1.0 / (C * n)
    args: tuple[object, ...]
    if n_classes == 2:
        fun: Any = _binary_objective
        args = (Z, (codes == 1).astype(np.float64), penalty, strength)
    else:
        fun = _multinomial_objective
        args = (Z, codes * n + np.arange(n), n_classes, penalty, strength)
    d = K * (p + 1)
    if d <= NEWTON_MAX_PARAMS and n * d * d <= NEWTON_MAX_WORK:
        if n_classes == 2:
            hess: Any = _binary_hessian
            hess_args: tuple[object, ...] = (Z, penalty, strength)
        else:
            hess = _multinomial_hessian
            hess_args = (np.column_stack([Z, np.ones(n)]), n_classes, penalty, strength)
        found = _newton(fun, args, hess, hess_args, x0)
        if found is not None:
            return _params_of(found[0], basis, spread, K, p), found[1], found[2], True
    res = minimize(
        fun,
        x0,
        args=args,
        jac=True,
        method="L-BFGS-B",
        options={"maxiter": LBFGS_MAX_ITER, "gtol": LBFGS_GTOL, "ftol": LBFGS_FTOL, "maxls": LBFGS_MAXLS},
    )
    theta = np.asarray(res.x, dtype=np.float64)
    if not np.all(np.isfinite(theta)):  # cannot happen with a finite start and objective; kept as a guard
        theta = x0
    return _params_of(theta, basis, spread, K, p), float(res.fun), int(res.nit), bool(res.success)


def _params_of(theta: FloatArray, basis: _Basis, spread: FloatArray, K: int, p: int) -> _Params:
    """The optimizer's coordinates back to coefficients of u and scores at the mean (see :func:`_solve`)."""
    T = theta.reshape(K, p + 1)
    return (T[:, :-1] / spread) @ basis.vectors.T, T[:, -1].copy()


def _make_fit(
    basis: _Basis, params: _Params, fun: float, n_iter: int, converged: bool, n_classes: int, C: float
) -> LogisticFit:
    coef, intercept = basis.external(params, n_classes)
    n = basis.Y.shape[0]
    return LogisticFit(
        n_classes=n_classes,
        C=C,
        coef=_readonly(coef),
        intercept=_readonly(intercept),
        centre=_readonly(basis.centre),
        scale=_readonly(basis.scale),
        feature_sd=_readonly(basis.sd),
        n_rows=n,
        objective=fun * n,
        n_iter=n_iter,
        converged=converged,
    )


def fit_logistic(
    X: npt.ArrayLike,
    codes: npt.ArrayLike,
    n_classes: int,
    C: float,
    *,
    init: LogisticFit | None = None,
    scale: npt.ArrayLike | None = None,
    centre: npt.ArrayLike | None = None,
) -> LogisticFit:
    """L2-penalized maximum likelihood logistic regression, as scikit-learn 1.9's ``LogisticRegression(C=C)``.

    Parameters
    ----------
    X : array-like, shape (n, p)
        Finite features in their original units.
    codes : array-like of int, shape (n,)
        Class code 0..K-1 of each row; every class must have a row.
    n_classes : int
        K >= 2.
    C : float
        Inverse penalty strength (> 0), scikit-learn's ``C``.
    init : LogisticFit, optional
        A fit to start from (a warm start; e.g. the fit at a neighbouring C). Any centre and scale.
    key_origin : array-like, shape (p,), optional
        Subtracted from the rows before their keys are computed (e.g. each column's minimum), so that
        shifting a column by a constant that is exact in float64 (integer data) chooses the same rows.
    scale : array-like, shape (p,), optional
        Positive per-feature scale: the model is fitted to u = (x - centre) / scale.
    centre : array-like, shape (p,), optional
        Per-feature centre. Default: the column means of X when ``scale`` is given (so ``scale`` from
        a ``StandardScaler`` fitted on X gives that scaler's transform), 0 when it is not (the raw
        features).

    Returns
    -------
    LogisticFit

    Raises
    ------
    DataError
        If the inputs are malformed or a class has no row (its intercept would diverge).

    See Also
    --------
    cross_validated_logistic : held-out accuracy and log-loss, with C chosen by cross-validation.
    discaudit.stats.separation.detect_separation : whether the unpenalized fit would exist at all.

    Notes
    -----
    With u_i the fitted features, the fit minimizes

    - K = 2: sum_i [ln(1 + exp(z_i)) - y_i z_i] + ||w||^2 / (2 C), z_i = b + u_i'w, y_i = [code_i = 1]:
      one coefficient vector, the log-odds of class 1 (scikit-learn's binary case);
    - K > 2: sum_i [ln sum_k exp(z_ik) - z_i,code_i] + sum_k ||w_k||^2 / (2 C), z_ik = b_k + u_i'w_k:
      the symmetric multinomial with K vectors, all penalized (no reference class).

    The intercepts are not penalized. scikit-learn 1.9 hands L-BFGS-B the mean of the log-losses plus
    ||w||^2 / (2 C n) (``l2_reg_strength = 1 / (C * sw_sum)`` in ``_logistic_regression_path``), the
    same objective divided by n; so do we (the tolerances then refer to that scale). The centre only
    moves the intercept; the scale changes the fit, the penalty acting on coefficients of u.

    With K > 2 a common shift of the K intercepts leaves every probability and the objective unchanged;
    scikit-learn's solver starts at zero, where the intercepts sum to zero, and its gradient steps keep
    them so. We report the intercepts centred to sum to zero, which is that solution.

    The optimizer works in other coordinates of the same function: the centred u rotated to the
    eigenbasis of their covariance (V diag(sigma) V') and each direction divided by
    sqrt(sigma_j + 1 / (a C n)), a = ``PRECONDITION_CURVATURE``, the penalty weighted to match, so that
    the minimizer is unchanged and only its conditioning improves (correlated features or features in
    uneven units would otherwise slow L-BFGS by ten times and more). Where the parameters are few and
    the rows not many (``NEWTON_MAX_PARAMS``, ``NEWTON_MAX_WORK``) the minimum is found by Newton's
    method with the exact Hessian and a backtracking line search (Nocedal & Wright 2006), stopped by
    the same gradient tolerance ``LBFGS_GTOL``, which it meets in a few iterations; elsewhere, and
    whenever Newton's method cannot proceed (a Hessian not numerically positive definite, a failed
    line search, ``NEWTON_MAX_ITER`` reached), by L-BFGS-B (Byrd, Lu, Nocedal & Zhu 1995) from the
    same start, analytic gradient, tolerances ``LBFGS_GTOL`` and ``LBFGS_FTOL``, at most
    ``LBFGS_MAX_ITER`` iterations. Both minimize the same strictly convex function (up to the
    intercepts' common shift for K > 2), so they reach the same optimum to the tolerance. Collinear or constant features need no special case (the penalty makes the optimum
    unique), and the penalty keeps the fit finite on separable data.

    References
    ----------
    le Cessie, S. & van Houwelingen, J. C. (1992). Ridge estimators in logistic regression. Applied
    Statistics 41, 191-201.
    Byrd, R. H., Lu, P., Nocedal, J. & Zhu, C. (1995). A limited memory algorithm for bound constrained
    optimization. SIAM Journal on Scientific Computing 16, 1190-1208.
    Nocedal, J. & Wright, S. J. (2006). Numerical Optimization, 2nd ed. Springer (Newton's method with
    a backtracking line search, chapters 3.1 and 3.4).

    Examples
    --------
    >>> from sklearn.datasets import load_iris  # doctest: +SKIP
    >>> X, y = load_iris(return_X_y=True)  # doctest: +SKIP
    >>> fit = fit_logistic(X, y, 3, 1.0)  # doctest: +SKIP
    >>> int(abs(fit.standardized_coef).argmax(axis=1)[0])  # doctest: +SKIP
    2

    Petal length (feature 2) carries most of the weight that tells setosa from the other species.
    """
    Xa, ca, K = _check_rows(X, codes, n_classes)
    value = _check_C(C)
    counts = np.bincount(ca, minlength=K)
    if np.any(counts == 0):
        k = int(np.flatnonzero(counts == 0)[0])
        raise DataError(f"class code {k} has no row; every class 0..{K - 1} needs one to fit its intercept.")
    c, s = _affine(Xa, scale, centre)
    basis = _Basis.of(Xa, c, s)
    start = None
    if init is not None:
        if init.n_classes != K or init.n_features != Xa.shape[1]:
            raise DataError(
                f"init has {init.n_classes} classes and {init.n_features} features; expected {K} and {Xa.shape[1]}."
            )
        start = basis.start(init)
    params, fun, n_iter, converged = _solve(basis, None, ca, K, value, start)
    return _make_fit(basis, params, fun, n_iter, converged, K, value)


# ---------------------------------------------------------------------------------------------------
# Subsample and folds


def _quotas(counts: npt.NDArray[np.int64], max_rows: int, folds: int, first_key: UIntArray) -> npt.NDArray[np.int64]:
    """Rows per class in the subsample: largest-remainder apportionment, each class at least min(n_k, folds).

    A class whose share falls below min(n_k, folds) gets that many, and ``max_rows`` less those rows is
    apportioned again among the others, until no share falls below. Equal remainders are ordered by the
    smallest row key of each class, so renaming the classes changes nothing.
    """
    N = int(counts.sum())
    if max_rows >= N:
        return np.array(counts, dtype=np.int64)
    floor = np.minimum(counts, folds)
    fixed = np.zeros(counts.size, dtype=np.bool_)
    while True:
        quota = np.where(fixed, floor, 0)
        free = np.flatnonzero(~fixed)
        budget = max_rows - int(quota.sum())
        exact = counts[free] * (budget / int(counts[free].sum()))
        share = np.floor(exact).astype(np.int64)
        order = np.lexsort((first_key[free], -(exact - share)))
        share[order[: budget - int(share.sum())]] += 1
        quota[free] = share
        low = free[share < floor[free]]
        if low.size == 0:
            return np.asarray(quota, dtype=np.int64)
        fixed[low] = True


def subsample(
    Xa: FloatArray, ca: IntArray, K: int, cap: int, floor: int, seed: int, key_origin: npt.ArrayLike | None
) -> tuple[IntArray, IntArray, npt.NDArray[np.int64]]:
    """The seeded stratified subsample (see the Notes of :func:`cross_validated_logistic`).

    Returns the positions of the rows taken (ascending), each one's place (from 0) in its class's key
    order, and the rows taken per class (at least min(n_k, ``floor``), ``cap`` in all).
    """
    keys = row_keys(Xa, seed, LOGISTIC_CV, origin=key_origin)
    counts = np.bincount(ca, minlength=K).astype(np.int64)
    by_class = [np.flatnonzero(ca == k) for k in range(K)]
    ordered = [idx[np.lexsort((idx, keys[idx]))] for idx in by_class]
    first_key = np.array([keys[o[0]] if o.size else np.iinfo(np.uint64).max for o in ordered], dtype=np.uint64)
    quota = _quotas(counts, cap, floor, first_key)
    taken = np.concatenate([o[: quota[k]] for k, o in enumerate(ordered)])
    place = np.concatenate([np.arange(quota[k]) for k in range(K)])
    order = np.argsort(taken)
    return taken[order], place[order], quota


# ---------------------------------------------------------------------------------------------------
# Cross-validation


@dataclass(frozen=True)
class LogisticEstimate:
    """Cross-validated held-out performance of L2-penalized logistic regression at the chosen C.

    Attributes
    ----------
    C : float or None
        The C of ``C_grid`` with the lowest cross-validated log-loss (first of ties); None if skipped.
    C_grid : tuple[float, ...]
        The values scored, ascending.
    cv_log_loss, cv_accuracy : ndarray, shape (len(C_grid),)
        Mean over the rows used of the out-of-fold -ln p(class | row) and correctness, per C.
    rows : ndarray of int, shape (n_used,)
        Positions (0-based, in the input's order, ascending) of the rows used.
    fold : ndarray of int, shape (n_used,)
        The fold (0..folds-1) each of those rows was held out in.
    correct : ndarray of bool, shape (n_used,)
        Whether the fit without the row's fold predicts its class at the chosen C (first maximal
        score, as numpy's argmax and scikit-learn's predict).
    neg_log_prob : ndarray, shape (n_used,)
        -ln of that fit's probability of the row's class (natural log, no clipping).
    accuracy, log_loss : float or None
        Means of ``correct`` and ``neg_log_prob``.
    accuracy_se, log_loss_se : float or None
        s / sqrt(n_used), s the sample standard deviation (divisor n_used - 1) of the per-row values.
    folds : int
        Folds used (fewer than requested when a class has fewer rows; 0 if skipped).
    folds_requested : int
        Folds asked for.
    n_used : int
        Rows used (the subsample).
    n_rows : int
        Rows given.
    class_rows : ndarray of int, shape (K,)
        Rows used per class code.
    seed : int
        The seed the row keys were drawn from (``random_state``, or a fresh one if it was None).
    fit : LogisticFit or None
        The fit at the chosen C on all rows used: which features carry the signal.
    all_converged : bool
        Whether every fit met the solver's tolerances.
    skipped : str or None
        Why nothing was estimated (then the figures are None and the arrays empty), or None.
    method : str
        ``"k_fold"`` (:func:`cross_validated_logistic`) or ``"leave_one_out"``
        (:func:`discaudit.stats.logistic_leave_one_out.leave_one_out_logistic`).
    approximated_rows : int
        Rows whose held-out figures come from the one-step approximation of their leave-one-out fit
        rather than from a refit (0 for k-fold).
    """

    C: float | None
    C_grid: tuple[float, ...]
    cv_log_loss: FloatArray
    cv_accuracy: FloatArray
    rows: IntArray
    fold: IntArray
    correct: BoolArray
    neg_log_prob: FloatArray
    accuracy: float | None
    accuracy_se: float | None
    log_loss: float | None
    log_loss_se: float | None
    folds: int
    folds_requested: int
    n_used: int
    n_rows: int
    class_rows: npt.NDArray[np.int64]
    seed: int
    fit: LogisticFit | None
    all_converged: bool
    skipped: str | None
    method: str
    approximated_rows: int


#: ``LogisticEstimate.method`` of a stratified k-fold cross-validation.
K_FOLD = "k_fold"
#: ``LogisticEstimate.method`` of a leave-one-out estimate.
LEAVE_ONE_OUT = "leave_one_out"


def skipped_estimate(
    grid: tuple[float, ...],
    folds_requested: int,
    n_rows: int,
    quota: npt.NDArray[np.int64],
    seed: int,
    reason: str,
    *,
    method: str,
) -> LogisticEstimate:
    """An estimate with nothing estimated, for ``reason``: figures None, arrays empty."""
    empty = np.empty(0)
    return LogisticEstimate(
        C=None,
        C_grid=grid,
        cv_log_loss=_readonly(empty),
        cv_accuracy=_readonly(empty),
        rows=_readonly(empty, np.intp),
        fold=_readonly(empty, np.intp),
        correct=_readonly(empty, np.bool_),
        neg_log_prob=_readonly(empty),
        accuracy=None,
        accuracy_se=None,
        log_loss=None,
        log_loss_se=None,
        folds=0,
        folds_requested=folds_requested,
        n_used=0,
        n_rows=n_rows,
        class_rows=_readonly(quota, np.int64),
        seed=seed,
        fit=None,
        all_converged=True,
        skipped=reason,
        method=method,
        approximated_rows=0,
    )


def _check_grid(C_grid: Iterable[float]) -> tuple[float, ...]:
    grid = tuple(float(c) for c in C_grid)
    if not grid or any(not (np.isfinite(c) and c > 0.0) for c in grid) or len(set(grid)) != len(grid):
        raise DataError(f"C_grid must hold distinct finite positive values; got {grid}.")
    return tuple(sorted(grid))


def _check_int(value: int, name: str, least: int) -> int:
    if isinstance(value, bool) or not isinstance(value, (int, np.integer)) or value < least:
        raise DataError(f"{name} must be an integer of at least {least}; got {value!r}.")
    return int(value)


def _mean_se(values: FloatArray) -> tuple[float, float]:
    return float(values.mean()), float(values.std(ddof=1) / np.sqrt(values.size))


def cross_validated_logistic(
    X: npt.ArrayLike,
    codes: npt.ArrayLike,
    n_classes: int,
    C_grid: Iterable[float] = DEFAULT_C_GRID,
    *,
    folds: int = DEFAULT_FOLDS,
    max_rows: int = DEFAULT_MAX_ROWS,
    random_state: int | None = None,
    scale: npt.ArrayLike | None = None,
    key_origin: npt.ArrayLike | None = None,
) -> LogisticEstimate:
    """Out-of-fold accuracy and log-loss of L2-penalized logistic regression, C chosen by cross-validation.

    Parameters
    ----------
    X : array-like, shape (n, p)
        Finite features in their original units.
    codes : array-like of int, shape (n,)
        Class code 0..K-1 of each row.
    n_classes : int
        K >= 2.
    C_grid : iterable of float
        Distinct positive values of scikit-learn's ``C`` to choose from.
    folds : int
        Folds of the stratified cross-validation (at least 2).
    max_rows : int
        Rows used at most (at least ``folds * n_classes``): a seeded stratified subsample when there
        are more.
    random_state : int, optional
        Seed of the subsample and the folds; None draws one (recorded in the result).
    scale : array-like, shape (p,), optional
        Positive per-feature scale, fixed for every fold (e.g. a ``StandardScaler``'s ``scale_`` on all
        rows): the fits see x / scale, as in :func:`fit_logistic`.

    Returns
    -------
    LogisticEstimate
        Never with a non-finite figure; with a ``skipped`` reason when a class has fewer than 2 rows.

    Raises
    ------
    DataError
        If the inputs or settings are malformed. Separable classes are not an error: the penalty keeps
        every fit finite.

    See Also
    --------
    fit_logistic : the fit itself, at one C.
    discaudit.stats.leave_one_out.LeaveOneOutScorer.score_block : the Gaussian models' exact leave-one-out
        figures; ``score_block(X[est.rows], codes[est.rows])`` scores the same rows, for paired differences.

    Notes
    -----
    Row keys, subsample and folds. Each row gets a pseudo-random 64-bit key from the bits of its float64
    values and the seed: splitmix64's output function (Steele, Lea & Flood 2014) of each value xor a
    seeded salt per column, summed over the columns (mod 2^64) and mixed again. Within each class the
    rows are ordered by key (equal keys, which only identical rows share, by position). The first q_k
    rows of class k form the subsample and the j-th of them (from 0) falls in fold j mod F. The quotas
    q_k are the largest-remainder (Hamilton) apportionment of ``max_rows`` to the class sizes; a class
    whose share falls below min(n_k, folds) gets that many and the rest is apportioned again among the
    other classes. With n <= ``max_rows`` every row is used. F = min(folds, min_k q_k); below 2 the estimate is skipped. So the subsample
    and the folds depend on the rows' values, classes and the seed only: not on the row order (up to
    swapping identical rows) nor on the names of the classes.

    Cross-validation (Stone 1974). For each fold the model is fitted on the other folds at each C in
    ascending order, each fit starting from the previous C's fit of that fold (a path; the first from
    zero), and predicts the held-out rows. Where :func:`fit_logistic` would use Newton's method, the
    folds' fits at one C are solved together, each to the same tolerance (the same optimum). The
    cross-validated log-loss of a C is the mean over all rows used of -ln p(class | row), pooled over
    the folds (not a mean of fold means); C is its argmin over
    the grid, first of ties, i.e. the strongest penalty among equals. The reported figures are those
    of the chosen C; ``fit`` is refitted on all rows used at that C, starting from the mean of the fold
    fits. ``scale`` is taken as fixed: a scaler refitted on each training fold is not reproduced.

    The fits see the features at a subsample and fold size below n: the estimate is of a logistic
    regression trained on (F - 1) / F of ``n_used`` rows, a pessimistic figure when n is larger, to be
    set beside the Gaussian models' leave-one-out figures on the same rows (``rows``). Standard errors
    treat the per-row values as independent (Bengio & Grandvalet 2004: no unbiased estimator exists).

    Cost: F x len(C_grid) + 1 fits of at most ``max_rows`` rows, O(n p) for the keys; no n x n object.

    References
    ----------
    Stone, M. (1974). Cross-validatory choice and assessment of statistical predictions. Journal of the
    Royal Statistical Society B 36, 111-147.
    le Cessie, S. & van Houwelingen, J. C. (1992). Ridge estimators in logistic regression. Applied
    Statistics 41, 191-201.
    Kohavi, R. (1995). A study of cross-validation and bootstrap for accuracy estimation and model
    selection. Proceedings of IJCAI 14, 1137-1143.
    Steele, G. L., Lea, D. & Flood, C. H. (2014). Fast splittable pseudorandom number generators.
    Proceedings of OOPSLA 2014, 453-472.
    Bengio, Y. & Grandvalet, Y. (2004). No unbiased estimator of the variance of K-fold
    cross-validation. Journal of Machine Learning Research 5, 1089-1105.

    Examples
    --------
    >>> from sklearn.datasets import load_iris  # doctest: +SKIP
    >>> X, y = load_iris(return_X_y=True)  # doctest: +SKIP
    >>> est = cross_validated_logistic(X, y, 3, random_state=0)  # doctest: +SKIP
    >>> est.C, round(est.accuracy, 2), round(est.log_loss, 3)  # doctest: +SKIP
    (100.0, 0.98, 0.066)

    A nearly unpenalized fit predicts 98% of held-out irises, at a mean log-loss of 0.066 nats.
    """
    Xa, ca, K = _check_rows(X, codes, n_classes)
    grid = _check_grid(C_grid)
    F_req = _check_int(folds, "folds", MIN_FOLDS)
    cap = _check_int(max_rows, "max_rows", F_req * K)
    seed = resolve_seed(random_state)
    n = Xa.shape[0]

    rows, place, quota = subsample(Xa, ca, K, cap, F_req, seed, key_origin)
    F = int(min(F_req, int(quota.min())))
    if F < MIN_FOLDS:
        k = int(np.argmin(quota))
        reason = (
            f"class code {k} has {int(quota[k])} row{'s' if quota[k] != 1 else ''}; cross-validation needs at "
            f"least {MIN_FOLDS} rows in every class"
        )
        return skipped_estimate(grid, F_req, n, quota, seed, reason, method=K_FOLD)

    fold = place % F
    Xs, cs = Xa[rows], ca[rows]
    c, s = _affine(Xs, scale, None)
    basis = _Basis.of(Xs, c, s)

    m = rows.size
    nll = np.empty((len(grid), m))
    correct = np.empty((len(grid), m), dtype=np.bool_)
    paths: list[list[_Params]] = [[] for _ in grid]
    converged = True
    d = (1 if K == 2 else K) * (Xs.shape[1] + 1)
    largest_fold = m - int(np.bincount(fold, minlength=F).min())  # rows of the largest training set
    together = d <= NEWTON_MAX_PARAMS and largest_fold * d * d <= NEWTON_MAX_WORK
    previous: list[_Params | None] = [None] * F
    for g, C in enumerate(grid):
        # Each fold's fit starts from its fit at the previous C (a path); the folds are solved together
        # where Newton's method applies, any fold it leaves unconverged (and every fold elsewhere) alone.
        if together:
            problems = _Folds(basis, fold, F, cs, K, C)
            theta, solved = _newton_folds(problems, problems.start(basis, previous))
        for f in range(F):
            train, test = fold != f, fold == f
            if together and solved[f]:
                params = _params_of(theta[f], basis, problems.spread[f], 1 if K == 2 else K, Xs.shape[1])
            else:
                params, _, _, ok = _solve(basis, train, cs[train], K, C, previous[f])
                converged &= ok
            previous[f] = params
            paths[g].append(params)
            correct[g, test], nll[g, test] = _row_figures(_scores(basis, test, params, K), cs[test], K)

    cv_log_loss = nll.mean(axis=1)
    best = int(np.argmin(cv_log_loss))
    mean_start = (np.mean([P[0] for P in paths[best]], axis=0), np.mean([P[1] for P in paths[best]], axis=0))
    full, fun, n_iter, ok = _solve(basis, None, cs, K, grid[best], mean_start)
    fit = _make_fit(basis, full, fun, n_iter, ok, K, grid[best])
    acc, acc_se = _mean_se(correct[best].astype(np.float64))
    ll, ll_se = _mean_se(nll[best])
    return LogisticEstimate(
        C=grid[best],
        C_grid=grid,
        cv_log_loss=_readonly(cv_log_loss),
        cv_accuracy=_readonly(correct.mean(axis=1)),
        rows=_readonly(rows, np.intp),
        fold=_readonly(fold, np.intp),
        correct=_readonly(correct[best], np.bool_),
        neg_log_prob=_readonly(nll[best]),
        accuracy=acc,
        accuracy_se=acc_se,
        log_loss=ll,
        log_loss_se=ll_se,
        folds=F,
        folds_requested=F_req,
        n_used=m,
        n_rows=n,
        class_rows=_readonly(quota, np.int64),
        seed=seed,
        fit=fit,
        all_converged=converged and ok,
        skipped=None,
        method=K_FOLD,
        approximated_rows=0,
    )
