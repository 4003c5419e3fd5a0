"""The README's notebook example and its account of the demo say what the demo data really give.

The demo data are invented (``examples/make_flake_data.py``, seeded); the README quotes the
recommendation, its settings, the feature to drop first, the number of flagged flakes and the
status of every check that warns or fails. If the audit changes what it says, this test names
the README line to update.
"""

from __future__ import annotations

import re
from pathlib import Path

import pandas as pd
import pytest

import discaudit

README = (Path(__file__).resolve().parents[1] / "README.md").read_text(encoding="utf-8")


@pytest.fixture(scope="module")
def demo(flakes, tmp_path_factory) -> discaudit.Verdict:
    frame, _ = flakes
    path = tmp_path_factory.mktemp("demo") / "flakes.csv"
    frame.to_csv(path)  # as make_flake_data.py writes it, read back as the README reads it
    return discaudit.preflight(pd.read_csv(path, index_col="flake_id"), target="family", random_state=0)


def test_the_notebook_example_quotes_the_demo(demo, flakes) -> None:
    block = README.split("## In a notebook")[1].split("```")[1]
    model = re.search(r"recommendation\.model  # '(\w+)' here", block).group(1)
    assert demo.recommendation.model == model
    params = re.search(r"recommendation\.params  # (\{.*?\}) here", block).group(1)
    assert str(demo.recommendation.params) == params
    drop = demo.findings["collinearity"].details["near_dependencies"][0]["drop_to_lower_max_vif"]
    assert f"{{'feature': '{drop['feature']}', 'max_vif_after': {drop['max_vif_after']:.1f}" in block
    n = int(re.search(r"outlier_rows\(\)  # the (\d+) flagged flakes", block).group(1))
    rows = demo.outlier_rows()
    assert len(rows) == n
    _, planted = flakes
    assert set(rows.sort_values("squared_distance", ascending=False).index[:6]) == set(planted["contaminated"])


def test_the_demo_section_names_the_planted_failures(demo) -> None:
    text = " ".join(
        README.split("**The checks that fail or warn on the demo are planted**")[1].split("\n\n")[0].split()
    )
    for key, finding in demo.findings.items():
        if finding.status in ("warn", "fail"):
            assert f"`{key}` {finding.status}s" in text, key
    for key in ("outliers", "normality"):
        if demo.findings[key].status == "pass":
            assert f"`{key}` passes" in text, key
    n = len(demo.outlier_rows())
    assert f"of the {n} rows" in text
    gate = re.search(r"gate\.outcome  # '(.*?)\.\.\.\)\.'", README).group(1)
    assert demo.gate.outcome.startswith(gate)
