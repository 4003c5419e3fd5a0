"""The statistics behind trustworthy findings, each against a reference outside the project.

* Tie screen (``stats.ties``) and octile skewness (``stats.quantile_skewness``): R's ``table``,
  ``unique``, ``quantile(type = 7)`` and robustbase's ``h.alpha.n`` (values stored by
  tests/reference/make_screen_reference.R, R 4.2.2, robustbase 0.95.0), on iris and wine per
  class (open data, the CSV files of tests/reference/mcd_data/); scipy.stats.mode as a second check.
* Far-out fence (``stats.far_out``): scipy.stats.median_abs_deviation (scale "normal") and
  numpy's cube root; the claim of the module (for a Gaussian class the fence lies beyond the
  0.998 quantile of the squared distances) against scipy's chi-square quantiles on seeded draws.
* Flury's hierarchy (``stats.flury``): the maximized CPC and proportional log-likelihoods against a
  general-purpose optimizer (scipy.optimize.minimize, BFGS) over orthogonal matrices
  (scipy.linalg.expm of a skew-symmetric matrix) and over (rho, Cholesky factor); the
  equal-versus-unrelated statistic against numpy's slogdet and the audit's own BIC comparison;
  matrices built with common axes or proportional by construction give zero statistics.
* Where the checks use them: the feature whose removal lowers the largest VIF most against
  statsmodels' variance_inflation_factor on class-centred rows; per-class generalized-variance
  ratios against numpy's slogdet; per-feature skewness and kurtosis against scipy.stats.
"""

from __future__ import annotations

import json
from pathlib import Path

import numpy as np
import pandas as pd
import pytest
from scipy import linalg, optimize
from scipy import stats as sps

import discaudit
from discaudit.stats.far_out import MAD_TO_SD, far_out_fence
from discaudit.stats.flury import cpc_axes, flury_hierarchy, proportional_fit
from discaudit.stats.gaussian_bic import covariance_bic
from discaudit.stats.moments import ClassMoments
from discaudit.stats.quantile_skewness import quantile_skewness
from discaudit.stats.ties import mcd_subset_size, screen_ties

REFERENCE = Path(__file__).parent / "reference"
SCREEN = json.loads((REFERENCE / "screen_reference.json").read_text(encoding="utf-8"))


# --- tie screen and octile skewness against R ----------------------------------------------------


@pytest.mark.parametrize("name", sorted(SCREEN["data"]))
def test_distinct_values_modal_counts_and_octile_skewness_match_r(name: str) -> None:
    frame = pd.read_csv(REFERENCE / "mcd_data" / f"{name}.csv")
    ref = SCREEN["data"][name]
    X = frame.to_numpy(dtype=float)
    screen = screen_ties(X, min_distinct=10)
    skew = quantile_skewness(X)
    assert ref["n"] == X.shape[0]
    for j, column in enumerate(frame.columns):
        r = ref["columns"][column]
        assert screen.distinct[j] == r["distinct"]
        assert screen.modal_count[j] == r["modal_count"]
        assert screen.modal_value[j] == pytest.approx(r["modal_value"], rel=1e-15)
        if r["octile_skewness"] is None:
            assert np.isnan(skew[j])
        else:
            assert skew[j] == pytest.approx(r["octile_skewness"], rel=1e-12, abs=1e-14)
        # scipy.stats.mode: the smallest of the most frequent values, and its count
        mode = sps.mode(X[:, j], keepdims=False)
        assert (mode.mode, mode.count) == (screen.modal_value[j], screen.modal_count[j])


@pytest.mark.parametrize("row", SCREEN["h_alpha_n"], ids=lambda r: f"n{r['n']}-p{r['p']}")
def test_subset_size_matches_robustbase(row: dict) -> None:
    assert mcd_subset_size(row["n"], row["p"]) == row["h"]


def test_iris_setosa_petal_width_is_an_exact_fit() -> None:
    # R: 29 of the 50 setosa rows have petal width 0.2; robustbase's h for the two kept sepal
    # columns is h.alpha.n(0.5, 50, 2) = 26, so the modal value alone holds more than h rows.
    frame = pd.read_csv(REFERENCE / "mcd_data" / "iris_setosa.csv")
    ref = SCREEN["data"]["iris_setosa"]["columns"]["petal width (cm)"]
    screen = screen_ties(frame.to_numpy(dtype=float), min_distinct=10)
    j = list(frame.columns).index("petal width (cm)")
    assert screen.exact_fit[j] and not screen.kept[j] and ref["modal_count"] == 29
    assert screen.h == mcd_subset_size(50, int(screen.kept.sum())) == 26
    assert list(frame.columns[screen.kept]) == ["sepal length (cm)", "sepal width (cm)"]


def test_exact_fit_rule_is_applied_until_it_settles() -> None:
    # Invented: h = floor((n + p + 1) / 2) with n = 41 is 23 for 4 kept features and 22 for 3.
    # Feature 0 has 23 rows at one value (an exact fit at once); feature 1 has 22, an exact fit
    # only once feature 0 is out.
    rng = np.random.default_rng(0)
    n = 41
    X = rng.normal(size=(n, 4))
    X[:23, 0] = 1.0
    X[:22, 1] = -1.0
    s = screen_ties(X, min_distinct=10)
    assert [mcd_subset_size(n, p) for p in (4, 3, 2)] == [23, 22, 22]
    assert list(s.exact_fit) == [True, True, False, False] and list(s.kept) == [False, False, True, True]
    assert s.h == 22


def test_few_values_in_a_small_class_means_fewer_than_half_distinct() -> None:
    X = np.arange(9.0)[:, None]  # nine distinct values in nine rows: continuous, though under 10
    assert screen_ties(X, min_distinct=10).kept[0]
    X = np.array([0.0, 0, 0, 1, 1, 1, 2, 2, 2])[:, None]  # three values in nine rows
    assert screen_ties(X, min_distinct=10).few_values[0]


# --- far-out fence -------------------------------------------------------------------------------


def test_far_out_fence_is_the_hampel_identifier_on_cube_roots() -> None:
    rng = np.random.default_rng(3)
    d = rng.chisquare(6, size=501) * rng.uniform(0.5, 2.0, size=501)
    f = far_out_fence(d, multiplier=3.0)
    roots = np.cbrt(d)
    assert f.centre == pytest.approx(np.median(roots), rel=1e-14)
    assert f.spread == pytest.approx(sps.median_abs_deviation(roots, scale="normal"), rel=1e-12)
    assert f.fence == pytest.approx((np.median(roots) + 3 * sps.median_abs_deviation(roots, scale="normal")) ** 3)
    # our constant against scipy's own "normal" scaling of the MAD
    raw = sps.median_abs_deviation(roots)
    assert raw * MAD_TO_SD == pytest.approx(sps.median_abs_deviation(roots, scale="normal"), rel=1e-12)


@pytest.mark.parametrize("p", [2, 5, 12, 30])
def test_for_a_gaussian_class_the_fence_lies_beyond_the_998_quantile(p: int) -> None:
    # The module's claim, with scipy's chi-square quantiles: Wilson-Hilferty makes the cube root
    # of chi-square(p) nearly Gaussian, so median + 3 MAD sits near its 0.99865 quantile.
    d = np.random.default_rng(p).chisquare(p, size=200_000)
    fence = far_out_fence(d).fence
    assert fence > sps.chi2.ppf(0.998, p)
    assert fence == pytest.approx(sps.chi2.ppf(sps.norm.cdf(3.0), p), rel=0.03)


def test_fence_is_infinite_without_spread_and_ignores_non_finite_values() -> None:
    assert far_out_fence(np.r_[np.ones(10), 5.0]).fence == float("inf")
    f = far_out_fence(np.r_[np.arange(1.0, 20.0), np.nan, np.inf])
    assert np.isfinite(f.fence) and f.centre == pytest.approx(np.median(np.cbrt(np.arange(1.0, 20.0))))


# --- Flury's hierarchy ---------------------------------------------------------------------------


def _random_spd(rng: np.random.Generator, p: int) -> np.ndarray:
    A = rng.normal(size=(p, p))
    return A @ A.T + p * np.eye(p)


def _cpc_objective(B: np.ndarray, S: np.ndarray, w: np.ndarray) -> float:
    return float(np.sum(w[:, None] * np.log(np.einsum("ji,kjl,li->ki", B, S, B))))


@pytest.mark.parametrize("seed", [0, 1, 2])
def test_cpc_axes_reach_the_optimum_a_general_optimizer_finds(seed: int) -> None:
    rng = np.random.default_rng(seed)
    K, p = 3, 4
    S = np.array([_random_spd(rng, p) for _ in range(K)])
    w = rng.integers(30, 90, size=K).astype(float)
    B, _, _ = cpc_axes(S, w)
    np.testing.assert_allclose(B.T @ B, np.eye(p), atol=1e-12)
    B0 = np.linalg.eigh(S.mean(axis=0))[1]
    iu = np.triu_indices(p, 1)

    def f(x: np.ndarray) -> float:
        A = np.zeros((p, p))
        A[iu] = x
        return _cpc_objective(linalg.expm(A - A.T) @ B0, S, w)

    starts = [np.zeros(iu[0].size)] + [rng.normal(scale=0.5, size=iu[0].size) for _ in range(6)]
    best = min((optimize.minimize(f, x0, method="BFGS", options={"gtol": 1e-10}) for x0 in starts), key=lambda r: r.fun)
    assert _cpc_objective(B, S, w) <= best.fun + 1e-7 * abs(best.fun)


@pytest.mark.parametrize(("name", "columns"), [("load_wine", slice(None)), ("load_breast_cancer", slice(0, 10))])
def test_cpc_axes_on_open_data_are_a_minimum_scipy_cannot_improve(name: str, columns: slice) -> None:
    # Open data sets scikit-learn ships (wine: 3 classes, p = 13; breast cancer: 2 classes, its first
    # 10 features). scipy's BFGS, started from the returned axes (rotations B expm(A - A'), A upper
    # triangular), finds no lower CPC objective: the sweeps plus simultaneous Newton steps stop at a
    # minimum, not short of one.
    datasets = pytest.importorskip("sklearn.datasets")
    X, y = getattr(datasets, name)(return_X_y=True)
    X = X[:, columns]
    classes = np.unique(y)
    S = np.array([np.cov(X[y == c].T, bias=True) for c in classes])
    w = np.array([np.sum(y == c) for c in classes], dtype=float)
    B, _, converged = cpc_axes(S, w)
    assert converged
    np.testing.assert_allclose(B.T @ B, np.eye(B.shape[0]), atol=1e-12)
    p = B.shape[0]
    iu = np.triu_indices(p, 1)

    def f(x: np.ndarray) -> float:
        A = np.zeros((p, p))
        A[iu] = x
        return _cpc_objective(B @ linalg.expm(A - A.T), S, w)

    ours = _cpc_objective(B, S, w)
    better = optimize.minimize(f, np.zeros(iu[0].size), method="BFGS", options={"gtol": 1e-9})
    # The sweeps stop once a sweep lowers -2 log-likelihood by less than 0.001: BFGS may add as much.
    assert better.fun >= ours - 1e-3


def test_cpc_axes_turn_with_the_coordinates() -> None:
    # Rotating the coordinates (S_k -> Q S_k Q') rotates the common axes (B -> Q B) and leaves the
    # objective unchanged: a property of the model, whatever the search.
    rng = np.random.default_rng(12)
    K, p = 3, 8
    S = np.array([_random_spd(rng, p) for _ in range(K)])
    w = np.array([50.0, 80.0, 65.0])
    Q = np.linalg.qr(rng.normal(size=(p, p)))[0]
    B, _, _ = cpc_axes(S, w)
    B_turned, _, _ = cpc_axes(np.einsum("ij,kjl,ml->kim", Q, S, Q), w)
    assert _cpc_objective(B_turned, np.einsum("ij,kjl,ml->kim", Q, S, Q), w) == pytest.approx(
        _cpc_objective(B, S, w), abs=1e-3
    )
    # Same axes up to sign (ordered by decreasing variance): |cosines| of matched columns near 1.
    np.testing.assert_allclose(np.abs(np.sum((Q @ B) * B_turned, axis=0)), 1.0, atol=1e-4)


def test_cpc_with_two_features_matches_a_scan_of_the_rotation_angle() -> None:
    # p = 2: the common axes are a rotation by one angle; scipy's bounded scalar minimizer finds it.
    rng = np.random.default_rng(9)
    S = np.array([_random_spd(rng, 2) for _ in range(3)])
    w = np.array([40.0, 55.0, 70.0])

    def f(theta: float) -> float:
        c, s = np.cos(theta), np.sin(theta)
        return _cpc_objective(np.array([[c, -s], [s, c]]), S, w)

    grid = np.linspace(0, np.pi / 2, 721)
    start = grid[np.argmin([f(t) for t in grid])]
    ref = optimize.minimize_scalar(f, bounds=(start - 0.01, start + 0.01), method="bounded", options={"xatol": 1e-12})
    B, _, _ = cpc_axes(S, w)
    assert _cpc_objective(B, S, w) == pytest.approx(ref.fun, rel=1e-10)


def test_proportional_fit_reaches_the_optimum_a_general_optimizer_finds() -> None:
    rng = np.random.default_rng(4)
    K, p = 3, 3
    S = np.array([_random_spd(rng, p) for _ in range(K)])
    w = np.array([50.0, 80.0, 65.0])

    def negloglik(rho: np.ndarray, Sigma: np.ndarray) -> float:
        return float(
            sum(
                w[k]
                * (p * np.log(rho[k]) + np.linalg.slogdet(Sigma)[1] + np.trace(np.linalg.solve(rho[k] * Sigma, S[k])))
                for k in range(K)
            )
        )

    def f(x: np.ndarray) -> float:
        L = np.zeros((p, p))
        L[np.tril_indices(p)] = x[K - 1 :]
        return negloglik(np.exp(np.r_[0.0, x[: K - 1]]), L @ L.T)

    x0 = np.r_[np.zeros(K - 1), np.linalg.cholesky(S.mean(axis=0))[np.tril_indices(p)]]
    ref = optimize.minimize(f, x0, method="BFGS", options={"gtol": 1e-9})
    rho, Sigma = proportional_fit(S, w)
    assert negloglik(rho, Sigma) == pytest.approx(ref.fun, rel=1e-9)
    assert np.exp(np.sum(w * np.log(rho)) / w.sum()) == pytest.approx(1.0)  # the stated scaling


def _moments(S: list[np.ndarray], n: list[int]) -> ClassMoments:
    """Moments whose maximum-likelihood covariances (scatter / n) are exactly the given matrices."""
    counts = np.asarray(n, dtype=np.int64)
    scatter = np.array([s * k for s, k in zip(S, n, strict=True)])
    return ClassMoments(tuple(range(len(S))), counts, np.zeros((len(S), S[0].shape[0])), scatter)


def test_hierarchy_statistics_add_up_and_match_slogdet_and_the_bic_comparison(iris) -> None:
    X, y = iris
    codes, classes = pd.factorize(y, sort=True)
    m = ClassMoments.from_arrays(X.to_numpy(), codes, tuple(classes))
    fl = flury_hierarchy(m)
    total = sum(step["statistic"] for step in fl.steps)
    n = m.counts.astype(float)
    S = m.scatter / n[:, None, None]
    pooled = m.within_scatter / n.sum()
    # numpy: sum_k n_k (ln det pooled - ln det S_k), the equal-versus-unrelated likelihood ratio
    direct = float(sum(k * (np.linalg.slogdet(pooled)[1] - np.linalg.slogdet(s)[1]) for k, s in zip(n, S, strict=True)))
    assert total == pytest.approx(direct, rel=1e-10)
    bic = covariance_bic(m)
    assert fl.bic["equal"] - fl.bic["unrelated"] == pytest.approx(bic.delta_bic, rel=1e-10)
    K, p = 3, 4
    assert [s["df"] for s in fl.steps] == [K - 1, (K - 1) * (p - 1), (K - 1) * p * (p - 1) // 2]
    for s in fl.steps:
        assert s["p_value"] == pytest.approx(sps.chi2.sf(s["statistic"], s["df"]))


def test_matrices_with_common_axes_or_proportional_give_zero_statistics() -> None:
    rng = np.random.default_rng(2)
    p = 4
    B = np.linalg.qr(rng.normal(size=(p, p)))[0]
    cpc = [B @ np.diag(rng.uniform(0.5, 5.0, p)) @ B.T for _ in range(3)]
    fl = flury_hierarchy(_moments(cpc, [60, 80, 70]))
    assert fl.steps[2]["statistic"] == pytest.approx(0.0, abs=1e-8)  # CPC within unrelated
    assert fl.steps[1]["statistic"] > 1.0 and fl.best in ("cpc", "unrelated")
    recovered, _, _ = cpc_axes(np.array(cpc), np.array([60.0, 80.0, 70.0]))
    assert np.abs(np.abs(recovered.T @ B).max(axis=0) - 1.0).max() < 1e-8  # the same axes, up to order and sign
    base = _random_spd(rng, p)
    prop = [base, 2.5 * base, 0.4 * base]
    fl = flury_hierarchy(_moments(prop, [60, 80, 70]))
    assert fl.steps[1]["statistic"] == pytest.approx(0.0, abs=1e-8) and fl.steps[2]["statistic"] == pytest.approx(
        0.0, abs=1e-8
    )
    assert fl.best == "proportional"
    factors = fl.proportional_factors
    assert factors[1] / factors[0] == pytest.approx(2.5) and factors[2] / factors[0] == pytest.approx(0.4)


# --- the located facts in the checks --------------------------------------------------------------


def test_dropping_the_named_feature_lowers_the_largest_vif_most(flakes) -> None:
    from statsmodels.stats.outliers_influence import variance_inflation_factor

    frame, _ = flakes
    X, y = frame.drop(columns="family"), frame["family"]
    f = discaudit.preflight(X, y, random_state=0).findings["collinearity"]
    dep = f.details["near_dependencies"][0]
    centred = X - X.groupby(y).transform("mean")  # class-centred rows: the pooled within-class correlation

    def max_vif_without(feature: str) -> float:
        Z = np.column_stack([np.ones(len(centred)), centred.drop(columns=feature).to_numpy()])
        return max(variance_inflation_factor(Z, j) for j in range(1, Z.shape[1]))

    after = {feature: max_vif_without(feature) for feature in dep["features"]}
    best = min(after, key=after.__getitem__)
    assert dep["drop_to_lower_max_vif"]["feature"] == best
    assert dep["drop_to_lower_max_vif"]["max_vif_after"] == pytest.approx(after[best], rel=1e-6)


def test_spread_ratios_match_slogdet_and_name_the_planted_class(flakes) -> None:
    frame, planted = flakes
    X, y = frame.drop(columns="family"), frame["family"]
    d = discaudit.preflight(X, y, random_state=0).findings["covariance_homogeneity"].details
    p = X.shape[1]
    groups = {c: X[y == c].to_numpy() for c in sorted(y.unique())}
    pooled = sum((len(g) - 1) * np.cov(g, rowvar=False) for g in groups.values()) / (len(X) - len(groups))
    for c, g in groups.items():
        ratio = np.exp((np.linalg.slogdet(np.cov(g, rowvar=False))[1] - np.linalg.slogdet(pooled)[1]) / p)
        assert d["spread"][c]["generalized_variance_ratio_to_pooled"] == pytest.approx(ratio, rel=1e-9)
    assert d["most_different_class"] == planted["different_covariance_family"]
    assert d["spread"]["PS"]["direction"] == "wider" and d["spread"]["PS"]["most_different_direction"] == "wider"
    # The demo scales PS's whole spread by one factor; the contaminated PET batch bends PET's spread, so
    # Flury's proportional model is the best by BIC once those rows are set aside.
    clean = ~frame.index.isin(planted["contaminated"])
    flury = discaudit.preflight(X[clean], y[clean], random_state=0).findings["covariance_homogeneity"].details
    assert flury["flury"]["best_by_bic"] == "proportional"


def test_normality_names_the_strongest_features_per_class(iris) -> None:
    X, y = iris
    per_class = discaudit.preflight(X, y, random_state=0).findings["normality"].details["per_class"]
    for c, shape in per_class.items():
        rows = X[y == c]
        skew = pd.Series(sps.skew(rows, axis=0), index=X.columns)
        kurt = pd.Series(sps.kurtosis(rows, axis=0), index=X.columns)
        top = skew.abs().sort_values(ascending=False, kind="stable").index[:3]
        assert list(shape["strongest_skewness"]) == list(top)
        np.testing.assert_allclose(list(shape["strongest_skewness"].values()), skew[top], rtol=1e-9)
        top_k = kurt.sort_values(ascending=False, kind="stable").index[:3]
        assert list(shape["strongest_excess_kurtosis"]) == list(top_k)


def test_each_pair_of_axes_is_rotated_to_the_minimum_of_its_two_by_two_problem() -> None:
    # The angle solver against a brute-force scan of 20,001 angles and scipy's bounded minimizer
    # around the best of them, on seeded random 2 x 2 problems (three classes).
    from discaudit.stats.flury import _pair_angles

    rng = np.random.default_rng(1)
    w = np.array([100.0, 120.0, 90.0])
    T = np.array([[_random_spd(rng, 2) * rng.uniform(0.1, 10) for _ in range(3)] for _ in range(60)])
    theta = _pair_angles(T, w)

    def f(t: float, Tp: np.ndarray) -> float:
        c, s = np.cos(t), np.sin(t)
        R = np.array([[c, -s], [s, c]])
        return float(np.sum(w[:, None] * np.log(np.einsum("ji,kjl,li->ki", R, Tp, R))))

    grid = np.linspace(0, np.pi / 2, 20001)
    for t, Tp in zip(theta, T, strict=True):
        values = [f(x, Tp) for x in grid]
        x0 = grid[int(np.argmin(values))]
        ref = optimize.minimize_scalar(f, bounds=(x0 - 1e-4, x0 + 1e-4), args=(Tp,), method="bounded",
                                       options={"xatol": 1e-12})  # fmt: skip
        assert f(t, Tp) <= ref.fun + 1e-10 * abs(ref.fun)


def test_a_single_feature_has_one_fixed_axis_and_no_cpc_or_proportional_step() -> None:
    # p = 1: every 1 x 1 covariance is proportional to every other and shares the one axis, so
    # proportional, CPC and unrelated coincide; the equal-versus-proportional step is Bartlett-like.
    m = _moments([np.array([[1.0]]), np.array([[4.0]])], [30, 40])
    fl = flury_hierarchy(m)
    assert fl.cpc_axes.shape == (1, 1) and abs(fl.cpc_axes[0, 0]) == 1.0
    assert [s["df"] for s in fl.steps] == [1, 0, 0]
    assert fl.steps[1]["statistic"] == pytest.approx(0.0, abs=1e-12) and fl.steps[2]["statistic"] == pytest.approx(
        0.0, abs=1e-12
    )
    # numpy: sum_k n_k ln(pooled / s_k) with the n-weighted pooled variance
    pooled = (30 * 1.0 + 40 * 4.0) / 70
    assert fl.steps[0]["statistic"] == pytest.approx(30 * np.log(pooled / 1.0) + 40 * np.log(pooled / 4.0))
