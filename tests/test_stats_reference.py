"""Reference tests for the closed-form statistics in :mod:`discaudit.stats`.

Every number our functions return is compared with something outside the project:

* a reference library (pingouin, statsmodels, scikit-learn, SciPy), called here at test time;
* or a second, independent formula written out in this file from a published source (cited
  beside it); each such formula is itself checked here against a reference library on data, or,
  where no library has it, against a simulation of the distribution it approximates;

on open data sets that scikit-learn ships (iris, wine, diabetes, digits). One constructed design
(the planted near-dependency) is invented by a seeded generator; its expected answer follows
from how it was built, not from our output.

Tolerance: 1e-6 relative unless a comment says otherwise. Library versions used when these tests
were written are listed in ``tests/reference/README.md``.
"""

from __future__ import annotations

import inspect

import numpy as np
import pandas as pd
import pingouin as pg
import pytest
from scipy import stats
from sklearn.covariance import LedoitWolf, ledoit_wolf_shrinkage
from sklearn.datasets import load_diabetes, load_digits, load_iris, load_wine
from sklearn.discriminant_analysis import LinearDiscriminantAnalysis
from statsmodels.multivariate.manova import MANOVA
from statsmodels.regression.linear_model import OLS
from statsmodels.stats.multivariate import test_cov_oneway as sm_test_cov_oneway
from statsmodels.stats.outliers_influence import variance_inflation_factor

from discaudit.stats import (
    box_m,
    condition_indices,
    shrinkage_intensity,
    vif,
    wilks_lambda,
)

RTOL = 1e-6

# A numpy RuntimeWarning escaping from our code is a bug (STYLE: use np.errstate); make it fail.
pytestmark = pytest.mark.filterwarnings("error::RuntimeWarning")

IRIS_COLUMNS = ["sepal_length", "sepal_width", "petal_length", "petal_width"]
WINE_COLUMNS = ["alcohol", "malic_acid", "ash", "flavanoids"]
DIGIT_COLUMNS = ["pixel_2_4", "pixel_3_2", "pixel_4_4", "pixel_5_3", "pixel_1_5"]


# --------------------------------------------------------------------------------------------
# Data (open data sets shipped with scikit-learn)
# --------------------------------------------------------------------------------------------


def iris() -> tuple[pd.DataFrame, pd.Series]:
    """Fisher's iris, 150 rows, 3 classes of 50, features renamed to formula-safe names."""
    bunch = load_iris(as_frame=True)
    X = bunch.data.copy()
    X.columns = IRIS_COLUMNS
    y = pd.Series(np.asarray(bunch.target_names)[bunch.target.to_numpy()], name="species")
    return X, y


def wine(columns: list[str] | None = None) -> tuple[pd.DataFrame, pd.Series]:
    """UCI wine, 178 rows, 3 classes of 59 / 71 / 48."""
    bunch = load_wine(as_frame=True)
    X = bunch.data if columns is None else bunch.data[columns]
    return X.copy(), bunch.target.rename("cultivar")


def digits_five_classes() -> tuple[pd.DataFrame, pd.Series]:
    """Optical digits 0-4 (901 rows, K = 5) on five high-variance pixels."""
    frame = load_digits(as_frame=True).frame
    frame = frame[frame["target"] < 5]
    return frame[DIGIT_COLUMNS].astype(float).reset_index(drop=True), frame["target"].reset_index(drop=True)


def diabetes() -> pd.DataFrame:
    """Efron et al. diabetes data, 442 rows, 10 features (s1..s6 strongly collinear)."""
    return load_diabetes(as_frame=True).data.copy()


def iris_subset(features: list[str], sizes: dict[str, int]) -> tuple[pd.DataFrame, pd.Series]:
    """First ``sizes[c]`` rows of each named iris class, on the given features."""
    X, y = iris()
    keep = np.zeros(len(y), dtype=bool)
    for label, size in sizes.items():
        keep[np.flatnonzero(y.to_numpy() == label)[:size]] = True
    return X.loc[keep, features].reset_index(drop=True), y[keep].reset_index(drop=True)


# --------------------------------------------------------------------------------------------
# Independent formulas written for the tests
# --------------------------------------------------------------------------------------------


def _logdet_pd(S: np.ndarray) -> float:
    sign, logdet = np.linalg.slogdet(S)
    assert sign > 0, "reference covariance is not positive definite"
    return float(logdet)


def box_constants(v: np.ndarray, p: int) -> tuple[float, float, float]:
    """c1, c2 and a1 of Box (1949) for degrees of freedom v_k = n_k - 1 and p features."""
    K = len(v)
    c1 = (np.sum(1 / v) - 1 / v.sum()) * (2 * p**2 + 3 * p - 1) / (6 * (p + 1) * (K - 1))
    c2 = (np.sum(1 / v**2) - 1 / v.sum() ** 2) * (p - 1) * (p + 2) / (6 * (K - 1))
    return float(c1), float(c2), (K - 1) * p * (p + 1) / 2


def box_f_by_hand(M, c1: float, c2: float, a1: float):
    """Box's F for M (a number or an array): (F on the design's branch, F on the other, a2)."""
    a2 = (a1 + 2) / abs(c2 - c1**2)
    f_upper = M * (1 - c1 - a1 / a2) / a1  # the c2 > c1^2 formula
    b = a2 / (1 - c1 + 2 / a2)
    f_lower = a2 * M / (a1 * (b - M))  # the c2 < c1^2 formula
    F, F_other = (f_upper, f_lower) if c2 > c1**2 else (f_lower, f_upper)
    return F, F_other, a2


def box_m_by_hand(X: pd.DataFrame, y: pd.Series) -> dict[str, float]:
    """Box's M with the chi-square and F approximations, written from the textbook formulas.

    Box, G. E. P. (1949), "A general distribution theory for a class of likelihood criteria",
    Biometrika 36:317-346, in the form Rencher, A. C. (2002), Methods of Multivariate Analysis,
    2nd ed., Wiley, gives it:

        M  = sum(v_k) ln|S_pooled| - sum v_k ln|S_k|,   v_k = n_k - 1, unbiased S_k
        c1 = [sum 1/v_k - 1/sum v_k] (2p^2 + 3p - 1) / (6 (p + 1) (K - 1))
        c2 = [sum 1/v_k^2 - 1/(sum v_k)^2] (p - 1)(p + 2) / (6 (K - 1))
        a1 = (K - 1) p (p + 1) / 2,   a2 = (a1 + 2) / |c2 - c1^2|
        chi-square: (1 - c1) M on a1 df
        c2 > c1^2:  F = M / b,  b = a1 / (1 - c1 - a1/a2),            on (a1, a2) df
        c2 < c1^2:  F = a2 M / (a1 (b - M)),  b = a2 / (1 - c1 + 2/a2), on (a1, a2) df

    Checked against statsmodels 0.15.0 ``statsmodels.stats.multivariate.test_cov_oneway``
    (M, chi-square, a1, a2 and the c2 > c1^2 F agree: ``TestBoxMReference``). On the c2 < c1^2
    branch statsmodels computes F = a2 M / (a1 (b + M)); the simulated null distribution of M
    (``test_lower_branch_matches_null_distribution``) supports b - M and rejects b + M.
    """
    values = X.to_numpy(dtype=float)
    labels = np.asarray(y)
    classes = pd.unique(labels)
    p = values.shape[1]
    groups = [values[labels == c] for c in classes]
    v = np.array([len(g) - 1 for g in groups], dtype=float)
    covs = [np.cov(g, rowvar=False, ddof=1).reshape(p, p) for g in groups]
    pooled = sum(vk * Sk for vk, Sk in zip(v, covs)) / v.sum()
    M = v.sum() * _logdet_pd(pooled) - sum(vk * _logdet_pd(Sk) for vk, Sk in zip(v, covs))
    c1, c2, a1 = box_constants(v, p)
    F, F_other, a2 = box_f_by_hand(M, c1, c2, a1)
    chi2 = (1 - c1) * M
    return {
        "M": M,
        "c1": c1,
        "c2": c2,
        "chi2": chi2,
        "df": a1,
        "p_chi2": stats.chi2.sf(chi2, a1),
        "F": F,
        "df1": a1,
        "df2": a2,
        "p_F": stats.f.sf(F, a1, a2),
        "F_other_branch": F_other,
    }


def box_m_statsmodels(X: pd.DataFrame, y: pd.Series):
    """statsmodels 0.15 ``test_cov_oneway`` (Box's M) on the classes' unbiased covariances."""
    values = X.to_numpy(dtype=float)
    labels = np.asarray(y)
    groups = [values[labels == c] for c in pd.unique(labels)]
    covs = [np.cov(g, rowvar=False, ddof=1).reshape(values.shape[1], -1) for g in groups]
    return sm_test_cov_oneway(covs, [len(g) for g in groups])


# statsmodels 0.15 added ``standardize=True`` (centring the columns by default); every earlier
# release regresses on the columns exactly as given, i.e. through the origin without a constant.
_SM_VIF_HAS_STANDARDIZE = "standardize" in inspect.signature(variance_inflation_factor).parameters


def vif_statsmodels(X: pd.DataFrame, *, with_constant: bool) -> pd.Series:
    """statsmodels' ``variance_inflation_factor`` on every feature column.

    ``with_constant=True``: the documented correct usage, a column of ones prepended to exog.
    ``with_constant=False``: the classic raw call on the feature matrix, regressing each column on
    the others *as given* (no intercept, uncentred); on statsmodels >= 0.15 that raw behaviour
    needs ``standardize=False``.
    """
    values = X.to_numpy(dtype=float)
    if with_constant:
        exog = np.column_stack([np.ones(len(values)), values])
        out = [variance_inflation_factor(exog, j + 1) for j in range(values.shape[1])]
    else:
        raw = {"standardize": False} if _SM_VIF_HAS_STANDARDIZE else {}
        out = [variance_inflation_factor(values, j, **raw) for j in range(values.shape[1])]
    return pd.Series(out, index=list(X.columns), dtype=float)


def standardized_svd(X: pd.DataFrame) -> tuple[np.ndarray, np.ndarray]:
    """Singular values (descending) and right singular vectors of Z, with Z'Z = correlation matrix."""
    values = X.to_numpy(dtype=float)
    Z = (values - values.mean(axis=0)) / (values.std(axis=0, ddof=1) * np.sqrt(len(values) - 1))
    _, s, Vt = np.linalg.svd(Z, full_matrices=False)
    return s, Vt.T


def bkw_by_hand(X: pd.DataFrame) -> tuple[np.ndarray, np.ndarray, np.ndarray]:
    """Condition indices and variance-decomposition proportions from the SVD route.

    Belsley, Kuh & Welsch (1980), Regression Diagnostics, Wiley, ch. 3: with Z = U D V' the
    SVD of the column-scaled data, eta_k = d_max / d_k, and phi_jk = v_jk^2 / d_k^2; the
    proportion of var(b_j) due to dimension k is pi_kj = phi_jk / sum_k phi_jk. Here the columns
    are centred (the correlation-matrix variant that discaudit documents; Belsley, Kuh & Welsch
    scale uncentred columns with the intercept). No library available here computes the
    proportions (R's perturb, mctest and olsrr are not packaged in Debian 12; statsmodels,
    scikit-learn and pingouin have none), so the route is checked against what it decomposes:
    sum_k phi_jk sigma^2 is the variance of b_j that statsmodels' OLS reports for a regression
    on Z (test_svd_route_decomposes_statsmodels_ols_variances), and sum_k phi_jk is statsmodels'
    VIF. Returns (indices, proportions [dimension x feature], phi).
    """
    s, V = standardized_svd(X)
    phi = V**2 / s**2  # (feature j, dimension k)
    proportions = (phi / phi.sum(axis=1, keepdims=True)).T
    return s[0] / s, proportions, phi


def class_centred(X: pd.DataFrame, y: pd.Series) -> np.ndarray:
    values = X.to_numpy(dtype=float)
    means = pd.DataFrame(values).groupby(np.asarray(y)).transform("mean").to_numpy()
    return values - means


def ledoit_wolf_by_hand(Xc: np.ndarray) -> float:
    """Ledoit-Wolf (2004) intensity written from the paper's lemmas.

    Ledoit, O. & Wolf, M. (2004), "A well-conditioned estimator for large-dimensional
    covariance matrices", J. Multivariate Analysis 88:365-411, with the scaled Frobenius
    norm ||A||^2 = tr(A A')/p and sample covariance S = Xc'Xc/n (divisor n, as scikit-learn):
        m = tr(S)/p,  d^2 = ||S - m I||^2,  bbar^2 = n^-2 sum_i ||x_i x_i' - S||^2,
        b^2 = min(bbar^2, d^2),  intensity = b^2 / d^2.
    Uses ||x x' - S||^2 = (|x|^4 - 2 x'Sx + ||S||_F^2)/p, so no n x n or n x p x p object.
    Confirmed by scikit-learn 1.9.1 ``ledoit_wolf_shrinkage`` on the same data
    (``test_matches_ledoit_wolf_lemmas``).
    """
    n, p = Xc.shape
    S = Xc.T @ Xc / n
    m = np.trace(S) / p
    d2 = np.sum((S - m * np.eye(p)) ** 2) / p
    row_sq = np.einsum("ij,ij->i", Xc, Xc)
    quad = np.einsum("ij,jk,ik->i", Xc, S, Xc)
    bbar2 = np.sum(row_sq**2 - 2 * quad + np.sum(S**2)) / (p * n**2)
    return float(min(bbar2, d2) / d2)


def canonical_correlations_by_qr(X: pd.DataFrame, y: pd.Series) -> np.ndarray:
    """Canonical correlations between X and the class indicators, Bjorck & Golub (1973).

    Bjorck, A. & Golub, G. H. (1973), "Numerical methods for computing angles between linear
    subspaces", Mathematics of Computation 27:579-594: the cosines of the principal angles
    between the column spaces of the centred X and the centred K-1 class dummies are the
    singular values of Qx' Qd.
    """
    values = X.to_numpy(dtype=float)
    dummies = pd.get_dummies(np.asarray(y)).to_numpy(dtype=float)[:, 1:]
    Qx, _ = np.linalg.qr(values - values.mean(axis=0))
    Qd, _ = np.linalg.qr(dummies - dummies.mean(axis=0))
    s = np.linalg.svd(Qx.T @ Qd, compute_uv=False)
    return np.sort(s)[::-1][: min(values.shape[1], dummies.shape[1])]


def manova_table(X: pd.DataFrame, y: pd.Series) -> pd.DataFrame:
    """statsmodels one-way MANOVA test table for the class term (floats)."""
    frame = X.copy()
    frame["group"] = np.asarray(y)
    formula = " + ".join(X.columns) + " ~ C(group)"
    table = MANOVA.from_formula(formula, data=frame).mv_test().results["C(group)"]["stat"]
    return table.astype(float)


# --------------------------------------------------------------------------------------------
# Box's M
# --------------------------------------------------------------------------------------------


class TestBoxMReference:
    @pytest.mark.parametrize(
        "data",
        [
            pytest.param(iris, id="iris-equal-n"),
            pytest.param(lambda: wine(WINE_COLUMNS), id="wine-unequal-n"),
        ],
    )
    def test_chi_square_matches_pingouin(self, data):
        X, y = data()
        result = box_m(X, y)
        frame = X.copy()
        frame["group"] = np.asarray(y)
        # pingouin 0.7 box_m (Rencher 2003 formulas): its "Chi2" is -2 (1 - c) ln(prod (|S_k|/|S|)^(v_k/2))
        # = (1 - c1) M, i.e. our `chi2`; "df" = (K-1)p(p+1)/2; "pval" the chi-square tail.
        # Iris has equal class sizes, wine unequal: both branches of pingouin's c are used.
        ref = pg.box_m(frame, dvs=list(X.columns), group="group")
        assert result.chi2 == pytest.approx(float(ref["Chi2"].iloc[0]), rel=RTOL)
        assert result.df == pytest.approx(float(ref["df"].iloc[0]), rel=RTOL)
        assert result.p_value == pytest.approx(float(ref["pval"].iloc[0]), rel=RTOL)

    @pytest.mark.parametrize(
        "data",
        [
            pytest.param(iris, id="iris"),
            pytest.param(lambda: wine(WINE_COLUMNS), id="wine4"),
            pytest.param(lambda: wine(), id="wine-all13"),
        ],
    )
    def test_statistic_and_chi_square_match_statsmodels(self, data):
        X, y = data()
        result = box_m(X, y)
        # statsmodels 0.15.0 test_cov_oneway: statistic_base is M, statistic_chi2 = (1 - c1) M.
        sm = box_m_statsmodels(X, y)
        assert result.statistic == pytest.approx(sm.statistic_base, rel=RTOL)
        assert result.chi2 == pytest.approx(sm.statistic_chi2, rel=RTOL)
        assert result.df == pytest.approx(sm.df_chi2, rel=RTOL)
        assert result.p_value == pytest.approx(sm.pvalue_chi2, rel=RTOL)
        # The formula written in this file agrees with statsmodels on the same data.
        ref = box_m_by_hand(X, y)
        assert ref["M"] == pytest.approx(sm.statistic_base, rel=RTOL)
        assert ref["chi2"] == pytest.approx(sm.statistic_chi2, rel=RTOL)
        assert ref["df2"] == pytest.approx(sm.df_f[1], rel=RTOL)

    def test_iris_matches_published_spss_table(self):
        # Published worked example: the Box's M table that SPSS (DISCRIMINANT / GLM) prints for
        # Fisher's iris with all four features and the three species, M = 146.663, approx.
        # F = 7.045, df1 = 20, df2 = 77566.751; confirmed by statsmodels 0.15.0
        # test_cov_oneway on scikit-learn's iris (statistic_base 146.6632492, statistic_f
        # 7.04526170, df_f (20, 77566.7512690)). Checked to the printed precision (half a unit
        # in the last digit), statsmodels' values and ours alike.
        X, y = iris()
        sm = box_m_statsmodels(X, y)
        assert sm.statistic_base == pytest.approx(146.663, abs=5e-4)
        assert sm.statistic_f == pytest.approx(7.045, abs=5e-4)
        assert sm.df_f[0] == pytest.approx(20, abs=5e-4)
        assert sm.df_f[1] == pytest.approx(77566.751, abs=5e-4)
        result = box_m(X, y)
        assert result.statistic == pytest.approx(146.663, abs=5e-4)
        assert result.f == pytest.approx(7.045, abs=5e-4)
        assert result.df1 == pytest.approx(20, abs=5e-4)
        assert result.df2 == pytest.approx(77566.751, abs=5e-4)

    def test_one_feature_reduces_to_bartlett(self):
        # With p = 1, M = (N-K) ln s_p^2 - sum v_k ln s_k^2 is the numerator of Bartlett's
        # (1937) test; SciPy 1.17 `scipy.stats.bartlett` divides it by
        # C = 1 + (sum 1/v_k - 1/sum v_k) / (3 (K - 1)) (read in its source), which is 1 + c1
        # for p = 1, since (2p^2 + 3p - 1) / (6 (p + 1)) = 1/3 there.
        X, y = iris_subset(["sepal_width"], {"setosa": 50, "versicolor": 30, "virginica": 20})
        result = box_m(X, y)
        ref = box_m_by_hand(X, y)
        groups = [X["sepal_width"].to_numpy()[y.to_numpy() == c] for c in pd.unique(y)]
        bartlett = stats.bartlett(*groups).statistic
        assert result.statistic == pytest.approx(bartlett * (1 + ref["c1"]), rel=RTOL)

    @pytest.mark.parametrize(
        ("features", "sizes", "branch"),
        [
            # c2 > c1^2: the usual case (p = 4, K = 3).
            pytest.param(IRIS_COLUMNS, {"setosa": 50, "versicolor": 50, "virginica": 50}, "c2>c1^2", id="iris-p4"),
            pytest.param(
                ["sepal_length", "petal_length"],
                {"versicolor": 10, "virginica": 50},
                "c2>c1^2",
                id="iris-p2-unequal",
            ),
            # c2 < c1^2 needs p = 1 (c2 = 0) or p = 2, K = 2 with near-equal small classes.
            pytest.param(
                ["sepal_length", "sepal_width"],
                {"versicolor": 21, "virginica": 24},
                "c2<c1^2",
                id="iris-p2-K2-small-unequal",
            ),
            pytest.param(
                ["sepal_length", "sepal_width"],
                {"versicolor": 50, "virginica": 50},
                "c2<c1^2",
                id="iris-p2-K2-equal",
            ),
            pytest.param(
                ["sepal_width"],
                {"setosa": 50, "versicolor": 30, "virginica": 20},
                "c2<c1^2",
                id="iris-p1",
            ),
            # Small classes: the two branch formulas differ by 1.7 % here, the clearest discriminator.
            pytest.param(
                ["sepal_width"],
                {"setosa": 5, "versicolor": 6, "virginica": 4},
                "c2<c1^2",
                id="iris-p1-small",
            ),
        ],
    )
    def test_f_approximation_both_branches(self, features, sizes, branch):
        X, y = iris_subset(features, sizes)
        ref = box_m_by_hand(X, y)  # Box (1949) F approximation in Rencher's (2002) form
        # Which branch this design exercises, recomputed here from c1, c2:
        assert (ref["c2"] > ref["c1"] ** 2) == (branch == "c2>c1^2")
        # The design can tell the branches apart at our tolerance (the two formulas converge as
        # |c2 - c1^2| -> 0, so a design too close to the switch would prove nothing):
        assert abs(ref["F"] - ref["F_other_branch"]) > 4 * RTOL * abs(ref["F"])
        result = box_m(X, y)
        assert result.df1 == pytest.approx(ref["df1"], rel=RTOL)
        assert result.df2 == pytest.approx(ref["df2"], rel=RTOL)
        assert result.f == pytest.approx(ref["F"], rel=RTOL)
        assert result.p_value_f == pytest.approx(ref["p_F"], rel=RTOL)
        # statsmodels 0.15.0 test_cov_oneway: the same df on both branches; the same F where
        # c2 > c1^2. Where c2 < c1^2 it computes F_sm = (a2/a1) t / (1 + t), t = M / b, where
        # Box's form is (a2/a1) t / (1 - t): recover t from F_sm and test that exact relation.
        sm = box_m_statsmodels(X, y)
        a1, a2 = sm.df_f
        assert result.df1 == pytest.approx(a1, rel=RTOL)
        assert result.df2 == pytest.approx(a2, rel=RTOL)
        if branch == "c2>c1^2":
            assert result.f == pytest.approx(sm.statistic_f, rel=RTOL)
            assert result.p_value_f == pytest.approx(sm.pvalue_f, rel=RTOL)
        else:
            t = a1 * sm.statistic_f / (a2 - a1 * sm.statistic_f)
            assert t * (a2 / (1 - ref["c1"] + 2 / a2)) == pytest.approx(sm.statistic_base, rel=RTOL)  # t = M / b
            assert result.f == pytest.approx(a2 / a1 * t / (1 - t), rel=RTOL)

    def test_lower_branch_matches_null_distribution(self):
        # Check of the c2 < c1^2 formula itself (no library here has it right: pingouin 0.7
        # gives the chi-square only, R's heplots and biotools are not packaged in Debian 12,
        # statsmodels 0.15 uses b + M). Under equal covariances, with p = 1 and classes of 5, 6
        # and 4 rows (c2 = 0 < c1^2), M is drawn exactly from independent chi-square variances
        # (v_k s_k^2 ~ chi2(v_k)), 400,000 seeded draws. The F of box_f_by_hand must reject
        # within 10 % of the nominal 5 % and 1 % (measured 4.98 % and 0.999 %, standard errors
        # 0.034 % and 0.016 %); the b + M form misses both by more than 10 % (4.37 %, 0.729 %),
        # so the simulation tells the two apart.
        rng = np.random.default_rng(20240611)
        v = np.array([4.0, 5.0, 3.0])
        s2 = rng.chisquare(v, size=(400_000, 3)) / v
        M = v.sum() * np.log(s2 @ v / v.sum()) - np.log(s2) @ v
        c1, c2, a1 = box_constants(v, p=1)
        assert c2 == 0.0
        f_box, _, a2 = box_f_by_hand(M, c1, c2, a1)
        t = M / (a2 / (1 - c1 + 2 / a2))
        f_plus = a2 / a1 * t / (1 + t)  # statsmodels 0.15's form
        for alpha in (0.05, 0.01):
            crit = stats.f.isf(alpha, a1, a2)
            assert np.mean(f_box > crit) == pytest.approx(alpha, rel=0.1)
            assert np.mean(f_plus > crit) != pytest.approx(alpha, rel=0.1)


# --------------------------------------------------------------------------------------------
# VIF
# --------------------------------------------------------------------------------------------


class TestVifReference:
    @pytest.mark.parametrize(
        "data", [pytest.param(lambda: iris()[0], id="iris"), pytest.param(diabetes, id="diabetes")]
    )
    def test_matches_statsmodels_with_constant(self, data):
        X = data()
        result = vif(X)
        # statsmodels 0.15 variance_inflation_factor, with a constant column added (correct usage).
        ref = vif_statsmodels(X, with_constant=True)
        assert isinstance(result, pd.Series)
        assert list(result.index) == list(X.columns)
        np.testing.assert_allclose(result.to_numpy(dtype=float), ref.to_numpy(), rtol=RTOL)

    @pytest.mark.parametrize(
        "data", [pytest.param(lambda: iris()[0], id="iris"), pytest.param(diabetes, id="diabetes")]
    )
    def test_matches_diagonal_of_inverse_correlation(self, data):
        X = data()
        # Marquardt (1970), Technometrics 12:591-612: VIF_j = [R^-1]_jj, R the correlation matrix.
        R = np.corrcoef(X.to_numpy(dtype=float), rowvar=False)
        ref = np.diag(np.linalg.solve(R, np.eye(R.shape[0])))
        np.testing.assert_allclose(vif(X).to_numpy(dtype=float), ref, rtol=RTOL)

    def test_uncentred_pitfall_is_not_reproduced(self):
        # Classic pitfall: statsmodels' variance_inflation_factor on the raw feature matrix, with no
        # constant, regresses through the origin and returns uncentred VIFs (the behaviour of every
        # release before 0.15, and of 0.15 with standardize=False). They are far from the textbook
        # values; ours must equal the with-constant version, not this one.
        X, _ = iris()
        result = vif(X).to_numpy(dtype=float)
        with_const = vif_statsmodels(X, with_constant=True).to_numpy()
        no_const = vif_statsmodels(X, with_constant=False).to_numpy()
        # The pitfall is real on this data (the uncentred values differ by more than a factor 2
        # in at least one column) ...
        assert np.max(no_const / with_const) > 2.0
        # ... and ours follows the centred definition.
        np.testing.assert_allclose(result, with_const, rtol=RTOL)
        assert not np.allclose(result, no_const, rtol=0.1)


# --------------------------------------------------------------------------------------------
# Wilks' Lambda
# --------------------------------------------------------------------------------------------

WILKS_DATA = [
    pytest.param(iris, id="iris"),
    pytest.param(lambda: wine(WINE_COLUMNS), id="wine4"),
    # K = 5, p = 5: Rao's t = sqrt((p^2 q^2 - 4)/(p^2 + q^2 - 5)) = sqrt(11) is not an integer,
    # so the approximation (not an exact F) is exercised; with K = 3, t = 2 always.
    pytest.param(digits_five_classes, id="digits-K5"),
]


class TestWilksLambdaReference:
    @pytest.mark.parametrize("data", WILKS_DATA)
    def test_matches_statsmodels_manova(self, data):
        X, y = data()
        result = wilks_lambda(X, y)
        # statsmodels 0.15 MANOVA.from_formula(...).mv_test(), row "Wilks' lambda" (Rao's F).
        ref = manova_table(X, y).loc["Wilks' lambda"]
        assert result.statistic == pytest.approx(ref["Value"], rel=RTOL)
        assert result.f == pytest.approx(ref["F Value"], rel=RTOL)
        assert result.df1 == pytest.approx(ref["Num DF"], rel=RTOL)
        assert result.df2 == pytest.approx(ref["Den DF"], rel=RTOL)
        assert result.p_value == pytest.approx(ref["Pr > F"], rel=RTOL)

    @pytest.mark.parametrize("data", WILKS_DATA)
    def test_eigenvalues_match_manova_traces(self, data):
        X, y = data()
        result = wilks_lambda(X, y)
        eig = np.asarray(result.eigenvalues, dtype=float)
        n_dir = min(X.shape[1], pd.unique(y).size - 1)
        assert eig.shape == (n_dir,)
        assert np.all(np.diff(eig) <= 0)
        table = manova_table(X, y)  # statsmodels MANOVA traces
        assert eig[0] == pytest.approx(table.loc["Roy's greatest root", "Value"], rel=RTOL)  # max l
        assert eig.sum() == pytest.approx(table.loc["Hotelling-Lawley trace", "Value"], rel=RTOL)  # sum l
        assert np.sum(eig / (1 + eig)) == pytest.approx(table.loc["Pillai's trace", "Value"], rel=RTOL)
        assert np.prod(1 / (1 + eig)) == pytest.approx(table.loc["Wilks' lambda", "Value"], rel=RTOL)

    @pytest.mark.parametrize("data", WILKS_DATA)
    def test_eigenvalues_match_lda_explained_variance(self, data):
        X, y = data()
        result = wilks_lambda(X, y)
        # scikit-learn LinearDiscriminantAnalysis(solver="eigen"): explained_variance_ratio_ is
        # l_i / sum(l) for the generalized eigenproblem Sb v = l Sw v (Sw = W/N, Sb = B/N, so the
        # same l as W^-1 B); scaled by the Hotelling-Lawley trace from statsmodels MANOVA.
        lda = LinearDiscriminantAnalysis(solver="eigen").fit(X.to_numpy(dtype=float), np.asarray(y))
        trace = manova_table(X, y).loc["Hotelling-Lawley trace", "Value"]
        ref = lda.explained_variance_ratio_ * trace
        np.testing.assert_allclose(np.asarray(result.eigenvalues, dtype=float), ref, rtol=RTOL)

    @pytest.mark.parametrize("data", WILKS_DATA)
    def test_canonical_correlations_match_principal_angles(self, data):
        X, y = data()
        result = wilks_lambda(X, y)
        ref = canonical_correlations_by_qr(X, y)  # Bjorck & Golub (1973) QR/SVD route
        np.testing.assert_allclose(np.asarray(result.canonical_correlations, dtype=float), ref, rtol=RTOL)
        eig = np.asarray(result.eigenvalues, dtype=float)
        np.testing.assert_allclose(ref, np.sqrt(eig / (1 + eig)), rtol=RTOL)

    def test_two_classes_match_hotelling_t2(self):
        # K = 2: Rao's F is exact and equals the two-sample Hotelling T^2 F;
        # pingouin 0.7 multivariate_ttest (Hotelling 1931, Ann. Math. Stat. 2:360-378).
        X, y = iris_subset(IRIS_COLUMNS, {"versicolor": 50, "virginica": 50})
        result = wilks_lambda(X, y)
        ref = pg.multivariate_ttest(X[y == "versicolor"], X[y == "virginica"])
        assert result.f == pytest.approx(float(ref["F"].iloc[0]), rel=RTOL)
        assert result.df1 == pytest.approx(float(ref["df1"].iloc[0]), rel=RTOL)
        assert result.df2 == pytest.approx(float(ref["df2"].iloc[0]), rel=RTOL)
        assert result.p_value == pytest.approx(float(ref["pval"].iloc[0]), rel=RTOL)
        n = len(y)
        assert result.statistic == pytest.approx(1 / (1 + float(ref["T2"].iloc[0]) / (n - 2)), rel=RTOL)

    def test_one_feature_matches_one_way_anova(self):
        # p = 1: Lambda = SS_within / SS_total and Rao's F is the one-way ANOVA F on (K-1, N-K);
        # SciPy f_oneway.
        X, y = wine(["alcohol"])
        result = wilks_lambda(X, y)
        groups = [X["alcohol"].to_numpy()[y.to_numpy() == c] for c in np.unique(y)]
        ref = stats.f_oneway(*groups)
        assert result.f == pytest.approx(ref.statistic, rel=RTOL)
        assert result.p_value == pytest.approx(ref.pvalue, rel=RTOL)
        assert result.df1 == pytest.approx(2, rel=RTOL)
        assert result.df2 == pytest.approx(len(y) - 3, rel=RTOL)
        assert np.asarray(result.eigenvalues).shape == (1,)


# --------------------------------------------------------------------------------------------
# Ledoit-Wolf shrinkage intensity
# --------------------------------------------------------------------------------------------

SHRINK_DATA = [
    pytest.param(iris, id="iris"),
    pytest.param(lambda: wine(), id="wine-all13"),
    pytest.param(lambda: wine(WINE_COLUMNS), id="wine4"),
]


class TestShrinkageIntensityReference:
    @pytest.mark.parametrize("data", SHRINK_DATA)
    def test_matches_sklearn_on_class_centred_data(self, data):
        X, y = data()
        result = shrinkage_intensity(X, y)
        Xc = class_centred(X, y)
        # scikit-learn 1.9 sklearn.covariance.ledoit_wolf_shrinkage on the class-centred matrix
        assert float(result) == pytest.approx(ledoit_wolf_shrinkage(Xc), rel=RTOL)
        # ... and LedoitWolf().fit(...).shrinkage_, the estimator users actually call.
        assert float(result) == pytest.approx(LedoitWolf().fit(Xc).shrinkage_, rel=RTOL)
        assert 0.0 <= float(result) <= 1.0

    @pytest.mark.parametrize("data", SHRINK_DATA)
    def test_matches_ledoit_wolf_lemmas(self, data):
        X, y = data()
        # Ledoit & Wolf (2004) written out in this file (divisor n, as scikit-learn); the
        # formula is itself confirmed by scikit-learn 1.9.1 ledoit_wolf_shrinkage on the data.
        Xc = class_centred(X, y)
        ref = ledoit_wolf_by_hand(Xc)
        assert ref == pytest.approx(ledoit_wolf_shrinkage(Xc), rel=RTOL)
        assert float(shrinkage_intensity(X, y)) == pytest.approx(ref, rel=RTOL)

    def test_one_feature_is_zero_like_sklearn(self):
        # scikit-learn returns 0.0 for a single feature (shrinking toward m I changes nothing).
        X, y = wine(["alcohol"])
        assert float(shrinkage_intensity(X, y)) == pytest.approx(ledoit_wolf_shrinkage(class_centred(X, y)), abs=1e-12)


# --------------------------------------------------------------------------------------------
# Condition indices and variance-decomposition proportions
# --------------------------------------------------------------------------------------------


class TestConditionIndicesReference:
    @pytest.mark.parametrize(
        "data", [pytest.param(lambda: iris()[0], id="iris"), pytest.param(diabetes, id="diabetes")]
    )
    def test_matches_svd_route(self, data):
        X = data()
        result = condition_indices(X)
        indices, proportions, _ = bkw_by_hand(X)  # Belsley, Kuh & Welsch (1980) via np.linalg.svd
        np.testing.assert_allclose(np.asarray(result.indices, dtype=float), indices, rtol=RTOL)
        assert result.indices[0] == 1.0
        assert float(result.condition_number) == pytest.approx(indices[-1], rel=RTOL)
        vp = result.variance_proportions
        assert isinstance(vp, pd.DataFrame)
        assert list(vp.columns) == list(X.columns)
        assert vp.shape == (X.shape[1], X.shape[1])
        # Proportions lie in [0, 1]; an absolute floor of 1e-10 covers entries that are
        # round-off small (relative agreement on 1e-14 is meaningless).
        np.testing.assert_allclose(vp.to_numpy(dtype=float), proportions, rtol=RTOL, atol=1e-10)

    @pytest.mark.parametrize(
        "data", [pytest.param(lambda: iris()[0], id="iris"), pytest.param(diabetes, id="diabetes")]
    )
    def test_condition_number_matches_numpy_cond(self, data):
        X = data()
        # numpy.linalg.cond (2-norm) of the correlation matrix is lambda_max / lambda_min,
        # the square of the BKW condition number of the unit-variance data.
        R = np.corrcoef(X.to_numpy(dtype=float), rowvar=False)
        assert float(condition_indices(X).condition_number) == pytest.approx(np.sqrt(np.linalg.cond(R)), rel=RTOL)

    @pytest.mark.parametrize(
        "data", [pytest.param(lambda: iris()[0], id="iris"), pytest.param(diabetes, id="diabetes")]
    )
    def test_svd_route_reproduces_statsmodels_vif(self, data):
        # Check of the reference route itself: sum_k phi_jk = [R^-1]_jj = VIF_j (statsmodels, with constant).
        X = data()
        _, _, phi = bkw_by_hand(X)
        np.testing.assert_allclose(phi.sum(axis=1), vif_statsmodels(X, with_constant=True).to_numpy(), rtol=RTOL)

    @pytest.mark.parametrize(
        "data", [pytest.param(lambda: iris()[0], id="iris"), pytest.param(diabetes, id="diabetes")]
    )
    def test_svd_route_decomposes_statsmodels_ols_variances(self, data):
        # Check of the reference route itself: regress any response on Z (centred, unit-variance
        # columns, so no constant is needed) with statsmodels 0.15 OLS; its coefficient variances
        # sigma^2 [(Z'Z)^-1]_jj are the sums that the proportions split, sigma^2 sum_k phi_jk.
        X = data()
        s, V = standardized_svd(X)
        Z = X.to_numpy(dtype=float)
        Z = (Z - Z.mean(axis=0)) / (Z.std(axis=0, ddof=1) * np.sqrt(len(Z) - 1))
        response = np.random.default_rng(3).standard_normal(len(Z))
        fit = OLS(response - response.mean(), Z).fit()
        _, _, phi = bkw_by_hand(X)
        np.testing.assert_allclose(fit.bse**2, fit.scale * phi.sum(axis=1), rtol=RTOL)
        np.testing.assert_allclose(fit.normalized_cov_params, (V / s**2) @ V.T, rtol=RTOL, atol=1e-12)

    def test_planted_near_dependency_is_named(self):
        # Constructed (seeded) design: f5 = f1 - f3 + small noise; the others independent.
        # BKW (1980): a near dependency shows as a large condition index whose row has
        # variance proportions > 0.5 for exactly the features involved.
        rng = np.random.default_rng(20240611)
        base = rng.normal(size=(300, 5))
        planted = base[:, 1] - base[:, 3] + 0.01 * rng.normal(size=300)
        X = pd.DataFrame(np.column_stack([base, planted]), columns=[f"f{j}" for j in range(6)])
        result = condition_indices(X)
        assert float(result.condition_number) > 30  # BKW's "strong" range
        last = result.variance_proportions.iloc[-1]
        assert set(last.index[last.to_numpy(dtype=float) > 0.5]) == {"f1", "f3", "f5"}
        _, proportions, _ = bkw_by_hand(X)
        np.testing.assert_allclose(last.to_numpy(dtype=float), proportions[-1], rtol=RTOL, atol=1e-10)
