"""Each verdict rule on hand-built findings (fires when it should, and only then), and end to end."""

from __future__ import annotations

import sys
from pathlib import Path

import pytest

import discaudit
from discaudit.config import CHECK_KEYS, Config
from discaudit.decision.rules import RULES, decide
from discaudit.decision.settings import rule_settings
from discaudit.findings import Finding

RULE = {r.name: r for r in RULES}
CFG = Config()


def findings(**overrides: tuple[str, dict]) -> dict[str, Finding]:
    """All checks passing with neutral details, except the (status, details) overrides."""
    base = {
        "sample_size": (
            "pass",
            {"error_df": 300, "n_features": 5, "rows_per_feature": 60.0, "smallest_class_rows_per_feature": 20.0},
        ),
        "collinearity": (
            "pass",
            {
                "max_vif": 1.5,
                "condition_number": 2.0,
                "rank_deficient": False,
                "shrinkage": {"retained_separation": 0.99, "ledoit_wolf_standardized": 0.05},
            },
        ),
        "covariance_homogeneity": ("pass", {"bic": {"delta_bic": -20.0}, "most_different_class": "a"}),
        "normality": ("pass", {"discrete_features": []}),
        "separation": ("pass", {"any_complete": False, "any_quasi_complete": False}),
        "outliers": ("pass", {}),
        "scale_disparity": ("pass", {}),
    }
    base.update(overrides)
    out = {k: Finding(k, "pass", "fine.", {}) for k in CHECK_KEYS}
    for key, (status, details) in base.items():
        out[key] = Finding(key, status, f"{key} summary.", details)
    return out


def fired(f: dict[str, Finding]) -> list[str]:
    return [r.name for r in RULES if r.test(f, CFG) is not None]


def test_nothing_fires_on_clean_findings_and_lda_wins() -> None:
    f = findings()
    assert fired(f) == []
    assert decide(f, CFG).model == "lda"


def test_pooled_covariance_singular() -> None:
    f = findings(
        sample_size=(
            "fail",
            {"error_df": 10, "n_features": 12, "rows_per_feature": 1.0, "smallest_class_rows_per_feature": 0.5},
        )
    )
    assert RULE["pooled_covariance_singular"].test(f, CFG) is not None
    d = decide(f, CFG)
    assert d.model == "regularized_lda" and "N - K = 10" in d.reasons[0]


def test_few_rows_per_feature_fires_below_the_threshold_only() -> None:
    low = findings(
        sample_size=(
            "warn",
            {"error_df": 40, "n_features": 8, "rows_per_feature": 5.0, "smallest_class_rows_per_feature": 2.5},
        )
    )
    assert RULE["few_rows_per_feature"].test(low, CFG) is not None
    assert RULE["few_rows_per_feature"].test(findings(), CFG) is None


def test_collinearity_goes_to_shrinkage_only_when_shrinkage_keeps_the_separation() -> None:
    cheap = findings(
        collinearity=(
            "fail",
            {
                "max_vif": 80.0,
                "condition_number": 40.0,
                "rank_deficient": False,
                "shrinkage": {"retained_separation": 0.97, "ledoit_wolf_standardized": 0.2},
            },
        )
    )
    costly = findings(
        collinearity=(
            "fail",
            {
                "max_vif": 80.0,
                "condition_number": 40.0,
                "rank_deficient": False,
                "shrinkage": {"retained_separation": 0.4},
            },
        )
    )
    assert fired(cheap) == ["serious_collinearity"] and decide(cheap, CFG).model == "regularized_lda"
    assert fired(costly) == ["costly_shrinkage"] and decide(costly, CFG).model == "lda"
    assert "40%" in decide(costly, CFG).reasons[0]


def test_collinearity_with_negligible_shrinkage_does_not_ask_for_it() -> None:
    # Ledoit-Wolf intensity near 0: the pooled covariance is already well estimated (huge N).
    details = {
        "max_vif": 45.0,
        "condition_number": 35.0,
        "rank_deficient": False,
        "shrinkage": {"retained_separation": 0.99, "ledoit_wolf_standardized": 0.0003},
    }
    f = findings(
        collinearity=("fail", details),
        covariance_homogeneity=("fail", {"bic": {"delta_bic": 5000.0}, "most_different_class": "b"}),
    )
    assert RULE["serious_collinearity"].test(f, CFG) is None
    assert decide(f, CFG).model == "qda"


def test_unequal_covariances_need_rows_per_feature_for_qda() -> None:
    cov_fail = ("fail", {"bic": {"delta_bic": 300.0}, "most_different_class": "b"})
    enough = findings(covariance_homogeneity=cov_fail)
    few = findings(
        covariance_homogeneity=cov_fail,
        sample_size=(
            "pass",
            {"error_df": 300, "n_features": 5, "rows_per_feature": 60.0, "smallest_class_rows_per_feature": 3.0},
        ),
    )
    assert decide(enough, CFG).model == "qda"
    assert RULE["unequal_covariances"].test(few, CFG) is None


def test_non_gaussian_shape_beats_covariance_evidence_but_not_separation() -> None:
    shape = ("fail", {"discrete_features": ["flag"]})
    f = findings(
        normality=shape, covariance_homogeneity=("fail", {"bic": {"delta_bic": 300.0}, "most_different_class": "b"})
    )
    d = decide(f, CFG)
    assert d.model == "logistic_regression" and "flag" in d.reasons[0]
    assert d.alternatives[0]["model"] == "qda"
    separated = findings(normality=shape, separation=("warn", {"any_complete": True, "any_quasi_complete": False}))
    assert RULE["non_gaussian_shape"].test(separated, CFG) is None


def test_influential_outliers_argue_for_logistic_regression() -> None:
    f = findings(outliers=("fail", {}))
    assert fired(f) == ["influential_outliers"]
    assert decide(f, CFG).model == "logistic_regression"


def test_settings_follow_the_findings() -> None:
    f = findings(separation=("warn", {"any_complete": True, "any_quasi_complete": False}))
    assert rule_settings("logistic_regression", f, CFG)[0]["C"] == 1.0
    assert rule_settings("regularized_lda", findings(), CFG)[0]["solver"] == "lsqr"
    assert rule_settings("regularized_lda", findings(), CFG)[0]["shrinkage"] == 0.05


@pytest.mark.parametrize("model", ["lda", "regularized_lda", "qda", "logistic_regression"])
def test_settings_construct_the_estimator(model) -> None:
    # Every key of params but ``standardize`` is a keyword argument of the scikit-learn estimator,
    # and every key has a note saying why (source: scikit-learn's own constructor signatures).
    params, notes = rule_settings(model, findings(), CFG)
    estimator = discaudit.Recommendation(model, params, [], []).estimator()
    step = estimator.steps[-1][1] if hasattr(estimator, "steps") else estimator
    assert {k: v for k, v in params.items() if k != "standardize"}.items() <= step.get_params().items()
    assert set(notes) == set(params)


def _quick_scenarios():
    sys.path.insert(0, str(Path(__file__).resolve().parents[1] / "benchmarks" / "validation"))
    from quick import unambiguous_scenarios

    return unambiguous_scenarios()


@pytest.mark.parametrize("case", _quick_scenarios(), ids=lambda c: c[0])
def test_unambiguous_scenarios_end_to_end(case) -> None:
    # The truth for these seeded cases (held-out accuracy of the four models fit with
    # scikit-learn) is in benchmarks/validation/RESULTS.md; the expected model is acceptable there.
    name, X, y, expected = case
    verdict = discaudit.preflight(X, y, random_state=0)
    acceptable = (expected,) if isinstance(expected, str) else expected
    assert verdict.recommendation.model in acceptable


@pytest.mark.parametrize("case", _quick_scenarios(), ids=lambda c: c[0])
def test_recommended_estimator_fits_without_warnings(case) -> None:
    import warnings

    name, X, y, expected = case
    estimator = discaudit.preflight(X, y, random_state=0).recommendation.estimator()
    with warnings.catch_warnings():
        warnings.simplefilter("error")
        estimator.fit(X, y)


def test_estimator_without_scikit_learn_says_how_to_install(monkeypatch) -> None:
    import builtins

    real_import = builtins.__import__

    def no_sklearn(name, *args, **kwargs):
        if name.startswith("sklearn"):
            raise ImportError("No module named 'sklearn'")
        return real_import(name, *args, **kwargs)

    monkeypatch.setattr(builtins, "__import__", no_sklearn)
    rec = discaudit.Recommendation("lda", {}, [], [])
    with pytest.raises(ImportError, match=r"pip install discaudit\[sklearn\]"):
        rec.estimator()


def test_a_covariance_difference_that_bic_does_not_back_argues_weakly(wine) -> None:
    """Wine (scikit-learn): Box's M rejects equal covariances while BIC favours one shared covariance.
    The reasons must not say plainly that unequal covariances argue for QDA."""
    X, y = wine
    verdict = discaudit.preflight(X, y, random_state=0)
    details = verdict.findings["covariance_homogeneity"].details
    assert details["bic"]["delta_bic"] < 0 and verdict.findings["covariance_homogeneity"].status != "pass"
    text = " ".join(verdict.recommendation.reasons)
    assert "though BIC favours one shared covariance" in text and "argue weakly for QDA" in text
    assert "Unequal class covariances (BIC: shared" not in text


def _open_data_sets():
    import statsmodels.api as sm
    from sklearn.datasets import load_breast_cancer, load_iris, load_wine

    for loader in (load_iris, load_wine, load_breast_cancer):
        d = loader(as_frame=True)
        yield loader.__name__, d.data, d.target
    anes = sm.datasets.anes96.load_pandas().data  # statsmodels' bundled ANES 1996 extract
    yield "anes96", anes.drop(columns=["vote"]), anes["vote"]


def test_predicts_best_means_among_the_contenders_when_a_ruled_out_model_classifies_more() -> None:
    """On open data sets (scikit-learn, statsmodels): "predicts best" is never said of a model that a
    candidate ruled out by its log-loss beats in accuracy; then it "predicts best of the contenders"."""
    seen_above = False
    for name, X, y in _open_data_sets():
        verdict = discaudit.preflight(X, y, random_state=0)
        details = verdict.findings["expected_performance"].details
        model = verdict.recommendation.model
        candidates, ruled_out = details["candidates"], details.get("not_contenders") or {}
        above = any(c in ruled_out and candidates[c]["accuracy"] > candidates[model]["accuracy"] for c in candidates)
        text = " ".join(verdict.recommendation.reasons)
        seen_above |= above
        if above:
            assert "predicts best of the contenders" in text, name
        else:
            assert "best of the contenders" not in text, name
    assert seen_above, "precondition: at least one data set has a ruled-out candidate that classifies more"
