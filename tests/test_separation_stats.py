"""Tests of discaudit.stats.separation.detect_separation.

Outside references: statsmodels' Logit (PerfectSeparationWarning / PerfectSeparationError under
complete separation, a clean fit on overlapping data), the iris data shipped with scikit-learn
(its bundled description states that one class is linearly separable from the other two and
that those two are not linearly separable from each other), and constructed data whose
separation is known by construction. Every reported hyperplane is also verified as a
certificate on the raw data.
"""

from __future__ import annotations

import warnings

import numpy as np
import pandas as pd
import pytest
from sklearn.datasets import load_iris

from discaudit.errors import DataError
from discaudit.stats.separation import detect_separation

sm = pytest.importorskip("statsmodels.api")
from statsmodels.tools.sm_exceptions import (
    ConvergenceWarning,
    PerfectSeparationError,
    PerfectSeparationWarning,
)


def _values(X, comparison) -> np.ndarray:
    """Signed hyperplane values sum_j c_j x_j + b of the reported separation, on raw X."""
    names = list(comparison.coefficients)
    coef = np.array([comparison.coefficients[k] for k in names])
    return np.asarray(X, dtype=float) @ coef + comparison.intercept


def _statsmodels_flags_separation(X: np.ndarray, y01: np.ndarray) -> bool:
    """True if statsmodels' Logit raises or warns about perfect separation on these data."""
    with warnings.catch_warnings(record=True) as caught:
        warnings.simplefilter("always")
        try:
            sm.Logit(y01, sm.add_constant(X)).fit(disp=0, maxiter=200)
        except PerfectSeparationError:
            return True
    return any(issubclass(w.category, PerfectSeparationWarning) for w in caught)


def _two_clusters(shift: float, n: int = 60, seed: int = 0) -> tuple[np.ndarray, np.ndarray]:
    """Invented data: two Gaussian clouds in 3 dimensions, the second moved along (1, 1, 0)."""
    rng = np.random.default_rng(seed)
    X = rng.normal(size=(2 * n, 3))
    X[n:, :2] += shift
    return X, np.repeat([0, 1], n)


class TestConstructed:
    def test_complete_separation_and_its_certificate(self):
        X, y = _two_clusters(shift=8.0)
        res = detect_separation(X, y)
        (c,) = res.comparisons
        assert (c.label, c.versus, c.kind) == (1, (0,), "complete")
        assert res.any_complete and not res.any_quasi_complete
        v = _values(X, c)
        assert np.all(v[y == 1] > 0) and np.all(v[y == 0] < 0)
        assert c.boundary_rows == () and c.margin > 0
        assert not c.subsampled and c.n_used == 120
        assert np.linalg.norm(list(c.direction.values())) == pytest.approx(1.0)
        assert set(c.separating_features) <= {"x0", "x1", "x2"} and c.separating_features

    def test_quasi_complete_overlap_only_on_a_line(self):
        # Class 1 lies in x0 > 0, class 0 in x0 < 0, and both classes have points on the line
        # x0 = 0 where they interleave along x1 (1 at x1 in {0, 2}, 0 at x1 = 1), so no tilted
        # line separates them: quasi-complete, with exactly the three line points on the boundary.
        rng = np.random.default_rng(1)
        right = np.column_stack([rng.uniform(0.5, 3, 20), rng.normal(size=20)])
        left = np.column_stack([rng.uniform(-3, -0.5, 20), rng.normal(size=20)])
        line = np.array([[0.0, 0.0], [0.0, 2.0], [0.0, 1.0]])
        X = np.vstack([right, left, line])
        y = np.r_[np.ones(20), np.zeros(20), 1, 1, 0]
        (c,) = detect_separation(X, y).comparisons
        assert c.kind == "quasi_complete"
        assert c.boundary_rows == (40, 41, 42) and c.n_boundary == 3
        assert c.separating_features == ("x0",)
        v = _values(X, c)
        assert np.allclose(v[40:], 0.0, atol=1e-7)
        assert np.all(v[:20] > 0) and np.all(v[20:40] < 0)

    def test_quasi_complete_binary_feature(self):
        # The classic case: a binary feature that equals 1 only in class "yes"; where it is 0 both
        # classes occur and overlap in the continuous feature.
        rng = np.random.default_rng(2)
        flag = np.r_[np.ones(25), np.zeros(75)]
        label = np.where(flag == 1, "yes", np.where(rng.random(100) < 0.5, "yes", "no"))
        X = pd.DataFrame({"flag": flag, "score": rng.normal(size=100)})
        (c,) = detect_separation(X, label).comparisons
        assert (c.label, c.kind, c.separating_features) == ("yes", "quasi_complete", ("flag",))
        assert c.boundary_rows == tuple(range(25, 100))
        # statsmodels cannot fit either: the coefficient of `flag` diverges (it warns).
        with warnings.catch_warnings(record=True) as caught:
            warnings.simplefilter("always")
            fit = sm.Logit((label == "yes").astype(float), sm.add_constant(X)).fit(disp=0, maxiter=100)
        assert any(issubclass(w.category, (ConvergenceWarning, PerfectSeparationWarning)) for w in caught)
        assert abs(fit.params["flag"]) > 10

    def test_overlapping_classes(self):
        X, y = _two_clusters(shift=1.0)
        res = detect_separation(X, y)
        (c,) = res.comparisons
        assert c.kind == "none" and not res.any_separation
        assert c.direction is None and c.coefficients is None and c.boundary_rows == ()

    def test_collinear_features_are_not_mistaken_for_separation(self):
        # A duplicated column and a constant column give directions with a_i' beta = 0 for all
        # rows; that is rank deficiency, not separation.
        X, y = _two_clusters(shift=1.0)
        X = np.column_stack([X, X[:, 0] - X[:, 1], np.full(len(y), 4.0)])
        res = detect_separation(X, y)
        assert res.comparisons[0].kind == "none"
        assert any("constant" in note for note in res.notes)

    def test_row_order_and_feature_scale_do_not_change_the_kind(self):
        X, y = _two_clusters(shift=8.0, seed=3)
        perm = np.random.default_rng(3).permutation(len(y))
        scaled = X * [1e-4, 1e5, 1.0] + [1e6, -3.0, 0.0]
        assert detect_separation(X[perm], y[perm]).comparisons[0].kind == "complete"
        c = detect_separation(scaled, y).comparisons[0]
        assert c.kind == "complete"
        v = _values(scaled, c)
        assert np.all(v[y == 1] > 0) and np.all(v[y == 0] < 0)


class TestAgainstStatsmodels:
    @pytest.mark.parametrize("seed", [0, 1, 2])
    def test_complete_separation_flagged_by_both(self, seed):
        X, y = _two_clusters(shift=7.0, n=40, seed=seed)
        assert detect_separation(X, y).any_complete
        assert _statsmodels_flags_separation(X, y)

    @pytest.mark.parametrize("seed", [0, 1, 2])
    def test_overlap_flagged_by_neither(self, seed):
        X, y = _two_clusters(shift=1.0, n=40, seed=seed)
        assert not detect_separation(X, y).any_separation
        assert not _statsmodels_flags_separation(X, y)


class TestIris:
    def test_one_versus_rest(self):
        # Well known, and stated in the description scikit-learn ships with the data: setosa is
        # linearly separable from the other two species, versicolor and virginica are not
        # linearly separable from each other (hence neither is separable from the rest).
        data = load_iris(as_frame=True)
        species = data.target.map(dict(enumerate(data.target_names)))
        res = detect_separation(data.data, species)
        kinds = {c.label: c.kind for c in res.comparisons}
        assert kinds == {"setosa": "complete", "versicolor": "none", "virginica": "none"}
        setosa = res.comparisons[0]
        assert setosa.versus == ("versicolor", "virginica")
        v = _values(data.data, setosa)
        assert np.all(v[species == "setosa"] > 0) and np.all(v[species != "setosa"] < 0)
        assert set(setosa.direction) == set(data.data.columns)

    def test_setosa_against_statsmodels(self):
        data = load_iris()
        setosa = (data.target == 0).astype(float)
        assert _statsmodels_flags_separation(data.data, setosa)
        assert detect_separation(data.data, setosa).comparisons[0].kind == "complete"

    def test_setosa_on_sepal_measurements_alone(self):
        # Setosa is also linearly separable on the two sepal measurements, with a thin gap.
        # statsmodels' heuristic check misses this one (it only reports non-convergence), so
        # the reported hyperplane is verified directly as a certificate.
        data = load_iris()
        X, setosa = data.data[:, :2], data.target == 0
        c = detect_separation(X, setosa).comparisons[0]
        assert c.kind == "complete"
        v = _values(X, c)
        assert np.all(v[setosa] > 0) and np.all(v[~setosa] < 0)


class TestLargeData:
    def test_overlap_decided_on_a_subsample(self):
        rng = np.random.default_rng(4)
        X = rng.normal(size=(30_000, 6))
        y = (X[:, 0] + rng.normal(size=30_000) > 0).astype(int)
        res = detect_separation(X, y, max_rows=800, random_state=9)
        (c,) = res.comparisons
        assert c.kind == "none" and c.subsampled
        assert c.n_used == 800 < res.n_total == 30_000
        assert res.random_state == 9
        assert detect_separation(X, y, max_rows=800, random_state=9) == res

    def test_subsample_shortcut_with_collinear_features(self):
        rng = np.random.default_rng(5)
        X = rng.normal(size=(20_000, 3))
        X = np.column_stack([X, X[:, 0] + X[:, 1]])
        y = (X[:, 2] + rng.normal(size=20_000) > 0).astype(int)
        (c,) = detect_separation(X, y, max_rows=500, random_state=1).comparisons
        assert c.kind == "none" and c.n_used == 500

    def test_separated_large_data_use_all_rows(self):
        X, y = _two_clusters(shift=9.0, n=3000, seed=6)
        res = detect_separation(X, y, max_rows=300, random_state=2)
        (c,) = res.comparisons
        assert c.kind == "complete" and c.n_used <= 6000
        v = _values(X, c)
        assert np.all(v[y == 1] > 0) and np.all(v[y == 0] < 0)

    def test_rare_class_is_kept_in_the_subsample(self):
        # 30 rows of class 1 among 20,000: the stratified subsample keeps all of them, so the
        # overlap is proven without solving on all rows.
        rng = np.random.default_rng(7)
        X = rng.normal(size=(20_000, 2))
        y = np.zeros(20_000, dtype=int)
        y[rng.choice(20_000, 30, replace=False)] = 1
        (c,) = detect_separation(X, y, max_rows=400, random_state=3).comparisons
        assert c.kind == "none" and c.subsampled and c.n_used == 400

    def test_unseeded_subsample_records_its_seed(self):
        rng = np.random.default_rng(8)
        X = rng.normal(size=(5000, 2))
        y = rng.integers(0, 2, 5000)
        res = detect_separation(X, y, max_rows=200)
        assert isinstance(res.random_state, int)
        assert detect_separation(X, y, max_rows=200, random_state=res.random_state) == res


class TestBadInput:
    def test_single_class(self):
        with pytest.raises(DataError, match="single class"):
            detect_separation(np.arange(10.0)[:, None], ["a"] * 10)

    def test_length_mismatch(self):
        with pytest.raises(DataError, match="9 labels but X has 10 rows"):
            detect_separation(np.arange(10.0)[:, None], [0, 1] * 4 + [0])

    def test_bad_max_rows(self):
        with pytest.raises(DataError, match="max_rows"):
            detect_separation(np.arange(10.0)[:, None], [0, 1] * 5, max_rows=1)

    def test_only_constant_features(self):
        res = detect_separation(np.ones((10, 2)), [0, 1] * 5)
        assert res.comparisons[0].kind == "none"

    def test_moments_of_other_rows(self):
        from discaudit.stats.moments import ClassMoments

        X = np.arange(20.0).reshape(10, 2)
        other = ClassMoments.from_arrays(X[:8], np.array([0, 1] * 4), (0, 1))
        with pytest.raises(DataError, match=r"moments count \[4, 4\] rows per class over 2 features"):
            detect_separation(X, [0, 1] * 5, moments=other)


class TestGivenMoments:
    """Moments passed in (an audit's) give the answer computed from the rows themselves, and the total
    mean and standard deviation they give (W + B) are numpy's over all rows."""

    def test_standardization_is_numpys(self):
        import discaudit.stats.separation as separation
        from discaudit.stats.moments import ClassMoments

        rng = np.random.default_rng(12)
        X = rng.normal(size=(1000, 3)) * [1.0, 1e3, 1e-3] + [5.0, -2e4, 0.0]
        y = rng.integers(0, 3, 1000)
        space = separation._FeatureSpace(X, ["a", "b", "c"], ClassMoments.from_arrays(X, y, (0, 1, 2)))
        np.testing.assert_allclose(space.mean, X.mean(axis=0), rtol=1e-13)
        np.testing.assert_allclose(space.sd, X.std(axis=0), rtol=1e-12)

    @pytest.mark.parametrize("shift", [0.5, 3.0, 12.0])
    def test_same_answer_as_without(self, shift):
        from discaudit.stats.moments import ClassMoments

        rng = np.random.default_rng(11)
        X = np.vstack([rng.normal(size=(300, 4)), rng.normal(size=(200, 4)) + [shift, 0, 0, 0]])
        X[:, 3] = 2.0  # a constant feature, screened from the ranges of the moments
        y = np.repeat([0, 1], [300, 200])
        given = detect_separation(X, y, moments=ClassMoments.from_arrays(X, y, (0, 1)), random_state=0)
        own = detect_separation(X, y, random_state=0)
        assert [(c.kind, c.separating_features, c.n_used) for c in given.comparisons] == [
            (c.kind, c.separating_features, c.n_used) for c in own.comparisons
        ]
        assert given.notes == own.notes == ("constant features ignored: x3",)


class TestSubsampleSoundness:
    def test_rare_indicator_missing_from_the_subsample(self):
        # An indicator that is 1 on only three rows, all of class 1, quasi-separates the classes.
        # A subsample that misses those rows has a constant column (rank deficient) and no
        # separation; the shortcut must not conclude "none" from it.
        rng = np.random.default_rng(10)
        n = 8000
        X = np.column_stack([rng.normal(size=n), np.zeros(n)])
        y = np.repeat([0, 1], n // 2)
        flagged = np.array([n - 3, n - 2, n - 1])
        X[flagged, 1] = 1.0
        (c,) = detect_separation(X, y, max_rows=300, random_state=0).comparisons
        assert c.kind == "quasi_complete"
        assert c.separating_features == ("x1",)
        assert c.boundary_rows == tuple(range(n - 3))
        v = _values(X, c)
        assert np.all(v[flagged] > 0) and np.allclose(v[: n - 3], 0.0, atol=1e-9)

    @pytest.mark.parametrize("seed", range(24))
    def test_working_set_agrees_with_the_direct_program(self, seed):
        # Integer-grid data (many ties and rows on the boundary) labelled to be completely
        # separated, quasi-completely separated or overlapping. The answer from a tiny starting
        # subsample grown by the certification rules must equal the one-shot LP on all rows, and
        # the reported hyperplane must be a valid certificate on the raw data.
        rng = np.random.default_rng(seed)
        X = rng.integers(-3, 4, size=(150, 3)).astype(float)
        score = X[:, 0] + X[:, 1]
        if seed % 3 == 0:
            y = (score > 0).astype(int)
        elif seed % 3 == 1:
            y = np.where(score > 0, 1, np.where(score < 0, 0, rng.integers(0, 2, 150)))
        else:
            y = (X[:, 0] + rng.normal(size=150) > 0).astype(int)
        direct = detect_separation(X, y).comparisons[0]
        grown = detect_separation(X, y, max_rows=20, random_state=seed).comparisons[0]
        assert (grown.kind, grown.boundary_rows) == (direct.kind, direct.boundary_rows)
        if grown.kind != "none":
            v = _values(X, grown)
            strict = np.setdiff1d(np.arange(150), grown.boundary_rows)
            sign = np.where(y == 1, 1.0, -1.0)
            assert np.all(sign[strict] * v[strict] > 0)
            assert np.allclose(v[list(grown.boundary_rows)], 0.0, atol=1e-8)


def _block_cases() -> dict[str, tuple[np.ndarray, np.ndarray, int]]:
    """Invented, seeded data (X, y, max_rows) that take every blocked pass over the rows."""
    rng = np.random.default_rng(11)
    cases = {}
    X, y = _two_clusters(shift=9.0, n=1500, seed=11)
    cases["complete"] = (X, y, 300)
    n = 4000
    X = np.column_stack([rng.normal(size=n), np.zeros(n)])
    X[n - 3 :, 1] = 1.0  # quasi-complete: an indicator on three rows of class 1 only
    cases["quasi_rare_indicator"] = (X, np.repeat([0, 1], n // 2), 300)
    X = rng.integers(-3, 4, size=(3000, 3)).astype(float)
    score = X[:, 0] + X[:, 1]
    cases["quasi_ties"] = (X, np.where(score > 0, 1, np.where(score < 0, 0, rng.integers(0, 2, 3000))), 50)
    Z = rng.normal(size=(3000, 4))
    X = np.column_stack([Z, Z[:, 0] + Z[:, 1], 2.0 * Z[:, 2] - Z[:, 3]])  # two exact dependencies
    cases["collinear_k3"] = (X, np.where(Z[:, 0] > 1.0, 2, (Z[:, 1] + rng.normal(size=3000) > 0).astype(int)), 200)
    return cases


class TestBlocks:
    """Passes over all rows run on blocks of rows; the answer must not depend on the block size."""

    @pytest.mark.parametrize("name", list(_block_cases()))
    @pytest.mark.parametrize("block", [7, 64])
    def test_block_size_does_not_change_the_answer(self, monkeypatch, name, block):
        # Property: the blocks only split sums and products row-wise, so kinds, boundary rows,
        # working-set sizes, dropped features and the hyperplane are those of the default size.
        import discaudit.stats.separation as separation

        X, y, max_rows = _block_cases()[name]
        default = detect_separation(X, y, max_rows=max_rows, random_state=5)
        monkeypatch.setattr(separation, "ROW_BLOCK", block)
        small = detect_separation(X, y, max_rows=max_rows, random_state=5)
        assert small.notes == default.notes
        assert len(small.comparisons) == len(default.comparisons)
        for s, d in zip(small.comparisons, default.comparisons):
            assert (s.kind, s.boundary_rows, s.n_used, s.separating_features) == (
                d.kind,
                d.boundary_rows,
                d.n_used,
                d.separating_features,
            )
            if d.kind != "none":
                assert list(s.direction.values()) == pytest.approx(list(d.direction.values()), abs=1e-9)
        expected = {
            "complete": ["complete"],
            "quasi_rare_indicator": ["quasi_complete"],
            "quasi_ties": ["quasi_complete"],
            "collinear_k3": ["none", "none", "complete"],  # class 2 is x0 > 1
        }
        assert [c.kind for c in default.comparisons] == expected[name]
        assert all(c.subsampled for c in default.comparisons)

    def test_collinear_features_found_by_blocks(self, monkeypatch):
        # Two exact dependencies among six features: two features are named, the others have
        # full rank (checked with numpy's SVD-based matrix_rank), and neither the order of the
        # rows nor the block size changes which ones.
        import discaudit.stats.separation as separation

        X, y, _ = _block_cases()["collinear_k3"]
        res = detect_separation(X, y)
        (note,) = res.notes
        dropped = note.split(": ")[1].split(", ")
        assert len(dropped) == 2
        kept = [j for j in range(X.shape[1]) if f"x{j}" not in dropped]
        assert np.linalg.matrix_rank(X[:, kept] - X[:, kept].mean(axis=0)) == 4
        perm = np.random.default_rng(12).permutation(len(y))
        assert detect_separation(X[perm], y[perm]).notes == res.notes
        monkeypatch.setattr(separation, "ROW_BLOCK", 5)
        assert detect_separation(X, y).notes == res.notes

    @pytest.mark.parametrize(("noise", "dropped"), [(1e-7, False), (1e-12, True)])
    def test_near_copy_is_dropped_only_below_the_rank_tolerance(self, noise, dropped):
        # A copy of x0 plus noise of relative size `noise`: its pivot, relative to the first, is
        # about `noise`, so it is dropped exactly when that is below 1e-9. Both cases fail the
        # cross-product screen and are decided by the blocked QR.
        rng = np.random.default_rng(13)
        Z = rng.normal(size=(20_000, 3))
        X = np.column_stack([Z, Z[:, 0] + noise * rng.normal(size=20_000)])
        y = (Z[:, 1] + rng.normal(size=20_000) > 0).astype(int)
        notes = detect_separation(X, y, random_state=0).notes
        assert notes == (("features that are linear combinations of others (to 1e-9) ignored: x3",) if dropped else ())

    def test_no_standardized_copy_of_the_data(self):
        # Peak memory traced while the detection runs (numpy reports its buffers to tracemalloc)
        # stays below one copy of the input (about 0.7 here, mostly input checks and one block of
        # the standardizing sums; a standardized copy plus the signed design was over 3).
        import tracemalloc

        rng = np.random.default_rng(14)
        X = rng.normal(size=(200_000, 40))
        y = (X[:, 0] + rng.normal(size=200_000) > 0).astype(int)
        tracemalloc.start()
        try:
            detect_separation(X, y, random_state=0)
            _, peak = tracemalloc.get_traced_memory()
        finally:
            tracemalloc.stop()
        assert peak < X.nbytes


def _overlap_weights(separation, A: np.ndarray) -> np.ndarray | None:
    """The overlap certificate's weights alone (the module's _certificate, separation not sought)."""
    found = separation._certificate(A, lambda: 1.0, separation=False)
    return None if found is None else found[1]


def _assert_same_but_working_set(a, b) -> None:
    """Two results agree except for the working sets' sizes (n_used, subsampled) and rounding.

    The direction LP's equalities come from a basis of the boundary rows' span, which another
    working set gives in other rounding: its hyperplane agrees to 1e-9, not bit for bit.
    """
    assert (a.classes, a.feature_names, a.n_total, a.max_rows, a.notes) == (
        b.classes, b.feature_names, b.n_total, b.max_rows, b.notes
    )  # fmt: skip
    assert (a.any_complete, a.any_quasi_complete) == (b.any_complete, b.any_quasi_complete)
    for c, d in zip(a.comparisons, b.comparisons, strict=True):
        assert (c.label, c.versus, c.kind, c.separating_features, c.boundary_rows) == (
            d.label, d.versus, d.kind, d.separating_features, d.boundary_rows
        )  # fmt: skip
        if c.direction is None:
            assert d.direction is None
            continue
        assert c.direction == pytest.approx(d.direction, abs=1e-9)
        assert c.coefficients == pytest.approx(d.coefficients, rel=1e-9, abs=1e-9)
        assert (c.intercept, c.margin) == pytest.approx((d.intercept, d.margin), rel=1e-9, abs=1e-9)


def _signed_design(X: np.ndarray, y: np.ndarray, positive_class) -> np.ndarray:
    """Rows a_i = s_i (z_i, 1) of the module, for all rows of one comparison."""
    import discaudit.stats.separation as separation
    from discaudit.stats.moments import ClassMoments

    values = np.asarray(X, dtype=float)
    side = (np.asarray(y) == positive_class).astype(np.intp)
    moments = ClassMoments.from_arrays(values, side, (0, 1))
    space = separation._FeatureSpace(values, [f"x{j}" for j in range(X.shape[1])], moments)
    sign = np.where(y == positive_class, 1.0, -1.0)
    return separation._SignedRows(space, sign).take(np.arange(len(y)))


def _separable_case(seed: int) -> tuple[np.ndarray, np.ndarray]:
    """Invented data separable by construction: completely (a random hyperplane through a
    Gaussian cloud, so some rows lie very close to it) or quasi-completely (integer grid, rows on
    the hyperplane x0 + x1 = 0 labelled at random)."""
    rng = np.random.default_rng(seed)
    if seed % 2 == 0:
        p = 2 + seed % 5
        X = rng.normal(size=(60 + 20 * (seed % 7), p))
        u = rng.normal(size=p)
        y = (X @ u > rng.normal(scale=0.3)).astype(int)
    else:
        X = rng.integers(-3, 4, size=(120, 3)).astype(float)
        score = X[:, 0] + X[:, 1]
        y = np.where(score > 0, 1, np.where(score < 0, 0, rng.integers(0, 2, 120)))
    return X, y


def _overlapping_case(seed: int, n: int = 400) -> tuple[np.ndarray, np.ndarray]:
    """Invented data: Gaussian classes (K = 2 or 3) with shifted means that overlap."""
    rng = np.random.default_rng(seed)
    K = 2 + seed % 2
    p = 2 + seed % 6
    y = rng.integers(0, K, size=n)
    X = rng.normal(size=(n, p)) + 0.75 * rng.normal(size=(K, p))[y]
    return X, y


class TestOverlapCertificate:
    """The certificate of overlap tried before each detection LP (Stiemke's alternative)."""

    @pytest.mark.parametrize("steps", [None, 60])
    @pytest.mark.parametrize("seed", range(80))
    def test_never_fires_on_separable_data(self, monkeypatch, seed, steps):
        # Property: a certificate lambda > 0 with A' lambda = 0 cannot exist when some beta gives
        # A beta >= 0, A beta != 0 (Stiemke 1915). The LP's reported hyperplane confirms, on the
        # raw data, that each case is separated. With 60 Newton steps the weights of the strict
        # rows of the quasi-complete cases fall to the rounding level and the candidate is
        # positive in floating point: only the rounding bound refuses it there (without that
        # bound it fires on 9 of these 80 seeds).
        import discaudit.stats.separation as separation

        if steps is not None:
            monkeypatch.setattr(separation, "_CERTIFICATE_STEPS", steps)
        X, y = _separable_case(seed)
        (c,) = detect_separation(X, y, certify_overlap=False).comparisons
        assert c.kind in ("complete", "quasi_complete")
        v = _values(X, c)
        sign = np.where(y == 1, 1.0, -1.0)
        assert np.all(sign * v > -1e-8)
        assert _overlap_weights(separation, _signed_design(X, y, 1)) is None

    @pytest.mark.parametrize("seed", range(12))
    def test_weights_prove_overlap(self, seed):
        # The weights are positive, A' lambda = 0 to rounding, and they give one point that is a
        # positive convex combination of the rows of either side (checked on the raw data).
        # statsmodels' Logit, whose MLE exists exactly under overlap (Albert & Anderson 1984),
        # fits the same comparison without a perfect-separation warning.
        import discaudit.stats.separation as separation

        X, y = _overlapping_case(seed)
        positive = y == 0
        A = _signed_design(X, y, 0)
        lam = _overlap_weights(separation, A)
        assert lam is not None
        assert np.all(lam > 0)
        assert np.linalg.norm(A.T @ lam) <= 1e-12 * float(lam @ np.linalg.norm(A, axis=1))
        assert lam[positive].sum() == pytest.approx(lam[~positive].sum(), rel=1e-10)
        point_p = lam[positive] @ X[positive] / lam[positive].sum()
        point_n = lam[~positive] @ X[~positive] / lam[~positive].sum()
        assert point_p == pytest.approx(point_n, abs=1e-9 * np.abs(X).max())
        assert not _statsmodels_flags_separation(X, positive.astype(int))

    def test_first_candidate_is_the_least_squares_fit_of_the_labels(self, monkeypatch):
        # At beta = 0 the candidate weights are (1 - s_i yhat_i) / 2, yhat the least-squares fit
        # of the +-1 labels on (x, 1) (numpy's lstsq on the raw data; the fit is affine
        # invariant). It holds when no s_i yhat_i reaches 1, and is refused when one does.
        import discaudit.stats.separation as separation

        monkeypatch.setattr(separation, "_CERTIFICATE_STEPS", 1)
        rng = np.random.default_rng(40)
        for shift, holds in [(0.4, True), (4.0, False)]:
            X = rng.normal(size=(300, 3))
            y = np.repeat([0, 1], 150)
            X[y == 1, 0] += shift
            s = np.where(y == 1, 1.0, -1.0)
            design = np.column_stack([X, np.ones(300)])
            yhat = design @ np.linalg.lstsq(design, s, rcond=None)[0]
            assert (np.max(s * yhat) < 1) == holds
            lam = _overlap_weights(separation, _signed_design(X, y, 1))
            if holds:
                assert lam == pytest.approx((1 - s * yhat) / 2, abs=1e-12)
            else:
                assert lam is None

    @pytest.mark.parametrize("seed", range(40))
    def test_results_identical_with_and_without(self, monkeypatch, seed):
        # Property: the certificate only skips programs whose answer it has proven, so every
        # field of the result is the same. Cases: overlapping or separable, K = 2 or 3, all rows
        # or a subsample grown from max_rows = 60.
        import discaudit.stats.separation as separation

        X, y = _overlapping_case(seed, n=300) if seed % 4 < 2 else _separable_case(seed)
        max_rows = 60 if seed % 2 else 2000
        fired = []
        original = separation._certificate

        def counting(A, row_norm, **kinds):
            found = original(A, row_norm, **kinds)
            fired.append(found is not None and found[0] == "overlap")
            return found

        monkeypatch.setattr(separation, "_certificate", counting)
        with_it = detect_separation(X, y, max_rows=max_rows, random_state=seed)
        without = detect_separation(
            X, y, max_rows=max_rows, random_state=seed, certify_overlap=False, certify_separation=False
        )
        # A separated subsample proven by the separation certificate instead of a program can grow
        # into a different working set (n_used); nothing else differs.
        _assert_same_but_working_set(with_it, without)
        none = sum(c.kind == "none" for c in with_it.comparisons)
        assert sum(fired) <= none  # it can decide only "none", once per comparison
        if seed % 4 < 2 and max_rows == 2000:
            assert sum(fired) == none == len(with_it.comparisons)  # overlapping Gaussian classes
        only_overlap = detect_separation(X, y, max_rows=max_rows, random_state=seed, certify_separation=False)
        assert only_overlap == without  # the overlap certificate alone changes nothing, n_used included

    def test_no_program_runs_when_every_comparison_is_certified(self, monkeypatch):
        # Benchmark-like overlapping classes (K = 3, subsampled): the LP is never called.
        import discaudit.stats.separation as separation

        def no_lp(*args, **kwargs):
            raise AssertionError("a linear program ran")

        X, y = _overlapping_case(3, n=5000)
        monkeypatch.setattr(separation, "_strict_lp", no_lp)
        res = detect_separation(X, y, max_rows=500, random_state=0)
        assert [c.kind for c in res.comparisons] == ["none"] * 3
        assert all(c.n_used == 500 and c.subsampled for c in res.comparisons)


class TestSeparationCertificate:
    """The Newton iterate that proves a working set strictly separated, in place of the detection LP."""

    @pytest.mark.parametrize("seed", range(40))
    def test_never_fires_on_overlapping_data(self, seed):
        # Property: a beta with a_i' beta > 0 on every row cannot exist when the classes overlap.
        # statsmodels' Logit, whose MLE exists exactly under overlap (Albert & Anderson 1984),
        # confirms each case overlaps.
        import discaudit.stats.separation as separation

        X, y = _overlapping_case(seed)
        positive = (y == 0).astype(int)
        assert not _statsmodels_flags_separation(X, positive)
        A = _signed_design(X, y, 0)
        found = separation._certificate(A, lambda: float(np.linalg.norm(A, axis=1).max()), overlap=False)
        assert found is None

    @pytest.mark.parametrize("seed", range(0, 40, 2))
    def test_a_proof_separates_every_row_of_the_raw_data(self, seed):
        # Completely separable invented cases (a random hyperplane through a Gaussian cloud): when
        # the certificate fires, its beta, taken back to the raw features, puts every row of each
        # side strictly on its own side (checked with numpy on the raw data).
        import discaudit.stats.separation as separation

        X, y = _separable_case(seed)
        A = _signed_design(X, y, 1)
        found = separation._certificate(A, lambda: float(np.linalg.norm(A, axis=1).max()), overlap=False)
        if found is None:
            return  # not proven in 25 steps: the LP decides (test_results_identical covers that path)
        kind, beta = found
        assert kind == "separated"
        assert np.all(A @ beta > 0)
        z = (X - X.mean(axis=0)) / X.std(axis=0)
        score = z @ beta[:-1] + beta[-1]
        assert np.all(score[y == 1] > 0) and np.all(score[y == 0] < 0)

    @pytest.mark.parametrize("name", ["load_iris", "load_wine", "load_breast_cancer"])
    def test_open_data_need_no_detection_program(self, monkeypatch, name):
        # Open data sets scikit-learn ships: every separated comparison is complete (the LPs without
        # any certificate say so) and is proven without a detection LP; only the direction LP runs,
        # and the results agree with the LP-only ones except for the working set's size.
        import discaudit.stats.separation as separation

        datasets = pytest.importorskip("sklearn.datasets")
        X, y = getattr(datasets, name)(return_X_y=True)
        programs = dict(max_rows=500, random_state=0)
        plain = detect_separation(X, y, certify_overlap=False, certify_separation=False, **programs)
        kinds = {c.kind for c in plain.comparisons}
        assert "complete" in kinds and "quasi_complete" not in kinds
        original = separation._strict_lp
        ran = []
        monkeypatch.setattr(separation, "_strict_lp", lambda A: (ran.append(A.shape), original(A))[1])
        certified = detect_separation(X, y, **programs)
        _assert_same_but_working_set(certified, plain)
        separated = [c for c in plain.comparisons if c.kind != "none"]
        assert len(ran) <= len(plain.comparisons) - len(separated)  # at most the overlapping ones
