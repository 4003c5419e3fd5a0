"""The JSON report is a documented format: every report validates against the shipped JSON Schema.

The validator is the ``jsonschema`` package (draft 2020-12), independent of the code that writes
the reports. Reports come from the invented demo data, open data sets shipped by scikit-learn,
a comparison with a baseline, advisory and turned-off checks, streamed input and the command line.
"""

from __future__ import annotations

import json
from importlib import resources

import jsonschema
import numpy as np
import pandas as pd
import pytest

import discaudit
from discaudit.cli import main
from discaudit.decision.baseline import compare
from discaudit.report.json import SCHEMA_VERSION, schema
from discaudit.stream import preflight_chunks


@pytest.fixture(scope="module")
def validator() -> jsonschema.Draft202012Validator:
    document = schema()
    jsonschema.Draft202012Validator.check_schema(document)  # the schema itself is valid draft 2020-12
    return jsonschema.Draft202012Validator(document)


def _valid(validator: jsonschema.Draft202012Validator, report: dict) -> None:
    errors = sorted(validator.iter_errors(report), key=lambda e: list(e.path))
    assert not errors, [f"{list(e.path)}: {e.message}"[:300] for e in errors[:5]]


def test_the_schema_ships_in_the_package_and_names_its_draft() -> None:
    text = resources.files("discaudit.report").joinpath("verdict.schema.json").read_text(encoding="utf-8")
    document = json.loads(text)
    assert document["$schema"] == "https://json-schema.org/draft/2020-12/schema"
    assert document["properties"]["schema_version"] == {"const": SCHEMA_VERSION}
    assert set(document["required"]) == set(document["properties"])  # every top-level key is described


@pytest.fixture(scope="module")
def reports(flakes, iris, wine) -> dict[str, dict]:
    frame, _ = flakes
    out = {
        "demo": discaudit.preflight(frame, target="family"),
        "demo_qda_warn": discaudit.preflight(
            frame, target="family", config=discaudit.Config(model="qda", fail_on="warn")
        ),
        "severities": discaudit.preflight(
            frame, target="family", config=discaudit.Config(severity={"normality": "advisory", "separation": "off"})
        ),
        "iris": discaudit.preflight(*iris),
        "wine_lda": discaudit.preflight(*wine, config=discaudit.Config(model="lda")),
    }
    chunks = [frame.iloc[a : a + 150] for a in range(0, len(frame), 150)]
    out["streamed"] = preflight_chunks(lambda: iter(chunks), "family")
    accepted = json.loads(out["iris"].to_json())
    X, y = iris
    rng = np.random.default_rng(0)
    moved = X + rng.normal(scale=0.3, size=X.shape)
    out["iris_against_baseline"] = compare(discaudit.preflight(moved, y), accepted, discaudit.Config(), "iris.json")
    vanished = discaudit.preflight(X[y != "setosa"], y[y != "setosa"])
    out["class_vanished"] = compare(vanished, accepted, discaudit.Config(), "iris.json")
    return {name: json.loads(v.to_json()) for name, v in out.items()}


def test_every_library_report_validates(validator, reports) -> None:
    assert reports["iris_against_baseline"]["baseline"]["drifted"] is True
    assert any(c["figure"] == "vanished" for c in reports["class_vanished"]["baseline"]["changes"])
    for report in reports.values():
        _valid(validator, report)


def test_command_line_reports_validate(validator, tmp_path, monkeypatch, capsys) -> None:
    monkeypatch.chdir(tmp_path)
    rng = np.random.default_rng(3)
    frame = pd.DataFrame(rng.normal(size=(240, 3)), columns=["a", "b", "c"])
    frame["label"] = np.repeat(["u", "v", "w"], 80)
    frame.loc[frame["label"] == "v", "a"] += 1.0
    frame.to_csv(tmp_path / "d.csv", index=False)
    frame.to_parquet(tmp_path / "d.parquet")
    for argv in (
        ["check", "d.csv", "--target", "label", "--format", "json", "--write-baseline", "accepted.json"],
        ["check", "d.parquet", "--target", "label", "--format", "json", "--baseline", "accepted.json"],
        ["check", "d.csv", "--target", "label", "--format", "json", "--stream", "--batch-rows", "50", "--model", "qda"],
    ):
        code = main(argv)
        out = capsys.readouterr().out
        assert code in (0, 1)
        _valid(validator, json.loads(out))
    _valid(validator, json.loads((tmp_path / "accepted.json").read_text(encoding="utf-8")))


def test_the_schema_rejects_what_is_not_a_report(validator, reports) -> None:
    report = json.loads(json.dumps(reports["iris"]))
    assert validator.is_valid(report)
    for path, bad in ((("status",), "unknown"), (("gate", "model"), "svm"), (("schema_version",), 2)):
        broken = json.loads(json.dumps(report))
        target = broken
        for key in path[:-1]:
            target = target[key]
        target[path[-1]] = bad
        assert not validator.is_valid(broken), path
    del report["meta"]["class_moments"]
    assert not validator.is_valid(report)
