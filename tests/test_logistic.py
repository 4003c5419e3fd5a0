"""Penalized logistic regression and its cross-validated estimate against scikit-learn.

References throughout: scikit-learn 1.9's ``LogisticRegression(C=C)`` (lbfgs, the default solver),
run to a tight tolerance (``tol=1e-12``) so that both sides are at the optimum, and its
``newton-cholesky`` solver (a second-order method, ``tol=1e-13``) as a second fit of the same
objective. scikit-learn at its default ``tol=1e-4`` stops up to 3e-2 away in probability on these
data, so it is no reference for the optimum. The cross-validation is checked by refitting
scikit-learn on each training fold (the folds the estimate reports). Data: iris, wine and breast
cancer as shipped by scikit-learn (open data), plus seeded invented data for small classes.
"""

from __future__ import annotations

import numpy as np
import pytest
from scipy.special import log_softmax
from sklearn.datasets import load_breast_cancer, load_iris, load_wine
from sklearn.linear_model import LogisticRegression
from sklearn.preprocessing import StandardScaler

from discaudit.errors import DataError
from discaudit.stats import logistic
from discaudit.stats.logistic import (
    DEFAULT_C_GRID,
    LogisticFit,
    cross_validated_logistic,
    fit_logistic,
)

# A numpy RuntimeWarning escaping from our code is a bug; make it fail.
pytestmark = pytest.mark.filterwarnings("error::RuntimeWarning")

# Agreement with scikit-learn at its optimum. Observed when written: coefficients within 1.5e-5 of the
# largest coefficient against lbfgs and 4e-6 against newton-cholesky, probabilities within 2.5e-6 (fits)
# and 3e-6 (out of fold); the worst cases are C = 100 on 13 and 30 features, where the objective is
# flat along some directions and the solvers stop on its relative decrease.
COEF_RTOL = 1e-4
PROB_ATOL = 1e-5


def _sk(C: float, solver: str = "lbfgs") -> LogisticRegression:
    """scikit-learn's estimator run to its optimum (reference)."""
    tol = 1e-12 if solver == "lbfgs" else 1e-13
    return LogisticRegression(C=C, solver=solver, tol=tol, max_iter=100_000)


def _iris():
    X, y = load_iris(return_X_y=True)
    return X, y.astype(np.intp)


def _wine():
    X, y = load_wine(return_X_y=True)
    return X, y.astype(np.intp)


def _cancer():
    X, y = load_breast_cancer(return_X_y=True)
    return X, y.astype(np.intp)


def _virginica():
    X, y = _iris()
    return X, (y == 2).astype(np.intp)


def _iris_degenerate():
    # A duplicated column (exactly collinear) and a constant one: the penalty still pins a unique fit.
    X, y = _iris()
    return np.column_stack([X, X[:, 2], np.full(y.size, 3.0)]), y


# name -> (data, standardized?)
CASES = {
    "iris": (_iris, False),
    "wine standardized": (_wine, True),
    "breast cancer standardized": (_cancer, True),
    "iris virginica vs rest": (_virginica, False),
    "iris with duplicate and constant columns": (_iris_degenerate, False),
}


def _sk_log_proba(est: LogisticRegression, X_fit: np.ndarray) -> np.ndarray:
    """ln p(k | x) of scikit-learn's fit: scipy's log_softmax of its decision_function (binary: of (0, d)).

    scikit-learn's own predict_log_proba takes the log of predict_proba, -inf where a probability
    underflows; the same model's log-probabilities, computed stably.
    """
    d = est.decision_function(X_fit)
    scores = np.column_stack([np.zeros_like(d), d]) if d.ndim == 1 else d
    return log_softmax(scores, axis=1)


def _max_rel(a: np.ndarray, b: np.ndarray) -> float:
    return float(np.max(np.abs(a - b)) / max(np.max(np.abs(b)), 1e-300))


def _objective(est: LogisticRegression, X_fit: np.ndarray, y: np.ndarray, C: float) -> float:
    """sum_i -ln p(y_i) + ||coef||^2 / (2 C) at scikit-learn's fit (scikit-learn's own probabilities)."""
    logp = _sk_log_proba(est, X_fit)[np.arange(y.size), y]
    return float(-logp.sum() + np.sum(est.coef_**2) / (2.0 * C))


@pytest.fixture(params=["newton", "lbfgs"])
def solver(request: pytest.FixtureRequest, monkeypatch: pytest.MonkeyPatch) -> str:
    """Each of the two solvers of the fits on every case: Newton's method where it is allowed, or L-BFGS-B only."""
    if request.param == "newton":
        monkeypatch.setattr(logistic, "NEWTON_MAX_WORK", float("inf"))
    else:
        monkeypatch.setattr(logistic, "NEWTON_MAX_PARAMS", 0)
    return str(request.param)


@pytest.mark.parametrize("C", [0.01, 1.0, 100.0])
@pytest.mark.parametrize("case", list(CASES))
def test_fit_matches_sklearn_at_its_optimum(case: str, C: float, solver: str) -> None:
    load, standardized = CASES[case]
    X, y = load()
    K = int(y.max()) + 1
    scaler = StandardScaler().fit(X)
    X_fit = scaler.transform(X) if standardized else X
    ours = fit_logistic(X, y, K, C, scale=scaler.scale_ if standardized else None)
    assert ours.converged and ours.n_rows == y.size
    P = np.exp(ours.predict_log_proba(X))
    for solver in ("lbfgs", "newton-cholesky"):
        ref = _sk(C, solver).fit(X_fit, y)  # source: scikit-learn
        # Binary: one vector (the log-odds of class 1); multinomial: K vectors, as coef_ is laid out.
        assert ours.coef.shape == ref.coef_.shape == ((1, X.shape[1]) if K == 2 else (K, X.shape[1]))
        assert _max_rel(ours.coef, ref.coef_) < COEF_RTOL
        np.testing.assert_allclose(
            ours.intercept, ref.intercept_, atol=COEF_RTOL * max(1.0, np.abs(ref.intercept_).max())
        )
        np.testing.assert_allclose(P, ref.predict_proba(X_fit), atol=PROB_ATOL)
        np.testing.assert_array_equal(ours.predict(X), ref.predict(X_fit))
        # The penalty's scale: sum of log-losses + ||w||^2 / (2 C), evaluated at scikit-learn's fit.
        assert ours.objective == pytest.approx(_objective(ref, X_fit, y, C), rel=1e-8)
        if K == 2:
            np.testing.assert_allclose(ours.decision_function(X), ref.decision_function(X_fit), atol=1e-3)


def test_separable_classes_give_a_finite_fit_equal_to_sklearns() -> None:
    # Setosa against the rest on petal length and width: perfectly separable, so only the penalty
    # keeps the coefficients finite.
    X, y = _iris()
    X, y = X[:, 2:], (y == 0).astype(np.intp)
    for C in (1.0, 100.0):
        ours = fit_logistic(X, y, 2, C)
        ref = _sk(C).fit(X, y)  # source: scikit-learn
        assert np.all(np.isfinite(ours.coef)) and ours.converged
        assert _max_rel(ours.coef, ref.coef_) < COEF_RTOL
        np.testing.assert_allclose(np.exp(ours.predict_log_proba(X)), ref.predict_proba(X), atol=PROB_ATOL)
        assert np.all(ours.predict(X) == y)


def test_centre_moves_only_the_intercept_and_scale_is_sklearns_feature_scale() -> None:
    X, y = _wine()
    scale = X.std(axis=0) * 2.0
    centre = np.median(X, axis=0)
    ours = fit_logistic(X, y, 3, 1.0, scale=scale, centre=centre)
    ref = _sk(1.0).fit((X - centre) / scale, y)  # source: scikit-learn on (x - centre) / scale
    assert _max_rel(ours.coef, ref.coef_) < COEF_RTOL
    np.testing.assert_allclose(ours.intercept, ref.intercept_, atol=COEF_RTOL * np.abs(ref.intercept_).max())
    default = fit_logistic(X, y, 3, 1.0, scale=scale)  # centre defaults to the column means
    ref_mean = _sk(1.0).fit((X - X.mean(axis=0)) / scale, y)
    np.testing.assert_allclose(
        default.intercept, ref_mean.intercept_, atol=COEF_RTOL * np.abs(ref_mean.intercept_).max()
    )
    np.testing.assert_allclose(default.predict_log_proba(X), ours.predict_log_proba(X), atol=1e-5)
    np.testing.assert_allclose(default.standardized_coef, default.coef * (X / scale).std(axis=0), rtol=1e-12)


def test_a_warm_start_from_another_fit_reaches_the_same_optimum() -> None:
    X, y = _cancer()
    scaler = StandardScaler().fit(X)
    ref = _sk(1.0).fit(scaler.transform(X), y)  # source: scikit-learn
    other = fit_logistic(X, y, 2, 10.0, scale=scaler.scale_ * 3.0, centre=np.zeros(X.shape[1]))
    warm = fit_logistic(X, y, 2, 1.0, scale=scaler.scale_, init=other)
    assert _max_rel(warm.coef, ref.coef_) < COEF_RTOL
    # A start at the optimum itself stops at once, within the solver's tolerance of where it started.
    cold = fit_logistic(X, y, 2, 1.0, scale=scaler.scale_)
    again = fit_logistic(X, y, 2, 1.0, scale=scaler.scale_, init=cold)
    assert again.n_iter <= 2 and _max_rel(again.coef, cold.coef) < COEF_RTOL / 10
    assert again.objective <= cold.objective * (1.0 + 1e-12)
    X3, y3 = _iris()
    with pytest.raises(DataError, match="init"):
        fit_logistic(X3, y3, 3, 1.0, init=cold)


def test_fit_refuses_malformed_input() -> None:
    X, y = _iris()
    with pytest.raises(DataError, match="class code 3 has no row"):
        fit_logistic(X, y, 4, 1.0)
    for C in (0.0, -1.0, np.inf, np.nan):
        with pytest.raises(DataError, match="C must"):
            fit_logistic(X, y, 3, C)
    with pytest.raises(DataError, match="class codes"):
        fit_logistic(X, y + 1, 3, 1.0)
    with pytest.raises(DataError, match="NaN"):
        fit_logistic(np.where(X > 7.0, np.nan, X), y, 3, 1.0)
    with pytest.raises(DataError, match="scale"):
        fit_logistic(X, y, 3, 1.0, scale=np.zeros(4))


# ---------------------------------------------------------------------------------------------------
# Cross-validation


def _sklearn_out_of_fold(
    X_fit: np.ndarray, y: np.ndarray, est, C: float, solver: str = "lbfgs"
) -> tuple[np.ndarray, np.ndarray]:
    """Per-row correctness and -ln p(class) of scikit-learn refit on each training fold (reference).

    lbfgs sees the training rows centred by their mean, which changes no probability (the intercept is
    not penalized) but lets it reach the optimum: on wine / sd uncentred it stops up to 7e-5 away in
    probability even at tol=1e-12. newton-cholesky sees the rows as they are.
    """
    Xr, yr = X_fit[est.rows], y[est.rows]
    correct, nll = np.empty(yr.size, dtype=bool), np.empty(yr.size)
    for f in range(est.folds):
        train, test = est.fold != f, est.fold == f
        shift = Xr[train].mean(axis=0) if solver == "lbfgs" else 0.0
        ref = _sk(C, solver).fit(Xr[train] - shift, yr[train])
        correct[test] = ref.predict(Xr[test] - shift) == yr[test]
        nll[test] = -_sk_log_proba(ref, Xr[test] - shift)[np.arange(test.sum()), yr[test]]
    return correct, nll


def _check_cv_against_sklearn(X, y, *, scale=None, grid=DEFAULT_C_GRID, **kw):
    K = int(y.max()) + 1
    est = cross_validated_logistic(X, y, K, grid, scale=scale, random_state=3, **kw)
    assert est.skipped is None and est.n_used == est.rows.size and est.all_converged
    X_fit = X if scale is None else X / scale
    reference = {C: _sklearn_out_of_fold(X_fit, y, est, C) for C in est.C_grid}  # source: scikit-learn refits
    cv_loss = np.array([reference[C][1].mean() for C in est.C_grid])
    np.testing.assert_allclose(est.cv_log_loss, cv_loss, rtol=1e-5)
    np.testing.assert_array_equal(est.cv_accuracy, [reference[C][0].mean() for C in est.C_grid])
    assert est.C_grid[int(np.argmin(cv_loss))] == est.C  # the grid argmin of scikit-learn's CV log-loss
    correct, nll = reference[est.C]
    np.testing.assert_array_equal(est.correct, correct)
    np.testing.assert_allclose(np.exp(-est.neg_log_prob), np.exp(-nll), atol=PROB_ATOL)
    np.testing.assert_allclose(est.neg_log_prob, nll, rtol=1e-4, atol=1e-6)
    second = _sklearn_out_of_fold(X_fit, y, est, est.C, "newton-cholesky")  # source: scikit-learn, second solver
    np.testing.assert_array_equal(est.correct, second[0])
    np.testing.assert_allclose(np.exp(-est.neg_log_prob), np.exp(-second[1]), atol=PROB_ATOL)
    assert est.accuracy == correct.mean()
    assert est.log_loss == pytest.approx(nll.mean(), rel=1e-5)
    # Standard errors: numpy's sample standard deviation (ddof=1) of scikit-learn's per-row values.
    assert est.accuracy_se == pytest.approx(correct.std(ddof=1) / np.sqrt(correct.size), rel=1e-12)
    assert est.log_loss_se == pytest.approx(nll.std(ddof=1) / np.sqrt(nll.size), rel=1e-4)
    # The fit on all rows used, at the chosen C.
    full = _sk(est.C).fit(X_fit[est.rows], y[est.rows])
    assert est.fit is not None and est.fit.C == est.C and est.fit.n_rows == est.n_used
    assert _max_rel(est.fit.coef, full.coef_) < COEF_RTOL
    # Stratified: within each class the folds differ by at most one row.
    for k in range(K):
        sizes = np.bincount(est.fold[y[est.rows] == k], minlength=est.folds)
        assert sizes.max() - sizes.min() <= 1
    return est


@pytest.mark.parametrize("load", [_wine, _cancer, _iris])
def test_newton_and_lbfgs_reach_the_same_estimate(load, monkeypatch: pytest.MonkeyPatch) -> None:
    # Property: the two solvers minimize one strictly convex objective, so every out-of-fold figure agrees
    # to the solvers' tolerance and every classification is the same.
    X, y = load()
    K = int(y.max()) + 1
    monkeypatch.setattr(logistic, "NEWTON_MAX_WORK", float("inf"))
    newton = cross_validated_logistic(X, y, K, scale=X.std(axis=0), random_state=1)
    monkeypatch.setattr(logistic, "NEWTON_MAX_PARAMS", 0)
    lbfgs = cross_validated_logistic(X, y, K, scale=X.std(axis=0), random_state=1)
    assert newton.all_converged and lbfgs.all_converged and newton.C == lbfgs.C
    np.testing.assert_array_equal(newton.correct, lbfgs.correct)
    np.testing.assert_allclose(np.exp(-newton.neg_log_prob), np.exp(-lbfgs.neg_log_prob), atol=PROB_ATOL)
    np.testing.assert_allclose(newton.cv_log_loss, lbfgs.cv_log_loss, rtol=1e-5)
    assert newton.fit is not None and lbfgs.fit is not None
    assert newton.fit.objective <= lbfgs.fit.objective * (1.0 + 1e-9)  # Newton stops at least as low


def test_wine_out_of_fold_predictions_match_sklearn_refits() -> None:
    X, y = _wine()
    est = _check_cv_against_sklearn(X, y, scale=X.std(axis=0))
    assert est.n_used == y.size and est.folds == 10 and np.array_equal(est.rows, np.arange(y.size))


def test_breast_cancer_subsample_matches_sklearn_refits() -> None:
    X, y = _cancer()
    est = _check_cv_against_sklearn(X, y, scale=X.std(axis=0), max_rows=300)
    assert est.n_used == 300 and est.n_rows == y.size
    # Largest-remainder apportionment of 300 rows to 212 / 357 (computed here): 111.78 -> 112, 188.22 -> 188.
    np.testing.assert_array_equal(est.class_rows, [112, 188])
    np.testing.assert_array_equal(np.bincount(y[est.rows]), est.class_rows)


def test_iris_raw_features_five_folds_match_sklearn_refits() -> None:
    X, y = _iris()
    est = _check_cv_against_sklearn(X, y, folds=5, grid=(100.0, 0.1, 1.0))
    assert est.C_grid == (0.1, 1.0, 100.0) and est.folds == 5


def test_separable_data_never_raise_and_stay_finite() -> None:
    X, y = _iris()
    X, y = X[:, 2:], (y == 0).astype(np.intp)
    est = _check_cv_against_sklearn(X, y)
    assert est.accuracy == 1.0
    for value in (est.cv_log_loss, est.neg_log_prob, est.fit.coef, est.fit.intercept):
        assert np.all(np.isfinite(value))


def _invented(sizes: tuple[int, ...], p: int, seed: int):
    rng = np.random.default_rng(seed)
    X = np.vstack([rng.normal(loc=0.7 * k, size=(n, p)) for k, n in enumerate(sizes)])
    return X, np.repeat(np.arange(len(sizes)), sizes).astype(np.intp)


def test_a_class_with_fewer_rows_than_folds_gets_fewer_folds() -> None:
    X, y = _invented((40, 4, 30), p=3, seed=1)
    est = _check_cv_against_sklearn(X, y, grid=(0.1, 10.0))
    assert est.folds == 4 and est.folds_requested == 10
    small = est.fold[y[est.rows] == 1]
    np.testing.assert_array_equal(np.sort(small), np.arange(4))  # one row of the small class per fold


def test_a_small_class_keeps_enough_rows_in_a_subsample() -> None:
    # Proportionally the class of 12 rows would get 1.2 of 200; it keeps min(12, folds) = 10, and the
    # other 190 are apportioned to 1200 and 788 rows (computed here): 114.69 -> 115, 75.31 -> 75.
    X, y = _invented((1200, 12, 788), p=3, seed=2)
    est = cross_validated_logistic(X, y, 3, (1.0,), max_rows=200, random_state=0)
    assert est.n_used == 200 and est.folds == 10
    np.testing.assert_array_equal(est.class_rows, [115, 10, 75])
    np.testing.assert_array_equal(np.bincount(y[est.rows]), est.class_rows)


def test_a_class_with_one_row_is_skipped_with_a_reason() -> None:
    X, y = _invented((30, 1, 30), p=2, seed=3)
    est = cross_validated_logistic(X, y, 3, random_state=0)
    assert est.skipped is not None and est.skipped.startswith("class code 1 has 1 row;")
    assert est.C is None and est.fit is None and est.accuracy is None and est.log_loss_se is None
    assert est.rows.size == 0 and est.folds == 0
    missing = cross_validated_logistic(X[y != 1], np.where(y[y != 1] == 2, 2, 0), 3, random_state=0)
    assert missing.skipped is not None and missing.skipped.startswith("class code 1 has 0 rows;")


def _assert_same_estimate(a, b, rtol: float = 0.0) -> None:
    np.testing.assert_array_equal(a.rows, b.rows)
    np.testing.assert_array_equal(a.fold, b.fold)
    np.testing.assert_array_equal(a.correct, b.correct)
    np.testing.assert_allclose(a.neg_log_prob, b.neg_log_prob, rtol=rtol, atol=0.0 if rtol == 0.0 else 1e-12)
    np.testing.assert_allclose(a.cv_log_loss, b.cv_log_loss, rtol=rtol)
    assert a.C == b.C and a.folds == b.folds and a.seed == b.seed


def test_invariant_to_renaming_the_labels() -> None:
    X, y = _wine()
    rename = np.array([2, 0, 1])
    a = cross_validated_logistic(X, y, 3, scale=X.std(axis=0), max_rows=120, random_state=5)
    b = cross_validated_logistic(X, rename[y], 3, scale=X.std(axis=0), max_rows=120, random_state=5)
    _assert_same_estimate(a, b, rtol=1e-6)
    np.testing.assert_array_equal(b.class_rows[rename], a.class_rows)
    X2, y2 = _cancer()
    a2 = cross_validated_logistic(X2, y2, 2, (1.0,), scale=X2.std(axis=0), max_rows=200, random_state=5)
    b2 = cross_validated_logistic(X2, 1 - y2, 2, (1.0,), scale=X2.std(axis=0), max_rows=200, random_state=5)
    _assert_same_estimate(a2, b2, rtol=1e-6)


def test_invariant_to_row_order() -> None:
    X, y = _cancer()
    perm = np.random.default_rng(4).permutation(y.size)
    a = cross_validated_logistic(X, y, 2, (0.1, 1.0), scale=X.std(axis=0), max_rows=250, random_state=6)
    b = cross_validated_logistic(X[perm], y[perm], 2, (0.1, 1.0), scale=X.std(axis=0), max_rows=250, random_state=6)
    back = perm[b.rows]  # b's rows in a's positions
    order = np.argsort(back)
    np.testing.assert_array_equal(back[order], a.rows)
    np.testing.assert_array_equal(b.fold[order], a.fold)
    np.testing.assert_array_equal(b.correct[order], a.correct)
    np.testing.assert_allclose(b.neg_log_prob[order], a.neg_log_prob, rtol=1e-6, atol=1e-12)
    assert a.C == b.C


def test_seed_reproducibility() -> None:
    X, y = _cancer()
    kw = dict(scale=X.std(axis=0), max_rows=200, C_grid=(1.0,))
    a = cross_validated_logistic(X, y, 2, random_state=11, **kw)
    _assert_same_estimate(a, cross_validated_logistic(X, y, 2, random_state=11, **kw))
    other = cross_validated_logistic(X, y, 2, random_state=12, **kw)
    assert not np.array_equal(other.rows, a.rows)
    drawn = cross_validated_logistic(X, y, 2, random_state=None, **kw)
    _assert_same_estimate(drawn, cross_validated_logistic(X, y, 2, random_state=drawn.seed, **kw))
    # Without a subsample only the folds depend on the seed.
    full = [cross_validated_logistic(X, y, 2, (1.0,), random_state=s, scale=X.std(axis=0)) for s in (1, 2)]
    assert np.array_equal(full[0].rows, full[1].rows) and not np.array_equal(full[0].fold, full[1].fold)


def test_results_are_read_only() -> None:
    X, y = _iris()
    est = cross_validated_logistic(X, y, 3, (1.0,), random_state=0)
    assert isinstance(est.fit, LogisticFit)
    for array in (est.rows, est.neg_log_prob, est.fit.coef):
        with pytest.raises(ValueError):
            array[0] = 0
    with pytest.raises(AttributeError):
        est.C = 2.0  # type: ignore[misc]


def test_cross_validation_refuses_malformed_settings() -> None:
    X, y = _iris()
    for grid in ((), (1.0, 1.0), (0.0, 1.0), (np.inf,)):
        with pytest.raises(DataError, match="C_grid"):
            cross_validated_logistic(X, y, 3, grid)
    with pytest.raises(DataError, match="folds"):
        cross_validated_logistic(X, y, 3, folds=1)
    with pytest.raises(DataError, match="max_rows"):
        cross_validated_logistic(X, y, 3, max_rows=29)  # fewer than folds x classes = 30
    with pytest.raises(DataError, match="random_state"):
        cross_validated_logistic(X, y, 3, random_state=-1)


@pytest.mark.parametrize("bad", [np.nan, np.inf, -np.inf])
def test_non_finite_values_are_refused_by_both_scorings(bad: float) -> None:
    from discaudit.errors import DataError
    from discaudit.stats.logistic import cross_validated_logistic
    from discaudit.stats.logistic_leave_one_out import leave_one_out_logistic

    rng = np.random.default_rng(5)
    X = rng.normal(size=(60, 3))
    y = np.repeat([0, 1], 30)
    X[17, 2] = bad
    for estimate in (cross_validated_logistic, leave_one_out_logistic):
        with pytest.raises(DataError, match="NaN or infinite"):
            estimate(X, y, 2, random_state=0)
