"""Audit input that does not fit in memory: chunks of rows, read once or twice.

Pass 1 folds chunk summaries (:mod:`discaudit.sources.chunks`): exact per-class moments for the
closed-form checks and a seeded uniform sample per class for the robust and pairwise ones.
When the chunks can be read again, checks that must see every row (outlier scoring) read
them again through the data's row pass, so flagged rows are exact row labels of the input and
the outlier counts are over all rows. Memory is bounded by the chunk and sample sizes, not by
the number of rows.
"""

from __future__ import annotations

import os
from collections.abc import Callable, Sequence

from discaudit.audit import audit
from discaudit.config import Config
from discaudit.sources.chunks import ChunkSource, load_chunks
from discaudit.sources.duck import load_file, load_sql
from discaudit.sources.files import file_chunks
from discaudit.verdict import Verdict

__all__ = ["file_chunks", "preflight_chunks", "preflight_file", "preflight_sql"]


def preflight_chunks(
    chunks: ChunkSource,
    target: str,
    *,
    config: Config | None = None,
    random_state: int | None = 0,
    progress: Callable[[int], None] | None = None,
) -> Verdict:
    """Audit data arriving as chunks of rows (DataFrames that hold the target column).

    Parameters
    ----------
    chunks : callable or iterable of DataFrame
        Preferably a function returning a fresh iterator over the chunks: it is called twice,
        once for the moments and sample and once to score every row for outliers. A plain
        iterable is read once; outlier rows then come from the sample only (noted in the
        finding). Each chunk's index labels are the row labels reported.
    target : str
        The class column.
    config : Config, optional
        ``Config.sample_rows_per_class`` bounds the sample kept per class.
    random_state : int or None, default 0
        Seed of the sample and of every robust fit.
    progress : callable, optional
        Called with the number of rows of each chunk read in pass 1.

    Returns
    -------
    Verdict
        Moment-based findings are exact over all rows; outliers, normality and separation
        are computed on the sample (its size and seed are in ``verdict.meta["sample"]``).
    """
    config = config or Config()
    return audit(load_chunks(chunks, target, config, random_state, progress), config, random_state)


def preflight_file(
    path: str | os.PathLike[str],
    target: str,
    *,
    features: Sequence[str] | None = None,
    exclude: Sequence[str] = (),
    index_col: str | None = None,
    reader: str = "auto",
    batch_rows: int | None = None,
    config: Config | None = None,
    random_state: int | None = 0,
) -> Verdict:
    """Audit a CSV or Parquet file too big for memory, where it lies.

    Parameters
    ----------
    path : str or path-like
        ``.csv``, ``.csv.gz``, ``.parquet`` or ``.pq``.
    target : str
        The class column.
    features, exclude, index_col
        As for ``discaudit check``: the feature columns, columns left out, the column of row labels
        (default: 0-based row positions).
    reader : {"auto", "duckdb", "arrow"}, default "auto"
        ``"duckdb"``: the file becomes a DuckDB relation; moments, sample and screens are queries
        on every core and the rows are streamed back once for the row pass (``discaudit[duckdb]``).
        ``"arrow"``: pyarrow's batch readers (multithreaded for CSV) and the chunked path.
        ``"auto"``: DuckDB when it is installed.
    batch_rows : int, optional
        Rows per batch for the ``"arrow"`` reader.
    config, random_state
        As for :func:`discaudit.preflight`.

    Returns
    -------
    Verdict
        Moment-based findings are exact over all rows; the robust and pairwise checks use the
        seeded per-class sample (``verdict.meta["sample"]``); outliers are scored on every row.
    """
    config = config or Config()
    data = load_file(
        path,
        target=target,
        features=features,
        exclude=exclude,
        index_col=index_col,
        config=config,
        random_state=random_state,
        reader=reader,
        batch_rows=batch_rows,
    )
    return audit(data, config, random_state)


def preflight_sql(
    query: str,
    target: str,
    *,
    index_col: str | None = None,
    config: Config | None = None,
    random_state: int | None = 0,
) -> Verdict:
    """Audit the result of a DuckDB query, e.g. ``SELECT * FROM 'data/*.parquet'`` (``discaudit[duckdb]``).

    Every column but ``target`` and ``index_col`` is a feature; rows are labelled by ``index_col``
    or by their position in the result (add ``ORDER BY`` for a stable order).
    """
    config = config or Config()
    return audit(
        load_sql(query, target=target, index_col=index_col, config=config, random_state=random_state),
        config,
        random_state,
    )
