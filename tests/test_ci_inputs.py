"""What CI data look like: ragged rows, repeated headers, decimal commas, targets that are not classes.

Each is an exit-2 error of one line naming the file and the line or column (the CSV files are
written here by hand, so the line numbers are known); ``--min-class-rows`` drops small classes
with a note in every report. Also: ``assert_fit_for`` for data tests, and which settings file the
command line says it used.
"""

from __future__ import annotations

import gzip
import json
from pathlib import Path

import numpy as np
import pandas as pd
import pytest

import discaudit
from discaudit.cli import main
from discaudit.sources.files import check_csv_layout, csv_line
from discaudit.testing import assert_fit_for


@pytest.fixture(autouse=True)
def _outside_any_project(tmp_path: Path, monkeypatch: pytest.MonkeyPatch) -> None:
    monkeypatch.chdir(tmp_path)
    monkeypatch.delenv("CI", raising=False)


def _rows(n: int = 60, seed: int = 0) -> list[str]:
    """Invented: two Gaussian classes, three features, as CSV lines (header first)."""
    rng = np.random.default_rng(seed)
    lines = ["a,b,c,label"]
    for i in range(n):
        shift = 1.5 if i % 2 else 0.0
        x = rng.normal(size=3) + shift
        lines.append(f"{x[0]:.6f},{x[1]:.6f},{x[2]:.6f},{'v' if i % 2 else 'u'}")
    return lines


def _write(path: Path, lines: list[str]) -> Path:
    path.write_text("\n".join(lines) + "\n", encoding="utf-8")
    return path


def _error(capsys, path: Path, *extra: str) -> str:
    code = main(["check", str(path), "--target", "label", *extra])
    out, err = capsys.readouterr()
    assert code == 2 and out == "", (code, out, err)
    assert err.startswith("discaudit: error: ") and err.count("\n") == 1 and "Traceback" not in err
    return err


def test_a_ragged_row_names_its_line(tmp_path, capsys) -> None:
    lines = _rows()
    lines[7] = lines[7] + ",9.9"  # line 8 of the file: one field too many
    err = _error(capsys, _write(tmp_path / "extra.csv", lines))
    assert "extra.csv: line 8 has 5 fields but the header has 4" in err
    lines = _rows()
    lines[1] = "0.1,0.2,0.3,u,7"  # the first data row: pandas would take the first column as the index
    assert "line 2 has 5 fields" in _error(capsys, _write(tmp_path / "first.csv", lines))
    lines = _rows()
    lines[30] = "0.1,0.2,u"
    assert "line 31 has 3 fields but the header has 4 (a missing field?)" in _error(
        capsys, _write(tmp_path / "short.csv", lines)
    )


def test_quoted_fields_and_blank_lines_are_counted_as_pandas_reads_them(tmp_path, capsys) -> None:
    lines = _rows()
    lines[3] = '0.5,"1.5",0.25,"u"'  # quotes: the csv module counts the fields
    lines.insert(10, "")  # a blank line, skipped by pandas
    lines[20] = lines[20] + ",extra"  # line 21
    path = _write(tmp_path / "quoted.csv", lines)
    assert "quoted.csv: line 21 has 5 fields" in _error(capsys, path)
    lines = _rows()
    lines[3] = '0.5,1.5,0.25,"u, with a comma"'  # a quoted delimiter is one field
    check_csv_layout(_write(tmp_path / "fine.csv", lines))  # no error
    frame = pd.read_csv(tmp_path / "fine.csv")
    assert csv_line(tmp_path / "fine.csv", 2) == 4 and frame.iloc[2]["label"] == "u, with a comma"


def test_a_repeated_header_names_its_line_also_in_gzip(tmp_path, capsys) -> None:
    lines = _rows()
    joined = lines + lines  # two files joined, each with its header: line 62 repeats line 1
    assert "line 62 repeats the header row" in _error(capsys, _write(tmp_path / "joined.csv", joined))
    gz = tmp_path / "joined.csv.gz"
    gz.write_bytes(gzip.compress(("\n".join(joined) + "\n").encode()))
    assert "joined.csv.gz: line 62 repeats the header row" in _error(capsys, gz)
    assert "line 62 repeats" in _error(capsys, gz, "--stream")


def test_decimal_commas_name_the_column_and_the_line(tmp_path, capsys) -> None:
    lines = _rows()
    lines[12] = '0.5,"1,25",0.25,u'  # line 13: a decimal comma in column b, quoted
    err = _error(capsys, _write(tmp_path / "comma.csv", lines))
    assert "comma.csv: column 'b' holds '1,25' on line 13, a number with a decimal comma" in err
    assert "beside numbers with a decimal point" in err


def test_a_continuous_target_says_so_and_suggests_a_class_column(tmp_path, capsys) -> None:
    rng = np.random.default_rng(1)
    frame = pd.DataFrame(rng.normal(size=(80, 2)), columns=["a", "b"])
    frame["species"] = np.repeat(["x", "y"], 40)
    frame["label"] = rng.normal(size=80).round(3)  # a measurement, not a class
    frame.to_csv(tmp_path / "measured.csv", index=False)
    err = _error(capsys, tmp_path / "measured.csv", "--non-numeric", "drop")
    assert "target column 'label' has" in err and "distinct non-whole numbers in 80 rows" in err
    assert "it looks like a measurement or an identifier, not a class label" in err
    assert "Columns that look like class labels: 'species' (2 values)" in err


def test_singleton_classes_beside_a_huge_one_are_named_and_can_be_dropped(tmp_path, capsys) -> None:
    lines = _rows(200)
    lines[5] = lines[5].rsplit(",", 1)[0] + ",rare1"
    lines[9] = lines[9].rsplit(",", 1)[0] + ",rare2"
    path = _write(tmp_path / "rare.csv", lines)
    err = _error(capsys, path)
    assert "classes 'rare1' (1 row), 'rare2' (1 row) have fewer than two rows beside" in err
    assert "--min-class-rows 2" in err
    code = main(["check", str(path), "--target", "label", "--min-class-rows", "2", "--format", "json"])
    out, err = capsys.readouterr()
    note = "--min-class-rows 2: dropped 2 classes with fewer rows ('rare1' (1 row), 'rare2' (1 row)), 2 rows in all."
    assert code in (0, 1) and note in err
    doc = json.loads(out)
    assert doc["meta"]["notes"] == [note] and doc["meta"]["n_rows"] == 198
    main(["check", str(path), "--target", "label", "--min-class-rows", "2"])
    assert note in " ".join(capsys.readouterr().out.split())  # under the table in the text report too


# --- data tests beside unit tests ---------------------------------------------------------------


def test_assert_fit_for_fails_with_the_verdict_table_as_its_message(iris) -> None:
    X, y = iris
    frame = X.assign(species=y)
    verdict = assert_fit_for(frame, "qda", target="species")  # unequal covariances: fine for QDA
    assert verdict.gate.passed and verdict.gate.model == "qda"
    with pytest.raises(AssertionError) as failed:
        assert_fit_for(X, "lda", y=y, random_state=0)
    message = str(failed.value)
    assert message.startswith("The data are not fit for LDA: covariance_homogeneity fails")
    assert "gated for LDA" in message
    assert any(line.split()[:2] == ["covariance_homogeneity", "FAIL"] for line in message.splitlines())  # the table
    with pytest.raises(discaudit.DataError, match="Config.model must be one of"):
        assert_fit_for(X, "svm", y=y)
    # A config passed along keeps its other settings; the model given wins.
    relaxed = discaudit.Config(severity={"covariance_homogeneity": "advisory"}, model="qda")
    assert assert_fit_for(X, "lda", y=y, config=relaxed).gate.model == "lda"


# --- which settings apply -------------------------------------------------------------------------


def test_the_command_line_names_the_settings_it_used(tmp_path, capsys, monkeypatch) -> None:
    data = _write(tmp_path / "data.csv", _rows(120))
    nested = tmp_path / "project" / "ci"
    nested.mkdir(parents=True)
    monkeypatch.chdir(nested)

    def settings_line(*extra: str) -> str:
        code = main(["check", str(data), "--target", "label", "--format", "json", *extra])
        _, err = capsys.readouterr()
        assert code in (0, 1), err
        return err.splitlines()[0]

    assert settings_line() == "discaudit: settings: defaults (no pyproject.toml in the current directory or above it)"
    parent = tmp_path / "project" / "pyproject.toml"
    parent.write_text("[project]\nname = 'x'\n", encoding="utf-8")
    assert settings_line() == f"discaudit: settings: defaults ({parent} has no [tool.discaudit] table)"
    parent.write_text('[tool.discaudit]\nmodel = "qda"\n', encoding="utf-8")  # a parent's table applies
    assert settings_line() == f"discaudit: settings: {parent} [tool.discaudit]"
    code = main(["check", str(data), "--target", "label", "--format", "json"])
    assert json.loads(capsys.readouterr().out)["gate"]["model"] == "qda" and code in (0, 1)
    explicit = tmp_path / "ci.toml"
    explicit.write_text('model = "lda"\n', encoding="utf-8")
    assert settings_line("--config", str(explicit)) == f"discaudit: settings: {explicit}"
