"""The self-contained HTML report: offline, escaped, complete, and matched to its data.

Outside references: the standard library's ``html.parser`` (reads the document, collects tags,
attributes and text), ``hashlib`` (the data fingerprint recomputed from the input with pandas)
and the PNG signature of the embedded figures (ISO/IEC 15948). Verdicts come from the invented
demo data and small invented sets with hostile names.
"""

from __future__ import annotations

import base64
import builtins
import hashlib
import json
import re
from html import escape
from html.parser import HTMLParser

import matplotlib

matplotlib.use("Agg")

import numpy as np
import pandas as pd
import pytest

import discaudit
from discaudit.cli import main
from discaudit.config import Config
from discaudit.plot import plottable
from discaudit.report.labels import CAUTION

HOSTILE_COLUMN = "<script>alert(1)</script>"
HOSTILE_CLASS = "<b onmouseover=alert(2)>x</b>"
HOSTILE_ROW = '"><img src=x onerror=alert(3)>'


class _Document(HTMLParser):
    """Tags with attributes, and the text, of an HTML document."""

    def __init__(self) -> None:
        super().__init__(convert_charrefs=True)
        self.tags: list[tuple[str, dict[str, str | None]]] = []
        self.text: list[str] = []

    def handle_starttag(self, tag, attrs):
        self.tags.append((tag, dict(attrs)))

    def handle_data(self, data):
        self.text.append(data)


def _parse(html: str) -> _Document:
    doc = _Document()
    doc.feed(html)
    doc.close()
    return doc


@pytest.fixture(scope="module")
def demo(flakes) -> discaudit.Verdict:
    frame, _ = flakes
    return discaudit.preflight(frame, target="family", random_state=0)


@pytest.fixture(scope="module")
def report(demo) -> str:
    return demo.to_html()


@pytest.fixture(scope="module")
def hostile() -> tuple[discaudit.Verdict, str]:
    """Invented Gaussian classes with a hostile column name, class label and (flagged) row label."""
    rng = np.random.default_rng(8)
    X = np.vstack([rng.normal(size=(70, 3)), rng.normal(size=(70, 3)) + 2.0])
    frame = pd.DataFrame(X, columns=["x1", HOSTILE_COLUMN, "x3"], index=[f"r{i}" for i in range(140)])
    frame.index = [HOSTILE_ROW if i == 5 else f"r{i}" for i in range(140)]
    frame.iloc[5] = [8.0, -8.0, 8.0]  # far from its class: flagged, so the row label is listed
    y = np.repeat([HOSTILE_CLASS, "plain"], 70)
    verdict = discaudit.preflight(frame, y, config=Config(vif_warn=4.0), random_state=0)
    return verdict, verdict.to_html()


# --- offline and self-contained ---------------------------------------------------------------


def test_no_external_references(report):
    assert re.search(r"https?://", report, flags=re.IGNORECASE) is None
    assert re.search(r"<script|<link|@import|url\(|<iframe|<object|<embed", report, flags=re.IGNORECASE) is None
    doc = _parse(report)
    for tag, attrs in doc.tags:
        for name in ("src", "href"):
            value = attrs.get(name)
            if value is not None:
                assert value.startswith(("data:image/png;base64,", "#")), (tag, name, value[:40])


def test_one_figure_per_plotted_check_each_a_png(demo, report):
    doc = _parse(report)
    figures = [attrs["data-check"] for tag, attrs in doc.tags if tag == "figure"]
    assert figures == plottable(demo) and len(figures) == 6
    images = [attrs["src"] for tag, attrs in doc.tags if tag == "img"]
    assert len(images) == len(figures)
    for src in images:
        png = base64.b64decode(src.removeprefix("data:image/png;base64,"), validate=True)
        assert png[:8] == b"\x89PNG\r\n\x1a\n"  # PNG signature
        assert b"http" not in png  # no Software text chunk with a URL


def test_report_holds_table_details_settings_fingerprint_and_caution(demo, report):
    doc = _parse(report)
    text = " ".join(doc.text)
    body = escape(CAUTION.removeprefix("Caution: "), quote=True)
    assert report.count(body) == 1  # one caution, in the box at the top
    for key, finding in demo.findings.items():
        assert any(t == "section" and a.get("data-check") == key for t, a in doc.tags)
        assert finding.summary in text
    # details as tables: every feature's VIF has its own row header
    for feature in demo.findings["collinearity"].details["vif_within"]:
        assert f"<tr><th>{escape(feature)}</th>" in report
    # settings: every Config field, with its meaning
    for field in Config.describe():
        if field["name"] != "severity":
            assert f"<code>{field['name']}</code>" in report
            assert escape(field["doc"], quote=True) in report
    fingerprint = demo.meta["fingerprint"]
    assert fingerprint["sha256"] in report and len(fingerprint["sha256"]) == 64
    assert "Worst check status" in text and "FAIL" in text
    assert demo.gate.outcome in text


def test_fingerprint_is_sha256_of_matrix_codes_and_labels(flakes, demo):
    frame, _ = flakes
    X = frame.drop(columns=["family"]).to_numpy(dtype="<f8")
    classes = demo.meta["classes"]
    codes = pd.Categorical(frame["family"], categories=classes).codes.astype("<i8")
    reference = hashlib.sha256()  # the documented definition, recomputed with hashlib
    reference.update(np.ascontiguousarray(X).tobytes())
    reference.update(codes.tobytes())
    reference.update(json.dumps([str(c) for c in classes]).encode("utf-8"))
    assert demo.meta["fingerprint"]["sha256"] == reference.hexdigest()
    assert (demo.meta["fingerprint"]["rows"], demo.meta["fingerprint"]["columns"]) == X.shape


def test_fingerprint_tracks_values_and_order_not_names(flakes, demo):
    frame, _ = flakes
    small = frame.iloc[::3]

    def digest(f: pd.DataFrame) -> str:
        return discaudit.preflight(f, target="family", random_state=0).meta["fingerprint"]["sha256"]

    base = digest(small)
    assert digest(small.rename(columns={"bulk_density": "density"})) == base
    assert digest(small.iloc[::-1]) != base
    changed = small.copy()
    changed.iloc[0, 0] += 1e-9
    assert digest(changed) != base


def test_json_carries_the_fingerprint(demo):
    document = json.loads(demo.to_json())
    assert document["meta"]["fingerprint"]["sha256"] == demo.meta["fingerprint"]["sha256"]


# --- escaping ----------------------------------------------------------------------------------


def test_hostile_names_appear_only_escaped(hostile):
    verdict, html = hostile
    for raw in (HOSTILE_COLUMN, HOSTILE_CLASS, HOSTILE_ROW):
        assert raw not in html
    assert escape(HOSTILE_COLUMN, quote=True) in html
    assert escape(HOSTILE_CLASS, quote=True) in html
    assert escape(HOSTILE_ROW, quote=True) in html  # listed among the flagged rows
    doc = _parse(html)
    assert not [t for t, _ in doc.tags if t in ("script", "b")]
    assert all(not any(k.startswith("on") for k in attrs) for _, attrs in doc.tags)
    # the parser recovers the literal strings as text
    text = "".join(doc.text)
    assert HOSTILE_COLUMN in text and HOSTILE_CLASS in text


def test_a_changed_setting_is_marked(hostile):
    _, html = hostile
    assert re.search(r"<code>vif_warn</code></th><td class=\"changed\">4 \(changed\)</td>", html)


# --- without matplotlib, and from the command line ----------------------------------------------


def test_report_without_matplotlib_has_no_figures_and_says_why(demo, monkeypatch):
    real_import = builtins.__import__

    def no_matplotlib(name, *args, **kwargs):
        if name == "matplotlib" or name.startswith("matplotlib."):
            raise ImportError(f"No module named {name!r}")
        return real_import(name, *args, **kwargs)

    monkeypatch.setattr(builtins, "__import__", no_matplotlib)
    html = demo.to_html()
    assert "<img" not in html and "<figure" not in html
    assert "matplotlib is not installed" in html
    assert escape(CAUTION.removeprefix("Caution: "), quote=True) in html


def test_cli_writes_the_html_report(tmp_path, capsys):
    rng = np.random.default_rng(2)  # invented: two Gaussian classes
    frame = pd.DataFrame(np.vstack([rng.normal(size=(60, 3)), rng.normal(size=(60, 3)) + 1.5]), columns=["a", "b", "c"])
    frame["label"] = np.repeat(["u", "w"], 60)
    data = tmp_path / "data.csv"
    frame.to_csv(data, index=False)
    out = tmp_path / "report.html"
    code = main(["check", str(data), "--target", "label", "--format", "html", "--output", str(out)])
    stdout = capsys.readouterr().out
    assert code in (0, 1)
    assert f"html report written to {out}" in stdout
    html = out.read_text(encoding="utf-8")
    assert html.startswith("<!DOCTYPE html>") and html.rstrip().endswith("</html>")
    assert re.search(r"https?://", html) is None
    reference = discaudit.preflight(frame, target="label", random_state=0)
    assert reference.meta["fingerprint"]["sha256"] in html


# --- reads cleanly --------------------------------------------------------------------------


def test_status_cells_stay_on_one_line(demo, report) -> None:
    for html in (report, demo._repr_html_()):
        cells = re.findall(r'<td style="([^"]*)">[\u2713\u26a0\u2717\u2013] [A-Z]+', html)
        assert cells and all("white-space:nowrap" in style for style in cells)
    assert ".status { font-weight: bold; white-space: nowrap; }" in report


def test_details_use_readable_headings_and_the_summary_number_format(demo, report) -> None:
    # Box's M p-value on the demo is 0 in float64: the table prints it as the summary does
    assert demo.findings["covariance_homogeneity"].details["box_m"]["p_value"] == 0.0
    section = report.split('id="finding-covariance_homogeneity"')[1].split("</section>")[0]
    assert '<th>p-value</th><td class="num">p &lt; 1e-16</td>' in section
    assert "<th>p_value</th>" not in section
    # feature names keep their underscores; detail keys do not
    assert "<th>thickness_um</th>" in report and "<th>max VIF feature</th>" in report


def test_robust_fit_internals_are_collapsed(report) -> None:
    section = report.split('id="finding-outliers"')[1].split("</section>")[0]
    internals = re.findall(r'<details(?: open)?><summary>[^<]*</summary>(?=<table class="kv"><tr><th>h</th>)', section)
    assert internals and all(not d.startswith("<details open") for d in internals)


def test_outlier_caption_says_which_classes_were_fitted_classically(wine) -> None:
    X, y = wine  # every wine class is under 10 rows per feature: classical distances
    html = discaudit.preflight(X, y, random_state=0).to_html()
    caption = re.search(r'<figure data-check="outliers">.*?<figcaption>(.*?)</figcaption>', html, re.S).group(1)
    assert "both axes are classical" in caption and "robust (MCD)" not in caption
