"""Leave-one-out logistic regression against exact refits and against one Newton step done by hand.

References: scikit-learn 1.9's ``LogisticRegression(C=C)`` refitted without each row (lbfgs run to its
optimum, ``tol=1e-12``, as in tests/test_logistic.py), the exact leave-one-out figures the estimate
approximates; and one Newton step of the objective without a row, from the full fit, written out
with dense matrices (the closed form of :func:`one_step_scores` must equal it to rounding). Data:
iris, wine and breast cancer as scikit-learn ships them (open data) and seeded invented data.
"""

from __future__ import annotations

import numpy as np
import pytest
from scipy.special import log_softmax
from sklearn.datasets import load_breast_cancer, load_iris, load_wine
from sklearn.linear_model import LogisticRegression

from discaudit.config import Config
from discaudit.errors import DataError
from discaudit.stats import logistic_leave_one_out as loo_module
from discaudit.stats.logistic import LEAVE_ONE_OUT, _affine, _Basis, fit_logistic
from discaudit.stats.logistic_leave_one_out import leave_one_out_logistic, one_step_scores

pytestmark = pytest.mark.filterwarnings("error::RuntimeWarning")


def _iris():
    X, y = load_iris(return_X_y=True)
    return X, y.astype(np.intp)


def _wine():
    X, y = load_wine(return_X_y=True)
    return X, y.astype(np.intp)


def _cancer_part():
    # 200 rows of breast cancer (every third row): 200 scikit-learn refits stay quick.
    X, y = load_breast_cancer(return_X_y=True)
    return X[::3][:200], y[::3][:200].astype(np.intp)


def _sk_loo(X_fit: np.ndarray, y: np.ndarray, C: float) -> tuple[np.ndarray, np.ndarray]:
    """Exact leave-one-out correctness and -ln p(class) by refitting scikit-learn without each row (reference)."""
    n = y.size
    correct, nll = np.empty(n, dtype=bool), np.empty(n)
    for i in range(n):
        keep = np.arange(n) != i
        shift = X_fit[keep].mean(axis=0)  # centring changes no probability and lets lbfgs reach the optimum
        ref = LogisticRegression(C=C, tol=1e-12, max_iter=100_000).fit(X_fit[keep] - shift, y[keep])
        d = ref.decision_function(X_fit[i : i + 1] - shift)
        scores = np.column_stack([np.zeros_like(d), d]) if d.ndim == 1 else d
        logp = log_softmax(scores, axis=1)[0]
        correct[i] = ref.predict(X_fit[i : i + 1] - shift)[0] == y[i]
        nll[i] = -logp[y[i]]
    return correct, nll


CASES = {"iris": _iris, "wine": _wine, "breast cancer (200 rows)": _cancer_part}


@pytest.mark.parametrize("case", list(CASES))
def test_figures_match_exact_leave_one_out_refits(case: str) -> None:
    X, y = CASES[case]()
    K = int(y.max()) + 1
    scale = X.std(axis=0)
    est = leave_one_out_logistic(X, y, K, scale=scale, random_state=0)
    assert est.skipped is None and est.method == LEAVE_ONE_OUT and est.all_converged
    assert est.n_used == y.size and est.folds == y.size  # no subsample below max_rows; each row its own fold
    correct, nll = _sk_loo(X / scale, y, float(est.C))  # source: scikit-learn refits without each row
    refitted = est.n_used - est.approximated_rows
    # Observed when written: mean log-loss within 2e-4 of the exact refits (iris, wine, breast cancer),
    # every row's correctness the same, the largest per-row gap 2e-2 nats on an approximated row.
    np.testing.assert_array_equal(est.correct, correct)
    assert est.log_loss == pytest.approx(nll.mean(), abs=1e-3)
    assert np.max(np.abs(est.neg_log_prob - nll)) < 0.05
    # The rows the approximation refitted are exact (to the solvers' tolerance): at least that many agree.
    assert refitted <= loo_module.MAX_REFITS
    assert int(np.sum(np.abs(est.neg_log_prob - nll) < 1e-5)) >= refitted


def test_refits_remove_what_the_one_step_approximation_misses_at_a_weak_penalty(monkeypatch) -> None:
    # Iris at C = 100: a few rows hold up a nearly separating fit; one Newton step misses their
    # leave-one-out fits by up to 0.4 nats. The refits of the rows the step moves far close most of it.
    X, y = _iris()
    scale = X.std(axis=0)
    kw = dict(C_grid=(100.0,), scale=scale, random_state=0)
    _, nll = _sk_loo(X / scale, y, 100.0)  # source: scikit-learn refits
    refined = leave_one_out_logistic(X, y, 3, **kw)
    monkeypatch.setattr(loo_module, "MAX_REFITS", 0)
    raw = leave_one_out_logistic(X, y, 3, **kw)
    assert raw.approximated_rows == y.size and refined.approximated_rows < y.size
    raw_gap, refined_gap = np.abs(raw.neg_log_prob - nll), np.abs(refined.neg_log_prob - nll)
    assert raw_gap.max() > 0.1  # the approximation alone misses a row badly
    assert refined_gap.max() < 0.5 * raw_gap.max() and refined_gap.sum() < 0.5 * raw_gap.sum()


def _one_newton_step_by_hand(basis: _Basis, fit, codes: np.ndarray, K: int, C: float, i: int) -> np.ndarray:
    """Scores of row i after one Newton step of the objective without row i, from the full fit (dense)."""
    m, p = basis.Y.shape
    Z1 = np.column_stack([basis.Y, np.ones(m)])
    W = fit.coef @ basis.vectors  # coefficients of Y
    b = fit.intercept + fit.coef @ basis.u_mean  # scores at the mean
    Kp = 1 if K == 2 else K
    theta = np.column_stack([W, b]).ravel()
    keep = np.arange(m) != i
    q = p + 1
    grad = np.zeros(Kp * q)
    hess = np.zeros((Kp * q, Kp * q))
    for r in np.flatnonzero(keep):
        z = Z1[r]
        if K == 2:
            s = z @ theta
            pr = 1.0 / (1.0 + np.exp(-s))
            grad += (pr - (codes[r] == 1)) * z
            hess += pr * (1 - pr) * np.outer(z, z)
        else:
            s = theta.reshape(K, q) @ z
            pr = np.exp(s - s.max())
            pr /= pr.sum()
            g = pr.copy()
            g[codes[r]] -= 1.0
            grad += np.kron(g, z)
            hess += np.kron(np.diag(pr) - np.outer(pr, pr), np.outer(z, z))
    pen = np.tile(np.r_[np.ones(p), 0.0], Kp) / C
    grad += pen * theta
    hess += np.diag(pen)
    if K > 2:  # the intercepts' common shift: any positive multiple changes no probability
        u = np.tile(np.r_[np.zeros(p), 1.0], K)
        hess += np.outer(u, u)
    step = -np.linalg.lstsq(hess, grad, rcond=None)[0]
    new = theta + step
    if K == 2:
        return np.array([Z1[i] @ new])
    return new.reshape(K, q) @ Z1[i]


@pytest.mark.parametrize("case", ["iris", "wine", "binary"])
def test_one_step_scores_equal_one_newton_step_done_by_hand(case: str) -> None:
    if case == "binary":
        X, y = _cancer_part()
        X = X[:80, :6]
        y = y[:80]
    else:
        X, y = CASES[case]()
    K = int(y.max()) + 1
    scale = X.std(axis=0)
    C = 1.0
    fit = fit_logistic(X, y, K, C, scale=scale)
    c, s = _affine(X, scale, None)
    basis = _Basis.of(X, c, s)
    params = (fit.coef, fit.intercept + fit.coef @ basis.u_mean)
    scores, shift = one_step_scores(basis, params, y, K, C)
    full = fit.decision_function(X)
    for i in (0, 7, y.size - 1):
        hand = _one_newton_step_by_hand(basis, fit, y, K, C, i)
        got = np.atleast_1d(scores[i])
        if K > 2:  # scores are defined up to a common shift
            hand, got = hand - hand.mean(), got - got.mean()
            moved = got - (full[i] - full[i].mean())
            assert shift[i] == pytest.approx(moved.max() - moved.min(), rel=1e-9, abs=1e-12)
        else:
            assert shift[i] == pytest.approx(abs(got[0] - full[i]), rel=1e-9, abs=1e-12)
        np.testing.assert_allclose(got, hand, rtol=1e-7, atol=1e-9)


def _invented(sizes, p=3, seed=0):
    rng = np.random.default_rng(seed)
    X = np.vstack([rng.normal(loc=k, size=(n, p)) for k, n in enumerate(sizes)])
    y = np.concatenate([np.full(n, k) for k, n in enumerate(sizes)]).astype(np.intp)
    return X, y


def test_a_class_with_one_row_is_skipped_with_a_reason() -> None:
    X, y = _invented((30, 1, 30), p=2, seed=3)
    est = leave_one_out_logistic(X, y, 3, random_state=0)
    assert est.skipped is not None and est.skipped.startswith("class code 1 has 1 row;")
    assert est.C is None and est.fit is None and est.accuracy is None and est.rows.size == 0


def test_invariant_to_renaming_the_labels_and_to_row_order() -> None:
    X, y = _wine()
    rename = np.array([2, 0, 1])
    kw = dict(scale=X.std(axis=0), max_rows=120, random_state=5)
    a = leave_one_out_logistic(X, y, 3, **kw)
    b = leave_one_out_logistic(X, rename[y], 3, **kw)
    np.testing.assert_array_equal(a.rows, b.rows)
    np.testing.assert_array_equal(a.correct, b.correct)
    np.testing.assert_allclose(a.neg_log_prob, b.neg_log_prob, rtol=1e-6, atol=1e-12)
    assert a.C == b.C
    perm = np.random.default_rng(4).permutation(y.size)
    c = leave_one_out_logistic(X[perm], y[perm], 3, **kw)
    back = perm[c.rows]
    order = np.argsort(back)
    np.testing.assert_array_equal(back[order], a.rows)
    np.testing.assert_array_equal(c.correct[order], a.correct)
    np.testing.assert_allclose(c.neg_log_prob[order], a.neg_log_prob, rtol=1e-6, atol=1e-12)


def test_seed_reproducibility_and_the_subsample_of_cross_validation() -> None:
    X, y = _invented((400, 300, 50), p=4, seed=1)
    kw = dict(max_rows=200, scale=X.std(axis=0))
    a = leave_one_out_logistic(X, y, 3, random_state=11, **kw)
    again = leave_one_out_logistic(X, y, 3, random_state=11, **kw)
    np.testing.assert_array_equal(a.rows, again.rows)
    np.testing.assert_array_equal(a.neg_log_prob, again.neg_log_prob)
    other = leave_one_out_logistic(X, y, 3, random_state=12, **kw)
    assert not np.array_equal(other.rows, a.rows)
    assert a.n_used == 200 and int(a.class_rows.sum()) == 200
    np.testing.assert_array_equal(np.bincount(y[a.rows], minlength=3), a.class_rows)


def test_refuses_malformed_settings() -> None:
    X, y = _iris()
    with pytest.raises(DataError, match="max_rows"):
        leave_one_out_logistic(X, y, 3, max_rows=5)
    with pytest.raises(DataError, match="C_grid"):
        leave_one_out_logistic(X, y, 3, C_grid=(1.0, -1.0))
    with pytest.raises(DataError, match="logistic_scoring"):
        Config(logistic_scoring="bootstrap")


def test_the_audit_scores_logistic_regression_by_either_method() -> None:
    import discaudit

    X, y = _iris()
    loo = discaudit.preflight(X, y, random_state=0).findings["expected_performance"]
    kfold = discaudit.preflight(X, y, config=Config(logistic_scoring="k_fold"), random_state=0).findings[
        "expected_performance"
    ]
    a = loo.details["candidates"]["logistic_regression"]
    b = kfold.details["candidates"]["logistic_regression"]
    assert "approximated_rows" in a and "folds" not in a and "leave-one-out" in a["method"]
    assert b["folds"] == 10 and "cross-validation" in b["method"]
    # Two estimates of the same model's held-out accuracy on iris: within two standard errors.
    assert abs(a["accuracy"] - b["accuracy"]) < 2 * max(a["accuracy_se"], b["accuracy_se"])
