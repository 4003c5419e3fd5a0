"""End-to-end behaviour of preflight: contract shape, invariances, and the planted demo problems."""

from __future__ import annotations

import json

import numpy as np
import pandas as pd
import pytest

import discaudit
from discaudit.config import CHECK_KEYS
from discaudit.remedy_effects import MOMENT_CHECKS

#: The checks whose findings follow from the class moments alone.
CLOSED_FORM = MOMENT_CHECKS


def _numbers(verdict: discaudit.Verdict) -> dict:
    """The moment-based findings' details, for comparing two runs."""
    return {k: verdict.findings[k].details for k in CLOSED_FORM}


def test_contract_shape(gaussian_classes) -> None:
    X, y = gaussian_classes
    v = discaudit.preflight(X, y, random_state=0)
    assert list(v.findings) == list(CHECK_KEYS)
    assert v.recommendation.model in {"lda", "regularized_lda", "qda", "logistic_regression"}
    assert v.status in {"pass", "warn", "fail"}
    assert all(isinstance(r, str) for r in v.recommendation.reasons)
    assert {a["model"] for a in v.recommendation.alternatives} | {v.recommendation.model} == {
        "lda",
        "regularized_lda",
        "qda",
        "logistic_regression",
    }
    doc = json.loads(v.to_json())
    assert doc["schema_version"] == 1 and set(doc["findings"]) == set(CHECK_KEYS)
    assert not any(f.details.get("check_error") for f in v.findings.values())


def test_clean_gaussian_classes_recommend_lda(gaussian_classes) -> None:
    X, y = gaussian_classes
    v = discaudit.preflight(X, y)
    assert v.recommendation.model == "lda"
    assert v.findings["covariance_homogeneity"].status == "pass"
    assert v.findings["collinearity"].status == "pass"


def test_row_order_does_not_change_the_numbers(gaussian_classes) -> None:
    X, y = gaussian_classes
    perm = np.random.default_rng(11).permutation(len(y))
    a = discaudit.preflight(X, y)
    b = discaudit.preflight(X.iloc[perm], y[perm])
    for key in CLOSED_FORM:
        _assert_close(a.findings[key].details, b.findings[key].details)
    assert a.recommendation.model == b.recommendation.model


def test_label_renaming_does_not_change_the_numbers(gaussian_classes) -> None:
    X, y = gaussian_classes
    renamed = pd.Series(y).map({"a": 10, "b": 20, "c": 30}).to_numpy()
    a = discaudit.preflight(X, y)
    b = discaudit.preflight(X, renamed)
    for key in ("scale_disparity", "collinearity", "discriminant_signal"):
        da, db = dict(a.findings[key].details), dict(b.findings[key].details)
        pa, pb = da.pop("pairwise", {}), db.pop("pairwise", {})  # pairs are named by their classes
        _assert_close(da, db)
        rename = {"a": 10, "b": 20, "c": 30}
        assert [[rename[c] for c in p.pop("classes")] for p in pa.get("pairs", [])] == [
            p.pop("classes") for p in pb.get("pairs", [])
        ]
        pa.pop("indistinct_pairs", None), pb.pop("indistinct_pairs", None)
        _assert_close(pa, pb)
    box_a = a.findings["covariance_homogeneity"].details["box_m"]
    box_b = b.findings["covariance_homogeneity"].details["box_m"]
    _assert_close(box_a, box_b)


def test_rescaling_features_changes_only_scale_dependent_figures(gaussian_classes) -> None:
    X, y = gaussian_classes
    scaled = X * [1.0, 1e4, 1e-3, 7.0]
    a = discaudit.preflight(X, y)
    b = discaudit.preflight(scaled, y)
    assert b.findings["scale_disparity"].status == "warn"
    assert a.findings["collinearity"].details["vif_within"] == pytest.approx(
        b.findings["collinearity"].details["vif_within"], rel=1e-8
    )
    assert a.findings["discriminant_signal"].details["wilks_lambda"] == pytest.approx(
        b.findings["discriminant_signal"].details["wilks_lambda"], rel=1e-8
    )


def test_demo_data_shows_the_planted_problems(flakes) -> None:
    frame, planted = flakes
    v = discaudit.preflight(frame, target="family")
    assert v.findings["collinearity"].status == "fail"
    assert v.findings["collinearity"].details["max_vif_feature"] in planted["collinear_bands"]
    assert v.findings["scale_disparity"].status == "warn"
    assert v.findings["scale_disparity"].details["largest_sd_feature"] == planted["large_scale_column"]
    assert v.findings["covariance_homogeneity"].status == "fail"
    assert (
        v.findings["covariance_homogeneity"].details["most_different_class"] == planted["different_covariance_family"]
    )
    # Every candidate predicts the demo's families perfectly (they are well apart), so the most
    # efficient model within noise of the best is recommended, and the planted problems are
    # named as arguments the predictions weigh.
    perf = v.findings["expected_performance"].details
    assert v.recommendation.model == perf["most_efficient_within_noise"]
    assert v.recommendation.model in perf["within_noise_of_best"]
    reasons = " ".join(v.recommendation.reasons)
    assert "collinearity" in reasons and "covariances" in reasons


def test_text_table_fits_100_columns_and_carries_the_caution(flakes) -> None:
    frame, _ = flakes
    text = str(discaudit.preflight(frame, target="family"))
    assert max(len(line) for line in text.splitlines()) <= 100
    assert "Caution:" in text and "decisions about people" in " ".join(text.split())
    for key in CHECK_KEYS:
        assert key in text


def test_severity_advisory_and_off(flakes) -> None:
    frame, _ = flakes
    cfg = discaudit.Config(severity={"collinearity": "advisory", "covariance_homogeneity": "off"})
    v = discaudit.preflight(frame, target="family", config=cfg)
    assert v.findings["covariance_homogeneity"].status == "skip"
    assert v.findings["collinearity"].status == "fail"
    gating = [f.status for k, f in v.findings.items() if k not in ("collinearity", "covariance_homogeneity")]
    assert v.status == max(gating, key=["skip", "pass", "warn", "fail"].index)


def test_rank_deficiency_names_the_vanishing_combination() -> None:
    rng = np.random.default_rng(5)
    X = pd.DataFrame(rng.normal(size=(90, 3)), columns=["a", "b", "c"])
    X["total"] = X["a"] + 2 * X["b"]
    y = np.repeat([0, 1, 2], 30)
    v = discaudit.preflight(X, y)
    col = v.findings["collinearity"]
    assert col.status == "fail" and col.details["rank_deficient"]
    combo = col.details["vanishing_combinations"][0]
    assert set(combo) == {"a", "b", "total"}
    assert combo["a"] / combo["total"] == pytest.approx(-1.0, rel=1e-6)
    assert combo["b"] / combo["total"] == pytest.approx(-2.0, rel=1e-6)
    assert v.recommendation.model == "regularized_lda"
    assert "singular" in v.recommendation.reasons[0]


def test_p_above_n_minus_k_fails_sample_size() -> None:
    rng = np.random.default_rng(9)
    X = rng.normal(size=(12, 15))
    y = np.repeat([0, 1], 6)
    v = discaudit.preflight(X, y)
    assert v.findings["sample_size"].status == "fail"
    assert v.recommendation.model == "regularized_lda"
    json.loads(v.to_json())


def test_no_signal_fails_discriminant_signal() -> None:
    rng = np.random.default_rng(12)
    X = rng.normal(size=(300, 3))
    y = np.repeat([0, 1], 150)
    v = discaudit.preflight(X, y)
    assert v.findings["discriminant_signal"].status == "fail"
    assert v.findings["discriminant_signal"].details["p_value"] > 0.05


def test_json_has_no_nan_tokens_on_degenerate_data() -> None:
    X = pd.DataFrame({"a": [1.0, 2, 3, 4, 5, 6], "b": [1.0, 1, 1, 2, 2, 2]})
    y = [0, 0, 0, 1, 1, 1]
    text = discaudit.preflight(X, y).to_json()
    assert "NaN" not in text and "Infinity" not in text


def _assert_close(a, b) -> None:
    if isinstance(a, dict):
        assert a.keys() == b.keys()
        for k in a:
            _assert_close(a[k], b[k])
    elif isinstance(a, list):
        assert len(a) == len(b)
        for x, z in zip(a, b):
            _assert_close(x, z)
    elif isinstance(a, float):
        assert a == pytest.approx(b, rel=1e-8, abs=1e-12)
    else:
        assert a == b


def test_verdict_does_not_depend_on_the_number_of_threads(monkeypatch) -> None:
    # Property: per-class work spread over threads gives the same verdict as one thread.
    import discaudit._threads as threads

    rng = np.random.default_rng(21)
    y = np.repeat([0, 1, 2], [400, 300, 250])
    X = rng.normal(size=(950, 4)) + y[:, None] * 0.7
    X[:5] += 6.0
    monkeypatch.setattr(threads, "usable_cores", lambda: 1)
    one = discaudit.preflight(X, y, random_state=4).to_json()
    monkeypatch.setattr(threads, "usable_cores", lambda: 3)
    three = discaudit.preflight(X, y, random_state=4).to_json()
    assert one == three
