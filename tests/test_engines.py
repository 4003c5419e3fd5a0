"""Every dataframe engine gives what pandas input gives: the same statuses, recommendation and
flagged rows, and moment-based figures to 1e-9 relative, offset and badly scaled columns included.
(Spark: tests/test_spark.py.)"""

from __future__ import annotations

import numpy as np
import pandas as pd
import pytest
from engine_data import assert_same_moments, assert_same_verdict, moments, offset_frame

import discaudit
from discaudit.config import Config

pl = pytest.importorskip("polars", reason="polars is not installed")
pa = pytest.importorskip("pyarrow", reason="pyarrow is not installed")
duckdb = pytest.importorskip("duckdb", reason="the duckdb extra is not installed")


def _ibis(frame: pd.DataFrame):
    ibis = pytest.importorskip("ibis", reason="ibis is not installed")
    return ibis.memtable(frame)


ENGINES = {
    "polars": pl.from_pandas,
    "polars_lazy": lambda f: pl.from_pandas(f).lazy(),
    "arrow": lambda f: pa.Table.from_pandas(f, preserve_index=False),
    "duckdb": lambda f: duckdb.from_arrow(pa.Table.from_pandas(f, preserve_index=False)),
    "ibis": _ibis,
}


@pytest.fixture(scope="module")
def offset_data() -> pd.DataFrame:
    return offset_frame()


@pytest.fixture(scope="module")
def flakes_plain(flakes) -> pd.DataFrame:
    frame, _ = flakes
    return frame.reset_index(drop=True)


@pytest.fixture(scope="module")
def reference(offset_data, flakes_plain) -> dict[str, discaudit.Verdict]:
    return {
        "offset": discaudit.preflight(offset_data, target="label"),
        "flakes": discaudit.preflight(flakes_plain, target="family"),
    }


@pytest.mark.parametrize("engine", list(ENGINES))
def test_offset_and_badly_scaled_columns_match_pandas(engine, offset_data, reference) -> None:
    native = ENGINES[engine](offset_data)
    assert_same_moments(moments(native), moments(offset_data))
    verdict = discaudit.preflight(native, target="label")
    assert_same_verdict(verdict, reference["offset"])
    hygiene = verdict.findings["data_hygiene"].details
    assert hygiene == reference["offset"].findings["data_hygiene"].details  # constant, duplicate, few values
    assert verdict.meta["features"] == reference["offset"].meta["features"]


@pytest.mark.parametrize("engine", ["polars_lazy", "duckdb"])
def test_flakes_match_pandas(engine, flakes_plain, reference) -> None:
    verdict = discaudit.preflight(ENGINES[engine](flakes_plain), target="family")
    assert_same_verdict(verdict, reference["flakes"])
    assert len(verdict.outlier_rows()) > 0  # the demo data has planted outliers: the comparison bites


def test_polars_x_and_y_keep_the_column_names(offset_data, reference) -> None:
    X = pl.from_pandas(offset_data.drop(columns=["label"]))
    verdict = discaudit.preflight(X, pl.Series(offset_data["label"].to_numpy()))
    assert verdict.meta["features"] == reference["offset"].meta["features"]
    assert "x0" not in verdict.meta["features"]
    assert_same_verdict(verdict, reference["offset"])


@pytest.mark.parametrize("engine", ["polars_lazy", "duckdb", "ibis"])
def test_engine_means_are_exactly_rounded(engine, offset_data) -> None:
    from fractions import Fraction

    from discaudit.sources import open_source

    data = open_source(ENGINES[engine](offset_data), target="label", config=Config(), random_state=0)
    location = data.coordinates.locations[0] if data.coordinates is not None else 0.0
    assert location != 0.0  # audited about an origin near 1e9, as pandas input is
    for k, c in enumerate(data.classes):
        x = offset_data.loc[offset_data["label"] == c, "offset"].to_numpy() - location  # exact (Sterbenz)
        exact = float(sum(map(Fraction, x.tolist())) / len(x))
        assert abs(data.moments.means[k, 0] - exact) <= np.spacing(exact)  # within one ulp of the exact mean


def test_a_naive_sum_of_products_would_have_failed_this_data(offset_data) -> None:
    # The test data must be able to catch the trap: sum(x*x) - n m^2 on the offset column,
    # compared with the centred scatter, is wrong in the leading digits.
    x = offset_data.loc[offset_data["label"] == "class_0", "offset"].to_numpy()
    naive = float(np.sum(x * x) - len(x) * np.mean(x) ** 2)
    centred = float(np.sum((x - x.mean()) ** 2))
    assert abs(naive - centred) > 1e-3 * centred


def test_duckdb_moments_are_exact_with_a_sample_smaller_than_the_classes(offset_data) -> None:
    config = Config(sample_rows_per_class=40)
    native = ENGINES["duckdb"](offset_data)
    assert_same_moments(moments(native, config=config), moments(offset_data))
    a = discaudit.preflight(native, target="label", config=config, random_state=5)
    b = discaudit.preflight(ENGINES["duckdb"](offset_data), target="label", config=config, random_state=5)
    c = discaudit.preflight(native, target="label", config=config, random_state=6)
    assert a.meta["sample"]["per_class"] == {"class_0": 40, "class_1": 40, "class_2": 40}
    assert a.meta["fingerprint"] == b.meta["fingerprint"]  # seeded: the same sample again
    assert a.meta["fingerprint"] != c.meta["fingerprint"]  # another seed, another sample
    assert a.meta["n_rows"] == len(offset_data)


def test_polars_lazy_sample_is_a_uniform_draw_per_class(offset_data) -> None:
    from discaudit.sources import open_source

    config = Config(sample_rows_per_class=60)
    data = open_source(pl.from_pandas(offset_data).lazy(), target="label", config=config, random_state=0)
    labels = offset_data["label"].to_numpy()
    for k, c in enumerate(data.classes):
        rows = data.row_labels[data.codes == k].to_numpy(dtype=int)
        assert len(rows) == 60 and len(set(rows)) == 60
        assert (labels[rows] == c).all()  # each sampled row is a row of its class
        location = data.coordinates.locations[0]  # the offset column is audited about an origin
        np.testing.assert_array_equal(
            data.values[data.codes == k, 0], offset_data["offset"].to_numpy()[rows] - location
        )


def test_above_the_pushdown_limit_the_batch_summaries_agree(monkeypatch, offset_data, reference) -> None:
    from discaudit.sources import engines

    monkeypatch.setattr(engines, "PUSHDOWN_MAX_FEATURES", 2)
    for engine in ("duckdb", "polars_lazy"):
        native = ENGINES[engine](offset_data)
        assert_same_moments(moments(native), moments(offset_data))
        assert_same_verdict(discaudit.preflight(native, target="label"), reference["offset"])


@pytest.mark.parametrize("engine", ["polars", "polars_lazy", "duckdb"])
def test_missing_values_follow_the_policy(engine, offset_data) -> None:
    broken = offset_data.copy()
    broken.loc[[4, 9], "huge"] = np.nan
    broken.loc[[12], "label"] = None
    with pytest.raises(discaudit.DataError, match="missing labels"):
        discaudit.preflight(ENGINES[engine](broken), target="label")
    broken.loc[[12], "label"] = "class_1"
    with pytest.raises(discaudit.DataError, match=r"huge \(2\)"):
        discaudit.preflight(ENGINES[engine](broken), target="label")
    config = Config(missing="drop_rows")
    got = discaudit.preflight(ENGINES[engine](broken), target="label", config=config)
    want = discaudit.preflight(broken, target="label", config=config)
    assert got.findings["data_hygiene"].details == want.findings["data_hygiene"].details
    assert_same_verdict(got, want)


@pytest.mark.parametrize("engine", ["polars", "polars_lazy", "duckdb"])
def test_string_and_nested_columns_name_the_engine_and_the_column(engine, offset_data) -> None:
    frame = pl.from_pandas(offset_data).with_columns(
        pl.lit("note").alias("comment"), pl.concat_list("level", "level").alias("pair")
    )
    native = {"polars": frame, "polars_lazy": frame.lazy(), "duckdb": duckdb.from_arrow(frame.to_arrow())}[engine]
    name = {"polars": "Polars", "polars_lazy": "Polars", "duckdb": "DuckDB"}[engine]
    with pytest.raises(discaudit.DataError, match=rf"^{name} columns 'comment' \(String\), 'pair' \(List"):
        discaudit.preflight(native, target="label")
    verdict = discaudit.preflight(native, target="label", config=Config(non_numeric="drop"))
    assert verdict.findings["data_hygiene"].details["non_numeric_dropped"] == ["comment", "pair"]


def test_a_nested_target_is_a_data_error(offset_data) -> None:
    frame = pl.from_pandas(offset_data).with_columns(pl.concat_list("level", "level").alias("label"))
    with pytest.raises(discaudit.DataError, match=r"Polars column 'label' \(the target\) has the nested type"):
        discaudit.preflight(frame.lazy(), target="label")


def test_a_lazy_frame_needs_a_target_column(offset_data) -> None:
    with pytest.raises(discaudit.DataError, match="target="):
        discaudit.preflight(pl.from_pandas(offset_data).lazy(), offset_data["label"])
    with pytest.raises(discaudit.DataError, match="not found"):
        discaudit.preflight(pl.from_pandas(offset_data).lazy(), target="nope")


def test_an_engine_failure_is_a_data_error_naming_the_engine(monkeypatch, offset_data) -> None:
    from discaudit.sources import engines

    def fails(*args, **kwargs):
        raise duckdb.ConversionException("Conversion Error: could not convert string 'x' to INT32")

    monkeypatch.setattr(engines, "_first_pass", fails)
    with pytest.raises(discaudit.DataError, match=r"^DuckDB could not compute .*ConversionException: Conversion Error"):
        discaudit.preflight(ENGINES["duckdb"](offset_data), target="label")


@pytest.mark.parametrize("engine", ["polars_lazy", "duckdb"])
@pytest.mark.parametrize(
    "codes", [{"class_0": 0.5, "class_1": 1.5, "class_2": 2.5}, {"class_0": 1, "class_1": 2, "class_2": 3}]
)
def test_numeric_labels_are_compared_as_the_engine_holds_them(engine, codes, offset_data) -> None:
    # Classes go back into the engine's queries (centring, sampling, codes): as its own values, not as text.
    frame = offset_data.assign(label=offset_data["label"].map(codes))
    got = discaudit.preflight(ENGINES[engine](frame), target="label")
    want = discaudit.preflight(frame, target="label")
    assert got.meta["classes"] == want.meta["classes"]
    assert_same_verdict(got, want)


@pytest.mark.parametrize("engine", ["polars", "polars_lazy", "duckdb"])
def test_integers_beyond_two_to_the_53_keep_their_varying_digits(engine, offset_data) -> None:
    # float64 cannot hold every integer near 2**62: the shift to the column's origin is done in the
    # engine's integer arithmetic before any float conversion, as pandas input does it.
    rng = np.random.default_rng(2)
    frame = offset_data.assign(big=np.int64(2**62) + rng.integers(0, 1000, len(offset_data)).astype(np.int64))
    want = discaudit.preflight(frame, target="label")
    got = discaudit.preflight(ENGINES[engine](frame), target="label")
    assert_same_verdict(got, want)
    assert_same_moments(moments(ENGINES[engine](frame)), moments(frame))
    assert moments(frame).scatter[0, -1, -1] > 0  # the varying digits survived (a float cast would lose them)
