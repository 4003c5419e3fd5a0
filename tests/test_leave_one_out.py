"""Exact leave-one-out scores against scikit-learn refit once per left-out row (brute force).

Reference throughout: scikit-learn's LinearDiscriminantAnalysis (svd and lsqr solvers) and
QuadraticDiscriminantAnalysis, refit on the data with row i removed and asked to predict row i.
Data: iris, wine and breast cancer as shipped by scikit-learn (open data), plus seeded invented
data for the cases where a refit must fail.
"""

from __future__ import annotations

import numpy as np
import pytest
from scipy import linalg
from sklearn.datasets import load_breast_cancer, load_iris, load_wine
from sklearn.discriminant_analysis import LinearDiscriminantAnalysis, QuadraticDiscriminantAnalysis
from sklearn.preprocessing import StandardScaler

from discaudit.errors import DataError
from discaudit.stats.leave_one_out import (
    LeaveOneOutScorer,
    LeaveOneOutTally,
    array_blocks,
    leave_one_out,
)

# A numpy RuntimeWarning escaping from our code is a bug; make it fail.
pytestmark = pytest.mark.filterwarnings("error::RuntimeWarning")

GRID = (0.0, 0.01, 0.1, 0.6)
SHRINKAGE = 0.3
SHRINKAGE_GRID = (0.05, 0.5)


def _moments(X: np.ndarray, codes: np.ndarray) -> tuple[np.ndarray, np.ndarray, np.ndarray]:
    """Counts, means and centred scatter matrices per class (numpy, two-pass)."""
    K = int(codes.max()) + 1
    counts = np.bincount(codes, minlength=K)
    means = np.array([X[codes == k].mean(axis=0) for k in range(K)])
    scatter = np.array([(X[codes == k] - means[k]).T @ (X[codes == k] - means[k]) for k in range(K)])
    return counts, means, scatter


def _estimator(model: str, setting: float | None):
    if model == "lda":
        return LinearDiscriminantAnalysis(solver="svd" if setting is None else "lsqr")
    if model == "regularized_lda":
        return LinearDiscriminantAnalysis(solver="lsqr", shrinkage=setting)
    return QuadraticDiscriminantAnalysis(reg_param=setting)


def _brute_force(X: np.ndarray, codes: np.ndarray, rows: np.ndarray, model: str, setting: float | None):
    """Per-row correctness and -log p(true class) of scikit-learn refit without each row (reference)."""
    correct, nll = np.empty(rows.size, dtype=bool), np.empty(rows.size)
    keep = np.ones(codes.size, dtype=bool)
    for j, i in enumerate(rows):
        keep[i] = False
        est = _estimator(model, setting).fit(X[keep], codes[keep])
        keep[i] = True
        correct[j] = est.predict(X[i : i + 1])[0] == codes[i]
        nll[j] = -est.predict_log_proba(X[i : i + 1])[0, codes[i]]
    return correct, nll


def _refit_raises(X: np.ndarray, codes: np.ndarray, rows: np.ndarray, model: str, setting: float | None) -> bool:
    """True if scikit-learn refuses to fit without at least one of the rows (reference)."""
    keep = np.ones(codes.size, dtype=bool)
    for i in rows:
        keep[i] = False
        try:
            _estimator(model, setting).fit(X[keep], codes[keep])
        except (linalg.LinAlgError, ValueError):
            return True
        finally:
            keep[i] = True
    return False


def _iris():
    X, y = load_iris(return_X_y=True)
    return X, y.astype(np.intp)


def _wine5():
    d = load_wine(as_frame=True)
    cols = ["alcohol", "malic_acid", "ash", "flavanoids", "proline"]
    return d.data[cols].to_numpy(), d.target.to_numpy().astype(np.intp)


def _cancer8():
    d = load_breast_cancer()
    return d.data[:, :8], d.target.astype(np.intp)


def _check_against_brute_force(
    X, codes, rows, *, scale=None, X_fit=None, unfit_grid=(), shrinkage: float | tuple[float, ...] = SHRINKAGE
) -> None:
    """Every candidate, per row and in summary, equals scikit-learn refit without the row.

    ``X_fit`` is what the reference estimators see (X / scale when a scale is given);
    ``unfit_grid`` lists the reg_param values at which scikit-learn cannot fit QDA at all;
    ``shrinkage`` is one value (candidate ``regularized_lda``) or a grid (one candidate per value).
    """
    X_fit = X if X_fit is None else X_fit
    counts, means, scatter = _moments(X, codes)
    scorer = LeaveOneOutScorer.from_moments(counts, means, scatter, shrinkage=shrinkage, qda_reg_grid=GRID, scale=scale)
    grid = tuple(r for r in GRID if r not in unfit_grid)
    if isinstance(shrinkage, tuple):
        rlda = tuple(f"regularized_lda(shrinkage={a:g})" for a in shrinkage)
    else:
        rlda = ("regularized_lda",)
    assert scorer.names == ("lda", *rlda, *(f"qda(reg_param={r:g})" for r in grid))
    for r in unfit_grid:
        assert f"qda(reg_param={r:g})" in scorer.skipped
        with pytest.raises(linalg.LinAlgError):  # source: scikit-learn refuses the fit
            QuadraticDiscriminantAnalysis(reg_param=r).fit(X_fit, codes)
    ours = scorer.score_block(X[rows], codes[rows])
    result = scorer.tally(array_blocks(X[rows], codes[rows], block_rows=17)).result()
    assert result.n_used == rows.size and set(result.skipped) == set(scorer.skipped)
    reference = {}
    for j, (model, setting) in enumerate(zip(scorer.models, scorer.settings, strict=True)):
        correct, nll = _brute_force(X_fit, codes, rows, model, setting)  # source: scikit-learn refits
        reference[scorer.names[j]] = (correct, nll)
        assert not ours.refit_fails[:, j].any()
        np.testing.assert_array_equal(ours.correct[:, j], correct)
        # log(1 - tiny) in scikit-learn carries an absolute rounding of ~1e-16 per row.
        np.testing.assert_allclose(ours.neg_log_prob[:, j], nll, rtol=1e-8, atol=1e-12)
        assert result.accuracy[j] == correct.mean()
        assert result.log_loss[j] == pytest.approx(nll.mean(), rel=1e-8)
        # Standard errors: numpy's sample standard deviation (ddof=1) of the brute-force per-row values.
        assert result.accuracy_se[j] == pytest.approx(correct.std(ddof=1) / np.sqrt(rows.size), rel=1e-8, abs=1e-15)
        assert result.log_loss_se[j] == pytest.approx(nll.std(ddof=1) / np.sqrt(rows.size), rel=1e-7)
    for a in result.names:
        for b in result.names:
            d_nll = reference[a][1] - reference[b][1]
            d_acc = reference[a][0].astype(float) - reference[b][0].astype(float)
            # Paired SE: numpy on the brute-force per-row differences.
            assert result.paired_se(a, b) == pytest.approx(d_nll.std(ddof=1) / np.sqrt(rows.size), rel=1e-6, abs=1e-12)
            assert result.paired_se(a, b, "accuracy") == pytest.approx(
                d_acc.std(ddof=1) / np.sqrt(rows.size), rel=1e-8, abs=1e-15
            )
    with pytest.raises(ValueError, match="metric"):
        result.paired_se("lda", "lda", "error_rate")
    qda = [f"qda(reg_param={r:g})" for r in grid]
    best = grid[int(np.argmin([reference[name][1].mean() for name in qda]))]
    assert result.best_qda_reg_param() == best
    shrink = shrinkage if isinstance(shrinkage, tuple) else (shrinkage,)
    best_nll = shrink[int(np.argmin([reference[name][1].mean() for name in rlda]))]
    assert result.best_shrinkage() == best_nll
    best_acc = shrink[int(np.argmax([reference[name][0].mean() for name in rlda]))]
    assert result.best_shrinkage("accuracy") == best_acc


def test_iris_every_row_matches_sklearn_refits() -> None:
    X, y = _iris()
    _check_against_brute_force(X, y, np.arange(y.size))


def test_iris_shrinkage_grid_matches_sklearn_refits_per_value() -> None:
    # Given in descending order, so the log-loss winner (0.05, by the brute force) is not the first value.
    X, y = _iris()
    _check_against_brute_force(X, y, np.arange(y.size), shrinkage=SHRINKAGE_GRID[::-1])


def test_wine_five_features_with_a_shrinkage_grid_match_sklearn_refits() -> None:
    # The metrics disagree here (by the brute force): log-loss picks 0.05, accuracy 0.5.
    X, y = _wine5()
    rows = np.sort(np.random.default_rng(12).choice(y.size, 60, replace=False))
    _check_against_brute_force(X, y, rows, shrinkage=SHRINKAGE_GRID)


def test_shrinkage_names_and_validation() -> None:
    X, y = _iris()
    counts, means, scatter = _moments(X, y)
    one = LeaveOneOutScorer.from_moments(counts, means, scatter, shrinkage=[0.2], qda_reg_grid=())
    assert one.names == ("lda", "regularized_lda(shrinkage=0.2)")  # a sequence of one is still a grid
    plain = LeaveOneOutScorer.from_moments(counts, means, scatter, shrinkage=0.2, qda_reg_grid=())
    assert plain.names == ("lda", "regularized_lda")
    none = LeaveOneOutScorer.from_moments(counts, means, scatter, shrinkage=(), qda_reg_grid=())
    assert none.names == ("lda",)
    res = none.tally(array_blocks(X, y)).result()
    assert res.best_shrinkage() is None
    for bad in ((0.1, 0.1), (0.2, 1.5), -0.1, [[0.1]]):
        with pytest.raises(DataError, match="shrinkage"):
            LeaveOneOutScorer.from_moments(counts, means, scatter, shrinkage=bad)


def test_wine_five_features_match_sklearn_refits() -> None:
    # proline is in the hundreds while the others are near 1: shrinkage toward mu I is not scale-free.
    X, y = _wine5()
    rows = np.sort(np.random.default_rng(7).choice(y.size, 60, replace=False))
    _check_against_brute_force(X, y, rows)


def test_breast_cancer_with_a_standard_scaler_matches_sklearn_refits() -> None:
    # Reference: StandardScaler fitted once on all rows (a fixed scale), then the estimators refit
    # on the scaled rows without row i; ours takes the raw rows and the scaler's scale_. Radius,
    # perimeter and area are nearly collinear: unregularized QDA cannot be fitted (an eigenvalue of
    # class 1's covariance is below tol), and scikit-learn says so.
    X, y = _cancer8()
    scaler = StandardScaler().fit(X)
    rows = np.sort(np.random.default_rng(11).choice(y.size, 50, replace=False))
    _check_against_brute_force(X, y, rows, scale=scaler.scale_, X_fit=scaler.transform(X), unfit_grid=(0.0,))


def _pooled_within_sd(X: np.ndarray, codes: np.ndarray) -> np.ndarray:
    """sqrt of the diagonal of scikit-learn's LDA ``covariance_`` (lsqr, no shrinkage): the pooled
    within-class covariance with the class proportions as priors, i.e. divisor N (reference)."""
    lda = LinearDiscriminantAnalysis(solver="lsqr", store_covariance=True).fit(X, codes)
    return np.sqrt(np.diag(lda.covariance_))


def test_shrinkage_scale_matches_sklearn_refits_on_within_class_scaled_features() -> None:
    # Reference: the shrinkage candidates of scikit-learn refit on X / scale / within-class SD (both
    # fixed on all rows); LDA and QDA must not see the extra scale (they are refit on X / scale).
    X, y = _wine5()
    scaler = StandardScaler().fit(X)
    Z = scaler.transform(X)
    extra = _pooled_within_sd(Z, y)
    rows = np.sort(np.random.default_rng(21).choice(y.size, 40, replace=False))
    counts, means, scatter = _moments(X, y)
    scorer = LeaveOneOutScorer.from_moments(
        counts, means, scatter, shrinkage=(0.05, 0.5), qda_reg_grid=(0.1,), scale=scaler.scale_, shrinkage_scale=extra
    )
    ours = scorer.score_block(X[rows], y[rows])
    for j, (model, setting) in enumerate(zip(scorer.models, scorer.settings, strict=True)):
        X_fit = Z / extra if model == "regularized_lda" else Z
        correct, nll = _brute_force(X_fit, y, rows, model, setting)  # source: scikit-learn refits
        np.testing.assert_array_equal(ours.correct[:, j], correct)
        np.testing.assert_allclose(ours.neg_log_prob[:, j], nll, rtol=1e-8, atol=1e-12)
    with pytest.raises(DataError, match="shrinkage_scale"):
        LeaveOneOutScorer.from_moments(counts, means, scatter, shrinkage=0.1, shrinkage_scale=np.zeros(5))


def test_within_class_scaler_divides_by_sklearns_pooled_within_class_sd() -> None:
    from discaudit.within_class_scaler import WithinClassScaler

    X, y = _wine5()
    scaler = WithinClassScaler().fit(X, y)
    np.testing.assert_allclose(scaler.scale_, _pooled_within_sd(X, y), rtol=1e-10)  # source: scikit-learn's LDA
    np.testing.assert_allclose(scaler.transform(X), X / scaler.scale_)
    # Property: shrinkage toward mu I on these units is shrinkage toward the diagonal of the pooled
    # covariance, so it does not depend on the features' units (unlike shrinkage after a StandardScaler).
    from sklearn.pipeline import make_pipeline

    units = np.array([1.0, 1e3, 1e-2, 5.0, 1e4])
    a = make_pipeline(WithinClassScaler(), LinearDiscriminantAnalysis(solver="lsqr", shrinkage=0.3)).fit(X, y)
    b = make_pipeline(WithinClassScaler(), LinearDiscriminantAnalysis(solver="lsqr", shrinkage=0.3)).fit(X * units, y)
    np.testing.assert_allclose(a.predict_proba(X), b.predict_proba(X * units), rtol=1e-8, atol=1e-12)


def _invented(sizes: tuple[int, ...], p: int, seed: int, shrink_class: int | None = None):
    rng = np.random.default_rng(seed)
    X = np.vstack([rng.normal(loc=k, size=(n, p)) @ rng.normal(size=(p, p)) for k, n in enumerate(sizes)])
    y = np.repeat(np.arange(len(sizes)), sizes).astype(np.intp)
    if shrink_class is not None:
        X[y == shrink_class] *= 1e-3
    return X, y


def _skips_agree_with_sklearn(X, y, grid, *, expect_skipped, expect_scored) -> None:
    counts, means, scatter = _moments(X, y)
    res = leave_one_out(counts, means, scatter, array_blocks(X, y), shrinkage=SHRINKAGE, qda_reg_grid=grid)
    rows = np.arange(y.size)
    for r in expect_skipped:
        name = f"qda(reg_param={r:g})"
        assert name in res.skipped and name not in res.names
        assert _refit_raises(X, y, rows, "qda", r)  # source: scikit-learn raises for some refit
    for r in expect_scored:
        _, nll = _brute_force(X, y, rows, "qda", r)  # source: scikit-learn refits
        assert res.log_loss[res.index(f"qda(reg_param={r:g})")] == pytest.approx(nll.mean(), rel=1e-8)
    for values in (res.accuracy, res.log_loss, res.accuracy_se, res.log_loss_se, res.log_loss_paired_se):
        assert np.all(np.isfinite(values))


def test_qda_with_a_class_of_p_plus_one_rows_is_scored_only_when_regularized() -> None:
    # Class 0 has p + 1 = 7 rows: a refit keeps p, whose centred scatter has rank p - 1.
    X, y = _invented((7, 9, 30), p=6, seed=3)
    _skips_agree_with_sklearn(X, y, (0.0, 0.05, 0.5), expect_skipped=(0.0,), expect_scored=(0.05, 0.5))
    counts, means, scatter = _moments(X, y)
    skipped = LeaveOneOutScorer.from_moments(counts, means, scatter, qda_reg_grid=(0.0,)).skipped
    assert skipped["qda(reg_param=0)"].startswith("class code 0 has 7 rows")  # decided before the pass


def test_qda_with_a_class_of_p_rows_is_never_scored() -> None:
    # Class 1 has p = 6 rows: the svd solver has fewer than p singular values for any reg_param.
    X, y = _invented((12, 6, 30), p=6, seed=4)
    _skips_agree_with_sklearn(X, y, (0.0, 0.3), expect_skipped=(0.0, 0.3), expect_scored=())


def test_qda_eigenvalues_below_sklearns_tol_are_skipped() -> None:
    # Class 1 in units 1000 times smaller: covariance eigenvalues ~1e-6 < tol = 1e-4 unless regularized.
    X, y = _invented((25, 25, 25), p=3, seed=5, shrink_class=1)
    _skips_agree_with_sklearn(X, y, (0.0, 0.01), expect_skipped=(0.0,), expect_scored=(0.01,))


def test_a_refit_that_falls_below_tol_skips_the_setting() -> None:
    # Class 0 has p + 1 rows, so every refit leaving one of them out has a zero eigenvalue that
    # reg_param = 5e-5 lifts only to 5e-5 < tol: the full data pass, the refits do not.
    X, y = _invented((5, 20, 20), p=4, seed=6)
    counts, means, scatter = _moments(X, y)
    scorer = LeaveOneOutScorer.from_moments(counts, means, scatter, qda_reg_grid=(5e-5, 0.1))
    assert "qda(reg_param=5e-05)" in scorer.names  # passes the checks on the full data
    res = scorer.tally(array_blocks(X, y)).result()
    assert res.skipped["qda(reg_param=5e-05)"].startswith("5 of 45 leave-one-out refits")
    assert _refit_raises(X, y, np.flatnonzero(y == 0)[:1], "qda", 5e-5)  # source: scikit-learn
    assert not _refit_raises(X, y, np.flatnonzero(y == 1), "qda", 5e-5)
    _, nll = _brute_force(X, y, np.arange(y.size), "qda", 0.1)
    assert res.log_loss[res.index("qda(reg_param=0.1)")] == pytest.approx(nll.mean(), rel=1e-8)


def test_lda_is_skipped_where_sklearns_svd_solver_reduces_the_rank() -> None:
    # A fifth feature equal to the sum of two others up to noise 1e-5: the within-class correlation
    # matrix has an eigenvalue ~1e-10 < tol^2, and the svd solver drops that direction.
    X, y = _iris()
    X = np.column_stack([X, X[:, 0] + X[:, 1] + 1e-5 * np.random.default_rng(2).normal(size=y.size)])
    counts, means, scatter = _moments(X, y)
    res = leave_one_out(counts, means, scatter, array_blocks(X, y), qda_reg_grid=())
    assert "lda" in res.skipped and "reduced-rank" in res.skipped["lda"]
    # Source: scikit-learn, whose svd solver then differs from the full-rank lsqr solver.
    svd = LinearDiscriminantAnalysis(solver="svd").fit(X, y).predict_log_proba(X)
    lsqr = LinearDiscriminantAnalysis(solver="lsqr").fit(X, y).predict_log_proba(X)
    assert np.max(np.abs(svd - lsqr)) > 1e-3


def test_lda_with_collinear_class_means_is_scored_as_the_lsqr_solver() -> None:
    # Three invented classes whose means lie on one line (class 2 shifted to m0 + 2 (m1 - m0)), as with
    # ordered classes: the svd solver keeps one between-class direction, so LDA is scored and handed out
    # as the lsqr solver, the same full-rank rule.
    rng = np.random.default_rng(11)
    X = rng.normal(size=(90, 3))
    y = np.repeat(np.arange(3), 30).astype(np.intp)
    m = [X[y == k].mean(axis=0) for k in range(3)]
    X[y == 2] += m[0] + 2.0 * (m[1] - m[0]) - m[2]
    counts, means, scatter = _moments(X, y)
    scorer = LeaveOneOutScorer.from_moments(counts, means, scatter, shrinkage=None, qda_reg_grid=())
    assert scorer.settings[scorer.names.index("lda")] == 0.0
    # Source: scikit-learn's svd solver reduces the rank on these data (one discriminant direction).
    assert LinearDiscriminantAnalysis(solver="svd").fit(X, y).scalings_.shape[1] == 1
    rows = np.arange(y.size)
    ours = scorer.score_block(X, y)
    correct, nll = _brute_force(X, y, rows, "lda", 0.0)  # source: scikit-learn lsqr refits
    j = scorer.names.index("lda")
    np.testing.assert_array_equal(ours.correct[:, j], correct)
    np.testing.assert_allclose(ours.neg_log_prob[:, j], nll, rtol=1e-8, atol=1e-12)


def test_lda_is_skipped_when_one_refit_has_a_singular_pooled_covariance() -> None:
    # A fifth feature that is 0 on every row but one: the full data pass, the refit without that row
    # has a feature constant within classes.
    X, y = _iris()
    X = np.column_stack([X, np.zeros(y.size)])
    X[0, 4] = 1.0
    counts, means, scatter = _moments(X, y)
    res = leave_one_out(counts, means, scatter, array_blocks(X, y), shrinkage=0.2, qda_reg_grid=())
    assert res.skipped["lda"].startswith("1 of 150 leave-one-out refits")
    # Source: scikit-learn's pooled covariance of that refit has rank p - 1 (numpy's matrix_rank).
    cov = LinearDiscriminantAnalysis(solver="lsqr", store_covariance=True).fit(X[1:], y[1:]).covariance_
    assert np.linalg.matrix_rank(cov) == 4
    # Without shrinkage the lsqr solver's covariance of that refit is singular too.
    unshrunk = leave_one_out(counts, means, scatter, array_blocks(X, y), shrinkage=0.0, qda_reg_grid=())
    assert unshrunk.skipped["regularized_lda"].startswith("1 of 150 leave-one-out refits")
    # Shrinkage keeps that refit nonsingular: regularized LDA is still scored, and matches the refits.
    _, nll = _brute_force(X, y, np.arange(y.size), "regularized_lda", 0.2)
    assert res.log_loss[res.index("regularized_lda")] == pytest.approx(nll.mean(), rel=1e-8)


def test_lda_with_a_class_of_one_row_is_skipped_not_raised() -> None:
    X, y = _invented((1, 20, 20), p=2, seed=8)
    counts, means, scatter = _moments(X, y)
    res = leave_one_out(counts, means, scatter, array_blocks(X, y), shrinkage=0.1, qda_reg_grid=(0.1,))
    assert res.names == () and set(res.skipped) == {"lda", "regularized_lda", "qda(reg_param=0.1)"}
    assert res.best_qda_reg_param() is None


def _result(X, y, **kw):
    counts, means, scatter = _moments(X, y)
    return leave_one_out(counts, means, scatter, array_blocks(X, y), shrinkage=SHRINKAGE, qda_reg_grid=GRID, **kw)


def _assert_same(a, b, rtol: float = 1e-12) -> None:
    assert a.names == b.names and a.n_used == b.n_used
    for field in ("accuracy", "log_loss", "accuracy_se", "log_loss_se", "accuracy_paired_se", "log_loss_paired_se"):
        np.testing.assert_allclose(getattr(a, field), getattr(b, field), rtol=rtol, atol=1e-14)


def test_invariant_to_row_order() -> None:
    X, y = _wine5()
    perm = np.random.default_rng(1).permutation(y.size)
    _assert_same(_result(X, y), _result(X[perm], y[perm]))


def test_invariant_to_renaming_the_labels() -> None:
    X, y = _wine5()
    rename = np.array([2, 0, 1])
    _assert_same(_result(X, y), _result(X, rename[y]))


def test_block_size_does_not_change_the_result() -> None:
    X, y = _iris()
    counts, means, scatter = _moments(X, y)
    one = leave_one_out(counts, means, scatter, [(X, y)], shrinkage=SHRINKAGE, qda_reg_grid=GRID)
    for size in (1, 7, 64):
        blocks = lambda size=size: array_blocks(X, y, block_rows=size)  # noqa: E731 - a callable source
        _assert_same(one, leave_one_out(counts, means, scatter, blocks, shrinkage=SHRINKAGE, qda_reg_grid=GRID))


def test_a_block_larger_than_the_row_block_is_split_without_changing_the_result() -> None:
    X, y = _invented((4000, 3000, 2500), p=5, seed=9)
    counts, means, scatter = _moments(X, y)
    whole = leave_one_out(counts, means, scatter, [(X, y)], shrinkage=SHRINKAGE, qda_reg_grid=GRID)
    small = leave_one_out(counts, means, scatter, array_blocks(X, y, 1000), shrinkage=SHRINKAGE, qda_reg_grid=GRID)
    _assert_same(whole, small, rtol=1e-11)


def test_tallies_of_two_halves_add_up_to_one_pass() -> None:
    X, y = _cancer8()
    counts, means, scatter = _moments(X, y)
    scorer = LeaveOneOutScorer.from_moments(counts, means, scatter, shrinkage=SHRINKAGE, qda_reg_grid=GRID)
    half = y.size // 3
    first = scorer.tally(array_blocks(X[:half], y[:half]))
    second = scorer.tally(array_blocks(X[half:], y[half:]))
    whole = scorer.tally(array_blocks(X, y))
    _assert_same(whole.result(), (first + second).result())
    _assert_same(whole.result(), sum([first, second]).result())
    assert isinstance(first + second, LeaveOneOutTally)
    np.testing.assert_array_equal((first + second).class_rows, counts)


def test_blocks_that_miss_rows_are_refused() -> None:
    X, y = _iris()
    counts, means, scatter = _moments(X, y)
    with pytest.raises(DataError, match="rows of class code"):
        leave_one_out(counts, means, scatter, array_blocks(X[:-1], y[:-1]))
    with pytest.raises(DataError, match="class codes"):
        leave_one_out(counts, means, scatter, [(X, y + 1)])


def test_the_handed_out_shrinkage_lda_is_the_scored_one() -> None:
    # The audit scores shrinkage LDA at the Ledoit-Wolf intensity on features of unit pooled
    # within-class variance; estimator() must build that model. Reference: scikit-learn's
    # LeaveOneOut cross-validation of the built Pipeline (its scaler refit per fold, which the exact
    # leave-one-out holds fixed, so at most one row of 178 may differ).
    from sklearn.model_selection import LeaveOneOut, cross_val_score

    import discaudit

    X, y = load_wine(return_X_y=True)
    v = discaudit.preflight(X, y, random_state=0)
    scored = v.findings["expected_performance"].details["candidates"]["regularized_lda"]
    assert scored["settings"]["standardize"] == "within_class"
    from discaudit.stats.shrinkage import shrinkage_intensity

    # The intensity: Ledoit-Wolf of the pooled within-class covariance on the within-class scale.
    assert scored["settings"]["shrinkage"] == pytest.approx(shrinkage_intensity(X, y, standardize=True), abs=5e-5)
    from discaudit.estimator import build_estimator

    est = build_estimator("regularized_lda", scored["settings"])
    brute = cross_val_score(est, X, y, cv=LeaveOneOut()).mean()
    assert abs(brute - scored["accuracy"]) <= 1.0 / y.size + 1e-12


def test_row_log_sum_exp_matches_scipy_including_infinite_rows() -> None:
    # Reference: scipy.special.logsumexp(axis=1), which the leave-one-out log-loss used before.
    from scipy.special import logsumexp

    from discaudit.stats._linalg import row_log_sum_exp

    rng = np.random.default_rng(11)
    scores = rng.normal(scale=400.0, size=(500, 4))  # spreads of hundreds: exp would overflow unshifted
    scores[3] = -np.inf
    scores[4, 1] = np.inf
    scores[5, :2] = -np.inf
    np.testing.assert_allclose(row_log_sum_exp(scores), logsumexp(scores, axis=1), rtol=1e-14, atol=0)
