"""Remedies: proposed from the findings, their predicted effects equal to a what-if of the change.

The property behind every predicted effect: the statuses a remedy reports for the checks it
evaluated are those of ``verdict.what_if(**remedy.change)`` (a full re-audit of the changed data).
On the invented demo data (``examples/make_flake_data.py``) the top remedies must clear the planted
problems (the contaminated flakes, the scale gap, the collinear bands) and the reports must say so.
Other data here are invented for properties (equal class means, skewed classes).
"""

from __future__ import annotations

import json

import matplotlib

matplotlib.use("Agg")
import numpy as np
import pandas as pd
import pytest
from scipy import stats as sps

import discaudit
from discaudit.cli import main
from discaudit.plot import plot_verdict

TARGET = "family"


@pytest.fixture(scope="module")
def demo(flakes) -> discaudit.Verdict:
    frame, _ = flakes
    return discaudit.preflight(frame, target=TARGET, random_state=0)


def _by_action(verdict: discaudit.Verdict, action: str):
    return next(r for r in verdict.remedies if r.action == action)


def _assert_effect_is_a_what_if(verdict: discaudit.Verdict, remedy) -> discaudit.Verdict:
    w = verdict.what_if(**remedy.change)
    for key in remedy.effect.evaluated:
        assert remedy.effect.statuses[key] == (verdict.findings[key].status, w.findings[key].status), key
        assert remedy.effect.figures[key] == (verdict.findings[key].figure, w.findings[key].figure), key
    acc = remedy.effect.accuracy
    if acc is not None:  # the recommended model's predicted accuracy, as the fresh audit of the change gives it
        after = w.findings["expected_performance"].details["candidates"][acc["model"]]
        assert acc["after"] == pytest.approx(after["accuracy"], rel=1e-12)
        assert acc["se_after"] == pytest.approx(after["accuracy_se"], rel=1e-9, abs=1e-15)
    return w


@pytest.fixture(scope="module")
def contaminated() -> tuple[discaudit.Verdict, list[str]]:
    """Invented, for properties: three Gaussian classes with five rows moved 8 SD in every feature."""
    rng = np.random.default_rng(12)
    y = np.repeat(["u", "v", "w"], 150)
    X = pd.DataFrame(rng.normal(size=(450, 4)), columns=["a", "b", "c", "d"])
    X.loc[y == "v", "a"] += 2.0
    X.loc[y == "w", "b"] += 2.0
    far = [5, 160, 161, 320, 400]
    X.loc[far] += 8.0
    X.index = [f"r{i}" for i in range(450)]
    return discaudit.preflight(X, y), [f"r{i}" for i in far]


def test_the_top_remedies_clear_the_planted_problems(demo, flakes) -> None:
    _, planted = flakes
    top = [r for r in demo.remedies if r.helps][:3]
    assert {r.addresses for r in top} == {"scale_disparity", "collinearity", "outliers"}
    scale = _by_action(demo, "standardize")
    assert scale.change == {"standardize": True} and scale.effect.statuses["scale_disparity"] == ("warn", "pass")
    bands = _by_action(demo, "drop_features")
    assert set(bands.change["drop_features"]) < set(planted["collinear_bands"])
    assert bands.effect.statuses["collinearity"] == ("fail", "warn")
    # The contaminated batch (six flakes of one family) moves that family's mean: the outliers check warns,
    # and the removal proposed is exactly the planted flakes, none of the Gaussian tail flagged beside them.
    assert demo.findings["outliers"].status == "warn"
    rows = _by_action(demo, "drop_rows")
    assert sorted(rows.change["drop_rows"]) == sorted(planted["contaminated"])
    assert rows.effect.statuses["outliers"] == ("warn", "pass")
    assert all(r.clears_addressed for r in top)
    # LDA is recommended: each remedy carries its exact leave-one-out accuracy on the changed data.
    assert all(r.effect.accuracy is not None and r.effect.accuracy["model"] == "lda" for r in top)
    text = str(demo)
    for line in ("scale_disparity WARN -> PASS", "outliers WARN -> PASS", "collinearity FAIL -> WARN"):
        assert line in text, line  # the verdict table says what each top remedy clears


def test_influential_gross_outliers_are_proposed_for_removal_and_cleared(contaminated) -> None:
    verdict, far = contaminated
    assert verdict.findings["outliers"].status == "fail"  # precondition: judged influential
    rows = _by_action(verdict, "drop_rows")
    assert sorted(rows.change["drop_rows"]) == sorted(far)  # exactly the planted rows, none of the tail
    assert rows.effect.statuses["outliers"] == ("fail", "pass") and rows.helps and rows.needs_row_pass
    _assert_effect_is_a_what_if(verdict, rows)
    assert "outliers FAIL -> PASS" in str(verdict)
    fig = plot_verdict(verdict, "outliers")
    circled = sum(
        len(c.get_offsets())
        for ax in fig.axes
        for c in ax.collections
        if (c.get_gid() or "").startswith("remedy-rows:")
    )
    assert circled == len(far)


@pytest.mark.parametrize("action", ["standardize", "drop_features", "drop_rows"])
def test_each_predicted_effect_is_that_of_a_what_if(demo, action) -> None:
    remedy = _by_action(demo, action)
    w = _assert_effect_is_a_what_if(demo, remedy)
    assert remedy.spec == discaudit.sources.what_if.Change.of(**remedy.change).to_spec()
    assert set(remedy.effect.not_evaluated) == set(w.findings) - set(remedy.effect.evaluated)


def test_the_dropped_bands_follow_the_removal_plan_until_collinearity_no_longer_fails(demo) -> None:
    plan = demo.findings["collinearity"].details["removal_plan"]
    bands = _by_action(demo, "drop_features").change["drop_features"]
    k = len(bands)
    assert bands == plan["removed"][:k]
    assert plan["max_vif_after"][k - 1] <= 10.0 < plan["max_vif_after"][k - 2]
    w = demo.what_if(drop_features=bands)
    assert w.findings["collinearity"].details["max_vif"] == pytest.approx(plan["max_vif_after"][k - 1], rel=1e-9)


def test_the_reports_say_what_would_help(demo) -> None:
    text = str(demo)
    section = text[text.index("What would help:") :]
    assert "scale_disparity WARN -> PASS" in section and "collinearity FAIL -> WARN" in section
    assert '--what-if "standardize"' in section and "nir_1340" in section
    markdown = demo.to_markdown()
    assert "**What would help:**" in markdown and "collinearity FAIL -\\> WARN" in markdown
    html = demo._repr_html_()
    assert 'class="discaudit-remedies"' in html and 'data-addresses="collinearity" data-clears="true"' in html
    document = json.loads(demo.to_json())
    assert [r["rank"] for r in document["remedies"]] == list(range(1, len(demo.remedies) + 1))
    bands = next(r for r in document["remedies"] if r["action"] == "drop_features")
    assert bands["effect"]["changed"]["collinearity"] == {"before": "fail", "after": "warn"} and bands["helps"]


def test_the_collinearity_plot_marks_the_features_a_remedy_would_drop(demo) -> None:
    bands = set(_by_action(demo, "drop_features").change["drop_features"])
    fig = plot_verdict(demo, "collinearity")
    marked = {
        t.get_gid().split(":", 1)[1]
        for ax in fig.axes
        for t in ax.texts
        if (t.get_gid() or "").startswith("remedy-drop:")
    }
    assert marked == bands


def test_performance_effects_equal_the_what_if(flakes) -> None:
    frame, _ = flakes
    verdict = discaudit.preflight(frame, target=TARGET, config=discaudit.Config(remedy_effects="performance"))
    for remedy in verdict.remedies:
        assert "covariance_homogeneity" in remedy.effect.evaluated  # the costly check, in this mode
        w = _assert_effect_is_a_what_if(verdict, remedy)
        model = verdict.recommendation.model
        acc = remedy.effect.accuracy
        assert acc["model"] == model
        assert acc["before"] == verdict.findings["expected_performance"].details["candidates"][model]["accuracy"]
        assert acc["after"] == pytest.approx(
            w.findings["expected_performance"].details["candidates"][model]["accuracy"], rel=1e-12
        )
        assert remedy.effect.recommendation == (model, w.recommendation.model)


def test_on_large_classes_the_row_checks_are_left_to_the_what_if() -> None:
    # Invented, for a property: classes of 1000 rows (above remedy_rows_per_class = 500) with a scale gap, a near
    # dependency and 1% of one class moved far away.
    rng = np.random.default_rng(8)
    y = np.repeat(["a", "b", "c"], 1000)
    X = pd.DataFrame(rng.normal(size=(3000, 4)), columns=["p", "q", "r", "s"])
    X["q"] = X["r"] + 1e-3 * rng.normal(size=3000)
    X.loc[y == "b", "p"] += 2.0
    X["s"] *= 1e5
    far = np.flatnonzero(y == "a")[:10]
    X.loc[far, ["p", "q", "r"]] += 12.0
    verdict = discaudit.preflight(X, y)
    assert verdict.remedies, "precondition: something to remedy"
    moment = ("data_hygiene", "sample_size", "scale_disparity", "collinearity", "discriminant_signal")
    for remedy in verdict.remedies:
        assert "left to verdict.what_if" in remedy.effect.rows
        assert not {"outliers", "normality", "covariance_homogeneity"} & set(remedy.effect.evaluated)
        w = verdict.what_if(**remedy.change)
        for key in moment:
            assert remedy.effect.statuses[key] == (verdict.findings[key].status, w.findings[key].status), key
    rows = [r for r in verdict.remedies if r.action == "drop_rows"]
    if rows:  # not re-evaluated, so shown with a note rather than hidden
        assert rows[0].helps and not rows[0].addressed_evaluated
        assert "outliers not re-evaluated here" in str(verdict)


def test_classes_the_data_cannot_tell_apart_are_proposed_for_merging() -> None:
    # Invented: classes b and c share their mean; a differs.
    rng = np.random.default_rng(5)
    X = rng.normal(size=(300, 3))
    y = np.repeat(["a", "b", "c"], 100)
    X[y == "a"] += [2.0, 0.0, 1.0]
    verdict = discaudit.preflight(pd.DataFrame(X, columns=["u", "v", "w"]), y)
    pairwise = verdict.findings["discriminant_signal"].details["pairwise"]
    assert pairwise["indistinct_pairs"] == [["b", "c"]]
    merge = _by_action(verdict, "merge_classes")
    assert merge.change == {"merge_classes": [["b", "c"]]} and merge.spec == "merge=b+c"
    w = _assert_effect_is_a_what_if(verdict, merge)
    assert w.meta["classes"] == ["a", "b+c"]


def test_strongly_skewed_classes_get_a_power_transform_with_its_exponents() -> None:
    # Invented: log-normal features, so a Yeo-Johnson exponent near 0 makes the classes Gaussian.
    rng = np.random.default_rng(11)
    y = np.repeat(["p", "q"], 400)
    X = pd.DataFrame({"s": np.exp(rng.normal(size=800) + (y == "q")), "t": rng.normal(size=800)})
    verdict = discaudit.preflight(X, y)
    assert verdict.findings["normality"].status == "fail"
    remedy = _by_action(verdict, "transform")
    assert list(remedy.change["transform"]) == ["s"] and remedy.needs_row_pass
    w = _assert_effect_is_a_what_if(verdict, remedy)
    assert w.meta["what_if"][0]["transform"]["lambdas"] == remedy.change["transform"]
    assert remedy.effect.statuses["normality"][1] in ("pass", "warn")
    # The exponent is shown to two decimals, so the spec can be typed; it is the change evaluated.
    lam = remedy.change["transform"]["s"]
    assert lam == round(lam, 2) and f"s:{lam!r}" in remedy.spec
    # One exponent for both classes maximizes the sum of their likelihoods, so it lies between each class's
    # own maximum-likelihood exponent (scipy.stats.yeojohnson_normmax), up to the rounding.
    own = [sps.yeojohnson_normmax(X["s"].to_numpy()[y == c]) for c in ("p", "q")]
    assert min(own) - 0.005 <= lam <= max(own) + 0.005


def test_no_remedy_when_nothing_needs_one(gaussian_classes) -> None:
    X, y = gaussian_classes
    verdict = discaudit.preflight(X, y)
    assert verdict.status == "pass" and verdict.remedies == ()
    assert "What would help" not in str(verdict)


def test_outliers_that_do_not_move_the_estimates_are_not_proposed_for_removal() -> None:
    # Invented: Gaussian classes with their usual tail rows flagged but no influence.
    rng = np.random.default_rng(2)
    X = pd.DataFrame(rng.normal(size=(600, 3)), columns=list("abc"))
    y = np.repeat(["u", "v"], 300)
    X.loc[y == "v", "a"] += 1.5
    verdict = discaudit.preflight(X, y)
    assert verdict.findings["outliers"].status == "pass"
    assert not any(r.action == "drop_rows" for r in verdict.remedies)


def test_cli_prints_both_verdicts_side_by_side(tmp_path, flakes, capsys, monkeypatch) -> None:
    monkeypatch.chdir(tmp_path)
    frame, _ = flakes
    path = tmp_path / "flakes.csv"
    frame.to_csv(path)
    base = ["check", str(path), "--target", TARGET, "--index-col", "flake_id"]
    code = main([*base, "--what-if", "drop=nir_1340,nir_1400"])
    out = capsys.readouterr().out
    reference = pd.read_csv(path, index_col="flake_id")
    before = discaudit.preflight(reference, target=TARGET)
    after = before.what_if(drop_features=["nir_1340", "nir_1400"])
    assert code == int(not before.gate.passed)  # the exit status is the original audit's gate
    assert out.startswith("discaudit what-if: drop=nir_1340,nir_1400")
    for key, f in after.findings.items():
        row = next(line for line in out.splitlines() if line.startswith(key))
        assert before.findings[key].figure in row and f.figure in row
    assert "features removed: nir_1340, nir_1400" in out
    code = main([*base, "--what-if", "standardize", "--format", "json"])
    document = json.loads(capsys.readouterr().out)
    assert set(document) == {"what_if", "before", "after", "comparison"}
    assert document["comparison"]["changed"]["scale_disparity"] == {"before": "warn", "after": "pass"}
    code = main([*base, "--what-if", "drop=nir_9999"])
    err = capsys.readouterr().err
    assert code == 2 and "nir_9999" in err and err.count("\n") == 1
