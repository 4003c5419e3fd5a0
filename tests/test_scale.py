"""Chunked, streamed and distributed input give the same moment-based findings as in-memory input."""

from __future__ import annotations

import numpy as np
import pandas as pd
import pytest

import discaudit
from discaudit.stats.moments import ClassMoments
from discaudit.stream import file_chunks, preflight_chunks

MOMENT_CHECKS = ("data_hygiene", "sample_size", "scale_disparity", "covariance_homogeneity", "discriminant_signal")


def _close(a, b, rel=1e-10):
    if isinstance(a, dict):
        assert a.keys() == b.keys()
        for k in a:
            _close(a[k], b[k], rel)
    elif isinstance(a, list):
        assert len(a) == len(b)
        for x, z in zip(a, b):
            _close(x, z, rel)
    elif isinstance(a, float):
        assert a == pytest.approx(b, rel=rel, abs=1e-12)
    else:
        assert a == b


def _uneven_chunks(frame: pd.DataFrame, sizes=(37, 100, 5, 200, 58, 120, 80)):
    bounds = np.cumsum((0,) + tuple(sizes))
    assert bounds[-1] == len(frame)
    return lambda: (frame.iloc[a:b] for a, b in zip(bounds[:-1], bounds[1:]))


def test_chunked_moments_equal_in_memory_moments() -> None:
    rng = np.random.default_rng(0)
    X = rng.normal(size=(1000, 6)) * [1, 1e3, 1e-3, 5, 1, 1] + [0, 1e5, 0, -4, 0, 2]
    codes = rng.integers(0, 4, 1000)
    whole = ClassMoments.from_arrays(X, codes, tuple("abcd"))
    merged = None
    for a, b in zip(range(0, 1000, 130), list(range(130, 1000, 130)) + [1000]):
        part = ClassMoments.from_arrays(X[a:b], codes[a:b], tuple("abcd"))
        merged = part if merged is None else merged.merge(part)
    np.testing.assert_allclose(merged.means, whole.means, rtol=1e-10)
    np.testing.assert_allclose(merged.scatter, whole.scatter, rtol=1e-10)


def test_seven_uneven_chunks_match_the_whole(flakes) -> None:
    frame, _ = flakes
    whole = discaudit.preflight(frame, target="family", random_state=0)
    streamed = preflight_chunks(_uneven_chunks(frame), "family", random_state=0)
    for key in MOMENT_CHECKS + ("collinearity",):
        assert streamed.findings[key].status == whole.findings[key].status
    for key in MOMENT_CHECKS:
        details_w = {k: v for k, v in whole.findings[key].details.items() if k not in ("n_rows_input",)}
        details_s = {k: v for k, v in streamed.findings[key].details.items() if k not in ("n_rows_input",)}
        # Moments agree to 1e-10 (test above); derived figures such as the raw condition number
        # (about 4e10 here) amplify rounding by their own conditioning, hence 1e-6.
        _close(details_s, details_w, rel=1e-6)
    assert streamed.recommendation.model == whole.recommendation.model


def test_streaming_a_file_in_batches_flags_exact_rows(tmp_path, flakes) -> None:
    frame, planted = flakes
    path = tmp_path / "flakes.parquet"
    frame.reset_index().to_parquet(path)
    cfg = discaudit.Config(sample_rows_per_class=130)  # smaller than each class, enough for a robust fit
    v = preflight_chunks(file_chunks(path, batch_rows=90, index_col="flake_id"), "family", config=cfg)
    whole = discaudit.preflight(frame, target="family")
    for key in MOMENT_CHECKS:
        assert v.findings[key].status == whole.findings[key].status
    assert v.meta["sample"]["per_class"] == {"HDPE": 130, "PET": 130, "PP": 130, "PS": 130}
    outliers = v.findings["outliers"]
    assert "every row" in outliers.details["scored_rows"]
    assert sum(c["n"] for c in outliers.details["per_class"].values()) == len(frame)
    assert set(planted["contaminated"]) <= set(v.outlier_rows().index)


def test_one_shot_iterable_notes_sample_only_outliers(flakes) -> None:
    frame, _ = flakes
    chunks = iter([frame.iloc[:300], frame.iloc[300:]])
    v = preflight_chunks(chunks, "family")
    assert "sample only" in v.findings["outliers"].details["scored_rows"]


def test_streamed_missing_values_are_named(flakes) -> None:
    frame, _ = flakes
    broken = frame.copy()
    broken.iloc[400, 2] = np.nan
    with pytest.raises(discaudit.DataError, match=r"nir_1220 \(1\)"):
        preflight_chunks(_uneven_chunks(broken), "family")


def test_dask_on_a_local_cluster_equals_in_memory(flakes) -> None:
    dd = pytest.importorskip("dask.dataframe", reason="the dask extra is not installed")
    distributed = pytest.importorskip("distributed", reason="the dask extra is not installed")
    frame, _ = flakes
    whole = discaudit.preflight(frame, target="family", random_state=0)
    with (
        distributed.LocalCluster(n_workers=2, threads_per_worker=1, processes=True, dashboard_address=None) as cluster,
        distributed.Client(cluster),
    ):
        v = discaudit.preflight(dd.from_pandas(frame, npartitions=6), target="family", random_state=0)
    for key in MOMENT_CHECKS:
        _close(v.findings[key].details, whole.findings[key].details, rel=1e-6)
    assert v.recommendation.model == whole.recommendation.model
    assert set(v.outlier_rows().index) == set(whole.outlier_rows().index)


def test_cli_streams_a_file_with_the_same_moment_findings(tmp_path, flakes) -> None:
    import json

    from discaudit.cli import main

    frame, _ = flakes
    path = tmp_path / "flakes.csv"
    frame.to_csv(path)
    out_mem, out_stream = tmp_path / "mem.json", tmp_path / "stream.json"
    base = [str(path), "--target", "family", "--index-col", "flake_id", "--format", "json"]
    code_mem = main(["check", *base, "--output", str(out_mem)])
    code_stream = main(["check", *base, "--stream", "--batch-rows", "64", "--output", str(out_stream)])
    mem, stream = json.loads(out_mem.read_text()), json.loads(out_stream.read_text())
    assert code_mem == code_stream == (0 if mem["gate"]["passed"] else 1)
    assert stream["gate"]["passed"] == mem["gate"]["passed"]
    for key in MOMENT_CHECKS:
        _close(stream["findings"][key]["details"], mem["findings"][key]["details"], rel=1e-6)
    assert stream["meta"]["sample"] is not None and mem["meta"]["sample"] is None
