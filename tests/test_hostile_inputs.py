"""Hostile input and a busy process (issue 21): one case per item.

1. exact facts before scaled judgements (constants, offsets, big integers, tiny magnitudes,
   class-encoding features, rounding-level Wilks' Lambda);
2. awkward dtypes refused or converted, never silently;
3. class labels and column names that would print alike stay distinct in every report format;
4. concurrent audits in threads: identical findings, the caller's warnings filters and thread
   pools exactly as before;
5. the command line: header-only files, missing labels by line, Ctrl-C.

What the figures are checked against: properties that must hold (every statistic of the audit
is unchanged by shifting a feature and, but for the scale comparison, by multiplying it by a
power of two, which is exact in float64), numpy's own reductions on the unshifted data, and the
standard library's parsers for the report formats. The data are invented and seeded.
"""

from __future__ import annotations

import copy
import html
import json
import re
import signal
import subprocess
import sys
import threading
import time
import warnings
from pathlib import Path
from typing import Any

import numpy as np
import pandas as pd
import pytest
import threadpoolctl
from sklearn.covariance import ledoit_wolf_shrinkage

import discaudit
from discaudit import Config, DataError
from discaudit.cli import FORMATS, main
from discaudit.decision import figures
from discaudit.jsonable import label
from discaudit.stream import preflight_chunks


def _classes(n: int = 120, p: int = 3, shift: float = 0.8, seed: int = 0) -> tuple[np.ndarray, np.ndarray]:
    """Two Gaussian classes, every value a multiple of 1/8 (so adding 1e15 is exact in float64)."""
    rng = np.random.default_rng(seed)
    X = np.round(rng.normal(size=(n, p)) * 64) / 8
    y = np.repeat(np.array(["a", "b"]), n // 2)
    X[y == "b", 0] += shift
    return X, y


def _figures(verdict: discaudit.Verdict) -> dict[str, Any]:
    """The findings without the intake record (which says how features were shifted)."""
    out = copy.deepcopy(verdict.to_dict()["findings"])
    out["data_hygiene"]["details"].pop("coordinates")
    return out


def _numbers(value: Any) -> list[float]:
    if isinstance(value, bool) or value is None or isinstance(value, str):
        return []
    if isinstance(value, (int, float)):
        return [float(value)]
    if isinstance(value, dict):
        return [x for k in sorted(value) for x in _numbers(value[k])]
    if isinstance(value, list):
        return [x for v in value for x in _numbers(v)]
    return []


def _same_statistics(a: dict[str, Any], b: dict[str, Any], checks: list[str], rtol: float = 1e-7) -> None:
    for key in checks:
        assert a[key]["status"] == b[key]["status"], (key, a[key]["summary"], b[key]["summary"])
        np.testing.assert_allclose(_numbers(a[key]["details"]), _numbers(b[key]["details"]), rtol=rtol, atol=1e-9)


SCALE_FREE = ["sample_size", "collinearity", "normality", "covariance_homogeneity", "discriminant_signal"]

# ---------------------------------------------------------------------------- 1. exact facts


def test_constant_is_min_equal_max_exactly_at_any_magnitude() -> None:
    X, y = _classes()
    frame = pd.DataFrame(X, columns=["a", "b", "c"])
    frame["flat"] = 1e15  # constant: set aside
    frame["one_ulp"] = 1e15
    frame.loc[7, "one_ulp"] = np.nextafter(1e15, np.inf)  # varies by one unit in the last place
    verdict = discaudit.preflight(frame, y)
    details = verdict.findings["data_hygiene"].details
    assert details["constant_columns"] == ["flat"]
    assert "one_ulp" in details["features_used"]
    # one_ulp takes one value in class "b" (row 7 is in class "a"): an exact within-class constant
    assert details["constant_within_class"] == {"b": ["one_ulp"]}


def test_offset_of_1e15_is_audited_like_the_unshifted_feature() -> None:
    X, y = _classes()
    shifted = X.copy()
    shifted[:, 1] += 1e15  # exact: every value is a multiple of 1/8 and below 2**53 / 8 in size
    assert np.array_equal(shifted[:, 1] - 1e15, X[:, 1])
    plain, offset = discaudit.preflight(X, y), discaudit.preflight(shifted, y)
    assert offset.findings["normality"].status != "skip"
    _same_statistics(_figures(plain), _figures(offset), SCALE_FREE + ["scale_disparity"])
    centred = offset.findings["data_hygiene"].details["coordinates"]["centred"]
    assert (
        list(centred) == ["x1"] and "location" in offset.findings["data_hygiene"].details["coordinates"]["definition"]
    )


def test_integers_near_2_to_the_62_keep_every_digit() -> None:
    rng = np.random.default_rng(1)
    small = rng.integers(0, 1000, size=(150, 2))
    y = np.repeat([0, 1], 75)
    small[y == 1, 0] += 150
    big = small.astype(np.int64) + np.int64(2**62)
    # float64 cannot hold these: converting first would leave few distinct values
    assert len(np.unique(big[:, 0].astype(np.float64))) < 10 < len(np.unique(big[:, 0]))
    plain, shifted = discaudit.preflight(small, y), discaudit.preflight(big, y)
    assert shifted.findings["normality"].details["discrete_features"] == []
    _same_figures(plain, shifted)
    frame = pd.DataFrame({"u": big[:, 0].astype(np.uint64), "i": big[:, 1], "y": y})
    _same_figures(
        discaudit.preflight(frame, target="y"),
        discaudit.preflight(pd.DataFrame({"u": small[:, 0], "i": small[:, 1], "y": y}), target="y"),
    )


def _same_figures(one: discaudit.Verdict, other: discaudit.Verdict) -> None:
    """Integer shifts are exact: identical figures, but for the leave-one-out log-losses, whose class
    means are rounded on each scale (they agree to rounding, and every status and sentence is equal)."""
    a, b = _figures(one), _figures(other)
    pa, pb = a.pop("expected_performance"), b.pop("expected_performance")
    assert a == b
    assert pa["status"] == pb["status"] and pa["summary"] == pb["summary"]
    np.testing.assert_allclose(_numbers(pa["details"]), _numbers(pb["details"]), rtol=1e-12, atol=1e-15)


def test_values_near_1e_minus_300_are_audited_and_compared_in_their_own_units() -> None:
    X, y = _classes(seed=2)
    tiny = X.copy()
    tiny[:, 2] = np.ldexp(X[:, 2], -1000)  # exact, about 1e-301 times the original
    plain, small = discaudit.preflight(X, y), discaudit.preflight(tiny, y)
    assert small.findings["data_hygiene"].details["constant_within_class"] == {}
    a, b = _figures(plain), _figures(small)
    # Ledoit-Wolf's raw intensity depends on the units: against scikit-learn's on the class-centred rows
    raw = b["collinearity"]["details"]["shrinkage"].pop("ledoit_wolf_raw")
    a["collinearity"]["details"]["shrinkage"].pop("ledoit_wolf_raw")
    centred = np.vstack([tiny[y == c] - tiny[y == c].mean(axis=0) for c in ("a", "b")])
    assert raw == pytest.approx(ledoit_wolf_shrinkage(centred, assume_centered=True), rel=1e-9)
    # log-determinants and log-likelihoods are in the audited units; Box's M and the BIC gap are not
    for key in ("box_m", "bic"):
        np.testing.assert_allclose(
            _numbers(
                a["covariance_homogeneity"]["details"][key]["delta_bic"]
                if key == "bic"
                else a["covariance_homogeneity"]["details"][key]
            ),
            _numbers(
                b["covariance_homogeneity"]["details"][key]["delta_bic"]
                if key == "bic"
                else b["covariance_homogeneity"]["details"][key]
            ),
            rtol=1e-9,
        )
    _same_statistics(a, b, [c for c in SCALE_FREE if c != "covariance_homogeneity"])
    # the scale check sees the real disparity: pooled within-class SD against numpy's own
    sd = small.findings["scale_disparity"].details["pooled_within_sd"]
    resid = np.concatenate([tiny[y == c, 2] - tiny[y == c, 2].mean() for c in ("a", "b")])
    expected = np.ldexp(np.sqrt((np.ldexp(resid, 1000) ** 2).sum() / (len(y) - 2)), -1000)
    assert sd["x2"] == pytest.approx(expected, rel=1e-12)
    assert small.findings["scale_disparity"].status == "warn"
    assert small.findings["scale_disparity"].details["sd_ratio"] > 1e290


def test_feature_that_encodes_the_class_is_named_and_fails_hygiene() -> None:
    X, y = _classes(seed=3)
    frame = pd.DataFrame(X, columns=["a", "b", "c"]).assign(batch=np.where(y == "a", 10.0, 20.0))
    verdict = discaudit.preflight(frame, y)
    hygiene = verdict.findings["data_hygiene"]
    assert hygiene.status == "fail"
    assert "batch encodes the class" in hygiene.summary and "pooled covariance singular" in hygiene.summary
    assert figures.CLASS_ENCODING_FEATURES.read(verdict.findings) == ["batch"]
    assert figures.CLASS_ENCODING_FEATURES.read(discaudit.preflight(X, y).findings) == []


def test_identical_rows_within_each_class_are_exact_constants_not_rounding_noise() -> None:
    rows = np.array([[0.1, 0.7, 1.3], [0.3, 0.2, 2.9]])
    y = np.repeat(["a", "b"], 50)
    X = np.repeat(rows, 50, axis=0)
    verdict = discaudit.preflight(X, y)
    hygiene = verdict.findings["data_hygiene"].details
    assert hygiene["constant_within_class"] == {"a": ["x0", "x1", "x2"], "b": ["x0", "x1", "x2"]}
    assert hygiene["class_encoding_features"] == ["x0", "x1", "x2"]
    assert verdict.findings["discriminant_signal"].status == "skip"  # W is exactly zero, never a PASS


def test_rounding_level_wilks_lambda_is_exact_separation_not_a_pass() -> None:
    rng = np.random.default_rng(4)
    y = np.repeat(["a", "b"], 50)
    X = np.repeat(np.array([[0.0, 1.0, 2.0], [1.0, 3.0, 0.5]]), 50, axis=0) + 1e-13 * rng.normal(size=(100, 3))
    signal_ = discaudit.preflight(X, y).findings["discriminant_signal"]
    assert signal_.status == "warn" and signal_.summary.startswith("Exact separation")
    assert signal_.details["exact_separation"] is True and signal_.details["f"] is None
    assert signal_.details["wilks_lambda"] < np.finfo(float).eps
    ordinary = discaudit.preflight(*_classes()).findings["discriminant_signal"]
    assert ordinary.details["exact_separation"] is False
    assert figures.EXACT_SEPARATION.read({"discriminant_signal": signal_}) is True


def test_streamed_and_in_memory_input_share_the_coordinates_of_offset_features() -> None:
    X, y = _classes(n=400, seed=5)
    frame = pd.DataFrame(X, columns=["a", "b", "c"]).assign(
        big=np.int64(2**62) + np.arange(400, dtype=np.int64) % 97, label=y
    )
    frame["a"] += 1e15
    frame = frame.sample(frac=1.0, random_state=0)
    whole = discaudit.preflight(frame, target="label")
    streamed = preflight_chunks(lambda: (frame.iloc[i : i + 90] for i in range(0, 400, 90)), "label")
    _same_statistics(_figures(whole), _figures(streamed), ["sample_size", "collinearity", "discriminant_signal"])


# ---------------------------------------------------------------------------- 2. awkward dtypes


def _frame(seed: int = 6) -> tuple[pd.DataFrame, np.ndarray]:
    X, y = _classes(n=60, p=2, seed=seed)
    return pd.DataFrame(X, columns=["a", "b"]), y


@pytest.mark.parametrize(
    ("column", "named", "advice"),
    [
        (lambda n: np.arange(n) + 1j, "z", "real and imaginary parts"),
        (lambda n: np.array([1.5, "n/a"] * (n // 2), dtype=object), "z", "first non-number 'n/a' at row 1"),
        (lambda n: pd.date_range("2024-01-01", periods=n, freq="h"), "z", "total_seconds"),
        (lambda n: pd.to_timedelta(np.arange(n), unit="s"), "z", "total_seconds"),
        (lambda n: pd.Categorical(["lo", "mid", "hi"] * (n // 3)), "z", "Config(categorical='codes')"),
    ],
    ids=["complex", "mixed_object", "datetime", "timedelta", "categorical"],
)
def test_awkward_columns_are_refused_naming_the_column_and_the_fix(column: Any, named: str, advice: str) -> None:
    frame, y = _frame()
    frame["z"] = column(len(frame))
    before = frame.copy()
    with pytest.raises(DataError, match=re.escape(advice)) as info:
        discaudit.preflight(frame, y)
    assert f"'{named}'" in str(info.value) or f"{named} (" in str(info.value)
    pd.testing.assert_frame_equal(frame, before)  # the input is not changed


def test_complex_is_refused_even_under_the_drop_policy() -> None:
    frame, y = _frame()
    with pytest.raises(DataError, match="complex"):
        discaudit.preflight(frame.assign(z=frame["a"] + 1j), y, config=Config(non_numeric="drop"))


def test_categorical_codes_on_request_equal_the_codes_audited_as_numbers() -> None:
    frame, y = _frame()
    grades = pd.Categorical(np.random.default_rng(7).choice(["lo", "mid", "hi", "top", "max", "x"], len(frame)))
    with_codes = discaudit.preflight(frame.assign(g=grades), y, config=Config(categorical="codes"))
    by_hand = discaudit.preflight(frame.assign(g=grades.codes.astype(float)), y)
    assert _figures(with_codes)["discriminant_signal"] == _figures(by_hand)["discriminant_signal"]
    assert "category codes" in with_codes.findings["data_hygiene"].details["conversions"]["g"]


def test_masked_entries_become_missing_values_under_the_missing_policy() -> None:
    frame, y = _frame()
    values = np.ma.masked_array(frame.to_numpy(), mask=np.zeros(frame.shape, dtype=bool))
    values.mask[[3, 40], 1] = True
    with pytest.raises(DataError, match=r"x1 \(2\).*row 3.*Masked entries count as missing"):
        discaudit.preflight(values, y)
    dropped = discaudit.preflight(values, y, config=Config(missing="drop_rows"))
    keep = np.ones(len(y), dtype=bool)
    keep[[3, 40]] = False
    reference = discaudit.preflight(frame.to_numpy()[keep], y[keep])
    assert dropped.findings["data_hygiene"].details["n_rows_used"] == 58
    assert _figures(dropped)["discriminant_signal"] == _figures(reference)["discriminant_signal"]
    labels = np.ma.masked_array(y, mask=np.arange(len(y)) == 5)
    with pytest.raises(DataError, match="missing labels"):
        discaudit.preflight(frame, labels)


def test_structured_arrays_are_audited_field_by_field() -> None:
    frame, y = _frame()
    records = np.zeros(len(frame), dtype=[("a", "f8"), ("b", "f4")])
    records["a"], records["b"] = frame["a"], frame["b"]
    by_field = discaudit.preflight(records, y)
    assert by_field.meta["features"] == ["a", "b"]
    reference = discaudit.preflight(pd.DataFrame({"a": records["a"], "b": records["b"]}), y)
    assert _figures(by_field)["discriminant_signal"] == _figures(reference)["discriminant_signal"]
    nested = np.zeros(len(frame), dtype=[("a", "f8"), ("pair", "f8", (2,))])
    with pytest.raises(DataError, match="Field 'pair'.*sub-arrays"):
        discaudit.preflight(nested, y)


def test_object_column_of_numbers_is_converted_and_says_so() -> None:
    frame, y = _frame()
    as_objects = frame.assign(b=np.array(list(frame["b"]), dtype=object))
    verdict = discaudit.preflight(as_objects, y)
    assert verdict.findings["data_hygiene"].details["conversions"] == {
        "b": "object column of numbers converted to float64"
    }
    assert _figures(verdict)["discriminant_signal"] == _figures(discaudit.preflight(frame, y))["discriminant_signal"]


# ---------------------------------------------------------------------------- 3. distinct names


def _unescaped(text: str) -> str:
    """HTML/XML entities and CommonMark backslash escapes undone."""
    return re.sub(r"\\([!-/:-@\[-`{-~])", r"\1", html.unescape(text))


@pytest.mark.parametrize(("first", "second"), [(True, "True"), (1, "1")])
def test_labels_that_print_alike_stay_distinct_in_every_format(first: Any, second: Any) -> None:
    X, _ = _classes(seed=8)
    y = np.array([first] * 60 + [second] * 60, dtype=object)
    X[60:, 2] = 4.0  # constant within the text class only, so the hygiene summary names it
    verdict = discaudit.preflight(X, y)
    assert verdict.meta["classes"] == [label(first), repr(second)]
    per_class = verdict.to_dict()["findings"]["normality"]["details"]["per_class"]
    assert sorted(per_class) == sorted([str(first), repr(second)])
    for name, render in FORMATS.items():
        shown = " ".join(_unescaped(render(verdict)).split())  # the text table wraps its cells
        assert f"lass {second!r} has constant x2" in shown, name


def test_columns_1_and_text_1_stay_distinct_in_every_format() -> None:
    X, y = _classes(seed=9)
    frame = pd.DataFrame({1: X[:, 0], "1": X[:, 0], "b": X[:, 1]})  # '1' duplicates 1
    verdict = discaudit.preflight(frame, y)
    assert verdict.findings["data_hygiene"].details["duplicate_columns"] == [{"column": "'1'", "duplicate_of": "1"}]
    for name, render in FORMATS.items():
        assert "'1' (= 1)" in " ".join(_unescaped(render(verdict)).split()), name
    json.loads(verdict.to_json())  # keys stay unique and the report stays plain JSON


# ---------------------------------------------------------------------------- 4. threads


def _thread_case(i: int) -> tuple[np.ndarray, np.ndarray]:
    rng = np.random.default_rng(100 + i)
    X = rng.normal(size=(90, 3))
    y = np.repeat(["a", "b"], 45)
    X[y == "b"] += 0.5
    if i % 2:
        # an exact linear relation in class a: the MCD's exact fit, which the screen of ties cannot
        # foresee, so the outliers check records the MCD's DegenerateDataWarning
        X[:45, 2] = X[:45, 0] + X[:45, 1]
    return X, y


def test_eight_concurrent_audits_equal_sequential_ones_and_leave_process_state_alone() -> None:
    cases = [_thread_case(i) for i in range(8)]
    with warnings.catch_warnings():
        warnings.simplefilter("error")  # the caller's own filters: any warning that escapes fails
        warnings.filterwarnings("ignore", message="a filter of the caller's")
        filters, filters_list = list(warnings.filters), warnings.filters
        pools = threadpoolctl.threadpool_info()
        sequential = [discaudit.preflight(X, y).to_dict()["findings"] for X, y in cases]
        assert any("warnings" in f["outliers"]["details"] for f in sequential)
        for _ in range(20):
            results: list[Any] = [None] * 8

            def audit(i: int, out: list[Any] = results) -> None:
                out[i] = discaudit.preflight(*cases[i]).to_dict()["findings"]

            threads = [threading.Thread(target=audit, args=(i,)) for i in range(8)]
            for t in threads:
                t.start()
            for t in threads:
                t.join()
            assert results == sequential
        assert warnings.filters is filters_list and warnings.filters == filters
        assert threadpoolctl.threadpool_info() == pools


def test_every_audit_limits_blas_to_one_thread_with_the_pools_found_once() -> None:
    # The pools are found on the first audit and reused (discaudit._threads._BlasPools): each later
    # audit still runs on one BLAS thread and restores what it found.
    from discaudit._threads import one_blas_thread

    before = threadpoolctl.threadpool_info()
    with threadpoolctl.threadpool_limits(limits=2, user_api="blas"):
        for _ in range(2):
            with one_blas_thread():
                inside = [i["num_threads"] for i in threadpoolctl.threadpool_info() if i["user_api"] == "blas"]
                assert inside and set(inside) == {1}
            outside = [i["num_threads"] for i in threadpoolctl.threadpool_info() if i["user_api"] == "blas"]
            assert set(outside) == {2}
    assert threadpoolctl.threadpool_info() == before


def test_process_state_is_restored_when_an_audit_raises(monkeypatch: pytest.MonkeyPatch) -> None:
    from discaudit import checks

    class Interrupting:
        KEY = "interrupting"

        @staticmethod
        def run(data: Any, config: Any, random_state: Any) -> Any:
            raise KeyboardInterrupt  # not an Exception: it leaves the audit

    monkeypatch.setattr(checks, "REGISTRY", (*checks.REGISTRY, Interrupting))
    filters, pools = list(warnings.filters), threadpoolctl.threadpool_info()
    with pytest.raises(KeyboardInterrupt):
        discaudit.preflight(*_classes())
    assert warnings.filters == filters and threadpoolctl.threadpool_info() == pools


def test_a_warning_from_another_thread_during_an_audit_follows_the_callers_filters(
    monkeypatch: pytest.MonkeyPatch,
) -> None:
    """While an audit runs, a thread that is not the audit's still gets the caller's filters."""
    from discaudit import checks
    from discaudit.findings import Finding

    outcome: list[str] = []

    def callers_thread() -> None:  # a new thread: it does not run in the audit's context
        try:
            warnings.warn("from the caller's thread", UserWarning, stacklevel=1)
            outcome.append("not raised")
        except UserWarning:
            outcome.append("raised")

    class Probe:
        KEY = "probe"

        @staticmethod
        def run(data: Any, config: Any, random_state: Any) -> Finding:
            other = threading.Thread(target=callers_thread)
            other.start()
            other.join()
            warnings.warn("from inside the audit", UserWarning, stacklevel=1)
            return Finding("probe", "pass", "Probed.", {})

    monkeypatch.setattr(checks, "REGISTRY", (*checks.REGISTRY, Probe))
    with warnings.catch_warnings():
        warnings.simplefilter("error")
        verdict = discaudit.preflight(*_classes())
    assert outcome == ["raised"]  # as the caller's "error" filter says
    assert verdict.findings["probe"].details["warnings"] == ["UserWarning: from inside the audit"]


# ---------------------------------------------------------------------------- 5. command line


def _csv(path: Path, lines: list[str]) -> Path:
    path.write_text("\n".join(lines) + "\n", encoding="utf-8")
    return path


def _data_lines(n: int = 120) -> list[str]:
    rng = np.random.default_rng(10)
    return ["a,b,label"] + [f"{rng.normal():.4f},{rng.normal():.4f},{'xy'[i % 2]}" for i in range(n)]


@pytest.mark.parametrize("stream", [False, True])
def test_header_only_file_says_no_data_rows(tmp_path: Path, capsys: pytest.CaptureFixture[str], stream: bool) -> None:
    path = _csv(tmp_path / "empty.csv", ["a,b,label"])
    assert main(["check", str(path), "--target", "label", *(["--stream"] if stream else [])]) == 2
    err = capsys.readouterr().err
    assert err.count("\n") == 1 and f"no data rows in {path}" in err


@pytest.mark.parametrize("cell", ["", "NA"], ids=["empty", "unparsable"])
def test_stream_mode_names_the_line_of_a_missing_label(
    tmp_path: Path, capsys: pytest.CaptureFixture[str], cell: str
) -> None:
    lines = _data_lines()
    lines[57] = f"0.1,0.2,{cell}"  # line 58 of the file
    lines.insert(30, "")  # a blank line before it (pandas skips it; lines still count)
    path = _csv(tmp_path / "labels.csv", lines)
    assert main(["check", str(path), "--target", "label", "--stream", "--batch-rows", "25"]) == 2
    err = capsys.readouterr().err
    assert err.count("\n") == 1 and "missing labels" in err and f"line 59 of {path}" in err


def test_ctrl_c_in_process_exits_130_with_one_line_and_no_report(
    tmp_path: Path, capsys: pytest.CaptureFixture[str], monkeypatch: pytest.MonkeyPatch
) -> None:
    path = _csv(tmp_path / "data.csv", _data_lines())
    out = tmp_path / "report.json"

    def interrupted_write(self: Path, text: str, encoding: str | None = None) -> int:
        with open(self, "w", encoding=encoding) as handle:
            handle.write(text[: len(text) // 2])  # half written when Ctrl-C arrives
        raise KeyboardInterrupt

    monkeypatch.setattr(Path, "write_text", interrupted_write)
    assert main(["check", str(path), "--target", "label", "--format", "json", "--output", str(out)]) == 130
    assert capsys.readouterr().err == "discaudit: error: interrupted\n"
    assert list(tmp_path.iterdir()) == [path]  # neither the report nor its temporary file


def test_ctrl_c_while_the_command_line_loads_exits_130(
    monkeypatch: pytest.MonkeyPatch, capsys: pytest.CaptureFixture[str]
) -> None:
    import builtins

    from discaudit.__main__ import run

    real_import = builtins.__import__

    def slow_import(name: str, *args: Any, **kwargs: Any) -> Any:
        if name == "discaudit.cli":
            raise KeyboardInterrupt
        return real_import(name, *args, **kwargs)

    monkeypatch.setattr(builtins, "__import__", slow_import)
    monkeypatch.setattr(signal, "signal", lambda *a: None)  # keep the test process's own handler
    assert run() == 130
    assert capsys.readouterr().err == "discaudit: error: interrupted\n"


def test_ctrl_c_at_any_point_of_a_real_run(tmp_path: Path) -> None:
    """SIGINT to ``python -m discaudit`` at several moments: either it finished (a whole report) or
    it says one line and exits 130 leaving no file; never a traceback."""
    path = _csv(tmp_path / "data.csv", _data_lines(2000))
    out = tmp_path / "report.json"
    for delay in (0.15, 0.4, 0.8, 1.2, 2.0):
        out.unlink(missing_ok=True)
        proc = subprocess.Popen(
            [
                sys.executable,
                "-m",
                "discaudit",
                "check",
                str(path),
                "--target",
                "label",
                "--format",
                "json",
                "--output",
                str(out),
            ],
            stdout=subprocess.PIPE,
            stderr=subprocess.PIPE,
            text=True,
        )
        time.sleep(delay)
        proc.send_signal(signal.SIGINT)
        _, err = proc.communicate(timeout=120)
        assert "Traceback" not in err, (delay, err)
        if proc.returncode == 130:
            assert err == "discaudit: error: interrupted\n", delay
            assert not out.exists()
        else:
            assert proc.returncode in (0, 1), (delay, proc.returncode, err)
            json.loads(out.read_text(encoding="utf-8"))
        assert not [p for p in tmp_path.iterdir() if p.name.endswith(".part")]
