"""The command line: exit codes, one-line errors, column choice, readers, and the console script.

Most cases call ``discaudit.cli.main(argv)`` in process (it returns the exit status); a few
run the real console script and ``python -m discaudit`` in a subprocess. The data are
invented (seeded numpy), which is all a command-line test needs; what the command line
reads is checked against pandas reading the same file and calling ``preflight`` directly.
"""

from __future__ import annotations

import io
import json
import os
import subprocess
import sys
from pathlib import Path

import numpy as np
import pandas as pd
import pytest

import discaudit
from discaudit import progress
from discaudit.cli import main, read_table
from discaudit.config import CHECK_KEYS

BIN = Path(sys.executable).parent


def _classes(seed: int = 0, n: int = 300) -> pd.DataFrame:
    """Invented: three overlapping Gaussian classes, three features, string row ids."""
    rng = np.random.default_rng(seed)
    means = np.array([[0.0, 0.0, 0.0], [1.2, 0.0, 0.4], [0.0, 1.2, -0.4]])
    X = np.vstack([rng.normal(size=(n, 3)) + m for m in means])
    frame = pd.DataFrame(X, columns=["f1", "f2", "f3"])
    frame["label"] = np.repeat(["a", "b", "c"], n)
    frame.insert(0, "row_id", [f"r{i:04d}" for i in range(len(frame))])
    return frame


@pytest.fixture(scope="module")
def files(tmp_path_factory: pytest.TempPathFactory) -> dict[str, Path]:
    """CSV and Parquet files: clean (passes), scale-only (warns), constant column (fails)."""
    root = tmp_path_factory.mktemp("cli")
    clean = _classes()
    warn = clean.assign(f2=clean["f2"] * 1e5)  # only scale_disparity should warn
    fail = clean.assign(k=1.0)  # a constant column fails data_hygiene
    paths = {
        "pass": root / "pass.csv",
        "warn": root / "warn.csv",
        "fail": root / "fail.csv",
        "parquet": root / "pass.parquet",
        "parquet_index": root / "pass_index.parquet",
        "gz": root / "pass.csv.gz",
    }
    clean.to_csv(paths["pass"], index=False)
    warn.to_csv(paths["warn"], index=False)
    fail.to_csv(paths["fail"], index=False)
    clean.to_parquet(paths["parquet"], index=False)
    clean.set_index("row_id").to_parquet(paths["parquet_index"])  # row ids stored as the pandas index
    clean.to_csv(paths["gz"], index=False)
    return paths


@pytest.fixture(autouse=True)
def _outside_any_project(tmp_path: Path, monkeypatch: pytest.MonkeyPatch) -> None:
    """Run from an empty folder, so no pyproject.toml of the repository applies."""
    monkeypatch.chdir(tmp_path)
    monkeypatch.delenv("CI", raising=False)


SETTINGS_LINE = "discaudit: settings: defaults (no pyproject.toml in the current directory or above it)\n"


def _run(capsys: pytest.CaptureFixture[str], *argv: str) -> tuple[int, str, str]:
    """(exit status, stdout, stderr without the line naming the settings, which every audit prints)."""
    code = main([str(a) for a in argv])
    out, err = capsys.readouterr()
    if code in (0, 1) and "--help" not in argv:
        assert err.startswith(SETTINGS_LINE), err  # run from an empty folder: the defaults, and why
        err = err[len(SETTINGS_LINE) :]
    return code, out, err


def _reference(path: Path, **config: object) -> discaudit.Verdict:
    """The verdict from pandas' own reader and the library call, outside the CLI."""
    frame = pd.read_csv(path, index_col="row_id")
    return discaudit.preflight(frame, target="label", config=discaudit.Config(**config), random_state=0)


# --- exit codes ---------------------------------------------------------------------------


def test_exit_0_and_text_identical_to_print(files, capsys) -> None:
    code, out, err = _run(capsys, "check", files["pass"], "--target", "label", "--index-col", "row_id")
    reference = _reference(files["pass"])
    assert reference.status == "pass"  # precondition: the clean data pass every gating check
    assert code == 0
    assert out == str(reference) + "\n"  # what print(verdict) writes
    assert err == ""


def test_exit_1_when_a_check_fails(files, capsys) -> None:
    code, out, _ = _run(capsys, "check", files["fail"], "--target", "label", "--index-col", "row_id")
    assert _reference(files["fail"]).findings["data_hygiene"].status == "fail"
    assert code == 1
    assert "Worst check status: FAIL" in out
    assert "The data are not fit for any candidate: data_hygiene fails" in out


def test_fail_on_warn_fails_only_on_warnings_that_bear_on_the_model(files, tmp_path, capsys) -> None:
    reference = _reference(files["warn"])
    assert reference.status == "warn"  # precondition: only scale_disparity warns
    assert [k for k, f in reference.findings.items() if f.status != "pass"] == ["scale_disparity"]
    base = ("check", files["warn"], "--target", "label", "--index-col", "row_id")
    assert _run(capsys, *base)[0] == 0  # default --fail-on fail
    assert _run(capsys, *base, "--fail-on", "fail")[0] == 0
    # A scale warning bears on no model (each is invariant to scale or standardizes): it never fails.
    assert _run(capsys, *base, "--fail-on", "warn")[0] == 0
    assert _run(capsys, *base, "--fail-on", "warn", "--model", "lda")[0] == 0
    # Invented: class b is fifteen times smaller, so sample_size warns (imbalance), which bears on LDA.
    frame = _classes()
    frame = frame[(frame["label"] != "b") | (frame.index % 15 == 0)]
    path = tmp_path / "imbalanced.csv"
    frame.to_csv(path, index=False)
    imbalanced = discaudit.preflight(frame.set_index("row_id"), target="label")
    assert imbalanced.findings["sample_size"].status == "warn"  # precondition
    base = ("check", path, "--target", "label", "--index-col", "row_id", "--model", "lda")
    code, out, _ = _run(capsys, *base, "--fail-on", "warn")
    assert code == 1 and "The data are not fit for LDA: sample_size warns" in out
    assert _run(capsys, *base, "--model", "logistic_regression", "--fail-on", "warn")[0] == 0


@pytest.mark.parametrize(
    ("argv", "expected"),
    [
        (("check", "{dir}/missing.csv", "--target", "label"), "missing.csv: no such file"),
        (("check", "{pass}", "--target", "species"), "target column 'species' not found"),
        (("check", "{pass}", "--target", "label", "--index-col", "row_id", "--features", "f1,f9"), "'f9'"),
        (("check", "{pass}", "--target", "label", "--index-col", "row_id", "--exclude", "label"), "target column"),
        (("check", "{pass}", "--target", "label", "--index-col", "nope"), "index column 'nope'"),
        (("check", "{pass}", "--target", "label"), "['row_id']"),  # a string column, not a feature
        (("check", "{dir}/data.xlsx", "--target", "label"), "data.xlsx"),
        (("check", "{dir}/empty.csv", "--target", "label"), "empty.csv"),
        (("check", "{dir}/garbage.parquet", "--target", "label"), "garbage.parquet: cannot be read as Parquet"),
        (("check", "{dir}/nan.csv", "--target", "label", "--index-col", "row_id"), "f2 (1)"),
        (("check", "{pass}", "--target", "label", "--config", "{dir}/missing.toml"), "missing.toml: no such file"),
        (("check", "{pass}", "--format", "pdf", "--target", "label"), "invalid choice: 'pdf'"),
        (("check", "{pass}"), "--target"),
        ((), "COMMAND"),
    ],
)
def test_exit_2_with_one_line_naming_the_culprit(files, capsys, argv, expected) -> None:
    folder = files["pass"].parent
    (folder / "empty.csv").write_text("")
    (folder / "garbage.parquet").write_bytes(b"not a parquet file at all")
    (folder / "data.xlsx").write_bytes(b"")
    nan = _classes(n=50)
    nan.loc[7, "f2"] = np.nan
    nan.to_csv(folder / "nan.csv", index=False)
    filled = [a.format(dir=folder, **{"pass": files["pass"]}) for a in argv]
    code, out, err = _run(capsys, *filled)
    assert code == 2
    assert out == ""
    assert err.startswith("discaudit: error: ") and err.endswith("\n") and err.count("\n") == 1, err
    assert expected in err
    assert "Traceback" not in err


def test_help_shows_examples_and_exit_codes(capsys) -> None:
    code, out, _ = _run(capsys, "check", "--help")
    assert code == 0
    assert "examples:" in out and "discaudit check flakes.csv --target family" in out
    assert "exit status:" in out and "[tool.discaudit]" in out


# --- choosing columns ---------------------------------------------------------------------


def _json(capsys, *argv) -> tuple[int, dict]:
    code, out, err = _run(capsys, *argv, "--format", "json")
    assert err == "", err
    return code, json.loads(out)


def test_features_and_exclude_choose_the_audited_columns(files, capsys) -> None:
    base = ("check", files["pass"], "--target", "label", "--index-col", "row_id")
    assert _json(capsys, *base)[1]["meta"]["features"] == ["f1", "f2", "f3"]
    assert _json(capsys, *base, "--features", "f3,f1")[1]["meta"]["features"] == ["f3", "f1"]
    assert _json(capsys, *base, "--exclude", "f2")[1]["meta"]["features"] == ["f1", "f3"]
    assert _json(capsys, *base, "--features", "f1,f2,f3", "--exclude", "f1")[1]["meta"]["features"] == ["f2", "f3"]


def test_index_col_labels_rows_and_is_not_a_feature(tmp_path, capsys) -> None:
    frame = _classes(n=100)
    frame.loc[5, ["f1", "f2", "f3"]] = [40.0, -40.0, 40.0]  # one gross outlier in class a
    frame.loc[5, "row_id"] = "gross-outlier-row"
    frame["serial"] = np.arange(len(frame), dtype=float)  # a numeric id column
    path = tmp_path / "ids.csv"
    frame.to_csv(path, index=False)
    base = ("check", path, "--target", "label", "--exclude", "serial")
    code, doc = _json(capsys, *base, "--index-col", "row_id")
    assert doc["meta"]["features"] == ["f1", "f2", "f3"]
    # The row label, not its position, is what the findings report.
    assert "gross-outlier-row" in json.dumps(doc["findings"]["outliers"])
    # A numeric id column is audited as a feature unless it is the index.
    _, with_serial = _json(capsys, "check", path, "--target", "label", "--index-col", "row_id")
    _, as_index = _json(capsys, "check", path, "--target", "label", "--index-col", "serial", "--exclude", "row_id")
    assert "serial" in with_serial["meta"]["features"]
    assert "serial" not in as_index["meta"]["features"]


# --- readers ------------------------------------------------------------------------------


def test_parquet_and_gzip_give_the_same_verdict_as_csv(files, capsys) -> None:
    base = ("--target", "label", "--index-col", "row_id")
    _, from_csv = _json(capsys, "check", files["pass"], *base)
    _, from_parquet = _json(capsys, "check", files["parquet"], *base)
    _, from_stored_index = _json(capsys, "check", files["parquet_index"], *base)
    _, from_gz = _json(capsys, "check", files["gz"], *base)
    reference = json.loads(_reference(files["pass"]).to_json())
    for doc in (from_csv, from_parquet, from_stored_index, from_gz):
        assert doc == reference  # the JSON holds nothing run-dependent


def test_read_table_matches_pandas_and_chunked_reading_matches_plain(files, capsys) -> None:
    # Reference: pandas' own CSV reader.
    expected = pd.read_csv(files["pass"], index_col="row_id")[["f1", "f2", "f3", "label"]]
    plain = read_table(files["pass"], target="label", index_col="row_id", progress=False)
    chunked = read_table(files["gz"], target="label", index_col="row_id", progress=True)
    by_groups = read_table(files["parquet_index"], target="label", index_col="row_id", progress=True)
    pd.testing.assert_frame_equal(plain, expected)
    pd.testing.assert_frame_equal(chunked, expected)
    pd.testing.assert_frame_equal(by_groups, expected)
    assert "reading pass.csv.gz" in capsys.readouterr().err


def test_output_file_and_the_formats_match_the_library(files, tmp_path, capsys) -> None:
    reference = _reference(files["fail"])
    base = ("check", files["fail"], "--target", "label", "--index-col", "row_id")
    for fmt, suffix in (("markdown", "md"), ("json", "json"), ("junit", "xml"), ("text", "txt")):
        target = tmp_path / f"report.{suffix}"
        code, out, err = _run(capsys, *base, "--format", fmt, "--output", target)
        assert code == 1 and err == ""
        assert out == f"discaudit: the data are not fit for any candidate (exit 1); {fmt} report written to {target}\n"
        written = target.read_text(encoding="utf-8")
        if fmt == "markdown":
            assert written == reference.to_markdown()
        elif fmt == "text":
            assert written == str(reference) + "\n"
        elif fmt == "json":
            assert written == reference.to_json() + "\n"
        else:
            assert written.startswith("<?xml") and written.count("<testcase ") == len(CHECK_KEYS) + 1  # and the gate


def test_unwritable_output_is_a_one_line_error(files, tmp_path, capsys) -> None:
    code, _, err = _run(
        capsys,
        "check",
        files["pass"],
        "--target",
        "label",
        "--index-col",
        "row_id",
        "--output",
        tmp_path / "no" / "such" / "dir" / "r.txt",
    )
    assert code == 2 and err.count("\n") == 1 and "r.txt" in err and "Traceback" not in err


# --- progress -----------------------------------------------------------------------------


class _Terminal(io.StringIO):
    def isatty(self) -> bool:
        return True


def test_progress_only_at_a_terminal_outside_ci(monkeypatch) -> None:
    monkeypatch.delenv("CI", raising=False)
    assert progress.enabled(_Terminal()) is True
    assert progress.enabled(io.StringIO()) is False  # redirected: silent
    monkeypatch.setenv("CI", "true")
    assert progress.enabled(_Terminal()) is False  # in CI: silent
    silent = io.StringIO()
    with progress.Progress("reading", total=10, stream=silent) as bar:
        bar.update(5)
    assert silent.getvalue() == ""
    shown = _Terminal()
    with progress.Progress("reading", total=10, stream=shown, show=True, min_interval=0) as bar:
        bar.update(5)
    assert "reading:  50%" in shown.getvalue() and shown.getvalue().endswith("\r")


# --- real processes -----------------------------------------------------------------------


def _subprocess(*argv: object, cwd: Path) -> subprocess.CompletedProcess[str]:
    env = {k: v for k, v in os.environ.items() if k != "CI"}
    return subprocess.run([str(a) for a in argv], capture_output=True, text=True, cwd=cwd, env=env, timeout=120)


def test_console_script_gates_and_matches_in_process_output(files, capsys) -> None:
    script = BIN / "discaudit"
    if not script.exists():
        pytest.skip("the discaudit console script is not installed in this environment")
    args = ("check", files["fail"], "--target", "label", "--index-col", "row_id")
    done = _subprocess(script, *args, cwd=files["fail"].parent)
    assert done.returncode == 1
    assert done.stdout == str(_reference(files["fail"])) + "\n"
    assert done.stderr == SETTINGS_LINE  # not a terminal: no progress line


def test_python_m_discaudit_errors_are_one_line_without_traceback(files) -> None:
    done = _subprocess(
        sys.executable,
        "-m",
        "discaudit",
        "check",
        files["pass"].parent / "absent.parquet",
        "--target",
        "label",
        cwd=files["pass"].parent,
    )
    assert done.returncode == 2
    assert done.stderr.count("\n") == 1 and "absent.parquet: no such file" in done.stderr
    assert "Traceback" not in done.stderr
    ok = _subprocess(
        sys.executable,
        "-m",
        "discaudit",
        "check",
        files["parquet"],
        "--target",
        "label",
        "--index-col",
        "row_id",
        "--format",
        "junit",
        cwd=files["pass"].parent,
    )
    assert ok.returncode == 0 and ok.stdout.startswith("<?xml") and "Traceback" not in ok.stderr
