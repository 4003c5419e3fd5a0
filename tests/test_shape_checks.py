"""The outliers, normality and separation checks inside preflight."""

from __future__ import annotations

import numpy as np
import pandas as pd
import pytest

import discaudit


def test_planted_contaminated_flakes_are_flagged_and_named(flakes) -> None:
    frame, planted = flakes
    v = discaudit.preflight(frame, target="family", random_state=0)
    rows = v.outlier_rows()
    assert set(planted["contaminated"]) <= set(rows.index)
    # the planted flakes lie farther out than the rest of what is flagged (Gaussian tail rows)
    others = rows.drop(index=planted["contaminated"])
    assert rows.loc[planted["contaminated"], "ratio"].median() > 2 * others["ratio"].median()
    assert list(rows.columns) == [
        "class",
        "squared_distance",
        "classical_squared_distance",
        "cutoff",
        "far_out_fence",
        "ratio",
    ]
    listed = {r["row"] for c in v.findings["outliers"].details["per_class"].values() for r in c["flagged_rows"]}
    assert set(planted["contaminated"]) <= listed


def test_outlier_verdict_is_reproducible_and_seeded(flakes) -> None:
    frame, _ = flakes
    a = discaudit.preflight(frame, target="family", random_state=3)
    b = discaudit.preflight(frame, target="family", random_state=3)
    assert a.to_json() == b.to_json()


def _gaussian(n: int, p: int, k: int, seed: int) -> tuple[pd.DataFrame, np.ndarray]:
    rng = np.random.default_rng(seed)
    X = np.vstack([rng.normal(size=(n, p)) + 0.8 * j for j in range(k)])
    return pd.DataFrame(X, columns=[f"f{j}" for j in range(p)]), np.repeat(np.arange(k), n)


def test_gross_contamination_is_influential_and_argues_against_lda() -> None:
    X, y = _gaussian(200, 4, 2, seed=21)
    # 8% of class 0 moved far away in one direction: the class mean and pooled covariance move
    bad = np.arange(16)
    X.iloc[bad, :] += 12.0
    v = discaudit.preflight(X, y, random_state=0)
    f = v.findings["outliers"]
    assert f.status == "fail"
    assert set(X.index[bad]) <= set(v.outlier_rows().index)
    assert f.details["max_mean_shift"] > 0.25
    assert v.recommendation.model != "lda"
    assert any("outliers" in r for r in v.recommendation.reasons)


def test_clean_gaussian_outliers_pass() -> None:
    X, y = _gaussian(300, 3, 2, seed=5)
    v = discaudit.preflight(X, y, random_state=0)
    assert v.findings["outliers"].status == "pass"
    assert v.findings["normality"].status == "pass"
    assert v.findings["separation"].status == "pass"


def test_small_class_falls_back_to_classical_distances() -> None:
    X, y = _gaussian(9, 5, 2, seed=8)  # 9 rows < 2(p+1) = 12
    v = discaudit.preflight(X, y, random_state=0)
    per_class = v.findings["outliers"].details["per_class"]
    assert all(c["method"].startswith("classical (fewer than") for c in per_class.values())


def test_heavy_tails_fail_normality_and_name_the_rule() -> None:
    rng = np.random.default_rng(2)
    n, p = 400, 3
    # multivariate t with 3 df: heavy tails (invented, seeded)
    t = rng.standard_normal((2 * n, p)) / np.sqrt(rng.chisquare(3, (2 * n, 1)) / 3)
    X = pd.DataFrame(t + np.repeat([[0, 0, 0], [1, 1, 1]], n, axis=0), columns=["a", "b", "c"])
    y = np.repeat(["u", "w"], n)
    v = discaudit.preflight(X, y)
    f = v.findings["normality"]
    assert f.status == "fail"
    assert "rule" in f.details
    assert f.details["per_class"]["u"]["mardia_kurtosis_ratio"] > 1.5


def test_binary_feature_is_named_as_discrete() -> None:
    X, y = _gaussian(100, 3, 2, seed=4)
    X["smoker"] = np.random.default_rng(4).integers(0, 2, len(X))
    v = discaudit.preflight(X, y)
    f = v.findings["normality"]
    assert f.status == "fail"
    assert f.details["discrete_features"] == ["smoker"]
    assert "smoker" in f.summary


def test_complete_separation_warns_and_suggests_a_penalty() -> None:
    rng = np.random.default_rng(6)
    X = pd.DataFrame(rng.normal(size=(80, 2)), columns=["u", "v"])
    y = np.where(X["u"] > 0, "hi", "lo")
    X.loc[y == "hi", "u"] += 0.5
    v = discaudit.preflight(X, y)
    f = v.findings["separation"]
    assert f.status == "warn" and f.details["any_complete"]
    assert "u" in f.details["comparisons"][0]["separating_features"]


@pytest.mark.parametrize("seed", [0, 1])
def test_subsample_sizes_and_seeds_are_recorded(seed: int) -> None:
    X, y = _gaussian(1500, 3, 2, seed=seed)
    cfg = discaudit.Config(pairwise_max_rows=500, separation_max_rows=400)
    v = discaudit.preflight(X, y, config=cfg, random_state=seed)
    shape = v.findings["normality"].details["per_class"]["0"]
    assert shape["n_used"] == 500 and shape["subsample_seed"] is not None
    again = discaudit.preflight(X, y, config=cfg, random_state=seed)
    assert again.to_json() == v.to_json()


@pytest.mark.parametrize(("n", "p"), [(60, 10), (200, 20), (1000, 10)])
def test_clean_gaussian_classes_flag_about_the_nominal_share(n: int, p: int) -> None:
    # Invented, seeded: on clean Gaussian classes the flagged share should be near the nominal
    # 2.5% even when rows per feature are few (the small-sample cut-offs exist for this).
    rng = np.random.default_rng(n + p)
    X = np.vstack([rng.normal(size=(n, p)) + 2 * k for k in range(3)])
    v = discaudit.preflight(X, np.repeat([0, 1, 2], n), random_state=0)
    f = v.findings["outliers"]
    assert f.status == "pass"
    assert f.details["n_flagged"] / (3 * n) < 0.08


def test_classical_fallback_uses_the_in_sample_beta_law() -> None:
    from scipy import stats as sps

    X, y = _gaussian(30, 4, 2, seed=3)  # 30 rows < 10 per feature: classical distances
    v = discaudit.preflight(X, y, random_state=0)
    c = v.findings["outliers"].details["per_class"]["0"]
    # Gnanadesikan & Kettenring (1972): in-sample squared distances ~ (n-1)^2/n Beta(p/2, (n-p-1)/2)
    assert c["cutoff"] == pytest.approx(29**2 / 30 * sps.beta.ppf(0.975, 2, 12.5), rel=1e-12)


def test_discrete_features_are_left_out_of_the_outlier_distances() -> None:
    # Invented, seeded: a binary flag would make every MCD fit an exact fit on its two values.
    X, y = _gaussian(300, 3, 2, seed=12)
    X["flag"] = np.random.default_rng(12).integers(0, 2, len(X))
    v = discaudit.preflight(X, y, random_state=0)
    f = v.findings["outliers"]
    for per_class in f.details["per_class"].values():
        reason = per_class["left_out_of_fit"]["flag"]["reason"]
        assert reason == "few distinct values" or reason.endswith("(exact fit)")
        assert "flag" not in per_class["features_used"]
    assert f.status == "pass" and f.details["n_flagged"] / len(X) < 0.08


def test_per_feature_moments_match_scipy() -> None:
    # Reference: scipy.stats.skew and scipy.stats.kurtosis with their defaults (biased, Fisher).
    from scipy import stats as sps

    from discaudit.checks.normality import _column_moments

    rng = np.random.default_rng(11)
    Z = np.column_stack([rng.normal(size=500), rng.exponential(size=500), rng.standard_t(4, size=500) * 3 + 7])
    moments = _column_moments(lambda: iter(np.array_split(Z, 7)))  # uneven blocks
    assert moments.n == 500
    np.testing.assert_allclose(moments.ptp, np.ptp(Z, axis=0))
    np.testing.assert_allclose(moments.skewness, sps.skew(Z, axis=0), rtol=1e-10)
    np.testing.assert_allclose(moments.excess_kurtosis, sps.kurtosis(Z, axis=0), rtol=1e-10)


def test_large_class_outlier_fit_uses_a_seeded_subset_and_scores_every_row() -> None:
    # Invented, seeded: one class far above robust_fit_max_rows; rows planted 8 SD out along
    # the first feature must be flagged although most of them are not in the fitted subset.
    rng = np.random.default_rng(5)
    X = rng.normal(size=(3000, 3))
    X[:40, 0] += 8.0
    y = np.repeat([0, 1], [2000, 1000])
    X[y == 1] += 1.0
    config = discaudit.Config(robust_fit_max_rows=500)
    v = discaudit.preflight(X, y, config=config, random_state=0)
    per_class = v.findings["outliers"].details["per_class"]
    internals = [per_class[c]["fit_internals"] for c in ("0", "1")]  # labels as JSON keys
    assert internals[0]["fit_rows"] == 500 and internals[1]["fit_rows"] == 500
    assert per_class["0"]["n"] == 2000
    assert set(range(40)) <= set(v.outlier_rows().index)
    again = discaudit.preflight(X, y, config=config, random_state=0)
    assert again.to_json() == v.to_json()


def test_normality_flat_screen_reads_the_whole_class(monkeypatch) -> None:
    # Property: a column that is constant in the per-feature moment subsample but not in the
    # class is not called constant; one that is constant in the whole class is. Invented data.
    from discaudit.checks import normality

    monkeypatch.setattr(normality, "_MOMENT_ROWS", 50)
    rng = np.random.default_rng(2)
    X = rng.normal(size=(400, 3))
    y = np.repeat([0, 1], 200)
    X[y == 0, 2] = 1.5
    X[np.flatnonzero(y == 0)[::50], 2] = 2.5  # 4 rows of 200: a 50-row sample may miss them all
    per_class = discaudit.preflight(X, y, random_state=0).findings["normality"].details["per_class"]
    assert "skipped" not in per_class["0"]
    X[y == 0, 2] = 1.5
    per_class = discaudit.preflight(X, y, random_state=0).findings["normality"].details["per_class"]
    assert "constant within this class: x2" in per_class["0"]["skipped"]
