"""Per-class moments: agreement with numpy's covariance and exact merging."""

from __future__ import annotations

import numpy as np

from discaudit.stats.moments import ClassMoments


def _data(seed: int = 3) -> tuple[np.ndarray, np.ndarray]:
    rng = np.random.default_rng(seed)
    X = rng.normal(size=(500, 5)) * [1, 10, 100, 1e-3, 1] + [0, 1e6, -3, 0, 5]
    codes = rng.integers(0, 3, 500)
    return X, codes


def test_class_covariances_match_numpy() -> None:
    # Reference: numpy.cov (unbiased) per class.
    X, codes = _data()
    m = ClassMoments.from_arrays(X, codes, ("a", "b", "c"))
    for k in range(3):
        np.testing.assert_allclose(m.class_covariances()[k], np.cov(X[codes == k], rowvar=False), rtol=1e-10)
        np.testing.assert_allclose(m.means[k], X[codes == k].mean(axis=0), rtol=1e-12)
    np.testing.assert_allclose(m.total_covariance, np.cov(X, rowvar=False), rtol=1e-9)


def test_merged_halves_equal_the_whole() -> None:
    X, codes = _data()
    whole = ClassMoments.from_arrays(X, codes, ("a", "b", "c"))
    first = ClassMoments.from_arrays(X[:200], codes[:200], ("a", "b", "c"))
    second = ClassMoments.from_arrays(X[200:], codes[200:], ("a", "b", "c"))
    merged = first.merge(second)
    np.testing.assert_array_equal(merged.counts, whole.counts)
    np.testing.assert_allclose(merged.means, whole.means, rtol=1e-12)
    np.testing.assert_allclose(merged.scatter, whole.scatter, rtol=1e-10)


def test_merge_with_a_class_missing_from_one_part() -> None:
    X, codes = _data()
    part_a = codes != 2
    a = ClassMoments.from_arrays(X[part_a], codes[part_a], ("a", "b", "c")).subset(np.arange(5))
    only_c = ClassMoments.from_arrays(X[~part_a], np.zeros((~part_a).sum(), dtype=np.intp), ("c",))
    merged = a.merge(only_c)
    whole = ClassMoments.from_arrays(X, codes, ("a", "b", "c"))
    assert merged.classes == ("a", "b", "c")
    np.testing.assert_allclose(merged.scatter, whole.scatter, rtol=1e-10)
