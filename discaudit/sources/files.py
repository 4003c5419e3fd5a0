"""CSV and Parquet files: the columns an audit needs, read whole or in batches.

The suffix decides the reader (``.csv``, ``.csv.gz``: pandas; ``.parquet``, ``.pq``: pyarrow).
:func:`read_table` reads a whole file for in-memory auditing; :func:`file_chunks` returns a
function giving a fresh iterator over batches, for :mod:`discaudit.sources.chunks`.
"""

from __future__ import annotations

import contextlib
import gzip
import os
from collections.abc import Callable, Iterator, Sequence
from pathlib import Path
from typing import Any, cast

import pandas as pd

from discaudit.errors import DataError
from discaudit.progress import Progress
from discaudit.progress import enabled as progress_enabled

#: Files larger than this are read in chunks with a progress line (at a terminal only).
LARGE_FILE_BYTES = 16_000_000
#: Rows per chunk when a whole CSV file is read with a progress line.
_CHUNK_ROWS = 200_000
_SUFFIXES = {".csv": "csv", ".csv.gz": "csv", ".parquet": "parquet", ".pq": "parquet"}


def read_table(
    path: str | os.PathLike[str],
    *,
    target: str,
    features: Sequence[str] | None = None,
    exclude: Sequence[str] = (),
    index_col: str | None = None,
    progress: bool | None = None,
) -> pd.DataFrame:
    """Read the columns an audit needs from a CSV or Parquet file.

    Parameters
    ----------
    path : str or path-like
        ``.csv``, ``.csv.gz``, ``.parquet`` or ``.pq``; the suffix decides the reader.
    target : str
        The class column (must exist).
    features : sequence of str, optional
        Feature columns, in this order; default every column but the target and the index.
    exclude : sequence of str, default ()
        Columns to leave out of the features.
    index_col : str, optional
        Column of row labels, used as the index (a Parquet file's stored pandas index also
        counts).
    progress : bool, optional
        Read in chunks with a progress line on stderr; by default only for files larger
        than :data:`LARGE_FILE_BYTES` when :func:`discaudit.progress.enabled`.

    Returns
    -------
    pandas.DataFrame
        The features then the target, indexed by ``index_col`` when given.

    Raises
    ------
    DataError
        Unknown suffix, missing target or index column, unknown or conflicting names in
        ``features``/``exclude``, or no feature left; the message names them.
    FileNotFoundError
        When the file does not exist.
    """
    path = Path(path)
    file_kind = kind(path)
    if not path.exists():
        raise FileNotFoundError(2, "No such file or directory", str(path))
    if progress is None:
        progress = progress_enabled() and path.stat().st_size > LARGE_FILE_BYTES
    if file_kind == "csv":
        columns = [str(c) for c in pd.read_csv(path, nrows=0).columns]
        chosen = choose_columns(columns, target, features, exclude, index_col)
        frame = _read_csv(path, [*chosen, target], index_col, progress)
    else:
        import pyarrow.parquet as pq

        parquet = pq.ParquetFile(path)
        columns, stored_index = _parquet_columns(parquet)
        chosen = choose_columns(columns, target, features, exclude, index_col, index_names=stored_index)
        frame = _read_parquet(parquet, path, [*chosen, target], index_col, progress)
    if index_col is not None:
        if index_col in frame.columns:
            frame = frame.set_index(index_col)
        elif frame.index.name != index_col:  # pragma: no cover - guarded by choose_columns
            raise DataError(f"Index column {index_col!r} not found.")
    if len(frame) == 0:
        raise DataError(f"no data rows in {path} (only a header); an audit needs labelled rows.")
    selected: pd.DataFrame = frame[[*chosen, target]]  # pandas-stubs' Self reads as Any when checked for 3.10
    return selected


def kind(path: Path) -> str:
    name = path.name.lower()
    for suffix, kind in _SUFFIXES.items():
        if name.endswith(suffix):
            return kind
    raise DataError(
        f"cannot tell the file format from the name {path.name!r}; use a .csv, .csv.gz, .parquet or .pq file."
    )


def kind_name(path: str) -> str:
    try:
        return {"csv": "CSV", "parquet": "Parquet"}[kind(Path(path))]
    except DataError:
        return "data"


def choose_columns(
    columns: list[str],
    target: str,
    features: Sequence[str] | None,
    exclude: Sequence[str],
    index_col: str | None,
    index_names: Sequence[str] = (),
) -> list[str]:
    """The feature columns to read, after checking every name given.

    ``columns`` are the file's data columns; ``index_names`` the names of an index stored
    with the data (Parquet written by pandas), which only ``--index-col`` may name.
    """
    shown = _shown(columns)
    if target not in columns:
        raise DataError(f"target column {target!r} not found; the columns are: {shown}.")
    if index_col is not None:
        if index_col not in columns and index_col not in index_names:
            raise DataError(f"index column {index_col!r} (--index-col) not found; the columns are: {shown}.")
        if index_col == target:
            raise DataError(f"--index-col {index_col!r} is the target column; pick the column of row labels.")
    if features is not None and not features:
        raise DataError("--features names no column; list at least one, e.g. --features a,b.")
    for option, names in (("--features", features or ()), ("--exclude", exclude)):
        unknown = [n for n in names if n not in columns]
        if unknown:
            raise DataError(f"{option} names columns not in the file: {_shown(unknown)}; the columns are: {shown}.")
        if target in names:
            raise DataError(f"{option} names the target column {target!r}; it is never a feature.")
        if index_col is not None and index_col in names:
            raise DataError(f"{option} names the index column {index_col!r}; it is never a feature.")
    pool = list(features) if features else [c for c in columns if c not in (target, index_col)]
    chosen = [c for c in dict.fromkeys(pool) if c not in set(exclude)]
    if not chosen:
        raise DataError("no feature column left after --features/--exclude; keep at least one.")
    return chosen


def _read_csv(path: Path, needed: list[str], index_col: str | None, progress: bool) -> pd.DataFrame:
    usecols = needed + ([index_col] if index_col else [])
    if not progress:
        return pd.read_csv(path, usecols=usecols, low_memory=False)
    size = path.stat().st_size
    chunks = []
    with path.open("rb") as raw, Progress(f"reading {path.name}", total=size, unit="B", show=True) as bar:
        unpacked = gzip.open(raw) if path.name.lower().endswith(".gz") else contextlib.nullcontext(raw)  # noqa: SIM115
        with unpacked as handle:
            for chunk in pd.read_csv(handle, usecols=usecols, low_memory=False, chunksize=_CHUNK_ROWS):
                chunks.append(chunk)
                bar.update(raw.tell())  # compressed bytes consumed, for a .gz file
    return pd.concat(chunks, ignore_index=True) if chunks else pd.read_csv(path, usecols=usecols)


def _parquet_columns(parquet: Any) -> tuple[list[str], list[str]]:
    """Data columns and the names of a stored pandas index, from a Parquet schema."""
    schema = parquet.schema_arrow
    meta = schema.pandas_metadata or {}
    index_fields = [c for c in meta.get("index_columns", []) if isinstance(c, str)]
    named = {c.get("field_name"): c.get("name") for c in meta.get("columns", [])}
    stored_index = [str(named[f]) for f in index_fields if named.get(f) is not None]
    return [n for n in schema.names if n not in index_fields], stored_index


def _read_parquet(parquet: Any, path: Path, needed: list[str], index_col: str | None, progress: bool) -> pd.DataFrame:
    import pyarrow as pa

    columns = needed + ([index_col] if index_col and index_col in parquet.schema_arrow.names else [])
    if not progress:  # pyarrow is untyped: its tables give Any
        return cast(pd.DataFrame, parquet.read(columns=columns, use_pandas_metadata=True).to_pandas())
    groups = parquet.num_row_groups
    with Progress(f"reading {path.name}", total=groups, unit="row groups", show=True) as bar:
        tables = []
        for i in range(groups):
            tables.append(parquet.read_row_group(i, columns=columns, use_pandas_metadata=True))
            bar.update(i + 1)
    if not tables:
        return cast(pd.DataFrame, parquet.read(columns=columns, use_pandas_metadata=True).to_pandas())
    return cast(pd.DataFrame, pa.concat_tables(tables).to_pandas())


def _shown(names: Sequence[str], limit: int = 10) -> str:
    listed = ", ".join(repr(n) for n in names[:limit])
    return listed + (f" and {len(names) - limit} more" if len(names) > limit else "")


def file_columns(path: Path) -> tuple[list[str], list[str]]:
    """The data columns of a file and the names of a stored pandas index (Parquet only)."""
    if kind(path) == "csv":
        return [str(c) for c in pd.read_csv(path, nrows=0).columns], []
    import pyarrow.parquet as pq

    return _parquet_columns(pq.ParquetFile(path))


def file_chunks(
    path: str | Path, batch_rows: int = 200_000, index_col: str | None = None, columns: list[str] | None = None
) -> Callable[[], Iterator[pd.DataFrame]]:
    """A function returning a fresh iterator over batches of a CSV (pandas) or Parquet (pyarrow) file.

    Each batch's index is the 0-based row number in the file (or ``index_col``'s values);
    ``columns`` limits what is read (the index column is added when given).
    """
    path = Path(path)
    file_kind = kind(path)
    wanted = None if columns is None else list(dict.fromkeys([*columns, *([index_col] if index_col else [])]))

    def batches() -> Iterator[pd.DataFrame]:
        start = 0
        for frame in _read_batches(path, file_kind, batch_rows, wanted):
            if len(frame) == 0:
                continue
            if index_col is not None:
                if index_col not in frame.columns:
                    raise DataError(f"{path}: index column {index_col!r} not found.")
                frame = frame.set_index(index_col)
            else:
                frame.index = pd.RangeIndex(start, start + len(frame))
            start += len(frame)
            yield frame
        if start == 0:
            raise DataError(f"no data rows in {path} (only a header); an audit needs labelled rows.")

    return batches


def csv_line(path: str | Path, row: int) -> int | None:
    """The line of a CSV file on which data row ``row`` (0-based, as pandas counts) starts.

    Counted by the csv module, so quoted fields that span lines and blank lines (which pandas
    skips) are accounted for; None when the file has fewer rows or is not CSV.
    """
    import csv
    import io

    path = Path(path)
    if kind(path) != "csv":
        return None
    raw = gzip.open(path, "rb") if path.name.lower().endswith(".gz") else path.open("rb")  # noqa: SIM115
    with raw, io.TextIOWrapper(raw, encoding="utf-8", errors="replace", newline="") as handle:
        reader = csv.reader(handle)
        seen_header, count, previous = False, -1, 0
        for record in reader:
            start, previous = previous + 1, reader.line_num
            if not record:
                continue  # a blank line
            if not seen_header:
                seen_header = True
                continue
            count += 1
            if count == row:
                return start
    return None


def _read_batches(path: Path, file_kind: str, batch_rows: int, columns: list[str] | None) -> Iterator[pd.DataFrame]:
    if file_kind == "parquet":
        import pyarrow.parquet as pq

        # pre_buffer=False with a small read buffer: pyarrow's default pre-buffering keeps the
        # decoded column chunks alive and memory grows with the file (about 2 GB for 20M x 10).
        parquet = pq.ParquetFile(path, pre_buffer=False, buffer_size=1 << 20)
        for batch in parquet.iter_batches(batch_size=batch_rows, columns=columns):
            yield batch.to_pandas()
    else:
        # pandas' chunked reader: bounded memory, and the same column names (and renames of
        # duplicated or empty headers) as the in-memory reader.
        with pd.read_csv(path, usecols=columns, chunksize=batch_rows, low_memory=False) as reader:
            yield from reader
