"""The command line through DuckDB and pyarrow: ``--stream`` and ``--sql`` give what the in-memory
audit of the same rows gives, and pandas' chunked reader is never used."""

from __future__ import annotations

import json

import pandas as pd
import pytest
from engine_data import MOMENT_CHECKS, close, close_condition_numbers

from discaudit.cli import main

pytest.importorskip("duckdb", reason="the duckdb extra is not installed")


@pytest.fixture(scope="module")
def flake_files(tmp_path_factory, flakes):
    frame, _ = flakes
    folder = tmp_path_factory.mktemp("engines")
    frame.to_csv(folder / "flakes.csv")
    frame.to_parquet(folder / "flakes.parquet")
    (folder / "parts").mkdir()
    frame.iloc[:250].to_parquet(folder / "parts" / "a.parquet")
    frame.iloc[250:].to_parquet(folder / "parts" / "b.parquet")
    return folder


def _report(argv: list[str], out) -> dict:
    status = main([*argv, "--format", "json", "--output", str(out)])
    assert status in (0, 1)
    return json.loads(out.read_text())


def _flagged(report: dict) -> dict:
    """Flagged rows listed per class (row label, robust distance to 1e-9)."""
    return {
        c: [(r["row"], round(r["squared_distance"], 6)) for r in d["flagged_rows"]]
        for c, d in report["findings"]["outliers"]["details"]["per_class"].items()
    }


def _same(got: dict, want: dict) -> None:
    assert {k: f["status"] for k, f in got["findings"].items()} == {k: f["status"] for k, f in want["findings"].items()}
    assert got["recommendation"] == want["recommendation"]
    assert _flagged(got) == _flagged(want)
    for key in MOMENT_CHECKS:
        skip = ("n_rows_input", "sample_note", "condition_number_raw")
        close(
            {k: v for k, v in got["findings"][key]["details"].items() if k not in skip},
            {k: v for k, v in want["findings"][key]["details"].items() if k not in skip},
            1e-9,
        )
    close_condition_numbers(*(r["findings"]["scale_disparity"]["details"]["condition_number_raw"] for r in (got, want)))


@pytest.fixture(scope="module")
def in_memory(flake_files, tmp_path_factory) -> dict:
    out = tmp_path_factory.mktemp("mem") / "mem.json"
    return _report(["check", str(flake_files / "flakes.csv"), "--target", "family", "--index-col", "flake_id"], out)


@pytest.mark.parametrize("reader", ["duckdb", "arrow"])
@pytest.mark.parametrize("name", ["flakes.csv", "flakes.parquet"])
def test_stream_reads_through_the_engine_without_pandas_chunks(
    reader, name, flake_files, in_memory, tmp_path, monkeypatch
) -> None:
    real = pd.read_csv

    def no_chunks(*args, **kwargs):
        assert kwargs.get("chunksize") is None, "pandas' chunked reader was used"
        return real(*args, **kwargs)

    monkeypatch.setattr(pd, "read_csv", no_chunks)
    argv = ["check", str(flake_files / name), "--target", "family", "--index-col", "flake_id"]
    got = _report([*argv, "--stream", "--reader", reader], tmp_path / "s.json")
    assert got["meta"]["sample"] is not None  # audited as a stream: moments exact, rows a sample
    assert sum(map(len, _flagged(got).values())) > 0  # planted outliers: the comparison bites
    _same(got, in_memory)


def test_sql_audits_a_query_over_a_parquet_glob(flake_files, in_memory, tmp_path) -> None:
    query = f"SELECT * FROM '{flake_files / 'parts'}/*.parquet' ORDER BY flake_id"
    got = _report(["check", "--sql", query, "--target", "family", "--index-col", "flake_id"], tmp_path / "q.json")
    _same(got, in_memory)
    assert got["meta"]["n_rows"] == 600


def test_sql_errors_are_one_line_naming_duckdb(capsys) -> None:
    assert main(["check", "--sql", "SELEKT 1", "--target", "label"]) == 2
    err = capsys.readouterr().err
    assert err.startswith("discaudit: error: ") and "DuckDB cannot run the query: Parser Error" in err
    assert "Traceback" not in err and err.count("\n") == 1
    assert main(["check", "--sql", "SELECT 1 AS a", "--target", "label"]) == 2
    assert "target column 'label' not found" in capsys.readouterr().err


def test_sql_and_a_file_together_is_an_error(flake_files, capsys) -> None:
    assert main(["check", str(flake_files / "flakes.csv"), "--sql", "SELECT 1", "--target", "family"]) == 2
    assert "either a data file or --sql" in capsys.readouterr().err
    assert main(["check", "--target", "family"]) == 2
    assert "give a data file, or a query with --sql" in capsys.readouterr().err
