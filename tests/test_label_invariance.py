"""Property: renaming the classes or shuffling the rows changes no figure, no status and no sentence.

Every random step draws its rows in a canonical order of each class's rows and takes the class's
seed from its place in a canonical order of the classes (both from the row values, never from the
labels), so the verdict of a relabelled, reshuffled copy must equal the original once the names
are mapped back. What may differ, and how the comparison allows for it:

* floats, at rounding level: a shuffle changes the order in which the sources sum the rows, and a
  renaming the order in which classes are summed, so sums agree to about 1e-13 relative, not to
  the bit. Floats are compared to 1e-9 relative (absolute 1e-12 near zero); the predicted-accuracy
  figures of ``expected_performance`` come from an iterative optimizer and are compared to 1e-4;
* the order of lists whose items are one per class (e.g. per-class comparisons) when the new
  names sort differently: such lists are compared as multisets;
* the data fingerprint, which hashes the rows in their order by design, and the timings.

Data: iris and wine (scikit-learn, open data) and the invented demo data; the relabellings and
shuffles are seeded draws.
"""

from __future__ import annotations

import json
from typing import Any

import numpy as np
import pandas as pd
import pytest

import discaudit

RTOL = 1e-9
ATOL = 1e-12
#: Checks whose figures come from an iterative optimizer (tolerance of its stopping rule).
#: The raw condition number kappa is itself ill-conditioned: summing the rows in another order moves it
#: by up to about 2 kappa eps relative (Golub & Van Loan 2013, Matrix Computations, sec. 2.6); 1e-5 covers
#: the demo's kappa of 3.6e10.
LOOSE = {"expected_performance": 1e-4, "condition_number_raw": 1e-5}


def _map_back(value: Any, back: dict[str, str]) -> Any:
    """Replace the new class names by the old ones in keys, values and sentences."""
    if isinstance(value, dict):
        return {_map_back(k, back): _map_back(v, back) for k, v in value.items()}
    if isinstance(value, list):
        return [_map_back(v, back) for v in value]
    if isinstance(value, str):
        if value in back:
            return back[value]
        for new, old in back.items():
            value = value.replace(new, old)
        return value
    return value


def _canonical(value: Any) -> Any:
    """Lists of mappings or of strings as sorted multisets (their order follows the class codes)."""
    if isinstance(value, dict):
        return {k: _canonical(v) for k, v in value.items()}
    if isinstance(value, list):
        items = [_canonical(v) for v in value]
        if items and all(isinstance(v, (dict, str)) for v in items):
            return sorted(items, key=lambda v: json.dumps(v, sort_keys=True))
        return items
    return value


def _assert_same(a: Any, b: Any, path: str, rtol: float) -> None:
    if isinstance(a, dict):
        assert isinstance(b, dict) and set(a) == set(b), f"{path}: keys {sorted(set(a) ^ set(b))}"
        for key in a:
            _assert_same(a[key], b[key], f"{path}/{key}", LOOSE.get(key, rtol))
    elif isinstance(a, list):
        assert isinstance(b, list) and len(a) == len(b), path
        for i, (x, y) in enumerate(zip(a, b, strict=True)):
            _assert_same(x, y, f"{path}[{i}]", rtol)
    elif isinstance(a, float) or isinstance(b, float):
        assert isinstance(a, (int, float)) and isinstance(b, (int, float)), path
        assert b == pytest.approx(a, rel=rtol, abs=ATOL), path
    else:
        assert a == b, f"{path}: {a!r} != {b!r}"


def _doc(verdict: discaudit.Verdict) -> dict[str, Any]:
    doc = json.loads(verdict.to_json())
    doc["meta"].pop("fingerprint")
    return doc


def _relabelled(X: pd.DataFrame, y: pd.Series, seed: int, keep_order: bool) -> tuple[Any, Any, dict[str, str]]:
    """A shuffled copy with new class names, and the map from new names back to old ones."""
    rng = np.random.default_rng(seed)
    classes = sorted(pd.unique(y), key=str)
    suffixes = np.arange(len(classes)) if keep_order else rng.permutation(len(classes))
    names = {c: f"Kq{int(s):02d}x" for c, s in zip(classes, suffixes, strict=True)}  # never in other text
    order = rng.permutation(len(y))
    return X.iloc[order], y.iloc[order].map(names), {v: str(k) for k, v in names.items()}


@pytest.fixture(scope="module")
def datasets(iris, wine, flakes) -> dict[str, tuple[pd.DataFrame, pd.Series]]:
    frame, _ = flakes
    return {
        "iris": iris,
        "wine": (wine[0], wine[1].astype(str)),
        "demo": (frame.drop(columns="family"), frame["family"]),
    }


@pytest.mark.parametrize("name", ["iris", "wine", "demo"])
@pytest.mark.parametrize("seed", [1, 2])
def test_renaming_in_order_and_shuffling_rows_leave_the_json_unchanged(datasets, name: str, seed: int) -> None:
    X, y = datasets[name]
    base = _doc(discaudit.preflight(X, y, random_state=0))
    Xs, ys, back = _relabelled(X, y, seed, keep_order=True)
    other = _map_back(_doc(discaudit.preflight(Xs, ys, random_state=0)), back)
    _assert_same(base, other, "", RTOL)


@pytest.mark.parametrize("name", ["iris", "wine", "demo"])
@pytest.mark.parametrize("seed", [3, 4])
def test_renaming_out_of_order_and_shuffling_leave_every_figure_and_status(datasets, name: str, seed: int) -> None:
    X, y = datasets[name]
    a = discaudit.preflight(X, y, random_state=0)
    Xs, ys, back = _relabelled(X, y, seed, keep_order=False)
    b = discaudit.preflight(Xs, ys, random_state=0)
    _assert_same(_canonical(_doc(a)), _canonical(_map_back(_doc(b), back)), "", RTOL)
    # the same rows are flagged, whatever the classes are called
    assert set(a.outlier_rows().index) == set(b.outlier_rows().index)
    assert {k: f.status for k, f in a.findings.items()} == {k: f.status for k, f in b.findings.items()}


def test_row_keys_depend_on_values_only_and_digests_on_the_set_of_rows() -> None:
    from discaudit.stats.canonical import canonical_order, canonical_ranks, content_digest
    from discaudit.stats.canonical import row_keys as canonical_keys
    from discaudit.stats.row_keys import content_hashes

    def row_keys(X: np.ndarray) -> np.ndarray:
        return canonical_keys(content_hashes(X))

    rng = np.random.default_rng(0)
    X = rng.normal(size=(500, 4))
    X[7] = X[3]
    X[11, 2] = -0.0
    Y = X.copy()
    Y[11, 2] = 0.0
    keys = row_keys(X)
    assert keys[7] == keys[3] and np.array_equal(keys, row_keys(Y))  # equal rows, and -0.0 == 0.0
    assert len(set(keys.tolist())) == 499
    order = rng.permutation(500)
    assert content_digest(row_keys(X[order])) == content_digest(keys)
    np.testing.assert_array_equal(X[order][canonical_order(row_keys(X[order]))], X[canonical_order(keys)])
    assert not np.array_equal(row_keys(X[:, ::-1]), keys)  # column order matters
    assert canonical_ranks([5, 3, 5], [9, 1, 2]) == [2, 0, 1]  # by count, then digest
