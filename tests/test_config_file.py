"""Settings files: keys and values, discovery of pyproject.toml, and precedence CLI > file > defaults.

TOML is read by the standard library (``tomllib``); the data for end-to-end cases are
invented (seeded numpy). Precedence is checked by behaviour (an exit status that changes)
and by the configuration the JSON report records.
"""

from __future__ import annotations

import json
from pathlib import Path

import numpy as np
import pandas as pd
import pytest

from discaudit import Config, DataError
from discaudit.cli import main
from discaudit.config_file import discover, find_pyproject, load, make_config


@pytest.fixture(autouse=True)
def _no_ci(monkeypatch: pytest.MonkeyPatch) -> None:
    monkeypatch.delenv("CI", raising=False)


def _write(path: Path, text: str) -> Path:
    path.parent.mkdir(parents=True, exist_ok=True)
    path.write_text(text, encoding="utf-8")
    return path


def _toml_value(value: object) -> str:
    if isinstance(value, str):
        return json.dumps(value)  # a JSON string is a valid TOML basic string
    if isinstance(value, float):
        return repr(value)
    return str(value)


# --- reading keys and values ----------------------------------------------------------------


def test_every_config_field_round_trips_through_a_file(tmp_path) -> None:
    lines = [
        f"{d['name']} = {_toml_value(d['default'])}"
        for d in Config.describe()
        if d["name"] != "severity" and d["default"] is not None  # TOML has no null: model = None is left unset
    ]
    lines += ["[severity]", 'normality = "advisory"', 'separation = "off"']
    settings = load(_write(tmp_path / "discaudit.toml", "\n".join(lines)))
    config = make_config(settings)
    expected = Config(severity={"normality": "advisory", "separation": "off"})
    assert config == expected


def test_pyproject_table_and_fail_on(tmp_path) -> None:
    path = _write(
        tmp_path / "pyproject.toml",
        """
[project]
name = "x"
[tool.discaudit]
fail_on = "warn"
vif_fail = 20
[tool.discaudit.severity]
normality = "advisory"
""",
    )
    settings = load(path)
    assert settings.fail_on == "warn" and settings.path == path
    config = make_config(settings)
    assert config.vif_fail == 20.0 and config.vif_warn == Config().vif_warn
    assert config.severity_of("normality") == "advisory" and config.severity_of("outliers") == "gate"


@pytest.mark.parametrize(
    ("text", "expected"),
    [
        ("vif_wran = 4", "unknown key 'vif_wran'"),
        ('vif_warn = "high"', "key 'vif_warn' must be a number"),
        ("vif_warn = true", "key 'vif_warn' must be a number"),
        ("pairwise_max_rows = 10.5", "key 'pairwise_max_rows' must be a whole number"),
        ("vif_warn = -1", "vif_warn must be positive"),
        ("vif_warn = 12", "vif_fail must not be below"),
        ('missing = "impute"', "missing must be one of"),
        ('fail_on = "error"', "key 'fail_on' must be one of"),
        ('severity = "advisory"', "key 'severity' must be a table"),
        ('[severity]\nnormalty = "advisory"', "unknown check 'normalty'"),
        ('[severity]\nnormality = "ignore"', "severity['normality'] must be one of"),
        ("vif_warn = ", "not valid TOML"),
    ],
)
def test_bad_key_or_value_names_the_file_and_the_key(tmp_path, text, expected) -> None:
    path = _write(tmp_path / "settings.toml", text)
    with pytest.raises(DataError) as info:
        load(path)
    message = str(info.value)
    assert expected in message and str(path) in message and "\n" not in message


def test_a_pyproject_without_the_table(tmp_path) -> None:
    path = _write(tmp_path / "pyproject.toml", "[project]\nname = 'x'\n")
    found = discover(tmp_path)  # discovered: defaults apply, and the report line says why
    assert found.path is None and found.config == {}
    assert found.source == f"defaults ({path} has no [tool.discaudit] table)"
    with pytest.raises(DataError, match=r"no \[tool.discaudit\] table"):
        load(path)  # named explicitly: an error


# --- discovery ------------------------------------------------------------------------------


def test_discovery_searches_upward_and_stops_at_the_nearest_pyproject(tmp_path) -> None:
    outer = _write(tmp_path / "pyproject.toml", "[tool.discaudit]\nvif_fail = 50\n")
    nested = tmp_path / "src" / "pkg" / "deeper"
    nested.mkdir(parents=True)
    assert find_pyproject(nested) == outer
    assert make_config(discover(nested)).vif_fail == 50.0
    inner = _write(tmp_path / "src" / "pyproject.toml", "[project]\nname = 'inner'\n")
    assert find_pyproject(nested) == inner
    assert make_config(discover(nested)) == Config()  # the nearest project has no table: defaults


# --- precedence, end to end -----------------------------------------------------------------


def _data(tmp_path: Path, *, constant: bool = False, nan: bool = False) -> Path:
    """Invented: two Gaussian classes; optionally a constant column (fails) or a NaN (an error by default)."""
    rng = np.random.default_rng(5)
    X = np.vstack([rng.normal(size=(80, 3)), rng.normal(size=(80, 3)) + [1.0, 0.5, 0.0]])
    frame = pd.DataFrame(X, columns=["f1", "f2", "f3"])
    frame["label"] = np.repeat(["a", "b"], 80)
    if constant:
        frame["k"] = 3.0
    if nan:
        frame.loc[11, "f3"] = np.nan
    path = tmp_path / "data" / f"d{int(constant)}{int(nan)}.csv"
    path.parent.mkdir(parents=True, exist_ok=True)
    frame.to_csv(path, index=False)
    return path


def _check(capsys, *argv: object) -> tuple[int, dict | None, str]:
    """(exit status, JSON report, stderr without the line naming the settings)."""
    code = main(["check", *map(str, argv), "--target", "label", "--format", "json"])
    out, err = capsys.readouterr()
    if code in (0, 1):
        first, _, err = err.partition("\n")
        assert first.startswith("discaudit: settings: "), first
    return code, (json.loads(out) if out else None), err


def test_precedence_defaults_then_file_then_command_line(tmp_path, capsys, monkeypatch) -> None:
    data = _data(tmp_path, nan=True)
    monkeypatch.chdir(tmp_path)
    # Defaults: a NaN is an error naming the column.
    code, _, err = _check(capsys, data)
    assert code == 2 and "f3 (1)" in err
    # The file: drop rows with missing values; its threshold is recorded.
    _write(tmp_path / "pyproject.toml", '[tool.discaudit]\nmissing = "drop_rows"\nvif_warn = 3\n')
    code, doc, err = _check(capsys, data)
    assert code in (0, 1) and err == ""
    assert doc["meta"]["config"]["missing"] == "drop_rows" and doc["meta"]["config"]["vif_warn"] == 3.0
    assert doc["meta"]["n_rows"] == 159
    # The command line beats the file.
    code, _, err = _check(capsys, data, "--missing", "error")
    assert code == 2 and "f3 (1)" in err


def test_file_severity_from_a_nested_cwd_and_fail_on_precedence(tmp_path, capsys, monkeypatch) -> None:
    data = _data(tmp_path, constant=True)
    nested = tmp_path / "project" / "ci" / "jobs"
    nested.mkdir(parents=True)
    monkeypatch.chdir(nested)
    code, doc, _ = _check(capsys, data)
    assert code == 1 and doc["findings"]["data_hygiene"]["status"] == "fail"  # no settings: the failure gates
    _write(
        tmp_path / "project" / "pyproject.toml",
        '[tool.discaudit]\nfail_on = "warn"\n[tool.discaudit.severity]\ndata_hygiene = "advisory"\n',
    )
    code, doc, _ = _check(capsys, data, "--fail-on", "fail")
    assert doc["meta"]["severity"]["data_hygiene"] == "advisory"
    assert doc["status"] in ("pass", "warn")  # the advisory failure does not count
    assert code == 0  # --fail-on fail beats the file's fail_on = "warn"
    code, doc, _ = _check(capsys, data)
    assert doc["gate"]["fail_on"] == "warn" and doc["meta"]["config"]["fail_on"] == "warn"  # the file's level applies
    assert code == (0 if doc["gate"]["passed"] else 1)


def test_explicit_config_replaces_discovery_and_errors_exit_2(tmp_path, capsys, monkeypatch) -> None:
    data = _data(tmp_path, constant=True)
    monkeypatch.chdir(tmp_path)
    _write(tmp_path / "pyproject.toml", '[tool.discaudit.severity]\ndata_hygiene = "off"\n')
    code, doc, _ = _check(capsys, data)
    assert doc["findings"]["data_hygiene"]["status"] == "skip"
    explicit = _write(tmp_path / "ci.toml", "vif_fail = 25\n")
    code, doc, _ = _check(capsys, data, "--config", explicit)
    assert code == 1 and doc["findings"]["data_hygiene"]["status"] == "fail"  # the pyproject is not read
    assert doc["meta"]["config"]["vif_fail"] == 25.0
    for text, key in (("vif_wran = 4\n", "'vif_wran'"), ('vif_warn = "high"\n', "'vif_warn'")):
        bad = _write(tmp_path / "bad.toml", text)
        code, doc, err = _check(capsys, data, "--config", bad)
        assert code == 2 and doc is None
        assert err.count("\n") == 1 and key in err and "bad.toml" in err and "Traceback" not in err
