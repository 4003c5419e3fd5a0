"""Spark DataFrames on a real local Spark session give what pandas input gives.

One session for the module (``local[1]``, three input partitions, no UI); few and small audits. The
tests skip, with the reason shown, only where pyspark or a Java runtime cannot be had (``.ci/run``
installs Java from the system's packages).
"""

from __future__ import annotations

import os
import shutil
import subprocess
import sys
from pathlib import Path

import pandas as pd
import pytest
from engine_data import assert_same_moments, assert_same_verdict, moments, offset_frame

import discaudit
from discaudit.config import Config

ROOT = Path(__file__).resolve().parents[1]


def _java_reason() -> str | None:
    java = shutil.which("java") or (os.environ.get("JAVA_HOME") and str(Path(os.environ["JAVA_HOME"]) / "bin/java"))
    if not java or not Path(java).exists():
        return "no Java runtime (install one, e.g. apt-get install default-jre-headless)"
    done = subprocess.run([java, "-version"], capture_output=True, text=True, timeout=60, check=False)
    return None if done.returncode == 0 else f"java -version failed: {done.stderr.strip()[:120]}"


@pytest.fixture(scope="module")
def spark():
    pytest.importorskip("pyspark", reason="the spark extra is not installed")
    reason = _java_reason()
    if reason:
        pytest.skip(reason)
    # The executors' Python must import this checkout's discaudit and the venv's packages.
    os.environ["PYSPARK_PYTHON"] = sys.executable
    os.environ["PYTHONPATH"] = os.pathsep.join([str(ROOT), *filter(None, [os.environ.get("PYTHONPATH")])])
    from pyspark.sql import SparkSession

    session = (
        SparkSession.builder.master("local[1]")
        .appName("discaudit-tests")
        .config("spark.ui.enabled", "false")
        .config("spark.default.parallelism", "3")  # createDataFrame splits the rows into 3 partitions, in order
        .config("spark.sql.shuffle.partitions", "2")
        .config("spark.driver.memory", "1g")
        .getOrCreate()
    )
    session.sparkContext.setLogLevel("ERROR")
    yield session
    session.stop()


@pytest.fixture(scope="module")
def offset_data() -> pd.DataFrame:
    return offset_frame(n_per_class=100)


def test_spark_matches_pandas_on_offset_and_badly_scaled_columns(spark, offset_data) -> None:
    sdf = spark.createDataFrame(offset_data)
    assert sdf.rdd.getNumPartitions() == 3  # row labels must survive the partitions
    want = discaudit.preflight(offset_data, target="label")
    got = discaudit.preflight(sdf, target="label")
    assert_same_verdict(got, want)
    assert_same_moments(moments(sdf), moments(offset_data))
    assert got.meta["features"] == want.meta["features"]


def test_spark_row_pass_runs_on_the_executors(spark, offset_data) -> None:
    from discaudit.sources import open_source
    from discaudit.sources.spark import SparkRows

    data = open_source(spark.createDataFrame(offset_data), target="label", config=Config(), random_state=0)
    assert isinstance(data.all_rows, SparkRows)
    seen = data.all_rows.map_reduce(lambda block: sorted(block.row_labels.tolist()), lambda a, b: a + b)
    assert seen == list(range(len(offset_data)))  # every row once, labelled by its position


def test_only_summaries_and_the_sample_reach_the_driver(monkeypatch, spark, offset_data) -> None:
    sdf = spark.createDataFrame(offset_data)
    DataFrame = type(sdf)  # the session's DataFrame class (classic or Connect)
    fetched: list[int] = []
    for name in ("collect", "toPandas", "toArrow", "_collect_as_arrow"):
        original = getattr(DataFrame, name, None)
        if original is None:
            continue

        def counted(self, *args, _original=original, **kwargs):
            out = _original(self, *args, **kwargs)
            rows = out.num_rows if hasattr(out, "num_rows") else len(out)
            fetched.append(
                rows
                if not isinstance(out, list) or not out or not hasattr(out[0], "num_rows")
                else sum(b.num_rows for b in out)
            )
            return out

        monkeypatch.setattr(DataFrame, name, counted)
    config = Config(sample_rows_per_class=10)
    verdict = discaudit.preflight(sdf, target="label", config=config)
    assert verdict.meta["n_rows"] == len(offset_data) and verdict.meta["sample"]["per_class"]["class_0"] == 10
    assert fetched and max(fetched) < len(offset_data) / 2  # never the rows themselves: summaries, sample keys


def test_spark_above_the_pushdown_limit_summarizes_in_map_in_pandas(monkeypatch, spark, offset_data) -> None:
    from discaudit.sources import engines

    monkeypatch.setattr(engines, "PUSHDOWN_MAX_FEATURES", 2)
    sdf = spark.createDataFrame(offset_data)
    assert_same_moments(moments(sdf), moments(offset_data))


def test_spark_string_column_names_spark_and_the_column(spark, offset_data) -> None:
    sdf = spark.createDataFrame(offset_data.assign(note="x"))
    with pytest.raises(discaudit.DataError, match=r"^Spark columns 'note' \(String\) cannot be audited"):
        discaudit.preflight(sdf, target="label")
