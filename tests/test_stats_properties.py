"""Properties the closed-form statistics in :mod:`discaudit.stats` must have.

Invariances that follow from the definitions (checked on seeded invented data):

* Box's M and Wilks' Lambda are invariant to any nonsingular affine map x -> A'x + b of the
  features: every determinant ratio they use picks up det(A)^2 in numerator and denominator.
* VIF and the condition indices / variance proportions are functions of the correlation matrix,
  hence invariant to per-feature rescaling and shifts.
* The Ledoit-Wolf intensity (scaled-identity target) is invariant to a common scale factor, a
  shift and an orthogonal rotation of the features, but not to per-feature rescaling.
* Nothing may depend on row order or on how the classes are named.

Plus the error contract: bad input raises ``DataError`` naming the culprit; a class too small for
its own covariance in Box's M is reported (NaN statistic) or refused by name, never a crash.
"""

from __future__ import annotations

import warnings

import numpy as np
import pandas as pd
import pytest

from discaudit.errors import DataError
from discaudit.stats import (
    box_m,
    condition_indices,
    shrinkage_intensity,
    vif,
    wilks_lambda,
)

# Invariances hold exactly in exact arithmetic; 1e-8 relative leaves room for round-off only.
RTOL = 1e-8

# A numpy RuntimeWarning escaping from our code is a bug (STYLE: use np.errstate); make it fail.
pytestmark = pytest.mark.filterwarnings("error::RuntimeWarning")

BOX_ATTRS = ("statistic", "chi2", "df", "p_value", "f", "df1", "df2", "p_value_f")
WILKS_ATTRS = ("statistic", "f", "df1", "df2", "p_value", "eigenvalues", "canonical_correlations")


def invented_classes(random_state: int = 0) -> tuple[pd.DataFrame, np.ndarray]:
    """Three Gaussian classes (40 / 55 / 35 rows, 4 features) with different means and covariances."""
    rng = np.random.default_rng(random_state)
    sizes, p = (40, 55, 35), 4
    blocks, labels = [], []
    for k, size in enumerate(sizes):
        root = rng.normal(size=(p, p)) + np.eye(p) * (1.0 + k)
        blocks.append(rng.normal(size=(size, p)) @ root + rng.normal(scale=2.0, size=p))
        labels.append(np.full(size, k))
    X = pd.DataFrame(np.vstack(blocks), columns=[f"f{j}" for j in range(p)])
    return X, np.concatenate(labels)


def assert_same(a, b, attrs, rtol=RTOL):
    for name in attrs:
        left = np.asarray(getattr(a, name), dtype=float)
        right = np.asarray(getattr(b, name), dtype=float)
        np.testing.assert_allclose(left, right, rtol=rtol, atol=0, err_msg=name)


def assert_same_condition(a, b, rtol=RTOL):
    assert float(a.condition_number) == pytest.approx(float(b.condition_number), rel=rtol)
    np.testing.assert_allclose(np.asarray(a.indices, float), np.asarray(b.indices, float), rtol=rtol)
    # Proportions in [0, 1]: absolute floor for entries at round-off level.
    np.testing.assert_allclose(
        a.variance_proportions.to_numpy(float), b.variance_proportions.to_numpy(float), rtol=1e-6, atol=1e-10
    )


# --------------------------------------------------------------------------------------------
# Invariance to feature transformations
# --------------------------------------------------------------------------------------------


class TestFeatureTransformInvariance:
    scales = np.array([1e-3, 1.0, 250.0, 4e4])
    shifts = np.array([5.0, -300.0, 0.1, 1e5])

    def test_box_m_per_feature_rescaling(self):
        X, y = invented_classes(1)
        assert_same(box_m(X, y), box_m(X * self.scales, y), BOX_ATTRS)

    def test_box_m_affine_map(self):
        X, y = invented_classes(2)
        rng = np.random.default_rng(12)
        A = rng.normal(size=(4, 4)) + 3 * np.eye(4)
        mapped = pd.DataFrame(X.to_numpy() @ A + self.shifts, columns=X.columns)
        assert_same(box_m(X, y), box_m(mapped, y), BOX_ATTRS)

    def test_wilks_per_feature_rescaling(self):
        X, y = invented_classes(3)
        assert_same(wilks_lambda(X, y), wilks_lambda(X * self.scales, y), WILKS_ATTRS)

    def test_wilks_affine_map(self):
        X, y = invented_classes(4)
        rng = np.random.default_rng(13)
        A = rng.normal(size=(4, 4)) + 3 * np.eye(4)
        mapped = pd.DataFrame(X.to_numpy() @ A + self.shifts, columns=X.columns)
        assert_same(wilks_lambda(X, y), wilks_lambda(mapped, y), WILKS_ATTRS)

    def test_vif_per_feature_rescaling_and_shift(self):
        X, _ = invented_classes(5)
        left, right = vif(X), vif(X * self.scales + self.shifts)
        assert list(left.index) == list(right.index) == list(X.columns)
        np.testing.assert_allclose(left.to_numpy(float), right.to_numpy(float), rtol=RTOL)

    def test_condition_indices_per_feature_rescaling_and_shift(self):
        # The decomposition is of the correlation matrix (centred, unit-variance columns).
        X, _ = invented_classes(6)
        assert_same_condition(condition_indices(X), condition_indices(X * self.scales + self.shifts))

    def test_shrinkage_common_scale_shift_and_rotation(self):
        X, y = invented_classes(7)
        rng = np.random.default_rng(14)
        Q, _ = np.linalg.qr(rng.normal(size=(4, 4)))
        moved = pd.DataFrame(37.5 * X.to_numpy() @ Q + self.shifts, columns=X.columns)
        assert float(shrinkage_intensity(moved, y)) == pytest.approx(float(shrinkage_intensity(X, y)), rel=RTOL)

    def test_shrinkage_uses_features_as_given(self):
        # Contract: intensity for the features as given, not standardized. Blowing up one
        # feature's scale makes the pooled covariance far from a multiple of I, so the
        # intensity must move (here it must fall: the identity target fits worse).
        X, y = invented_classes(8)
        stretched = X.copy()
        stretched["f0"] *= 1e3
        assert float(shrinkage_intensity(stretched, y)) < 0.5 * float(shrinkage_intensity(X, y))


# --------------------------------------------------------------------------------------------
# Row order and class naming
# --------------------------------------------------------------------------------------------


class TestRowOrderAndLabels:
    def _shuffled(self, X, y, seed):
        order = np.random.default_rng(seed).permutation(len(y))
        return X.iloc[order].reset_index(drop=True), y[order]

    def test_row_shuffle(self):
        X, y = invented_classes(9)
        Xs, ys = self._shuffled(X, y, 21)
        assert_same(box_m(X, y), box_m(Xs, ys), BOX_ATTRS)
        assert_same(wilks_lambda(X, y), wilks_lambda(Xs, ys), WILKS_ATTRS)
        np.testing.assert_allclose(vif(X).to_numpy(float), vif(Xs).to_numpy(float), rtol=RTOL)
        assert_same_condition(condition_indices(X), condition_indices(Xs))
        assert float(shrinkage_intensity(Xs, ys)) == pytest.approx(float(shrinkage_intensity(X, y)), rel=RTOL)

    @pytest.mark.parametrize(
        "rename",
        [
            pytest.param({0: "alpha", 1: "beta", 2: "gamma"}, id="strings-same-order"),
            pytest.param({0: "c", 1: "a", 2: "b"}, id="strings-permuted-order"),
            pytest.param({0: 7, 1: -3, 2: 100}, id="ints-permuted-order"),
            pytest.param({0: 2.5, 1: 0.5, 2: 1.5}, id="floats"),
        ],
    )
    def test_class_renaming(self, rename):
        X, y = invented_classes(10)
        renamed = np.array([rename[v] for v in y], dtype=object)
        assert_same(box_m(X, y), box_m(X, renamed), BOX_ATTRS)
        assert_same(wilks_lambda(X, y), wilks_lambda(X, renamed), WILKS_ATTRS)
        assert float(shrinkage_intensity(X, renamed)) == pytest.approx(float(shrinkage_intensity(X, y)), rel=RTOL)

    def test_labels_as_pandas_categorical(self):
        X, y = invented_classes(11)
        labels = pd.Series(pd.Categorical.from_codes(y, categories=["z", "m", "a"]))
        assert_same(box_m(X, y), box_m(X, labels), BOX_ATTRS)
        assert_same(wilks_lambda(X, y), wilks_lambda(X, labels), WILKS_ATTRS)

    def test_array_and_dataframe_give_same_numbers(self):
        X, y = invented_classes(12)
        values = X.to_numpy()
        assert_same(box_m(X, y), box_m(values, y), BOX_ATTRS)
        assert_same(wilks_lambda(X, y), wilks_lambda(values, y), WILKS_ATTRS)
        np.testing.assert_allclose(vif(X).to_numpy(float), vif(values).to_numpy(float), rtol=RTOL)
        assert_same_condition(condition_indices(X), condition_indices(values))


# --------------------------------------------------------------------------------------------
# Structure of the results (definitions in the contract)
# --------------------------------------------------------------------------------------------


class TestResultStructure:
    def test_wilks_directions_and_ranges(self):
        X, y = invented_classes(13)
        r = wilks_lambda(X, y)
        eig = np.asarray(r.eigenvalues, float)
        assert eig.shape == (min(X.shape[1], 3 - 1),)
        assert np.all(np.diff(eig) <= 0) and np.all(eig >= 0)
        cc = np.asarray(r.canonical_correlations, float)
        np.testing.assert_allclose(cc, np.sqrt(eig / (1 + eig)), rtol=RTOL)
        # Lambda = prod 1/(1 + l) when p >= K - 1 (all nonzero eigenvalues are kept).
        assert r.statistic == pytest.approx(np.prod(1 / (1 + eig)), rel=RTOL)
        assert 0 < r.statistic < 1 and 0 <= r.p_value <= 1

    def test_condition_indices_layout(self):
        X, _ = invented_classes(14)
        r = condition_indices(X)
        idx = np.asarray(r.indices, float)
        assert idx.shape == (X.shape[1],)
        assert idx[0] == 1.0 and np.all(np.diff(idx) >= 0)
        assert float(r.condition_number) == pytest.approx(idx[-1], rel=RTOL)
        vp = r.variance_proportions
        assert list(vp.columns) == list(X.columns) and vp.shape == (X.shape[1], X.shape[1])
        np.testing.assert_allclose(vp.sum(axis=0).to_numpy(float), 1.0, rtol=1e-10)
        assert (vp.to_numpy(float) >= 0).all()

    @pytest.mark.parametrize("seed", [0, 1, 2])
    @pytest.mark.parametrize("rows_per_class", [4, 10, 200])
    def test_shrinkage_in_unit_interval(self, seed, rows_per_class):
        # Includes p = 30 > N - K (pooled covariance singular), where the intensity approaches 1.
        rng = np.random.default_rng(seed)
        X = rng.normal(size=(3 * rows_per_class, 30)) * rng.uniform(0.5, 2.0, size=30)
        y = np.repeat([0, 1, 2], rows_per_class)
        value = float(shrinkage_intensity(X, y))
        assert 0.0 <= value <= 1.0

    def test_vif_exact_collinearity_is_infinite(self):
        # Integer data so that f2 = f0 + f1 holds exactly in floating point.
        rng = np.random.default_rng(15)
        base = rng.integers(-50, 50, size=(120, 2)).astype(float)
        other = rng.integers(-50, 50, size=120).astype(float)
        X = pd.DataFrame({"f0": base[:, 0], "f1": base[:, 1], "f2": base.sum(axis=1), "f3": other})
        result = vif(X)
        assert np.isposinf(result[["f0", "f1", "f2"]].to_numpy(float)).all()
        # f3 is not part of the dependency: its VIF is the ordinary 1/(1 - R^2) of f3 on the
        # others with an intercept (least squares by lstsq, which handles the rank deficiency).
        design = np.column_stack([np.ones(120), X[["f0", "f1", "f2"]].to_numpy()])
        coef, *_ = np.linalg.lstsq(design, other, rcond=None)
        resid = other - design @ coef
        r2 = 1 - resid @ resid / np.sum((other - other.mean()) ** 2)
        assert np.isfinite(result["f3"])
        assert result["f3"] == pytest.approx(1 / (1 - r2), rel=1e-6)


# --------------------------------------------------------------------------------------------
# Bad input
# --------------------------------------------------------------------------------------------

WITH_LABELS = [
    pytest.param(box_m, id="box_m"),
    pytest.param(wilks_lambda, id="wilks_lambda"),
    pytest.param(shrinkage_intensity, id="shrinkage_intensity"),
]
ALL_FUNCTIONS = [
    *WITH_LABELS,
    pytest.param(lambda X, y: vif(X), id="vif"),
    pytest.param(lambda X, y: condition_indices(X), id="condition_indices"),
]


class TestBadInput:
    def test_data_error_is_value_error(self):
        assert issubclass(DataError, ValueError)

    @pytest.mark.parametrize("func", ALL_FUNCTIONS)
    def test_non_finite_values_name_the_column(self, func):
        X, y = invented_classes(16)
        X.loc[7, "f2"] = np.nan
        with pytest.raises(DataError, match="f2"):
            func(X, y)
        X.loc[7, "f2"] = np.inf
        with pytest.raises(DataError, match="f2"):
            func(X, y)

    @pytest.mark.parametrize("func", ALL_FUNCTIONS)
    def test_non_numeric_column_is_named(self, func):
        X, y = invented_classes(17)
        X["colour"] = "red"
        with pytest.raises(DataError, match="colour"):
            func(X, y)

    @pytest.mark.parametrize("func", WITH_LABELS)
    def test_label_length_mismatch(self, func):
        X, y = invented_classes(18)
        with pytest.raises(DataError):
            func(X, y[:-3])

    @pytest.mark.parametrize("func", WITH_LABELS)
    def test_missing_label(self, func):
        X, y = invented_classes(19)
        labels = y.astype(object)
        labels[5] = None
        with pytest.raises(DataError):
            func(X, labels)

    @pytest.mark.parametrize(
        "func",
        [pytest.param(vif, id="vif"), pytest.param(condition_indices, id="condition_indices")],
    )
    def test_constant_column_is_named(self, func):
        # A constant column has no correlation with anything: VIF and the correlation-matrix
        # decomposition are undefined, and the message must say which column.
        X, _ = invented_classes(22)
        X["flat"] = 3.0
        with pytest.raises(DataError, match="flat"):
            func(X)

    @pytest.mark.parametrize("func", [pytest.param(box_m, id="box_m"), pytest.param(wilks_lambda, id="wilks_lambda")])
    def test_constant_column_makes_determinants_undefined(self, func):
        # Singular pooled (and class) covariance: ln det is -inf, so M and Lambda are undefined.
        X, y = invented_classes(23)
        X["flat"] = 3.0
        with pytest.raises(DataError):
            func(X, y)

    @pytest.mark.parametrize("func", [pytest.param(box_m, id="box_m"), pytest.param(wilks_lambda, id="wilks_lambda")])
    def test_single_class(self, func):
        X, _ = invented_classes(20)
        with pytest.raises(DataError):
            func(X, np.zeros(len(X), dtype=int))

    @pytest.mark.parametrize("tiny_rows", [1, 2, 4])
    def test_box_m_class_too_small_is_reported_not_crashed(self, tiny_rows):
        # Contract: a class whose covariance is singular (n_k <= p; here p = 4) cannot enter Box's M
        # and is reported, not a crash. Exactly two outcomes are accepted: a DataError whose message
        # names the class, or a result whose statistic (and hence p-values) is NaN. A numpy
        # RuntimeWarning leaking out counts as a failure (turned into an error here).
        X, y = invented_classes(21)
        labels = np.where(y == 0, "big_one", np.where(y == 1, "big_two", "tiny_class")).astype(object)
        keep = np.ones(len(y), dtype=bool)
        keep[np.flatnonzero(labels == "tiny_class")[tiny_rows:]] = False
        X, labels = X[keep].reset_index(drop=True), labels[keep]
        with warnings.catch_warnings():
            warnings.simplefilter("error", RuntimeWarning)
            try:
                result = box_m(X, labels)
            except DataError as exc:
                assert "tiny_class" in str(exc), f"DataError does not name the class: {exc}"
                return
        # Reached only if no DataError was raised: then the result must say "undefined".
        assert np.isnan(result.statistic)
        assert np.isnan(result.p_value)
        assert np.isnan(result.p_value_f)
