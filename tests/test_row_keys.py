"""Row keys: one content hash per row, seeded keys derived from it (``discaudit.stats.row_keys``).

Properties held: keys follow the values, never the position or the class; identical rows share keys
and distinct rows do not (also for structured data: sign flips, small-integer grids, rows that
differ in one bit); the same seed reproduces them and another seed or salt changes them; an exact
shift of a column about its minimum changes nothing; the hashes a :class:`RowHashes` holds are the
ones computed afresh for any rows of its matrix; the O(n) selection of the smallest keys is the
stable sort's. The audit-level consequences (a what-if's capped rows, the canonical order) are
checked for row order, class names and exact shifts.
"""

from __future__ import annotations

import numpy as np
import pytest

from discaudit.config import Config
from discaudit.sources.memory import load
from discaudit.sources.what_if import cap_rows
from discaudit.stats.row_keys import (
    RowHashes,
    content_hashes,
    derive_keys,
    keep_share,
    row_keys,
    smallest_keys,
)
from discaudit.stats.seeds import LOGISTIC_CV, PERFORMANCE_ROWS


@pytest.fixture(scope="module")
def X() -> np.ndarray:
    return np.random.default_rng(0).normal(size=(3000, 6))


class TestContentHashes:
    def test_row_order_does_not_matter(self, X: np.ndarray) -> None:
        order = np.random.default_rng(1).permutation(X.shape[0])
        np.testing.assert_array_equal(content_hashes(X[order]), content_hashes(X)[order])

    def test_identical_rows_share_a_hash_and_minus_zero_is_zero(self, X: np.ndarray) -> None:
        Y = X.copy()
        Y[10] = Y[20]
        Y[5, 3] = 0.0
        Z = Y.copy()
        Z[5, 3] = -0.0
        h = content_hashes(Y)
        assert h[10] == h[20]
        np.testing.assert_array_equal(h, content_hashes(Z))

    def test_distinct_structured_rows_get_distinct_hashes(self) -> None:
        grid = np.stack(np.meshgrid(*[np.arange(-4, 5.0)] * 4, indexing="ij"), axis=-1).reshape(-1, 4)
        # every sign pattern of a row, rows one ulp apart and columns swapped: all distinct rows
        signs = np.array([[1, 2, 3, 4]]) * np.stack(np.meshgrid(*[[-1.0, 1.0]] * 4, indexing="ij"), -1).reshape(-1, 4)
        ulp = np.nextafter(np.ones((4, 4)), 2.0) * np.eye(4) + (1 - np.eye(4))
        rows = np.unique(np.vstack([grid, signs, ulp, np.ones((1, 4)), [[2, 1, 3, 4]]]), axis=0)
        assert np.unique(content_hashes(rows)).size == rows.shape[0]

    def test_column_order_matters(self, X: np.ndarray) -> None:
        assert not np.array_equal(content_hashes(X[:, ::-1]), content_hashes(X))

    def test_an_exact_shift_about_the_column_minimum_changes_nothing(self) -> None:
        rng = np.random.default_rng(2)
        A = rng.integers(-50, 50, size=(500, 3)).astype(np.float64)
        B = A + np.array([1e6, -37.0, 2.0**40])  # exact in float64 for integers of this size
        np.testing.assert_array_equal(content_hashes(A, A.min(axis=0)), content_hashes(B, B.min(axis=0)))
        np.testing.assert_array_equal(
            row_keys(A, 4, LOGISTIC_CV, A.min(axis=0)), row_keys(B, 4, LOGISTIC_CV, B.min(axis=0))
        )
        assert not np.array_equal(content_hashes(A), content_hashes(B))  # without the origin they differ

    def test_blocks_do_not_matter(self) -> None:
        Y = np.random.default_rng(3).normal(size=(5000, 3))  # several hash blocks, the last one partial
        h = content_hashes(Y)
        np.testing.assert_array_equal(np.concatenate([content_hashes(Y[:777]), content_hashes(Y[777:])]), h)
        assert content_hashes(Y[:0]).size == 0


class TestDerivedKeys:
    def test_reproducible_and_different_per_seed_and_salt(self, X: np.ndarray) -> None:
        a = row_keys(X, 7, PERFORMANCE_ROWS)
        np.testing.assert_array_equal(a, row_keys(X, 7, PERFORMANCE_ROWS))
        for other in (row_keys(X, 8, PERFORMANCE_ROWS), row_keys(X, 7, LOGISTIC_CV)):
            assert np.mean(a == other) == 0.0
            # unrelated orders: the rank correlation of the keys is near zero
            ra, ro = np.argsort(np.argsort(a)), np.argsort(np.argsort(other))
            assert abs(np.corrcoef(ra, ro)[0, 1]) < 0.1

    def test_a_key_is_a_bijection_of_the_hash(self) -> None:
        hashes = np.arange(100_000, dtype=np.uint64)  # the least random hashes there are
        keys = derive_keys(hashes, 0, PERFORMANCE_ROWS)
        assert np.unique(keys).size == hashes.size
        # and they look uniform: each of 16 equal ranges of the key space holds about 1/16 of them
        counts = np.bincount((keys >> np.uint64(60)).astype(np.intp), minlength=16)
        assert counts.min() > 0.9 * hashes.size / 16 and counts.max() < 1.1 * hashes.size / 16

    def test_keep_share_keeps_about_the_share(self, X: np.ndarray) -> None:
        kept = keep_share(X, 0.25, 0, PERFORMANCE_ROWS)
        assert abs(kept.mean() - 0.25) < 4 * np.sqrt(0.25 * 0.75 / X.shape[0])
        assert keep_share(X, 1.0, 0, PERFORMANCE_ROWS).all()


class TestRowHashes:
    def test_rows_of_its_matrix_are_looked_up_and_agree_with_a_fresh_hash(self, X: np.ndarray) -> None:
        origin = X.min(axis=0)
        held = RowHashes.of(X, origin)
        for part in (X, X[100:900], X[2999:], X[:0]):
            assert held.rows_of(part) is not None
            np.testing.assert_array_equal(row_keys(part, 3, LOGISTIC_CV, held), row_keys(part, 3, LOGISTIC_CV, origin))
            np.testing.assert_array_equal(
                keep_share(part, 0.3, 3, PERFORMANCE_ROWS, held), keep_share(part, 0.3, 3, PERFORMANCE_ROWS, origin)
            )

    def test_other_arrays_are_hashed_afresh(self, X: np.ndarray) -> None:
        origin = X.min(axis=0)
        held = RowHashes.of(X, origin)
        others = [X.copy(), X[::2], X[[5, 1, 3]], np.ascontiguousarray(X[:, :5]), X.ravel()[1:-5].reshape(-1, 6)]
        for part in others:
            assert held.rows_of(part) is None
        shifted = others[-1]  # the same memory, off by one value: not rows of X
        np.testing.assert_array_equal(held.hashes_of(shifted), content_hashes(shifted, origin))
        np.testing.assert_array_equal(held.hashes_of(X[::2]), held.hashes[::2])

    def test_it_stands_for_its_origin(self, X: np.ndarray) -> None:
        origin = X.min(axis=0)
        np.testing.assert_array_equal(np.asarray(RowHashes.of(X, origin)), origin)


def test_smallest_keys_are_the_stable_sorts_first_ones() -> None:
    rng = np.random.default_rng(4)
    for keys in (rng.integers(0, 2**63, 1000, dtype=np.uint64), rng.integers(0, 20, 1000).astype(np.uint64)):
        for m in (0, 1, 37, 500, 999, 1000, 1500):
            expected = np.sort(np.argsort(keys, kind="stable")[:m])
            np.testing.assert_array_equal(smallest_keys(keys, m), expected)


def _data(X: np.ndarray, y: np.ndarray):  # type: ignore[no-untyped-def]
    return load(X, y, config=Config())


def test_audit_data_hash_their_rows_once_about_the_column_minimum() -> None:
    rng = np.random.default_rng(5)
    X = rng.integers(0, 1000, size=(400, 3)).astype(np.float64)
    y = np.repeat([0, 1], 200)
    data = _data(X, y)
    assert data.row_hashes() is data.row_hashes()
    np.testing.assert_array_equal(data.key_origin(), X.min(axis=0))
    np.testing.assert_array_equal(data.row_hashes().hashes, content_hashes(X, X.min(axis=0)))


def test_capped_rows_follow_the_values_not_their_order_names_or_exact_shifts() -> None:
    rng = np.random.default_rng(6)
    X = rng.integers(0, 10_000, size=(3000, 4)).astype(np.float64)
    y = np.repeat(["a", "b", "c"], 1000)
    base = cap_rows(_data(X, y), 300, 0)
    assert base.n == 900

    def rows(data) -> set[bytes]:  # type: ignore[no-untyped-def]
        return {r.tobytes() for r in np.asarray(data.values)}

    order = rng.permutation(3000)
    renamed = np.where(y == "a", "z", np.where(y == "b", "y", "x"))
    shifted = X + np.array([7.0, -3.0, 1e9, 0.0])
    assert rows(cap_rows(_data(X[order], renamed[order]), 300, 0)) == rows(base)
    assert rows(cap_rows(_data(shifted, y), 300, 0)) == {
        (r + np.array([7.0, -3.0, 1e9, 0.0])).tobytes() for r in np.asarray(base.values)
    }
    assert rows(cap_rows(_data(X, y), 300, 1)) != rows(base)  # another seed, another sample
