"""Tests of Mardia's statistics and the Henze-Zirkler test (discaudit.stats.mardia, .henze_zirkler).

Outside references: pingouin.multivariate_normality (Henze-Zirkler; it uses the covariance with
divisor n, ``np.cov(bias=True)``, like us), scipy.stats.skew/kurtosis and
scipy.spatial.distance.mahalanobis, explicit textbook formulas written out in the test, the
iris and wine data shipped with scikit-learn, and the chi-square / normal null distributions
(calibration by simulation).
"""

from __future__ import annotations

import numpy as np
import pytest
from scipy import stats as sp_stats
from scipy.spatial.distance import mahalanobis
from sklearn.datasets import load_iris, load_wine

import discaudit.stats._sampling as sampling_module
from discaudit.errors import DataError
from discaudit.stats.henze_zirkler import henze_zirkler
from discaudit.stats.mardia import mardia

pingouin = pytest.importorskip("pingouin")


def _iris_species() -> list[np.ndarray]:
    data = load_iris()
    return [data.data[data.target == k] for k in range(3)]


def _skewed_sample(n: int, p: int, seed: int) -> np.ndarray:
    """Invented data for property tests: correlated, skewed columns."""
    rng = np.random.default_rng(seed)
    return rng.standard_exponential(size=(n, p)) @ rng.normal(size=(p, p)) + rng.normal(size=p)


def _mardia_by_double_sum(X: np.ndarray) -> tuple[float, float]:
    """Mardia (1970) b1,p and b2,p written out literally: a double loop over pairs, S^-1 by solve."""
    n = X.shape[0]
    centred = X - X.mean(axis=0)
    S = np.cov(X, rowvar=False, bias=True)  # divisor n, as in Mardia (1970)
    b1 = 0.0
    b2 = 0.0
    for i in range(n):
        solved = np.linalg.solve(S, centred[i])
        for j in range(n):
            b1 += float(centred[j] @ solved) ** 3
        b2 += float(centred[i] @ solved) ** 2
    return b1 / n**2, b2 / n


class TestMardiaFormulas:
    def test_matches_explicit_double_sum(self):
        X = _skewed_sample(30, 3, seed=1)
        b1, b2 = _mardia_by_double_sum(X)
        res = mardia(X)
        assert res.skewness == pytest.approx(b1, rel=1e-10)
        assert res.kurtosis == pytest.approx(b2, rel=1e-10)

    def test_blocked_sum_matches_double_sum_across_many_blocks(self, monkeypatch):
        # Force blocks of a few rows so that the upper-triangle bookkeeping is exercised.
        X = _skewed_sample(41, 3, seed=2)
        b1, b2 = _mardia_by_double_sum(X)
        monkeypatch.setattr(sampling_module, "_BLOCK_ELEMENTS", 100)
        assert len(sampling_module.row_blocks(41)) > 10
        res = mardia(X)
        assert res.skewness == pytest.approx(b1, rel=1e-10)
        assert res.kurtosis == pytest.approx(b2, rel=1e-10)

    def test_skewness_equals_third_moment_tensor_form(self):
        # Independent identity: sum_ij (z_i'z_j)^3 = sum_rst (sum_i z_ir z_is z_it)^2, with z the
        # data whitened by the Cholesky factor of the divisor-n covariance.
        X = _skewed_sample(400, 4, seed=3)
        centred = X - X.mean(axis=0)
        L = np.linalg.cholesky(np.cov(X, rowvar=False, bias=True))
        Z = np.linalg.solve(L, centred.T).T
        moments = np.einsum("ir,is,it->rst", Z, Z, Z) / Z.shape[0]
        assert mardia(X).skewness == pytest.approx(float(np.sum(moments**2)), rel=1e-9)

    def test_kurtosis_is_mean_of_squared_mahalanobis_squared(self):
        # Squared Mahalanobis distances from scipy's implementation.
        X = _skewed_sample(120, 3, seed=4)
        VI = np.linalg.inv(np.cov(X, rowvar=False, bias=True))  # test-only reference
        mean = X.mean(axis=0)
        d2 = np.array([mahalanobis(x, mean, VI) ** 2 for x in X])
        assert mardia(X).kurtosis == pytest.approx(float(np.mean(d2**2)), rel=1e-9)

    def test_one_feature_reduces_to_univariate_moments(self):
        # For p = 1, b1,1 is the squared sample skewness and b2,1 the (non-excess) kurtosis;
        # reference: scipy.stats.skew / kurtosis with bias=True (moment estimators, divisor n).
        x = _skewed_sample(200, 1, seed=5)[:, 0]
        res = mardia(x)
        assert res.skewness == pytest.approx(sp_stats.skew(x, bias=True) ** 2, rel=1e-9)
        assert res.kurtosis == pytest.approx(sp_stats.kurtosis(x, fisher=False, bias=True), rel=1e-9)
        assert res.skew_df == 1 and res.kurt_expected == 3.0

    def test_test_statistics_follow_their_definitions(self):
        X = _skewed_sample(80, 3, seed=6)
        res = mardia(X)
        n, p = X.shape
        assert res.skew_df == p * (p + 1) * (p + 2) // 6 == 10
        assert res.skew_statistic == pytest.approx(n * res.skewness / 6)
        assert res.skew_p_value == pytest.approx(sp_stats.chi2.sf(res.skew_statistic, 10))
        z = (res.kurtosis - p * (p + 2)) / np.sqrt(8 * p * (p + 2) / n)
        assert res.kurt_statistic == pytest.approx(z)
        assert res.kurt_p_value == pytest.approx(2 * sp_stats.norm.sf(abs(z)))
        assert (res.n_used, res.n_total, res.n_features, res.random_state) == (80, 80, 3, None)
        assert res.covariance_divisor == "n" and not res.subsampled

    # Stored reference: R 4.x, psych 2.2.9 (Debian's r-cran-psych), on R's own iris data:
    #   m <- psych::mardia(iris[iris$Species == s, 1:4], plot = FALSE); c(m$b1p, m$b2p)
    # psych estimates the covariance with divisor n - 1 and Mardia (1970) with divisor n, so with
    # r = n / (n - 1): b1,p (divisor n) = r^3 b1,p (psych) and b2,p (divisor n) = r^2 b2,p (psych).
    # At setosa these give the skewness statistic 25.66 and kurtosis statistic 1.295 that the
    # documentation of the R package MVN (Korkmaz, Goksuluk & Zararsiz 2014) reports.
    PSYCH_IRIS = {0: (2.8986090897, 25.4867649774), 1: (2.8444717653, 21.9733521108), 2: (2.9670812205, 23.3368186483)}

    @pytest.mark.parametrize("species", [0, 1, 2])
    def test_iris_species_match_r_psych(self, species):
        b1_psych, b2_psych = self.PSYCH_IRIS[species]
        X = _iris_species()[species]
        r = X.shape[0] / (X.shape[0] - 1.0)
        res = mardia(X)
        assert res.skewness == pytest.approx(r**3 * b1_psych, rel=1e-9)
        assert res.kurtosis == pytest.approx(r**2 * b2_psych, rel=1e-9)
        if species == 0:
            assert res.skew_statistic == pytest.approx(25.66, abs=0.01)
            assert res.kurt_statistic == pytest.approx(1.295, abs=0.001)


class TestHenzeZirklerReference:
    @pytest.mark.parametrize("species", [0, 1, 2])
    def test_iris_species_match_pingouin(self, species):
        # Reference: pingouin.multivariate_normality on iris (shipped by scikit-learn).
        X = _iris_species()[species]
        ref = pingouin.multivariate_normality(X, alpha=0.05)
        res = henze_zirkler(X)
        assert res.statistic == pytest.approx(ref.hz, rel=1e-6)
        assert res.p_value == pytest.approx(ref.pval, rel=1e-6)

    def test_wine_matches_pingouin(self):
        # Reference: pingouin.multivariate_normality on the wine data (13 features, 178 rows).
        X = load_wine().data
        ref = pingouin.multivariate_normality(X, alpha=0.05)
        res = henze_zirkler(X)
        assert res.statistic == pytest.approx(ref.hz, rel=1e-6)
        assert res.p_value == pytest.approx(ref.pval, rel=1e-6)
        assert res.p_value < 1e-10

    def test_blocked_sum_matches_pingouin_across_many_blocks(self, monkeypatch):
        X = load_wine().data[:, :5]
        ref = pingouin.multivariate_normality(X, alpha=0.05)
        monkeypatch.setattr(sampling_module, "_BLOCK_ELEMENTS", 500)
        assert len(sampling_module.row_blocks(X.shape[0])) > 20
        res = henze_zirkler(X)
        assert res.statistic == pytest.approx(ref.hz, rel=1e-6)
        assert res.p_value == pytest.approx(ref.pval, rel=1e-6)

    def test_smoothing_parameter_and_lognormal_parameters(self):
        X = _iris_species()[1]
        res = henze_zirkler(X)
        n, p = X.shape
        assert res.beta == pytest.approx((1 / np.sqrt(2)) * ((2 * p + 1) * n / 4) ** (1 / (p + 4)))
        # The lognormal with these log-scale parameters has the stated mean and variance.
        ln = sp_stats.lognorm(res.lognormal_sigma, scale=np.exp(res.lognormal_mu))
        assert ln.mean() == pytest.approx(res.null_mean, rel=1e-10)
        assert ln.var() == pytest.approx(res.null_variance, rel=1e-8)
        assert res.p_value == pytest.approx(ln.sf(res.statistic), rel=1e-10)
        assert (res.n_used, res.n_total, res.random_state, res.covariance_divisor) == (50, 50, None, "n")


class TestCalibration:
    """Under normality each p-value rejects at 0.05 about 5% of the time (binomial bounds)."""

    DRAWS = 400
    BOUND = 3 * np.sqrt(0.05 * 0.95 / DRAWS)  # three binomial standard deviations

    def _rates(self, n: int, p: int, seed: int) -> dict[str, float]:
        rng = np.random.default_rng(seed)
        hits = {"skew": 0, "kurt": 0, "hz": 0}
        for _ in range(self.DRAWS):
            X = rng.normal(size=(n, p))
            m = mardia(X)
            hits["skew"] += m.skew_p_value < 0.05
            hits["kurt"] += m.kurt_p_value < 0.05
            hits["hz"] += henze_zirkler(X).p_value < 0.05
        return {k: v / self.DRAWS for k, v in hits.items()}

    def test_skewness_and_henze_zirkler_at_n50(self):
        rates = self._rates(50, 3, seed=11)
        assert abs(rates["skew"] - 0.05) < self.BOUND, rates
        assert abs(rates["hz"] - 0.05) < self.BOUND, rates

    def test_kurtosis_at_n200(self):
        # The normal approximation of the kurtosis statistic is conservative in small samples
        # (b2,p has null mean p(p+2)(n-1)/(n+1)); at n = 50, p = 3 its level is about 0.015, so
        # the large-sample calibration is checked at n = 200 (documented in mardia's Notes).
        rates = self._rates(200, 3, seed=12)
        assert abs(rates["kurt"] - 0.05) < self.BOUND, rates


class TestInvariance:
    def test_affine_invariance(self):
        rng = np.random.default_rng(21)
        X = _skewed_sample(150, 4, seed=21)
        A = rng.normal(size=(4, 4)) * 10.0 ** rng.uniform(-3, 3, size=4)
        b = rng.normal(size=4) * 1e3
        Y = X @ A + b
        m0, m1 = mardia(X), mardia(Y)
        assert m1.skewness == pytest.approx(m0.skewness, rel=1e-8)
        assert m1.kurtosis == pytest.approx(m0.kurtosis, rel=1e-8)
        assert henze_zirkler(Y).statistic == pytest.approx(henze_zirkler(X).statistic, rel=1e-8)

    def test_row_order_invariance(self):
        X = _skewed_sample(90, 3, seed=22)
        perm = np.random.default_rng(22).permutation(90)
        assert mardia(X[perm]).skewness == pytest.approx(mardia(X).skewness, rel=1e-10)
        assert henze_zirkler(X[perm]).statistic == pytest.approx(henze_zirkler(X).statistic, rel=1e-10)


class TestSubsampling:
    @pytest.mark.parametrize("func", [mardia, henze_zirkler])
    def test_records_size_and_seed_and_repeats(self, func):
        X = _skewed_sample(700, 3, seed=31)
        a = func(X, max_rows=250, random_state=7)
        b = func(X, max_rows=250, random_state=7)
        c = func(X, max_rows=250, random_state=8)
        assert (a.n_used, a.n_total, a.random_state, a.max_rows) == (250, 700, 7, 250)
        assert a.subsampled
        assert a == b
        assert a != c

    @pytest.mark.parametrize("func", [mardia, henze_zirkler])
    def test_unseeded_subsample_records_a_seed_that_reproduces_it(self, func):
        X = _skewed_sample(400, 2, seed=32)
        a = func(X, max_rows=100)
        assert isinstance(a.random_state, int)
        assert func(X, max_rows=100, random_state=a.random_state) == a

    @pytest.mark.parametrize("func", [mardia, henze_zirkler])
    def test_no_subsample_at_or_below_max_rows(self, func):
        X = _skewed_sample(100, 2, seed=33)
        res = func(X, max_rows=100, random_state=5)
        assert (res.n_used, res.random_state) == (100, None)


class TestDegenerateInput:
    @pytest.mark.parametrize("func", [mardia, henze_zirkler])
    def test_constant_column_is_named(self, func):
        import pandas as pd

        X = pd.DataFrame(_skewed_sample(40, 2, seed=41), columns=["a", "b"])
        X["flat"] = 3.7
        with pytest.raises(DataError, match=r"\[flat\] are constant"):
            func(X)

    @pytest.mark.parametrize("func", [mardia, henze_zirkler])
    def test_collinear_columns_are_named(self, func):
        import pandas as pd

        base = _skewed_sample(40, 3, seed=42)
        X = pd.DataFrame(base, columns=["a", "b", "c"])
        X["d"] = 2 * X["a"] - X["c"]
        with pytest.raises(DataError, match=r"collinear.*\bd\b") as info:
            func(X)
        assert all(name in str(info.value) for name in ("a", "c", "d"))
        assert "*b" not in str(info.value)

    @pytest.mark.parametrize("func", [mardia, henze_zirkler])
    def test_too_few_rows(self, func):
        with pytest.raises(DataError, match=r"3 rows and 3 features"):
            func(_skewed_sample(3, 3, seed=43))

    @pytest.mark.parametrize("func", [mardia, henze_zirkler])
    def test_non_finite_values(self, func):
        X = _skewed_sample(20, 2, seed=44)
        X[4, 1] = np.nan
        with pytest.raises(DataError, match="NaN"):
            func(X)

    @pytest.mark.parametrize("func", [mardia, henze_zirkler])
    def test_max_rows_too_small_for_the_features(self, func):
        X = _skewed_sample(50, 4, seed=45)
        with pytest.raises(DataError, match="max_rows"):
            func(X, max_rows=4)

    @pytest.mark.parametrize("func", [mardia, henze_zirkler])
    def test_bad_seed(self, func):
        X = _skewed_sample(50, 2, seed=46)
        with pytest.raises(DataError, match="random_state"):
            func(X, max_rows=10, random_state="abc")


class TestOnePassOverThePairs:
    """mardia_and_henze_zirkler shares one whitening and one pass over the pairs; it must equal the two
    functions it replaces in an audit (and so inherit their checks against pingouin and the definitions)."""

    @pytest.mark.parametrize("case", ["iris_setosa", "wine", "subsampled", "many_blocks"])
    def test_equals_mardia_and_henze_zirkler_called_apart(self, case, monkeypatch):
        from discaudit.stats.normality_tests import mardia_and_henze_zirkler

        kwargs: dict = {}
        if case == "iris_setosa":
            X = _iris_species()[0]
        elif case == "wine":
            X = load_wine().data[:, :8]
        elif case == "subsampled":
            X, kwargs = _skewed_sample(900, 4, seed=41), {"max_rows": 300, "random_state": 3}
        else:
            monkeypatch.setattr(sampling_module, "_BLOCK_ELEMENTS", 400)
            X = _skewed_sample(160, 3, seed=42)
            assert len(sampling_module.row_blocks(160)) > 20
        m, hz = mardia_and_henze_zirkler(X, **kwargs)
        assert m == mardia(X, **kwargs)
        assert hz == henze_zirkler(X, **kwargs)

    def test_errors_name_both_statistics(self):
        from discaudit.stats.normality_tests import mardia_and_henze_zirkler

        X = _skewed_sample(50, 3, seed=43)
        X[:, 1] = 2.0
        with pytest.raises(DataError, match="Mardia's and the Henze-Zirkler statistics.*constant"):
            mardia_and_henze_zirkler(X)
