"""The report formats render one verdict structure: JSON, Markdown, JUnit XML, HTML, DataFrame.

Outside references: the standard library's parsers (``json``, ``xml.etree.ElementTree``,
``html.parser``) read what we write; Markdown cells are split and unescaped by the
GitHub-flavoured Markdown table rule (cells split at unescaped ``|``) and CommonMark's
backslash-escape rule (any ASCII punctuation may be escaped), written out here in the test.
Verdicts come from the invented demo data and invented Gaussian classes.
"""

from __future__ import annotations

import json
import re
import xml.etree.ElementTree as ET
from html.parser import HTMLParser

import numpy as np
import pandas as pd
import pytest

import discaudit
from discaudit.config import CHECK_KEYS
from discaudit.decision.gate import regate

HOSTILE = "<script>alert(1)</script>"
PIPED = "a|b"


@pytest.fixture(scope="module")
def demo(flakes) -> discaudit.Verdict:
    """The demo data: failures and warnings, every check gating."""
    frame, _ = flakes
    return discaudit.preflight(frame, target="family", random_state=0)


@pytest.fixture(scope="module")
def demo_with_severities(flakes) -> discaudit.Verdict:
    """The demo data with collinearity advisory and separation turned off (a skip)."""
    frame, _ = flakes
    config = discaudit.Config(severity={"collinearity": "advisory", "separation": "off"})
    return discaudit.preflight(frame, target="family", config=config, random_state=0)


@pytest.fixture(scope="module")
def hostile() -> discaudit.Verdict:
    """Invented Gaussian classes plus two constant columns with hostile names (they appear in a summary)."""
    rng = np.random.default_rng(3)
    X = np.vstack([rng.normal(size=(60, 3)) + shift for shift in (0.0, 1.5)])
    frame = pd.DataFrame(X, columns=["x1", "x2", "x3"])
    frame[HOSTILE] = 1.0
    frame[PIPED] = 2.0
    return discaudit.preflight(frame, np.repeat(["u", "v"], 60), random_state=0)


VERDICTS = ("demo", "demo_with_severities", "hostile")


# --- JSON -----------------------------------------------------------------------------------


def _plain_types(value: object) -> bool:
    if isinstance(value, dict):
        return all(isinstance(k, str) and _plain_types(v) for k, v in value.items())
    if isinstance(value, list):
        return all(_plain_types(v) for v in value)
    return value is None or type(value) in (str, int, float, bool)


@pytest.mark.parametrize("name", VERDICTS)
def test_json_round_trip_and_schema_keys(name, request) -> None:
    verdict = request.getfixturevalue(name)
    text = verdict.to_json()
    document = json.loads(text)
    assert document == verdict.to_dict()
    assert json.loads(json.dumps(document, allow_nan=False)) == document
    assert _plain_types(document)
    assert set(document) == {
        "schema_version",
        "discaudit_version",
        "status",
        "gate",
        "baseline",
        "recommendation",
        "findings",
        "meta",
        "remedies",
        "caution",
    }
    assert document["schema_version"] == 1
    assert {"model", "params", "reasons", "alternatives", "rules_fired"} <= set(document["recommendation"])
    assert list(document["findings"]) == list(CHECK_KEYS)
    for key, finding in document["findings"].items():
        assert set(finding) == {"check", "status", "figure", "summary", "details"}
        assert finding["check"] == key and finding["status"] in {"pass", "warn", "fail", "skip"}


# --- JUnit XML ------------------------------------------------------------------------------


@pytest.mark.parametrize("name", VERDICTS)
@pytest.mark.parametrize(("model", "fail_on"), [(None, "fail"), (None, "warn"), ("lda", "fail"), ("qda", "warn")])
def test_junit_counts_match_the_verdict(name, model, fail_on, request) -> None:
    verdict = regate(request.getfixturevalue(name), discaudit.Config(model=model, fail_on=fail_on))
    gate = verdict.gate
    root = ET.fromstring(verdict.to_junit())
    suites = root.findall("testsuite")
    assert len(suites) == 1 and suites[0].get("name") == "discaudit"
    suite = suites[0]
    cases = suite.findall("testcase")
    assert [c.get("name") for c in cases] == [*CHECK_KEYS, "gate"]
    expected_skips = {k for k, f in verdict.findings.items() if f.status == "skip"}
    failures = {c.get("name") for c in cases if c.find("failure") is not None}
    skips = {c.get("name") for c in cases if c.find("skipped") is not None}
    assert failures - {"gate"} == set(gate.failing_checks)
    assert ("gate" in failures) == (not gate.passed)
    assert skips == expected_skips
    for element in (root, suite):
        assert element.get("tests") == str(len(CHECK_KEYS) + 1)
        assert element.get("failures") == str(len(failures))
        assert element.get("skipped") == str(len(expected_skips))
    # A JUnit failure exists exactly when the command line would exit 1.
    assert bool(failures) == (not gate.passed)
    for case in cases:
        assert float(case.get("time")) >= 0.0
        if case.get("name") == "gate":
            assert gate.rule in case.find("system-out").text
            continue
        finding = verdict.findings[case.get("name")]
        failure = case.find("failure")
        if failure is not None:
            assert failure.get("message") == finding.summary
            assert failure.get("type") == (finding.status if finding.status in ("warn", "fail") else "gate")
            assert json.loads(failure.text) == finding.details
        elif finding.status != "skip":
            assert finding.summary in case.find("system-out").text


def test_junit_advisory_failure_does_not_fail(demo_with_severities) -> None:
    verdict = demo_with_severities
    assert verdict.findings["collinearity"].status == "fail"  # precondition on the demo data
    case = ET.fromstring(verdict.to_junit()).find(".//testcase[@name='collinearity']")
    assert case.find("failure") is None
    assert "advisory" in case.find("system-out").text
    assert verdict.findings["separation"].status == "skip"


def test_an_unknown_gate_level_or_model_is_refused() -> None:
    with pytest.raises(discaudit.DataError, match="fail_on"):
        discaudit.Config(fail_on="error")
    with pytest.raises(discaudit.DataError, match="Config.model must be one of"):
        discaudit.Config(model="svm")


# --- Markdown -------------------------------------------------------------------------------


def _cells(line: str) -> list[str]:
    """GFM table rule: a row splits at pipes not escaped by a backslash; outer pipes are borders."""
    parts = re.split(r"(?<!\\)\|", line.strip())
    assert parts[0] == "" and parts[-1] == "", line
    return [p.strip() for p in parts[1:-1]]


def _unescape(text: str) -> str:
    """CommonMark: a backslash before ASCII punctuation stands for that character."""
    return re.sub(r"\\([!-/:-@\[-`{-~])", r"\1", text)


@pytest.mark.parametrize("name", VERDICTS)
def test_markdown_renders_one_table(name, request) -> None:
    verdict = request.getfixturevalue(name)
    text = verdict.to_markdown()
    rows = [line for line in text.splitlines() if line.startswith("|")]
    assert len(rows) == 2 + len(CHECK_KEYS)  # header, separator, one row per check
    assert _cells(rows[0]) == ["check", "status", "key figure", "summary"]
    assert all(re.fullmatch(r":?-{3,}:?", c) for c in _cells(rows[1]))
    for row, (key, finding) in zip(rows[2:], verdict.findings.items(), strict=True):
        cells = _cells(row)
        assert len(cells) == 4, row
        assert cells[0] == f"`{key}`"
        assert finding.status.upper() in cells[1]
        assert _unescape(cells[3]) == " ".join(finding.summary.split())
    assert "**Recommendation:**" in text and verdict.recommendation.model in text
    assert text.index("**Recommendation:**") < text.index("**Suggested settings:**") < text.index("> Caution")


def test_markdown_escapes_pipes_and_html(hostile) -> None:
    text = hostile.to_markdown()
    assert HOSTILE in hostile.findings["data_hygiene"].summary  # precondition: the name reaches a summary
    assert "<script>" not in text  # escaped as \<script\>, which CommonMark shows as text
    assert PIPED not in text and "a\\|b" in text


# --- HTML -----------------------------------------------------------------------------------


class _Collector(HTMLParser):
    """Start tags and the text of each table row's cells."""

    def __init__(self) -> None:
        super().__init__(convert_charrefs=True)
        self.tags: list[str] = []
        self.rows: list[list[str]] = []
        self._cell: list[str] | None = None

    def handle_starttag(self, tag, attrs) -> None:
        self.tags.append(tag)
        if tag == "tr":
            self.rows.append([])
        elif tag in ("td", "th"):
            self._cell = []

    def handle_endtag(self, tag) -> None:
        if tag in ("td", "th") and self._cell is not None:
            self.rows[-1].append("".join(self._cell))
            self._cell = None

    def handle_data(self, data) -> None:
        if self._cell is not None:
            self._cell.append(data)


@pytest.mark.parametrize("name", VERDICTS)
def test_repr_html_is_a_table_with_status_words(name, request) -> None:
    verdict = request.getfixturevalue(name)
    parser = _Collector()
    parser.feed(verdict._repr_html_())
    header, *rows = parser.rows
    assert header == ["check", "status", "key figure", "summary"]
    assert len(rows) == len(CHECK_KEYS)
    symbols = {"pass": "\u2713", "warn": "\u26a0", "fail": "\u2717", "skip": "\u2013"}
    for cells, (key, finding) in zip(rows, verdict.findings.items(), strict=True):
        assert cells[0] == key
        assert cells[1].startswith(f"{symbols[finding.status]} {finding.status.upper()}")  # no colour needed
        assert cells[3] == finding.summary


def test_repr_html_escapes_a_hostile_column_name(hostile) -> None:
    html = hostile._repr_html_()
    assert HOSTILE in hostile.findings["data_hygiene"].summary  # precondition
    assert "<script" not in html
    assert "&lt;script&gt;alert(1)&lt;/script&gt;" in html
    parser = _Collector()
    parser.feed(html)
    assert "script" not in parser.tags
    assert any(HOSTILE in cell for row in parser.rows for cell in row)  # shown as text


def test_advisory_status_is_marked_in_html_and_markdown(demo_with_severities) -> None:
    assert "\u2717 FAIL (advisory)" in demo_with_severities._repr_html_()
    assert "\u2717 FAIL (advisory)" in demo_with_severities.to_markdown()


# --- DataFrame ------------------------------------------------------------------------------


def test_to_frame_has_one_row_per_check(demo_with_severities) -> None:
    verdict = demo_with_severities
    frame = verdict.to_frame()
    assert list(frame.columns) == ["check", "status", "figure", "summary", "severity"]
    assert frame["check"].tolist() == list(CHECK_KEYS)
    assert frame["status"].tolist() == [f.status for f in verdict.findings.values()]
    assert frame["summary"].tolist() == [f.summary for f in verdict.findings.values()]
    severity = dict(zip(frame["check"], frame["severity"], strict=True))
    assert severity["collinearity"] == "advisory" and severity["separation"] == "off"
    assert severity["normality"] == "gate"
