"""Input sources: everything above the core. One front door, :func:`open_source`, picks a source by
the input's type; each source applies the shared rules of :mod:`discaudit.sources.screening` and
returns a :class:`~discaudit.dataset.AuditData` (validated moments, rows or a seeded sample, and a
pass over every row).

=====================  =================================================================
module                 input
=====================  =================================================================
``memory``             pandas DataFrame with a target column; X (frame or array) and y
``chunks``             an iterable of DataFrames, or a function returning a fresh one
``dask``               a Dask DataFrame (summarized on the workers)
``frames``             Polars DataFrames, PyArrow tables, other eager frames (via narwhals)
``engines``            lazy frames where they live: Polars LazyFrames, DuckDB relations,
                       Spark DataFrames (``spark``), Ibis tables (via narwhals)
``duck``               DuckDB (or pyarrow) readers for big files and SQL queries
``files``              CSV and Parquet files: whole, or in batches for ``chunks``
``what_if``            audited data with changes applied (``Verdict.what_if``), moments updated
=====================  =================================================================

To add a source: a module here that returns ``AuditData`` (reuse ``screening`` and, for data that
arrive in pieces, ``chunks.summarize``/``merge``), and one branch in :func:`open_source`.
"""

from __future__ import annotations

import sys
from typing import Any

from discaudit.config import Config
from discaudit.dataset import AuditData
from discaudit.errors import DataError


def _is_dask_frame(X: Any) -> bool:
    frames = sys.modules.get("dask.dataframe")  # a Dask frame exists only once its package is imported
    return frames is not None and isinstance(X, frames.DataFrame)


def _is_in_memory(X: Any) -> bool:
    """A numpy array, a pandas frame or series, or a plain sequence: :mod:`~discaudit.sources.memory` reads
    it, and no other library need be imported to tell (narwhals costs about 20 ms to import)."""
    if isinstance(X, (list, tuple)) or type(X).__module__ == "numpy":
        return True
    pandas = sys.modules.get("pandas")  # a pandas object exists only once pandas is imported
    return pandas is not None and isinstance(X, (pandas.DataFrame, pandas.Series))


def _is_lazy_frame(X: Any) -> bool:
    """A lazy frame narwhals knows (Polars LazyFrame, DuckDB relation, Spark, Ibis), by type only."""
    from narwhals import dependencies as nwd

    kinds = (
        nwd.is_polars_lazyframe,
        nwd.is_duckdb_relation,
        nwd.is_pyspark_dataframe,
        nwd.is_pyspark_connect_dataframe,
        nwd.is_sqlframe_dataframe,
        nwd.is_ibis_table,
    )
    return any(is_kind(X) for is_kind in kinds)


def open_source(
    X: Any, y: Any = None, *, target: str | None = None, config: Config, random_state: int | None
) -> AuditData:
    """Validated data from any supported input, chosen by the input's type."""
    if _is_in_memory(X):
        from discaudit.sources.memory import load

        return load(X, y, target=target, config=config)
    if _is_dask_frame(X):
        from discaudit.sources.dask import load_dask

        return load_dask(X, target=target, config=config, random_state=random_state)
    if _is_lazy_frame(X):
        from discaudit.sources.engines import load_lazy

        if y is not None:
            raise DataError(f"A lazy {type(X).__name__} needs target='<column>' naming its class column, not y.")
        return load_lazy(X, target=target, config=config, random_state=random_state)
    from discaudit.sources.frames import is_eager_frame

    if is_eager_frame(X):
        from discaudit.sources.frames import load_frame

        return load_frame(X, y, target=target, config=config, random_state=random_state)
    from discaudit.sources.memory import load

    return load(X, y, target=target, config=config)
