"""Two-sample comparisons from moments (``discaudit.stats.two_sample``).

References: pingouin's ``multivariate_ttest`` (Hotelling's two-sample T^2 from rows) and
``box_m`` (Box's M with the chi-square approximation, from rows and a group column);
scipy's ``chi2_contingency`` without continuity correction (Pearson's test of homogeneity).
Data are invented (seeded numpy), as reference checks need; properties: invariance to an affine
map of the features and exact zeros for identical moments.
"""

from __future__ import annotations

import numpy as np
import pandas as pd
import pingouin
import pytest
from scipy import stats as sps

from discaudit.errors import DataError
from discaudit.stats.two_sample import covariance_two_sample, hotelling_two_sample, shares_two_sample


def _moments(X: np.ndarray) -> tuple[int, np.ndarray, np.ndarray]:
    return X.shape[0], X.mean(axis=0), np.cov(X, rowvar=False, ddof=1)


def _samples(seed: int, n_a: int = 40, n_b: int = 55, p: int = 3) -> tuple[np.ndarray, np.ndarray]:
    rng = np.random.default_rng(seed)
    A = rng.normal(size=(n_a, p)) @ np.array([[1.0, 0.3, 0.0], [0.0, 1.0, 0.5], [0.0, 0.0, 1.0]])[:p, :p]
    B = rng.normal(size=(n_b, p)) * [1.0, 1.4, 0.8][:p] + [0.4, 0.0, -0.2][:p]
    return A, B


@pytest.mark.parametrize("seed", [0, 1, 2])
def test_hotelling_matches_pingouin(seed: int) -> None:
    A, B = _samples(seed)
    reference = pingouin.multivariate_ttest(A, B).iloc[0]  # pingouin: T2, F, df1, df2, pval from rows
    result = hotelling_two_sample(*_moments(A), *_moments(B))
    assert result.statistic == pytest.approx(reference["T2"], rel=1e-10)
    assert result.f == pytest.approx(reference["F"], rel=1e-10)
    assert (result.df1, result.df2) == (reference["df1"], reference["df2"])
    assert result.p_value == pytest.approx(reference["pval"], rel=1e-8)
    # The distance is the definition sqrt(d' S^-1 d) with the pooled covariance.
    pooled = ((len(A) - 1) * np.cov(A.T) + (len(B) - 1) * np.cov(B.T)) / (len(A) + len(B) - 2)
    d = B.mean(axis=0) - A.mean(axis=0)
    assert result.mahalanobis == pytest.approx(np.sqrt(d @ np.linalg.solve(pooled, d)), rel=1e-12)


def test_hotelling_with_one_feature_is_the_squared_t_test() -> None:
    A, B = _samples(4, p=1)
    t = sps.ttest_ind(A[:, 0], B[:, 0], equal_var=True)  # scipy: pooled-variance t test
    result = hotelling_two_sample(*_moments(A), *_moments(B))
    assert result.statistic == pytest.approx(t.statistic**2, rel=1e-10)
    assert result.p_value == pytest.approx(t.pvalue, rel=1e-8)
    pooled_sd = np.sqrt(((len(A) - 1) * A.var(ddof=1) + (len(B) - 1) * B.var(ddof=1)) / (len(A) + len(B) - 2))
    assert result.mahalanobis == pytest.approx(abs(A.mean() - B.mean()) / pooled_sd, rel=1e-12)  # Cohen's d


@pytest.mark.parametrize("seed", [0, 1, 2])
def test_two_sample_box_m_matches_pingouin(seed: int) -> None:
    A, B = _samples(seed)
    frame = pd.DataFrame(np.vstack([A, B]), columns=["a", "b", "c"])
    frame["group"] = ["x"] * len(A) + ["y"] * len(B)
    reference = pingouin.box_m(frame, dvs=["a", "b", "c"], group="group").iloc[0]
    result = covariance_two_sample(len(A), np.cov(A.T), len(B), np.cov(B.T))
    assert result.chi2 == pytest.approx(reference["Chi2"], rel=1e-9)
    assert result.df == reference["df"]
    assert result.p_value == pytest.approx(reference["pval"], rel=1e-8)


def test_covariance_effect_sizes_have_their_defining_values() -> None:
    S = np.array([[2.0, 0.6, 0.0], [0.6, 1.0, 0.3], [0.0, 0.3, 0.5]])
    doubled = covariance_two_sample(100, S, 100, 2.0 * S)
    assert doubled.spread_ratio == pytest.approx(2.0, rel=1e-12)
    assert doubled.log_det_ratio == pytest.approx(3 * np.log(2.0), rel=1e-12)
    assert doubled.variance_ratios == pytest.approx((2.0, 2.0, 2.0), rel=1e-12)
    # A rotation of the spread that keeps the volume: the determinant ratio misses it, the spread ratio does not.
    D = np.diag([4.0, 1.0, 0.25])
    R = np.array([[0.0, 1.0, 0.0], [1.0, 0.0, 0.0], [0.0, 0.0, 1.0]])
    turned = covariance_two_sample(100, D, 100, R @ D @ R.T)
    assert turned.log_det_ratio == pytest.approx(0.0, abs=1e-12)
    assert turned.spread_ratio == pytest.approx(np.exp(np.sqrt((2 * np.log(4.0) ** 2) / 3)), rel=1e-12)
    same = covariance_two_sample(80, S, 120, S)
    assert same.statistic == pytest.approx(0.0, abs=1e-9) and same.spread_ratio == pytest.approx(1.0)
    assert same.p_value == pytest.approx(1.0)


def test_statistics_are_invariant_to_an_affine_map() -> None:
    A, B = _samples(7)
    M = np.array([[2.0, 0.5, 0.0], [0.0, 1e3, 0.1], [0.3, 0.0, 1e-2]])
    shift = np.array([10.0, -4.0, 1e4])
    before = (
        hotelling_two_sample(*_moments(A), *_moments(B)),
        covariance_two_sample(len(A), np.cov(A.T), len(B), np.cov(B.T)),
    )
    A2, B2 = A @ M.T + shift, B @ M.T + shift
    after = (
        hotelling_two_sample(*_moments(A2), *_moments(B2)),
        covariance_two_sample(len(A2), np.cov(A2.T), len(B2), np.cov(B2.T)),
    )
    assert after[0].statistic == pytest.approx(before[0].statistic, rel=1e-8)
    assert after[0].mahalanobis == pytest.approx(before[0].mahalanobis, rel=1e-8)
    assert after[1].statistic == pytest.approx(before[1].statistic, rel=1e-8)
    assert after[1].spread_ratio == pytest.approx(before[1].spread_ratio, rel=1e-8)


def test_shares_match_scipy_chi2_contingency() -> None:
    a, b = [120, 60, 20], [100, 90, 10]
    chi2, p, dof, _ = sps.chi2_contingency(np.array([a, b]), correction=False)
    result = shares_two_sample(a, b)
    assert result.statistic == pytest.approx(chi2, rel=1e-12)
    assert result.p_value == pytest.approx(p, rel=1e-10) and result.df == dof
    assert result.largest_change == pytest.approx(abs(90 / 200 - 60 / 200))
    assert shares_two_sample([5, 5], [50, 50]).statistic == pytest.approx(0.0)


def test_degenerate_inputs_raise_data_errors() -> None:
    S = np.eye(3)
    with pytest.raises(DataError, match="features"):
        hotelling_two_sample(10, np.zeros(3), S, 10, np.zeros(2), np.eye(2))
    with pytest.raises(DataError, match="singular"):
        hotelling_two_sample(10, np.zeros(3), np.zeros((3, 3)), 10, np.ones(3), np.zeros((3, 3)))
    with pytest.raises(DataError, match="nonsingular"):
        covariance_two_sample(3, S, 10, S)  # three rows for three features: singular
    with pytest.raises(DataError, match="at least two rows"):
        hotelling_two_sample(1, np.zeros(3), S, 10, np.zeros(3), S)
