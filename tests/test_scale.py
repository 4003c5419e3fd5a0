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


def _counted(frame: pd.DataFrame, reads: list[int]):
    chunks = _uneven_chunks(frame)

    def again():
        reads.append(1)
        return chunks()

    return again


def test_a_streamed_input_is_read_once_for_every_check_that_scores_rows(flakes) -> None:
    # Outlier scoring and the leave-one-out sums both read every row; the core hands both tasks to one
    # read, and each check's finding is the one it gets from a read of its own.
    from discaudit.audit import _read_rows_once
    from discaudit.checks import expected_performance, outliers, row_tasks
    from discaudit.sources.chunks import load_chunks

    frame, _ = flakes
    cfg = discaudit.Config(sample_rows_per_class=130)
    reads: list[int] = []
    shared = load_chunks(_counted(frame, reads), "family", cfg, 0, None)
    _read_rows_once(shared, cfg, 0)
    fused = {check.KEY: check.run(shared, cfg, 0) for check in (outliers, expected_performance)}
    assert len(reads) == 2  # the summaries, then one row pass for both checks

    alone = load_chunks(_uneven_chunks(frame), "family", cfg, 0, None)
    assert len(row_tasks(alone, cfg, 0)) == 2
    for check in (outliers, expected_performance):
        separate = check.run(alone, cfg, 0)
        assert fused[check.KEY].summary == separate.summary
        _close(fused[check.KEY].details, separate.details, rel=0.0)


def test_kept_moments_from_the_streamed_tally_equal_the_kept_rows_own(flakes) -> None:
    # The kept rows' mean and scatter come from the class moments minus the flagged rows' sums; check
    # them against the kept rows themselves (numpy's mean and centred cross-products).
    import functools
    import operator

    from discaudit.checks import outliers as out
    from discaudit.checks._robust import robust_fits
    from discaudit.sources.chunks import load_chunks

    frame, _ = flakes
    cfg = discaudit.Config(sample_rows_per_class=130)
    data = load_chunks(_uneven_chunks(frame), "family", cfg, 0, None)
    assert data.all_rows is not None
    scoring = out._Scoring.of(data.moments, tuple(robust_fits(data, cfg, 0).fits))
    tally = data.all_rows.map_reduce(functools.partial(out._tally_block, scoring), operator.add)
    outcomes, arrays = out._score_tally(data, data.all_rows, scoring, tally)
    blocks = data.all_rows.map_reduce(lambda b: [b], operator.add)
    values = np.vstack([b.values for b in blocks])
    codes = np.concatenate([b.codes for b in blocks])
    labels = pd.Index(np.concatenate([np.asarray(b.row_labels) for b in blocks]))
    flagged = set(arrays["row_label"])
    assert flagged, "the demo data have contaminated rows"
    for fit, outcome in zip(scoring.fits, outcomes, strict=True):
        rows = np.flatnonzero((codes == fit.code) & ~labels.isin(flagged))
        if outcome.n_flagged == 0:
            assert outcome.kept_mean is None
            continue
        assert rows.size == outcome.n - outcome.n_flagged
        kept = values[rows]
        np.testing.assert_allclose(outcome.kept_mean, kept.mean(axis=0), rtol=1e-10, atol=1e-12)
        centred = kept - kept.mean(axis=0)
        np.testing.assert_allclose(outcome.kept_scatter, centred.T @ centred, rtol=1e-8, atol=1e-10)


def test_kept_moments_are_summed_directly_when_the_left_out_rows_carry_all_the_scatter() -> None:
    # Two distinct rows and many copies of the mean: removing the two leaves no scatter, where the
    # difference S - S_out would be rounding noise; the direct sums must be used and give exactly 0.
    from discaudit.checks.outliers import _kept_from_out

    X = np.vstack([np.full((50, 2), 3.0), [[3.0 + 1e3, 3.0 - 7e2]], [[3.0 - 1e3, 3.0 + 7e2]]])
    moments = ClassMoments.from_arrays(X, np.zeros(52, dtype=np.intp), ("a",))
    out_rows = X[50:]
    centre = moments.means[0]
    direct_calls: list[int] = []

    def direct():
        direct_calls.append(1)
        kept = X[:50]
        return kept.sum(axis=0), (kept - centre).T @ (kept - centre)

    mean, scatter = _kept_from_out(
        moments, 0, 2, out_rows.sum(axis=0), (out_rows - centre).T @ (out_rows - centre), direct
    )
    assert direct_calls == [1]
    np.testing.assert_allclose(mean, [3.0, 3.0], rtol=1e-15)
    np.testing.assert_allclose(scatter, np.zeros((2, 2)), atol=1e-9)


def test_read_ahead_keeps_order_raises_where_the_source_fails_and_stops_with_its_consumer(monkeypatch) -> None:
    import threading

    from discaudit import _threads

    monkeypatch.setattr(_threads, "usable_cores", lambda: 2)
    assert list(_threads.read_ahead(iter(range(50)))) == list(range(50))

    def failing():
        yield from range(3)
        raise ValueError("the source broke at item 3")

    got = []
    with pytest.raises(ValueError, match="item 3"):
        for item in _threads.read_ahead(failing()):
            got.append(item)
    assert got == [0, 1, 2]

    produced: list[int] = []

    def endless():
        i = 0
        while True:
            produced.append(i)
            yield i
            i += 1

    before = threading.active_count()
    ahead = _threads.read_ahead(endless(), depth=2)
    assert [next(ahead) for _ in range(5)] == [0, 1, 2, 3, 4]
    ahead.close()  # the consumer leaves: the worker stops, at most depth + 2 items past what was taken
    assert threading.active_count() == before
    assert len(produced) <= 5 + 2 + 2


def test_in_background_returns_the_result_and_raises_where_it_is_asked_for(monkeypatch) -> None:
    import threading

    from discaudit import _threads

    for cores in (1, 2):
        monkeypatch.setattr(_threads, "usable_cores", lambda cores=cores: cores)
        ran_on: list[str] = []

        def work(ran_on: list[str] = ran_on) -> int:
            ran_on.append(threading.current_thread().name)
            return 41 + 1

        wait = _threads.in_background(work)
        assert wait() == 42
        assert ran_on == (["discaudit-background"] if cores == 2 else [threading.current_thread().name])

        def broken() -> int:
            raise ValueError("hashing failed")

        wait = _threads.in_background(broken)
        with pytest.raises(ValueError, match="hashing failed"):
            wait()


def test_work_started_on_a_pool_thread_runs_inline_and_keeps_its_order(monkeypatch) -> None:
    # The shared pool has as many threads as cores; work a pool thread starts must not wait for it.
    from discaudit import _threads

    monkeypatch.setattr(_threads, "usable_cores", lambda: 2)

    def outer(i: int) -> list[int]:
        return _threads.map_in_threads(lambda j: 10 * i + j, list(range(4)))

    assert _threads.map_in_threads(outer, list(range(6))) == [[10 * i + j for j in range(4)] for i in range(6)]


def test_a_sampled_stream_estimates_the_ledoit_wolf_intensities_of_the_whole(tmp_path, flakes) -> None:
    # The sums of fourth powers behind both Ledoit-Wolf intensities come from the per-class sample,
    # each class's sum scaled by its row count (the moments count every row). Reference: scikit-learn's
    # ledoit_wolf_shrinkage of the class-centred rows of the whole data on the raw scale (divisor N, as
    # ours). The sample's own unscaled sum, as the collinearity check once used, understates the fourth
    # moment by the sampling fraction: 0.0053 against 0.0131 here (240 of 600 rows).
    from sklearn.covariance import ledoit_wolf_shrinkage

    frame, _ = flakes
    path = tmp_path / "flakes.parquet"
    frame.reset_index().to_parquet(path)
    cfg = discaudit.Config(sample_rows_per_class=60)
    streamed = preflight_chunks(file_chunks(path, batch_rows=90, index_col="flake_id"), "family", config=cfg)
    assert streamed.meta["sample"]["per_class"] == {"HDPE": 60, "PET": 60, "PP": 60, "PS": 60}
    whole = discaudit.preflight(frame, target="family")
    X = frame.drop(columns="family").to_numpy(dtype=float)
    centred = X - frame.groupby("family").transform("mean").to_numpy(dtype=float)
    reference = ledoit_wolf_shrinkage(centred, assume_centered=True)
    got_whole = whole.findings["collinearity"].details["shrinkage"]["ledoit_wolf_raw"]
    got_sampled = streamed.findings["collinearity"].details["shrinkage"]["ledoit_wolf_raw"]
    assert got_whole == pytest.approx(reference, rel=1e-9)
    assert 0.7 < got_sampled / reference < 1.4  # a 40 % sample's estimate, not a 40 % fraction of it
