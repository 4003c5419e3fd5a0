"""Every summary is built from the figures its details hold: parse the sentence, find each number.

For every open data set of the validation study's tuning split (the loaders of
``benchmarks/validation/open_data.py``) and the invented demo data, each check's summary is
parsed: every number in it (names of features, classes and rows set aside first) must be a
figure of that finding's details, printed the way the summary prints it (``fmt``, ``fmt_p``, a
percentage of a share, or an integer count). Beside that generic rule each check has its own
assertions: counts add up, the class named as worst is the worst by the stated measure, and no
"no evidence" sentence stands beside a statistic that favours the alternative without saying
which one is trusted. The same runs check the targets of the audit on open data: no warning
escapes to the caller, and no class has more than 10% of its rows flagged as outliers.
"""

from __future__ import annotations

import math
import re
import sys
import warnings
from pathlib import Path
from typing import Any

import numpy as np
import pytest

import discaudit
from discaudit.findings import fmt

sys.path.insert(0, str(Path(__file__).resolve().parents[1] / "benchmarks" / "validation"))
from open_data import OPEN_DATA
from split import OPEN_SPLIT

# The tuning split's open data sets only: the held-out ones are audited by the held-out look of the
# validation study and nothing else (benchmarks/validation/split.py).
DATASETS = [*(n for n in OPEN_DATA if n in OPEN_SPLIT["tuning"]), "demo"]
NUMBER = re.compile(r"(?<![\w.])[-+]?\d+(?:\.\d+)?(?:e[-+]?\d+)?%?(?![\w])")


@pytest.fixture(scope="module")
def verdicts(flakes) -> dict[str, discaudit.Verdict]:
    out = {}
    for name in DATASETS:
        if name == "demo":
            frame, _ = flakes
            X, y = frame.drop(columns="family"), frame["family"]
        else:
            X, y = OPEN_DATA[name][1]()
        with warnings.catch_warnings():
            warnings.simplefilter("error")  # target: no warning escapes to the caller
            out[name] = discaudit.preflight(X, y, random_state=0)
    return out


def _walk(value: Any, strings: set[str], numbers: list[float]) -> None:
    """Collect the strings and numbers of the details (a list or mapping also counts its items)."""
    if isinstance(value, (dict, list)):
        numbers.append(float(len(value)))
    if isinstance(value, dict):
        for k, v in value.items():
            strings.add(str(k))
            _walk(v, strings, numbers)
    elif isinstance(value, list):
        for v in value:
            _walk(v, strings, numbers)
    elif isinstance(value, bool) or value is None:
        return
    elif isinstance(value, (int, float)):
        numbers.append(float(value))
    else:
        strings.add(str(value))


def _renderings(x: float) -> set[str]:
    """How a figure may be printed in a sentence: fmt at 2 to 6 digits, its magnitude (a signed figure
    whose sign the sentence states in words), a share as a percentage or percentage points, a count."""
    out: set[str] = set()
    for v in (x, abs(x)):
        out |= {fmt(v, d) for d in (2, 3, 4, 6)}
        out |= {fmt(100 * v, d) + "%" for d in (2, 3, 4)} | {f"{100 * v:.1f}%", f"{100 * v:.1f}", fmt(100 * v, 2)}
        if float(v).is_integer():
            out.add(str(int(v)))
    return out


MORE = re.compile(r"\band (\d+) more\b|\((\d+) more\b|likewise in (\d+) more\b")


def numbers_in(summary: str, names: set[str], classes: set[str], rows: set[str]) -> tuple[list[str], list[int]]:
    """Numeric tokens of a sentence, with every known name blanked out first, and the 'N more' counts apart.

    Class and row labels may be numbers themselves; they are blanked where the sentence names
    them as such ("class 1", "classes 0, 1 and 2", "row 152").
    """
    text = summary.replace("p < 1e-16", "p below double precision")
    more = [int(next(g for g in m.groups() if g)) for m in MORE.finditer(text)]
    text = MORE.sub(" ", text)
    label = "|".join(re.escape(c) for c in sorted(classes, key=len, reverse=True))
    text = re.sub(rf"\b[Cc]lass(?:es)? (?:(?:{label})(?:, | and |(?=[^\w])))+", " ", text)
    if rows:
        row = "|".join(re.escape(r) for r in sorted(rows, key=len, reverse=True))
        text = re.sub(rf"\brow (?:{row})(?=[,;) ])", " ", text)
    for name in sorted((n for n in names if n and not NUMBER.fullmatch(n)), key=len, reverse=True):
        text = text.replace(name, " ")
    return NUMBER.findall(text), more


def _rows(verdict: discaudit.Verdict) -> set[str]:
    arrays = verdict.findings["outliers"].arrays
    if "row_label" not in arrays:
        return set()
    return {str(r) for r in np.asarray(arrays["row_label"], dtype=object)[np.asarray(arrays["flagged"], dtype=bool)]}


def _unexplained(verdict: discaudit.Verdict, key: str) -> list[str]:
    finding = verdict.findings[key]
    strings: set[str] = set()
    values: list[float] = []
    _walk(finding.details, strings, values)
    printed = set().union(*(_renderings(v) for v in values)) if values else set()
    counts = {int(v) for v in values if float(v).is_integer()}
    classes = {str(c) for c in verdict.meta["classes"]}
    names = classes | {str(f) for f in verdict.meta["features"]} | {s for s in strings if len(s) < 60}
    tokens, more = numbers_in(finding.summary, names, classes, _rows(verdict))
    out = [t for t in tokens if t not in printed and t.lstrip("+") not in printed]
    # "X, Y, Z and N more": N plus the few items shown is a count the details hold
    out += [f"{n} more" for n in more if not any(n + shown in counts for shown in range(1, 6))]
    return out


#: Checks whose summaries this test holds to their details (every registered check).
@pytest.mark.parametrize("name", DATASETS)
def test_every_number_in_every_summary_is_a_figure_of_its_details(verdicts, name: str) -> None:
    verdict = verdicts[name]
    bad = {key: _unexplained(verdict, key) for key in verdict.findings if verdict.findings[key].status != "skip"}
    bad = {k: v for k, v in bad.items() if v}
    assert not bad, {k: (v, verdict.findings[k].summary) for k, v in bad.items()}


# -- per-check facts ------------------------------------------------------------------------------


@pytest.mark.parametrize("name", DATASETS)
def test_outlier_counts_add_up_and_named_rows_are_the_farthest(verdicts, name: str) -> None:
    f = verdicts[name].findings["outliers"]
    if f.status == "skip":
        return
    d = f.details
    assert d["n_flagged"] == sum(c["n_flagged"] for c in d["per_class"].values())
    assert d["n_rows"] == sum(c["n"] for c in d["per_class"].values())
    m = re.search(r"^(\d+) of (\d+) rows", f.summary)
    if d["n_flagged"]:
        assert m and int(m.group(1)) == d["n_flagged"] and int(m.group(2)) == d["n_rows"], f.summary
        listed = sorted(
            ((r["squared_distance"], str(r["row"]), c) for c, v in d["per_class"].items() for r in v["flagged_rows"]),
            key=lambda t: (-t[0], t[1]),
        )
        named = re.findall(r"row (.+?), class (.+?)(?:;|\))", f.summary.split("farthest: ")[1].split(")")[0] + ")")
        assert [(r, c) for r, c in named] == [(row, str(c)) for _, row, c in listed[: len(named)]]
        more = re.search(r"and (\d+) more\)", f.summary)
        assert len(named) + (int(more.group(1)) if more else 0) == d["n_flagged"]
    wide = re.search(r"([\d.]+)% of class (.+?) is flagged", f.summary)
    if wide:
        worst = max(d["per_class"].values(), key=lambda v: v["fraction_flagged"])
        assert fmt(100 * worst["fraction_flagged"], 3) == wide.group(1)
        assert d["per_class"][wide.group(2)]["fraction_flagged"] == worst["fraction_flagged"]
    for count, n, cls, feature in re.findall(r"(\d+) of (\d+) rows of class (.+?) share (.+?) [-\d.e+]+:", f.summary):
        t = d["per_class"][cls]["left_out_of_fit"][feature]
        assert t["rows_at_modal_value"] == int(count) and d["per_class"][cls]["n"] == int(n)
        assert feature not in d["per_class"][cls]["features_used"]


@pytest.mark.parametrize("name", DATASETS)
def test_ties_and_tails_never_make_the_outlier_check_fail(verdicts, name: str) -> None:
    f = verdicts[name].findings["outliers"]
    if f.status != "fail":
        return
    # a failing check names flagged rows whose removal moves a class mean or widens the pooled covariance
    th = f.details["thresholds"]
    assert f.details["n_flagged"] > 0
    assert (
        f.details["max_mean_shift"] > th["mean_shift_fail"]
        or f.details["pooled_logdet_excess_per_feature"] > th["logdet_fail"]
    )


@pytest.mark.parametrize("name", DATASETS)
def test_no_class_has_more_than_a_tenth_of_its_rows_flagged(verdicts, name: str) -> None:
    # Target on open data: these sets hold no such mass of gross outliers (ties, exact fits and
    # skewed tails are stated instead).
    f = verdicts[name].findings["outliers"]
    for cls, v in f.details.get("per_class", {}).items():
        assert v["fraction_flagged"] <= 0.10, (cls, v["n_flagged"], v["n"])


_RANK = {"pass": 0, "warn": 1, "fail": 2}


@pytest.mark.parametrize("name", DATASETS)
def test_normality_names_the_worst_class_and_counts_its_classes(verdicts, name: str) -> None:
    f = verdicts[name].findings["normality"]
    d = f.details
    graded = {c: s for c, s in d["per_class"].items() if "status" in s}
    if not graded:
        return
    worst = max(graded.values(), key=lambda s: (_RANK[s["status"]], s["departure_size"]))
    named_worst = graded[str(d["worst_class"])]
    assert (_RANK[named_worst["status"]], named_worst["departure_size"]) == (
        _RANK[worst["status"]],
        worst["departure_size"],
    )
    strong = re.search(r"(\d+) of (\d+) classes departs? strongly", f.summary)
    n_fail = sum(s["status"] == "fail" for s in graded.values())
    n_warn = sum(s["status"] == "warn" for s in graded.values())
    if n_fail:
        assert strong and int(strong.group(1)) == n_fail and int(strong.group(2)) == len(d["per_class"]), f.summary
        moderately = re.search(r"and (\d+) moderately", f.summary)
        assert (int(moderately.group(1)) if moderately else 0) == n_warn
    named = re.search(r"worst, by departure size, class (.+?)(?: \(without|:)", f.summary)
    if n_fail or n_warn:
        assert named and named.group(1) == str(d["worst_class"]), f.summary
        s = graded[named.group(1)]
        assert f"|skewness| up to {fmt(s['max_abs_skewness'])} ({s['max_abs_skewness_feature']})" in f.summary
    else:
        assert "no class departs significantly" in f.summary.lower()
    for cls, count in re.findall(r"in class (.+?) the departure is driven by (\d+) flagged", f.summary):
        assert d["per_class"][cls]["driven_by_flagged_rows"] and d["per_class"][cls]["status"] == "pass"
        assert d["per_class"][cls]["n_flagged_by_outlier_check"] == int(count)
    # a discrete feature is named once
    for feature in d["discrete_features"]:
        assert len(re.findall(rf"(?<![\w]){re.escape(feature)}(?![\w])", f.summary)) == 1, feature


@pytest.mark.parametrize("name", DATASETS)
def test_covariance_summary_agrees_with_box_m_and_bic(verdicts, name: str) -> None:
    f = verdicts[name].findings["covariance_homogeneity"]
    d = f.details
    if "bic" not in d:
        return
    delta, p_value = d["bic"]["delta_bic"], d["box_m"]["p_value"]
    side = "separate covariances" if delta > 0 else "one shared covariance"
    assert f"BIC favours {side} by {fmt(abs(delta))}" in f.summary
    assert f.figure == f"BIC: {'separate' if delta > 0 else 'shared'} by {fmt(abs(delta))}"
    if "No evidence" in f.summary:
        assert delta <= 0 and p_value >= d["alpha"]
    if delta > d["bic_margin"] and f.status != "fail":
        assert "cannot confirm" in f.summary  # says which statistic it trusts
    if p_value < d["alpha"] and delta <= d["bic_margin"]:
        assert "the BIC is the one to trust" in f.summary
    if "most in class" in f.summary:
        named = re.search(r"most in class (.+?): ", f.summary).group(1)
        assert named == str(d["most_different_class"])
        ratios = {
            c: abs(math.log(v["most_different_direction_variance_ratio"] or 1e-300)) for c, v in d["spread"].items()
        }
        assert ratios[named] == pytest.approx(max(ratios.values()), rel=1e-9)


@pytest.mark.parametrize("name", DATASETS)
def test_collinearity_names_the_feature_whose_removal_helps_most(verdicts, name: str) -> None:
    f = verdicts[name].findings["collinearity"]
    deps = f.details.get("near_dependencies") or []
    if not deps or f.status == "pass":
        return
    drop = deps[0]["drop_to_lower_max_vif"]
    assert drop["feature"] in deps[0]["features"]
    assert f"dropping {drop['feature']} lowers the largest VIF most, to {fmt(drop['max_vif_after'])}" in f.summary
    assert drop["max_vif_after"] <= f.details["max_vif"]


def test_row_references_name_row_and_class_for_arrays() -> None:
    # numpy input: rows are positions and classes are codes, and the sentence says which is which
    rng = np.random.default_rng(3)
    X = rng.normal(size=(200, 3))
    X[7] += 40.0
    y = np.repeat([0, 1], 100)
    f = discaudit.preflight(X, y, random_state=0).findings["outliers"]
    assert "row 7, class 0" in f.summary


@pytest.mark.parametrize("name", DATASETS)
def test_no_warning_is_caught_inside_a_check(verdicts, name: str) -> None:
    # The audit turns a warning raised inside a check into a "warnings" detail; on open data there
    # must be none (a warning there means a computation met data it does not handle).
    caught = {k: f.details["warnings"] for k, f in verdicts[name].findings.items() if "warnings" in f.details}
    assert not caught
