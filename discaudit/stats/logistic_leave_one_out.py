"""Leave-one-out held-out performance of L2-penalized logistic regression from one fit per C.

Removing one row from a penalized likelihood moves its maximum by about one Newton step from the fit
on all rows; the Hessian without the row is the full one less the row's own term, so by the
Woodbury identity the step, and the row's leave-one-out scores, cost O(K^2 d) per row once the full
Hessian is factored (Pregibon 1981 for the binary model; Cawley & Talbot 2008 for kernel logistic
regression; Rad & Maleki 2020 for general penalized likelihoods). Where one step may fall short,
on the rows whose own scores the step moves far, the row is refitted exactly instead.
:func:`leave_one_out_logistic` so scores the same model and subsample as
:func:`discaudit.stats.logistic.cross_validated_logistic` at about one fit per value of C, where
ten-fold cross-validation costs ten, and estimates a model trained on n - 1 rows, as the Gaussian
models' exact leave-one-out figures (:mod:`discaudit.stats.leave_one_out`) do.
"""

from __future__ import annotations

from collections.abc import Iterable

import numpy as np
import numpy.typing as npt
from scipy.linalg import solve_triangular

from discaudit.stats._sampling import resolve_seed
from discaudit.stats.logistic import (
    DEFAULT_C_GRID,
    DEFAULT_MAX_ROWS,
    LEAVE_ONE_OUT,
    NEWTON_MAX_PARAMS,
    NEWTON_MAX_WORK,
    BoolArray,
    FloatArray,
    IntArray,
    LogisticEstimate,
    _affine,
    _Basis,
    _binary_hessian,
    _check_grid,
    _check_int,
    _check_rows,
    _Folds,
    _make_fit,
    _mean_se,
    _multinomial_hessian,
    _newton_folds,
    _Params,
    _params_of,
    _readonly,
    _row_figures,
    _scores,
    _solve,
    skipped_estimate,
    subsample,
)

#: Fewest rows a class needs in the subsample: without a class's only row its intercept diverges.
MIN_CLASS_ROWS = 2

#: A row is refitted exactly when the one-step approximation moves its own scores apart by more than
#: this (the largest minus the smallest change over the classes; for two classes the change of the
#: log-odds). Beyond about one unit of log-odds the log-likelihood's curvature changes along the step
#: and one Newton step falls short (design choice; on iris, wine and breast cancer at C = 100 the rows
#: so selected carry nearly all of the approximation's error, see tests/test_logistic_leave_one_out.py).
REFIT_SHIFT = 0.5

#: Rows refitted exactly at most, those whose scores the step moves farthest first (design choice: a
#: bound on the cost, about as many fits as three folds of a ten-fold cross-validation).
MAX_REFITS = 32


def _theta(basis: _Basis, params: _Params) -> FloatArray:
    """Parameters in the basis coordinates (coefficients of Y, scores at the mean), class by class."""
    W, b = params
    return np.column_stack([W @ basis.vectors, b]).ravel()


def one_step_scores(
    basis: _Basis, params: _Params, codes: IntArray, n_classes: int, C: float
) -> tuple[FloatArray, FloatArray]:
    """Approximate leave-one-out scores of every row, and how far the step moves each row's scores.

    With s_i the row's scores under the fit on all m rows, p_i its probabilities, g_i = p_i - e(code_i),
    J the Hessian of the total objective (sum of log-losses + ||w||^2 / (2C)) and X_i the Jacobian of
    s_i in the parameters, A_i = X_i J^-1 X_i' and W_i = diag(p_i) - p_i p_i' (for two classes the
    scalars a_i and p_i (1 - p_i)). One Newton step of the objective without row i, from the fit,
    moves s_i by M_i g_i with M_i = X_i (J - X_i' W_i X_i)^-1 X_i' = (I - A_i W_i)^-1 A_i (Woodbury).

    Returns
    -------
    scores : ndarray, shape (m,) for two classes, (m, K) else
        s_i + M_i g_i.
    shift : ndarray, shape (m,)
        max_k - min_k of M_i g_i (for two classes its absolute value): a common shift of the K
        scores changes no probability.
    """
    Y = basis.Y
    m, p = Y.shape
    Z1 = np.column_stack([Y, np.ones(m)])
    theta = _theta(basis, params)
    strength = 1.0 / (C * m)
    if n_classes == 2:
        H = _binary_hessian(theta, Y, np.ones(p), strength) * m
        L = np.linalg.cholesky(H)
        B = solve_triangular(L, Z1.T, lower=True, check_finite=False)
        a = np.einsum("ij,ij->j", B, B)
        s = Z1 @ theta
        prob = np.exp(-np.logaddexp(0.0, -s))
        w = prob * (1.0 - prob)
        move = a / (1.0 - w * a) * (prob - (codes == 1))
        return s + move, np.abs(move)
    K = n_classes
    q = p + 1
    # The multinomial Hessian's common shift of the intercepts is made positive definite (see
    # _multinomial_hessian); g_i has no component along it, so the steps' probabilities are unchanged.
    H = _multinomial_hessian(theta, Z1, K, np.ones(p), strength) * m
    L = np.linalg.cholesky(H)
    # Column k of L^-1 X_i' is L^-1 applied to z1_i in class k's block: zero above the block (L is lower
    # triangular), the trailing triangle's solve below. A_i[k, l] is the inner product of columns k, l.
    E = []
    for k in range(K):
        placed = np.zeros(((K - k) * q, m))
        placed[:q] = Z1.T
        E.append(solve_triangular(L[k * q :, k * q :], placed, lower=True, check_finite=False))
    A = np.empty((m, K, K))
    for k in range(K):
        for j in range(k, K):
            A[:, k, j] = A[:, j, k] = np.einsum("di,di->i", E[k][(j - k) * q :], E[j])
    S = (theta.reshape(K, q) @ Z1.T).T  # (m, K)
    P = np.exp(S - S.max(axis=1, keepdims=True))
    P /= P.sum(axis=1, keepdims=True)
    Wm = -P[:, :, None] * P[:, None, :]
    Wm[:, np.arange(K), np.arange(K)] += P
    M = np.linalg.solve(np.eye(K) - A @ Wm, A)
    g = P.copy()
    g[np.arange(m), codes] -= 1.0
    move = np.einsum("ikl,il->ik", M, g)
    return S + move, move.max(axis=1) - move.min(axis=1)


def _refit(
    basis: _Basis, which: IntArray, codes: IntArray, n_classes: int, C: float, params: _Params
) -> tuple[list[_Params], bool]:
    """Exact fits without each row of ``which``, from the fit on all rows; and whether all converged."""
    m, p = basis.Y.shape
    K = 1 if n_classes == 2 else n_classes
    d = K * (p + 1)
    out: list[_Params | None] = [None] * which.size
    converged = True
    if d <= NEWTON_MAX_PARAMS and (m - 1) * d * d <= NEWTON_MAX_WORK:
        fold = np.full(m, -1, dtype=np.intp)  # -1: in every training set
        fold[which] = np.arange(which.size)
        problems = _Folds(basis, fold, which.size, codes, n_classes, C)
        theta, solved = _newton_folds(problems, problems.start(basis, [params] * which.size))
        for f in np.flatnonzero(solved):
            out[f] = _params_of(theta[f], basis, problems.spread[f], K, p)
    for j in range(which.size):
        if out[j] is None:
            train = np.ones(m, dtype=np.bool_)
            train[which[j]] = False
            found, _, _, ok = _solve(basis, train, codes[train], n_classes, C, params)
            out[j] = found
            converged &= ok
    return [o for o in out if o is not None], converged


def leave_one_out_logistic(
    X: npt.ArrayLike,
    codes: npt.ArrayLike,
    n_classes: int,
    C_grid: Iterable[float] = DEFAULT_C_GRID,
    *,
    max_rows: int = DEFAULT_MAX_ROWS,
    random_state: int | None = None,
    scale: npt.ArrayLike | None = None,
    key_origin: npt.ArrayLike | None = None,
) -> LogisticEstimate:
    """Leave-one-out accuracy and log-loss of L2-penalized logistic regression, C chosen by them.

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
    max_rows : int
        Rows used at most (at least ``2 * n_classes``): the seeded stratified subsample of
        :func:`~discaudit.stats.logistic.cross_validated_logistic` when there are more.
    random_state : int, optional
        Seed of the subsample; None draws one (recorded in the result).
    scale : array-like, shape (p,), optional
        Positive per-feature scale, fixed for every fit: the fits see x / scale.
    key_origin : array-like, shape (p,), optional
        Subtracted from the rows before their keys are computed (see
        :func:`~discaudit.stats.logistic.cross_validated_logistic`).

    Returns
    -------
    LogisticEstimate
        ``method`` ``"leave_one_out"``, each row its own fold (``fold`` 0..n_used-1, ``folds`` =
        ``n_used``), ``approximated_rows`` the rows scored by the one-step approximation; with a
        ``skipped`` reason when a class has fewer than 2 rows.

    Raises
    ------
    DataError
        If the inputs or settings are malformed.

    See Also
    --------
    discaudit.stats.logistic.cross_validated_logistic : the same model scored by k-fold cross-validation.
    one_step_scores : the approximation itself.

    Notes
    -----
    For each C in ascending order the model is fitted on all rows used (each fit starting from the
    previous one, a path), and every row's leave-one-out scores are approximated by one Newton step of
    the objective without that row, started at the full fit (:func:`one_step_scores`; Pregibon 1981,
    section 5; Rad & Maleki 2020). Its error is of the order of the step squared: negligible where the
    penalty or the rows bound how far one row moves the fit, large for a row that alone holds up a
    nearly separating fit at a weak penalty. C is the argmin over the grid of the mean approximate
    leave-one-out log-loss (first of ties, the strongest penalty among equals). At the chosen C the
    rows whose scores the step moves apart by more than ``REFIT_SHIFT`` (at most ``MAX_REFITS``,
    farthest first) are refitted without the row, exactly, from the full fit; their figures replace
    the approximation's. ``fit`` is the fit on all rows used at the chosen C. Standard errors treat the
    per-row values as independent.

    Cost: len(C_grid) fits of at most ``max_rows`` rows, a Cholesky factor of a K(p + 1)-square Hessian
    and O(m K^2 (K p)^2) for the steps per C, and at most ``MAX_REFITS`` warm-started refits.

    References
    ----------
    Pregibon, D. (1981). Logistic regression diagnostics. Annals of Statistics 9, 705-724.
    Cawley, G. C. & Talbot, N. L. C. (2008). Efficient approximate leave-one-out cross-validation for
    kernel logistic regression. Machine Learning 71, 243-264.
    Rad, K. R. & Maleki, A. (2020). A scalable estimate of the out-of-sample prediction error via
    approximate leave-one-out cross-validation. Journal of the Royal Statistical Society B 82, 965-996.

    Examples
    --------
    >>> from sklearn.datasets import load_iris  # doctest: +SKIP
    >>> X, y = load_iris(return_X_y=True)  # doctest: +SKIP
    >>> est = leave_one_out_logistic(X, y, 3, scale=X.std(axis=0), random_state=0)  # doctest: +SKIP
    >>> est.C, round(est.accuracy, 2)  # doctest: +SKIP
    (100.0, 0.98)
    """
    Xa, ca, K = _check_rows(X, codes, n_classes)
    grid = _check_grid(C_grid)
    cap = _check_int(max_rows, "max_rows", MIN_CLASS_ROWS * K)
    seed = resolve_seed(random_state)
    n = Xa.shape[0]
    rows, _, quota = subsample(Xa, ca, K, cap, MIN_CLASS_ROWS, seed, key_origin)
    if int(quota.min()) < MIN_CLASS_ROWS:
        k = int(np.argmin(quota))
        reason = (
            f"class code {k} has {int(quota[k])} row{'s' if quota[k] != 1 else ''}; leave-one-out needs at "
            f"least {MIN_CLASS_ROWS} rows in every class"
        )
        return skipped_estimate(grid, 0, n, quota, seed, reason, method=LEAVE_ONE_OUT)

    Xs, cs = Xa[rows], ca[rows]
    c, s = _affine(Xs, scale, None)
    basis = _Basis.of(Xs, c, s)
    m = rows.size
    nll = np.empty((len(grid), m))
    correct = np.empty((len(grid), m), dtype=np.bool_)
    fits: list[tuple[_Params, float, int, bool]] = []
    shifts: list[FloatArray] = []
    start: _Params | None = None
    for g, C in enumerate(grid):
        found = _solve(basis, None, cs, K, C, start)
        start = found[0]
        fits.append(found)
        scores, shift = one_step_scores(basis, found[0], cs, K, C)
        correct[g], nll[g] = _row_figures(scores, cs, K)
        shifts.append(shift)

    best = int(np.argmin(nll.mean(axis=1)))
    full, fun, n_iter, ok = fits[best]
    converged = all(f[3] for f in fits)
    far: BoolArray = shifts[best] > REFIT_SHIFT
    which = np.flatnonzero(far)
    which = which[np.argsort(-shifts[best][which], kind="stable")[:MAX_REFITS]]
    row_correct, row_nll = correct[best].copy(), nll[best].copy()
    if which.size:
        refits, refits_ok = _refit(basis, which, cs, K, grid[best], full)
        converged &= refits_ok
        for r, params in zip(which, refits, strict=True):
            one = np.zeros(m, dtype=np.bool_)
            one[r] = True
            hit, loss = _row_figures(_scores(basis, one, params, K), cs[one], K)
            row_correct[r], row_nll[r] = hit[0], loss[0]
    fit = _make_fit(basis, full, fun, n_iter, ok, K, grid[best])
    acc, acc_se = _mean_se(row_correct.astype(np.float64))
    ll, ll_se = _mean_se(row_nll)
    return LogisticEstimate(
        C=grid[best],
        C_grid=grid,
        cv_log_loss=_readonly(nll.mean(axis=1)),
        cv_accuracy=_readonly(correct.mean(axis=1)),
        rows=_readonly(rows, np.intp),
        fold=_readonly(np.arange(m), np.intp),
        correct=_readonly(row_correct, np.bool_),
        neg_log_prob=_readonly(row_nll),
        accuracy=acc,
        accuracy_se=acc_se,
        log_loss=ll,
        log_loss_se=ll_se,
        folds=m,
        folds_requested=0,
        n_used=m,
        n_rows=n,
        class_rows=_readonly(quota, np.int64),
        seed=seed,
        fit=fit,
        all_converged=converged,
        skipped=None,
        method=LEAVE_ONE_OUT,
        approximated_rows=int(m - which.size),
    )
