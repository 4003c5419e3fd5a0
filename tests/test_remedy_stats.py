"""The statistics behind the remedies, against outside references.

* VIF after removing a feature: statsmodels' ``variance_inflation_factor`` on the remaining columns
  (with a constant), on open data sets shipped by scikit-learn.
* Yeo-Johnson: ``scipy.stats.yeojohnson`` and ``yeojohnson_normmax``.
* Pairwise Hotelling T^2: pingouin's two-sample ``multivariate_ttest`` (K = 2), and for every pair of
  K = 3 classes the same test recomputed by hand from numpy's covariance; Holm's adjustment against
  statsmodels' ``multipletests(method="holm")``.
"""

from __future__ import annotations

import numpy as np
import pandas as pd
import pingouin
import pytest
from scipy import stats as sps
from sklearn.datasets import load_breast_cancer, load_diabetes, load_wine
from statsmodels.stats.multitest import multipletests
from statsmodels.stats.outliers_influence import variance_inflation_factor

from discaudit.errors import DataError
from discaudit.stats.feature_removal import backward_elimination, vif_after_each_removal
from discaudit.stats.moments import ClassMoments
from discaudit.stats.pairwise_hotelling import holm, pairwise_hotelling
from discaudit.stats.yeo_johnson import yeo_johnson, yeo_johnson_lambda


def _statsmodels_vif(frame: pd.DataFrame) -> np.ndarray:
    design = np.column_stack([np.ones(len(frame)), frame.to_numpy()])
    return np.array([variance_inflation_factor(design, j) for j in range(1, design.shape[1])])


def _covariance(frame: pd.DataFrame) -> np.ndarray:
    return np.cov(frame.to_numpy(), rowvar=False)


class TestVifAfterRemoval:
    @pytest.mark.parametrize("loader", [load_diabetes, load_wine])
    def test_every_single_removal_matches_statsmodels(self, loader) -> None:
        # Open data: diabetes (s1..s5 strongly collinear) and wine, as scikit-learn ships them.
        X = loader(as_frame=True).data
        after = vif_after_each_removal(_covariance(X))
        for j, name in enumerate(X.columns):
            reference = _statsmodels_vif(X.drop(columns=[name]))
            np.testing.assert_allclose(np.delete(after[j], j), reference, rtol=1e-8)
            assert np.isnan(after[j, j])

    def test_an_exact_dependency_broken_by_the_removal_gives_finite_vifs(self) -> None:
        X = load_wine(as_frame=True).data[["alcohol", "ash", "flavanoids"]].copy()
        X["sum"] = X["alcohol"] + X["ash"]  # exact dependency among alcohol, ash, sum
        after = vif_after_each_removal(_covariance(X))
        for j, name in enumerate(X.columns):
            rest = np.delete(after[j], j)
            if name == "flavanoids":  # not in the dependency: it stays
                assert np.all(rest[[0, 1, 2]] > 1e8) or not np.all(np.isfinite(rest[[0, 1, 2]]))
            else:
                np.testing.assert_allclose(rest, _statsmodels_vif(X.drop(columns=[name])), rtol=1e-6)

    def test_backward_elimination_takes_the_removal_that_lowers_the_largest_vif_most(self) -> None:
        # Breast cancer: radius, perimeter and area (mean and worst) are near copies of each other.
        X = load_breast_cancer(as_frame=True).data.iloc[:, :10]
        names = list(X.columns)
        plan = backward_elimination(_covariance(X), names, names, vif_limit=5.0, condition_limit=30.0)
        left = list(names)
        for step, removed in enumerate(plan.removed):
            # Brute force: the largest VIF (statsmodels) after each candidate's removal.
            worst = {f: _statsmodels_vif(X[[g for g in left if g != f]]).max() for f in left}
            assert removed == min(left, key=lambda f: worst[f])
            left.remove(removed)
            assert plan.max_vif[step] == pytest.approx(_statsmodels_vif(X[left]).max(), rel=1e-8)
        assert plan.reached == (plan.max_vif[-1] <= 5.0 and plan.condition_number[-1] <= 30.0)
        assert plan.reached

    def test_nothing_is_removed_when_the_limits_already_hold(self) -> None:
        X = load_wine(as_frame=True).data[["alcohol", "ash", "hue"]]
        plan = backward_elimination(_covariance(X), list(X.columns), list(X.columns), 5.0, 30.0)
        assert plan.removed == () and plan.reached

    def test_only_candidates_are_removed(self) -> None:
        X = load_diabetes(as_frame=True).data
        plan = backward_elimination(_covariance(X), list(X.columns), ["s1", "s2"], 1.01, 1.01)
        assert set(plan.removed) == {"s1", "s2"} and not plan.reached


class TestYeoJohnson:
    @pytest.mark.parametrize("lmbda", [-1.3, 0.0, 0.5, 1.0, 2.0, 3.1])
    def test_transform_matches_scipy(self, lmbda) -> None:
        x = np.concatenate([np.linspace(-5, 5, 101), [-1e-12, 1e-12, 40.0]])
        np.testing.assert_allclose(yeo_johnson(x, lmbda), sps.yeojohnson(x, lmbda), rtol=1e-12, atol=1e-15)

    @pytest.mark.parametrize("column", ["area error", "mean concavity", "worst symmetry"])
    def test_exponent_without_classes_matches_scipy_normmax(self, column) -> None:
        # Skewed columns of the open breast cancer data; scipy maximizes the same profile likelihood.
        x = load_breast_cancer(as_frame=True).data[column].to_numpy()
        fit = yeo_johnson_lambda(x)
        assert fit.lmbda == pytest.approx(sps.yeojohnson_normmax(x), abs=1e-5)
        assert fit.log_likelihood == pytest.approx(sps.yeojohnson_llf(fit.lmbda, x), rel=1e-10)
        assert fit.log_likelihood >= fit.log_likelihood_identity and fit.variance == "total"

    def test_exponent_within_classes_maximizes_the_pooled_likelihood(self) -> None:
        d = load_breast_cancer(as_frame=True)
        x, codes = d.data["area error"].to_numpy(), d.target.to_numpy()
        fit = yeo_johnson_lambda(x, codes)

        def pooled(lam: float) -> float:
            t = yeo_johnson(x, lam)
            resid = t - pd.Series(t).groupby(codes).transform("mean").to_numpy()
            return -0.5 * x.size * np.log(np.mean(resid**2)) + (lam - 1) * np.sum(np.sign(x) * np.log1p(np.abs(x)))

        assert fit.log_likelihood == pytest.approx(pooled(fit.lmbda), rel=1e-12)
        grid = np.linspace(fit.lmbda - 1, fit.lmbda + 1, 41)
        assert fit.log_likelihood >= max(pooled(g) for g in grid) - 1e-9
        # One class only: the pooled model is the one-sample model.
        assert yeo_johnson_lambda(x, np.zeros(x.size, dtype=int)).lmbda == pytest.approx(fit_one(x), abs=1e-7)

    def test_constant_values_raise(self) -> None:
        with pytest.raises(DataError, match="do not vary"):
            yeo_johnson_lambda(np.ones(10))


def fit_one(x: np.ndarray) -> float:
    return yeo_johnson_lambda(x).lmbda


class TestPairwiseHotelling:
    def test_two_classes_match_pingouin(self) -> None:
        d = load_breast_cancer(as_frame=True)
        X = d.data[["mean radius", "mean texture", "mean smoothness", "mean symmetry"]]
        codes = d.target.to_numpy()
        h = pairwise_hotelling(ClassMoments.from_arrays(X.to_numpy(), codes, (0, 1)))
        ref = pingouin.multivariate_ttest(X[codes == 0], X[codes == 1])
        assert h.t2[0] == pytest.approx(float(ref["T2"].iloc[0]), rel=1e-9)
        assert h.f[0] == pytest.approx(float(ref["F"].iloc[0]), rel=1e-9)
        assert (h.df1, h.df2) == (float(ref["df1"].iloc[0]), float(ref["df2"].iloc[0]))

    def test_three_classes_use_the_covariance_pooled_over_every_class(self) -> None:
        d = load_wine(as_frame=True)
        X = d.data[["alcohol", "malic_acid", "ash", "flavanoids"]].to_numpy()
        y = d.target.to_numpy()
        h = pairwise_hotelling(ClassMoments.from_arrays(X, y, (0, 1, 2)))
        N, K, p = len(y), 3, X.shape[1]
        W = sum((np.sum(y == k) - 1) * np.cov(X[y == k], rowvar=False) for k in range(K))
        S = W / (N - K)
        for (i, j), f, pv in zip(h.pairs, h.f, h.p_value, strict=True):
            diff = X[y == i].mean(axis=0) - X[y == j].mean(axis=0)
            ni, nj = np.sum(y == i), np.sum(y == j)
            t2 = ni * nj / (ni + nj) * diff @ np.linalg.solve(S, diff)
            f_ref = t2 * (N - K - p + 1) / ((N - K) * p)
            assert f == pytest.approx(f_ref, rel=1e-10)
            assert pv == pytest.approx(sps.f.sf(f_ref, p, N - K - p + 1), rel=1e-8, abs=1e-300)

    def test_holm_matches_statsmodels(self) -> None:
        p = np.array([0.01, 0.04, 0.03, 0.2, 0.005, 0.04])
        np.testing.assert_allclose(holm(p), multipletests(p, method="holm")[1], rtol=1e-14)

    def test_equal_means_give_large_p_values_and_a_singular_pooled_covariance_raises(self) -> None:
        rng = np.random.default_rng(0)
        X = rng.normal(size=(200, 3))
        codes = np.repeat([0, 1], 100)
        h = pairwise_hotelling(ClassMoments.from_arrays(X, codes, ("a", "b")))
        assert h.p_adjusted[0] > 0.01
        flat = np.column_stack([X, X[:, 0] + X[:, 1]])
        with pytest.raises(DataError, match="singular"):
            pairwise_hotelling(ClassMoments.from_arrays(flat, codes, ("a", "b")))
