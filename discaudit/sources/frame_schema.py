"""What every dataframe library read through narwhals shares: its name, and its columns judged by
the input rules of :mod:`discaudit.sources.screening`.

The rules are applied, not restated: the frame's schema becomes a pandas frame with no rows (a few
bytes), and :func:`~discaudit.sources.screening.split` and
:func:`~discaudit.sources.screening.numeric_columns` judge the target and the feature columns
exactly as for pandas input. What only a foreign engine can get wrong (a nested target, a column
type the audit cannot read as a number) raises :class:`DataError` naming the engine and the column.
"""

from __future__ import annotations

import dataclasses
from dataclasses import dataclass
from typing import Any

import numpy as np
import pandas as pd

from discaudit.config import Config
from discaudit.errors import DataError
from discaudit.sources.screening import numeric_columns, split

#: Columns an engine adds to the queries it runs: the row label, the sample key, the class code.
ROW = "__discaudit_row"
KEY = "__discaudit_key"
CODE = "__discaudit_code"

#: Display names of the narwhals backends, for messages.
_ENGINE_NAMES = {
    "polars": "Polars",
    "pyarrow": "PyArrow",
    "duckdb": "DuckDB",
    "pyspark": "Spark",
    "pyspark[connect]": "Spark Connect",
    "sqlframe": "SQLFrame",
    "ibis": "Ibis",
    "dask": "Dask",
    "modin": "Modin",
    "cudf": "cuDF",
    "pandas": "pandas",
}


def engine_name(frame: Any) -> str:
    """``'Polars'``, ``'DuckDB'``, ``'Spark'``...: the library behind a narwhals frame."""
    implementation = str(frame.implementation.value if hasattr(frame.implementation, "value") else frame.implementation)
    return _ENGINE_NAMES.get(implementation, implementation)


def _nested(dtype: Any) -> bool:
    return bool(getattr(dtype, "is_nested", lambda: False)())


@dataclass(frozen=True)
class FrameColumns:
    """The columns of a foreign frame, judged: which are audited features, which were set aside."""

    engine: str
    target: str | None
    features: tuple[str, ...]
    non_numeric: tuple[str, ...]
    n_features_input: int
    #: Decimal columns: read as float64 (pandas would read them as objects).
    decimals: tuple[str, ...] = ()


def judge_columns(frame: Any, target: str | None, config: Config, *, has_y: bool = False) -> FrameColumns:
    """Apply the shared column rules to a narwhals DataFrame or LazyFrame (target column or external y).

    Raises
    ------
    DataError
        For a missing or duplicated target, a nested target column, no feature column, duplicate
        column names, or (under ``Config(non_numeric='error')``) a column that is not numeric;
        each message names the engine and the column.
    """
    import narwhals as nw

    engine = engine_name(frame)
    schema = dict(frame.collect_schema())
    if target is not None and has_y:
        raise DataError("Pass either y or target=, not both.")
    if target is None and not has_y:
        raise DataError(f"A {engine} frame needs target='<column>' naming the class column (or pass X, y).")
    if target is not None and target in schema and _nested(schema[target]):
        raise DataError(
            f"{engine} column {target!r} (the target) has the nested type {schema[target]}; the target must hold "
            "one class label per row."
        )
    decimals = tuple(str(c) for c, t in schema.items() if isinstance(t, nw.Decimal) and c != target)
    # The shared rules judge a pandas frame: the first row (the rules refuse an input with none),
    # typed by Arrow so that a null in it does not change its column's kind.
    first = frame.head(1)
    if decimals:
        first = first.with_columns(*[nw.col(c).cast(nw.Float64) for c in decimals])
    if isinstance(first, nw.LazyFrame):
        first = first.collect()
    head: pd.DataFrame = first.to_arrow().to_pandas(types_mapper=pd.ArrowDtype)
    columns, _ = split(head, None if target is not None else np.empty(len(head)), target)
    # Categorical codes (Config(categorical='codes')) and text holding numbers are conversions pandas
    # input gets; an engine's column of that kind is judged as not numeric.
    lenient = dataclasses.replace(config, non_numeric="drop", categorical="non_numeric")
    try:
        numeric, non_numeric, conversions = numeric_columns(columns, lenient)
    except DataError as exc:
        raise DataError(f"{engine} input: {exc}") from None
    set_aside = {*non_numeric, *conversions}
    non_numeric = [str(c) for c in columns.columns if str(c) in set_aside]  # in column order
    numeric = numeric.drop(columns=list(conversions))
    if not numeric.shape[1]:
        raise DataError(f"{engine} input: no numeric feature: every feature column is non-numeric ({non_numeric[:8]}).")
    if non_numeric and config.non_numeric == "error":
        shown = ", ".join(f"{c!r} ({schema[c]})" for c in non_numeric[:8])
        raise DataError(
            f"{engine} columns {shown} cannot be audited as numbers: encode them as numbers, leave them out, "
            "or pass Config(non_numeric='drop') to set them aside."
        )
    return FrameColumns(
        engine=engine,
        target=target,
        features=tuple(str(c) for c in numeric.columns),
        non_numeric=tuple(non_numeric),
        n_features_input=columns.shape[1],
        decimals=decimals,
    )
