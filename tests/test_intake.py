"""Every DataError case of intake, asserting the message names the culprit."""

from __future__ import annotations

import numpy as np
import pandas as pd
import pytest

import discaudit
from discaudit import Config, DataError


def frame(n: int = 30, seed: int = 0) -> pd.DataFrame:
    rng = np.random.default_rng(seed)
    df = pd.DataFrame(rng.normal(size=(n, 3)), columns=["alpha", "beta", "gamma"])
    df["label"] = np.resize(["u", "v"], n)
    return df


def test_data_error_is_value_error() -> None:
    assert issubclass(DataError, ValueError)


def test_missing_target_column_is_named() -> None:
    with pytest.raises(DataError, match=r"Target column 'kind' not found.*alpha"):
        discaudit.preflight(frame(), target="kind")


def test_no_target_at_all() -> None:
    with pytest.raises(DataError, match="No target"):
        discaudit.preflight(frame().drop(columns="label"))


def test_single_class_is_named() -> None:
    df = frame().assign(label="u")
    with pytest.raises(DataError, match=r"at least two classes.*'u'"):
        discaudit.preflight(df, target="label")


def test_class_with_one_row_is_named() -> None:
    df = frame()
    df.loc[0, "label"] = "lonely"
    with pytest.raises(DataError, match=r"Class 'lonely' \(1 row\)"):
        discaudit.preflight(df, target="label")


def test_no_numeric_feature() -> None:
    df = pd.DataFrame({"colour": list("abcdef"), "label": list("xxxyyy")})
    with pytest.raises(DataError, match=r"Non-numeric feature columns \['colour'\]"):
        discaudit.preflight(df, target="label")
    with pytest.raises(DataError, match="No numeric feature"):
        discaudit.preflight(df, target="label", config=Config(non_numeric="drop"))


def test_length_mismatch() -> None:
    X = np.zeros((10, 2))
    with pytest.raises(DataError, match="X has 10 rows but y has 9 labels"):
        discaudit.preflight(X, np.arange(9) % 2)


def test_nan_and_inf_name_columns_and_counts() -> None:
    df = frame()
    df.loc[3, "beta"] = np.nan
    df.loc[5, "beta"] = np.inf
    df.loc[7, "gamma"] = -np.inf
    with pytest.raises(DataError, match=r"beta \(2\), gamma \(1\).*first at row 3"):
        discaudit.preflight(df, target="label")


def test_drop_rows_policy_records_per_class_counts() -> None:
    df = frame()
    df.loc[[2, 4], "alpha"] = np.nan  # both labelled "u"
    df.loc[3, "gamma"] = np.nan  # labelled "v"
    v = discaudit.preflight(df, target="label", config=Config(missing="drop_rows"))
    hygiene = v.findings["data_hygiene"]
    assert hygiene.details["rows_dropped_per_class"] == {"u": 2, "v": 1}
    assert hygiene.details["n_rows_used"] == 27
    assert hygiene.status == "warn"


def test_missing_labels_are_named() -> None:
    df = frame()
    df["label"] = df["label"].astype(object)
    df.loc[4, "label"] = None
    with pytest.raises(DataError, match=r"1 missing labels \(rows \[4\]\)"):
        discaudit.preflight(df, target="label")


def test_non_numeric_columns_named_and_droppable() -> None:
    df = frame().assign(site=lambda d: np.resize(["north", "south"], len(d)))
    with pytest.raises(DataError, match=r"\['site'\]"):
        discaudit.preflight(df, target="label")
    v = discaudit.preflight(df, target="label", config=Config(non_numeric="drop"))
    assert v.findings["data_hygiene"].details["non_numeric_dropped"] == ["site"]
    assert "site" not in v.meta["features"]


def test_constant_and_duplicated_columns_fail_hygiene_but_audit_runs() -> None:
    df = frame().assign(flat=1.0, alpha_copy=lambda d: d["alpha"])
    v = discaudit.preflight(df, target="label")
    hygiene = v.findings["data_hygiene"]
    assert hygiene.status == "fail"
    assert hygiene.details["constant_columns"] == ["flat"]
    assert hygiene.details["duplicate_columns"] == [{"column": "alpha_copy", "duplicate_of": "alpha"}]
    assert v.meta["features"] == ["alpha", "beta", "gamma"]
    assert v.findings["collinearity"].status != "skip"


def test_all_columns_constant_is_a_data_error() -> None:
    df = pd.DataFrame({"a": [1.0] * 6, "b": [2.0] * 6, "label": list("xxxyyy")})
    with pytest.raises(DataError, match=r"No usable feature.*a, b"):
        discaudit.preflight(df, target="label")


def test_overflowing_magnitudes_are_named() -> None:
    df = frame()
    df.loc[0, "gamma"] = 1e200
    with pytest.raises(DataError, match=r"\['gamma'\].*beyond 1e150"):
        discaudit.preflight(df, target="label")


def test_array_input_gets_positional_names_and_keeps_lists() -> None:
    rng = np.random.default_rng(1)
    X = rng.normal(size=(40, 3)).tolist()
    y = [0, 1] * 20
    v = discaudit.preflight(X, y)
    assert v.meta["features"] == ["x0", "x1", "x2"]
    assert v.meta["classes"] == [0, 1]


def test_both_y_and_target_rejected() -> None:
    df = frame()
    with pytest.raises(DataError, match="either y or target"):
        discaudit.preflight(df, df["label"], target="label")


def test_bad_config_value_named() -> None:
    with pytest.raises(DataError, match="Config.vif_fail"):
        Config(vif_fail=-1)
    with pytest.raises(DataError, match="Config.missing"):
        Config(missing="ignore")
    with pytest.raises(DataError, match="unknown check 'normalty'"):
        Config(severity={"normalty": "advisory"})


def test_input_is_not_mutated() -> None:
    df = frame()
    before = df.copy()
    discaudit.preflight(df, target="label")
    pd.testing.assert_frame_equal(df, before)
