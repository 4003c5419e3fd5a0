"""A batch against its accepted baseline (``discaudit.decision.baseline`` and ``--baseline``).

The moment comparisons rest on ``discaudit.stats.two_sample`` (checked against pingouin and
scipy in ``test_two_sample_stats.py``); here the properties the comparison must have are
tested on invented, seeded Gaussian populations: a batch against itself shows no drift; a fresh
sample from the same population passes in at least 95 of 100 trials (the family-wise level is
0.01); a half-SD mean shift or a doubled covariance in one class is caught and named; a shift too
small to matter does not fail a huge batch; classes that appear or vanish and moved shares count.
"""

from __future__ import annotations

import json
from pathlib import Path

import numpy as np
import pandas as pd
import pytest

import discaudit
from discaudit.cli import main
from discaudit.decision.baseline import class_moments_record, compare, compare_moments, load_baseline
from discaudit.stats.moments import ClassMoments

FEATURES = ["f1", "f2", "f3", "f4"]
MEANS = np.array([[0.0, 0.0, 0.0, 0.0], [1.5, 0.5, 0.0, -0.5], [0.0, 1.5, 1.0, 0.5]])
COVS = np.array(
    [
        [[1.0, 0.3, 0.0, 0.1], [0.3, 1.0, 0.2, 0.0], [0.0, 0.2, 1.0, 0.4], [0.1, 0.0, 0.4, 1.0]],
        [[2.0, 0.0, 0.5, 0.0], [0.0, 1.0, 0.0, 0.0], [0.5, 0.0, 1.5, 0.3], [0.0, 0.0, 0.3, 0.8]],
        [[1.0, -0.4, 0.0, 0.0], [-0.4, 1.2, 0.0, 0.2], [0.0, 0.0, 0.7, 0.0], [0.0, 0.2, 0.0, 1.0]],
    ]
)
PRIORS = np.array([0.5, 0.3, 0.2])
CLASSES = ("a", "b", "c")


def _shift(k: int, size: float) -> np.ndarray:
    """A shift of class k's mean along f1 whose Mahalanobis length in class k's covariance is ``size``."""
    e1 = np.eye(4)[0]
    return size * e1 / np.sqrt(e1 @ np.linalg.solve(COVS[k], e1))


def _sample(
    rng: np.random.Generator, n: int, *, shift_b: float = 0.0, scale_c: float = 1.0
) -> tuple[np.ndarray, np.ndarray]:
    """Invented population: three Gaussian classes, multinomial class sizes; optional drift in b or c."""
    counts = rng.multinomial(n, PRIORS)
    rows, codes = [], []
    for k, m in enumerate(counts):
        mean, cov = MEANS[k].copy(), COVS[k] * (scale_c if k == 2 else 1.0)
        if k == 1:
            mean = mean + _shift(1, shift_b)
        rows.append(rng.multivariate_normal(mean, cov, m))
        codes.append(np.full(m, k))
    return np.vstack(rows), np.concatenate(codes)


def _record(X: np.ndarray, codes: np.ndarray) -> dict:
    return json.loads(json.dumps(class_moments_record(ClassMoments.from_arrays(X, codes, CLASSES), FEATURES)))


def test_fresh_samples_from_the_accepted_population_pass_at_least_95_of_100_trials() -> None:
    config = discaudit.Config()
    passed = 0
    for seed in range(100):
        rng = np.random.default_rng(seed)
        accepted, batch = _record(*_sample(rng, 450)), _record(*_sample(rng, 450))
        drift = compare_moments(accepted, batch, config)
        passed += not any(c.counts for c in drift.changes)
    assert passed >= 95, passed


def test_a_half_sd_mean_shift_and_a_doubled_covariance_are_caught_and_named() -> None:
    config = discaudit.Config()
    rng = np.random.default_rng(2024)
    accepted = _record(*_sample(rng, 3000))
    shifted = compare_moments(accepted, _record(*_sample(rng, 3000, shift_b=0.5)), config)
    counted = [c for c in shifted.changes if c.counts]
    assert [(c.kind, c.subject) for c in counted] == [("mean", "b")]
    row = next(r for r in shifted.classes if r["class"] == "b")
    assert row["mean"]["mahalanobis"] == pytest.approx(0.5, abs=0.15)  # half a pooled SD, with sampling noise
    assert counted[0].figure.startswith(f"D = {row['mean']['mahalanobis']:.2g} SD")
    assert "Class b's mean moved" in counted[0].summary and "pooled SD" in counted[0].summary
    doubled = compare_moments(accepted, _record(*_sample(rng, 3000, scale_c=2.0)), config)
    counted = [c for c in doubled.changes if c.counts]
    assert [(c.kind, c.subject) for c in counted] == [("covariance", "c")]
    row = next(r for r in doubled.classes if r["class"] == "c")
    assert row["covariance"]["spread_ratio"] == pytest.approx(2.0, rel=0.2)
    assert row["covariance"]["log_det_ratio"] == pytest.approx(4 * np.log(2.0), rel=0.2)


def test_a_huge_batch_does_not_fail_on_a_shift_too_small_to_matter() -> None:
    # Moments given exactly (no rows): a million rows per class, class b's mean 0.05 SD off.
    n = 1_000_000
    accepted = {
        "features": FEATURES,
        "classes": [
            {"class": c, "count": n, "mean": MEANS[k].tolist(), "covariance": COVS[k].tolist()}
            for k, c in enumerate(CLASSES)
        ],
    }
    batch = json.loads(json.dumps(accepted))
    batch["classes"][1]["mean"] = (MEANS[1] + _shift(1, 0.05)).tolist()
    drift = compare_moments(accepted, batch, discaudit.Config())
    (change,) = drift.changes
    assert change.kind == "mean" and not change.counts and "too small to matter" in change.summary
    row = drift.classes[1]["mean"]
    assert row["p_value"] < 1e-100 and row["mahalanobis"] == pytest.approx(0.05, rel=1e-3)
    # The same shift at ten times the size counts.
    batch["classes"][1]["mean"] = (MEANS[1] + _shift(1, 0.5)).tolist()
    assert [c.counts for c in compare_moments(accepted, batch, discaudit.Config()).changes] == [True]


def test_classes_that_appear_or_vanish_and_moved_shares_count() -> None:
    config = discaudit.Config()
    rng = np.random.default_rng(5)
    X, codes = _sample(rng, 900)
    accepted = _record(X, codes)
    without_c = json.loads(json.dumps(accepted))
    without_c["classes"] = without_c["classes"][:2]
    drift = compare_moments(accepted, without_c, config)
    assert ("class", "c", True) in [(c.kind, c.subject, c.counts) for c in drift.changes]
    assert "vanished" in [c.figure for c in drift.changes]
    drift = compare_moments(without_c, accepted, config)
    assert [c.figure for c in drift.changes if c.kind == "class"] == ["appeared"]
    # Class a's share from about 0.5 to about 0.25: beyond the tolerance and significant.
    keep = (codes != 0) | (np.arange(len(codes)) % 3 == 0)
    moved = compare_moments(accepted, _record(X[keep], codes[keep]), config)
    share = [c for c in moved.changes if c.kind == "prior"]
    assert share and share[0].counts and share[0].subject == "a"


# --- the comparison of whole reports, and the command line ------------------------------------


def _frame(seed: int, n: int = 900, **drift: float) -> pd.DataFrame:
    X, codes = _sample(np.random.default_rng(seed), n, **drift)
    frame = pd.DataFrame(X, columns=FEATURES)
    frame["label"] = np.array(CLASSES)[codes]
    return frame


def _run(capsys, *argv: object) -> tuple[int, str, str]:
    code = main([str(a) for a in argv])
    out, err = capsys.readouterr()
    return code, out, err


@pytest.fixture(scope="module")
def accepted_files(tmp_path_factory) -> dict[str, Path]:
    root = tmp_path_factory.mktemp("baseline")
    paths = {"accepted": root / "accepted.csv", "shifted": root / "shifted.csv", "doubled": root / "doubled.csv"}
    _frame(11).to_csv(paths["accepted"], index=False)
    _frame(12, shift_b=0.5).to_csv(paths["shifted"], index=False)
    _frame(13, scale_c=2.0).to_csv(paths["doubled"], index=False)
    paths["json"] = root / "accepted.json"
    return paths


@pytest.fixture(autouse=True)
def _outside_any_project(tmp_path: Path, monkeypatch: pytest.MonkeyPatch) -> None:
    monkeypatch.chdir(tmp_path)
    monkeypatch.delenv("CI", raising=False)


def test_the_command_line_accepts_once_and_gates_later_batches(accepted_files, capsys) -> None:
    files = accepted_files
    code, out, err = _run(
        capsys, "check", files["accepted"], "--target", "label", "--model", "qda", "--write-baseline", files["json"]
    )
    assert code == 0, out
    assert f"baseline written to {files['json']}" in err
    written = load_baseline(files["json"])
    assert written["meta"]["class_moments"]["classes"][0]["count"] > 0
    # The same data against its own baseline: no drift at all.
    code, out, _ = _run(
        capsys,
        "check",
        files["accepted"],
        "--target",
        "label",
        "--model",
        "qda",
        "--baseline",
        files["json"],
        "--format",
        "json",
    )
    doc = json.loads(out)
    assert code == 0 and doc["baseline"]["drifted"] is False and doc["baseline"]["changes"] == []
    assert doc["baseline"]["accepted"]["same_data"] is True
    # One class's mean shifted by half a pooled SD: exit 1, the class and the figure named.
    code, out, _ = _run(
        capsys, "check", files["shifted"], "--target", "label", "--model", "qda", "--baseline", files["json"]
    )
    assert code == 1
    assert "Class b's mean moved" in out and "pooled SD" in out and "DRIFTED" in out
    # One class's covariance doubled: exit 1, the class and the figure named.
    code, out, _ = _run(
        capsys,
        "check",
        files["doubled"],
        "--target",
        "label",
        "--model",
        "qda",
        "--baseline",
        files["json"],
        "--format",
        "markdown",
    )
    assert code == 1
    assert "Class c's covariance changed: variances x" in out and "counts" in out


def test_fresh_batches_pass_the_whole_comparison(accepted_files) -> None:
    # Findings, recommendation and moments together: fresh samples of the accepted population, same size.
    accepted = json.loads(discaudit.preflight(pd.read_csv(accepted_files["accepted"]), target="label").to_json())
    for seed in range(101, 106):
        compared = compare(discaudit.preflight(_frame(seed), target="label"), accepted, discaudit.Config())
        assert not compared.baseline.drifted, [c.summary for c in compared.baseline.changes if c.counts]
        assert compared.gate.passed == compared.gate.data_passed


def test_the_baseline_section_is_in_every_format(accepted_files) -> None:
    frame = pd.read_csv(accepted_files["shifted"])
    verdict = discaudit.preflight(frame, target="label")
    accepted = json.loads(discaudit.preflight(pd.read_csv(accepted_files["accepted"]), target="label").to_json())
    compared = compare(verdict, accepted, discaudit.Config(), source="accepted.json")
    assert compared.baseline.drifted and not compared.gate.passed and compared.gate.drifted
    assert compared.gate.data_passed == verdict.gate.passed
    outcome = compared.baseline.outcome
    assert "Compared with the baseline (accepted.json)" in str(compared) and outcome[:60] in str(compared)
    assert "Compared with the baseline" in compared.to_markdown()
    assert 'class="baseline"' in compared.to_html()
    assert '<testcase classname="discaudit" name="baseline"' in compared.to_junit()
    assert 'type="drift"' in compared.to_junit()
    assert json.loads(compared.to_json())["baseline"]["outcome"] == outcome


def test_a_check_that_got_worse_counts_only_when_it_bears_on_the_model_at_the_gates_level(accepted_files) -> None:
    verdict = discaudit.preflight(pd.read_csv(accepted_files["accepted"]), target="label")
    accepted = json.loads(verdict.to_json())
    status = verdict.findings["covariance_homogeneity"].status
    assert status in ("warn", "fail")  # precondition: the invented classes differ in covariance
    accepted["findings"]["covariance_homogeneity"]["status"] = "pass"
    # It bears on LDA, not on QDA; a worse status counts once it reaches the gate's level.
    for model, fail_on, counts in (
        ("lda", "warn", True),
        ("lda", "fail", status == "fail"),
        ("qda", "warn", False),
    ):
        compared = compare(verdict, accepted, discaudit.Config(model=model, fail_on=fail_on))
        (change,) = [c for c in compared.baseline.changes if c.kind == "check"]
        assert change.subject == "covariance_homogeneity" and change.counts is counts, (model, fail_on)
        assert compared.baseline.drifted is counts
    noted = compare(verdict, accepted, discaudit.Config(model="qda")).baseline.changes[0]
    assert "it does not bear on QDA" in noted.summary


def test_a_recommendation_that_flipped_within_a_near_tie_is_noted_not_counted(accepted_files) -> None:
    verdict = discaudit.preflight(pd.read_csv(accepted_files["accepted"]), target="label")
    accepted = json.loads(verdict.to_json())
    other = next(m for m in ("lda", "qda") if m != verdict.recommendation.model)
    accepted["recommendation"]["model"] = other
    (change,) = [
        c for c in compare(verdict, accepted, discaudit.Config()).baseline.changes if c.kind == "recommendation"
    ]
    assert change.counts
    tie = discaudit.Verdict(
        **{
            **verdict.__dict__,
            "recommendation": discaudit.Recommendation(**{**verdict.recommendation.__dict__, "close_to": [other]}),
        }
    )
    accepted["recommendation"]["close_to"] = [verdict.recommendation.model]
    (change,) = [c for c in compare(tie, accepted, discaudit.Config()).baseline.changes if c.kind == "recommendation"]
    assert not change.counts and "within noise of each other" in change.summary


@pytest.mark.parametrize(
    ("content", "expected"),
    [
        ("{not json", "not a JSON report (line 1"),
        ('{"a": 1}', "not a discaudit JSON report"),
        ('{"schema_version": 9}', "schema_version 9 is newer"),
        ('{"schema_version": 1, "findings": {}, "recommendation": {}, "meta": {}}', "no class moments"),
    ],
)
def test_an_unusable_baseline_is_a_one_line_error(accepted_files, tmp_path, capsys, content, expected) -> None:
    bad = tmp_path / "bad.json"
    bad.write_text(content, encoding="utf-8")
    code, out, err = _run(capsys, "check", accepted_files["accepted"], "--target", "label", "--baseline", bad)
    assert code == 2 and out == "" and err.count("\n") == 1
    assert str(bad) in err and expected in err and "Traceback" not in err
