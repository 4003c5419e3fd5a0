"""CSV and Parquet files: the columns an audit needs, read whole or in batches.

The suffix decides the reader (``.csv``, ``.csv.gz``: pandas; ``.parquet``, ``.pq``: pyarrow).
:func:`read_table` reads a whole file for in-memory auditing; :func:`file_chunks` returns a
function giving a fresh iterator over batches, for :mod:`discaudit.sources.chunks`.
"""

from __future__ import annotations

import contextlib
import gzip
import io
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
        ``features``/``exclude``, or no feature left; for CSV, a row with another number of
        fields than the header, the header repeated on a later line, or numbers written with a
        decimal comma (:func:`check_csv_layout`, :func:`check_text_numbers`). The message names
        the file and the line or column.
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
        check_csv_layout(path)
        frame = _read_csv(path, [*chosen, target], index_col, progress)
        check_text_numbers(frame, path, chosen)
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


def csv_line(path: str | os.PathLike[str], row: int) -> int | None:
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


# -- what CI data look like: ragged rows, repeated headers, decimal commas, labels that are not classes ------------

#: Bytes read at a time by the layout scan of a CSV file.
_SCAN_BLOCK = 1 << 24
#: A target with more distinct values than this, most of them alone in their class, looks continuous.
CONTINUOUS_DISTINCT = 20
#: Columns with at most this many distinct values are suggested as class columns.
_CLASS_LIKE_MAX = 20
_DECIMAL_COMMA = r"[+-]?\d*,\d+(?:[eE][+-]?\d+)?"


def check_csv_layout(path: str | os.PathLike[str]) -> None:
    """Every line of a CSV file has as many fields as the header, and no line repeats the header.

    pandas reads a row with fewer fields by filling missing values, and a first row with one
    field too many by taking the first column as the index, shifting every column: the audit
    would then see nonsense (a target holding feature values). One pass over the bytes, in
    blocks: fields are counted by delimiters while the file has no quote character, and by the
    csv module (which understands quoted delimiters and line breaks) once one appears. Blank
    lines are skipped, as pandas skips them. Lines are counted from 1, the header being line 1.

    Raises
    ------
    DataError
        Naming the file, the first line at fault and what to do.
    """
    path = Path(path)
    with _binary(path) as handle:
        header: bytes | None = None
        expected = 0
        line = 0
        carry = b""
        while True:
            block = handle.read(_SCAN_BLOCK)
            data = carry + block
            if b'"' in data:
                _check_layout_quoted(path)
                return
            if not block:
                complete, carry = (data + b"\n" if data else b""), b""
            else:
                cut = data.rfind(b"\n")
                complete, carry = data[: cut + 1], data[cut + 1 :]
            if complete:
                header, expected, line = _scan_lines(path, complete, header, expected, line)
            if not block:
                return


def _binary(path: Path) -> Any:
    raw = path.open("rb")
    if path.name.lower().endswith(".gz"):
        return gzip.GzipFile(fileobj=raw, mode="rb")
    return raw


def _scan_lines(
    path: Path, data: bytes, header: bytes | None, expected: int, line: int
) -> tuple[bytes | None, int, int]:
    """Field counts and header repeats of whole lines (``data`` ends with a newline)."""
    import numpy as np

    array = np.frombuffer(data, dtype=np.uint8)
    ends = np.flatnonzero(array == 10)
    starts = np.concatenate([[0], ends[:-1] + 1])
    stops = ends - (array[np.maximum(ends - 1, 0)] == 13) * (ends > starts)  # without a '\r'
    # Delimiters per line: positions of every comma, counted between line ends by a sorted search.
    commas = np.diff(np.searchsorted(np.flatnonzero(array == 44), np.concatenate([[-1], ends])))
    numbers = line + 1 + np.arange(starts.size)
    blank = stops == starts
    if header is None:
        first = np.flatnonzero(~blank)
        if not first.size:
            return None, 0, line + starts.size
        i = int(first[0])
        header = bytes(data[starts[i] : stops[i]])
        expected = int(commas[i]) + 1
        blank[: i + 1] = True
    fields = commas + 1
    ragged = np.flatnonzero(~blank & (fields != expected))
    # Lines as long as the header whose first bytes match it, then compared in full.
    same = np.flatnonzero(~blank & (stops - starts == len(header)))
    head = np.frombuffer(header[:8], dtype=np.uint8)
    if same.size and head.size:
        same = same[(array[starts[same][:, None] + np.arange(head.size)] == head).all(axis=1)]
    repeat = next((int(j) for j in same if data[starts[j] : stops[j]] == header), None)
    first_ragged = int(ragged[0]) if ragged.size else None
    if repeat is not None and (first_ragged is None or repeat < first_ragged):
        _repeated_header(path, int(numbers[repeat]))
    if first_ragged is not None:
        _ragged(path, int(numbers[first_ragged]), int(fields[first_ragged]), expected)
    return header, expected, line + starts.size


def _check_layout_quoted(path: Path) -> None:
    """The layout check by the csv module, for a file with quoted fields."""
    import csv

    with _binary(path) as raw, io.TextIOWrapper(raw, encoding="utf-8", errors="replace", newline="") as text:
        reader = csv.reader(text)
        header: list[str] | None = None
        before = 0
        for record in reader:
            start, before = before + 1, reader.line_num
            if not record:
                continue
            if header is None:
                header = record
            elif len(record) != len(header):
                _ragged(path, start, len(record), len(header))
            elif record == header:
                _repeated_header(path, start)


def _ragged(path: Path, line: int, fields: int, expected: int) -> None:
    hint = "a stray delimiter, or a field with a comma that needs quotes?" if fields > expected else "a missing field?"
    raise DataError(
        f"{path}: line {line} has {fields} fields but the header has {expected} ({hint}); fix that row so every row "
        "has one field per column."
    )


def _repeated_header(path: Path, line: int) -> None:
    raise DataError(
        f"{path}: line {line} repeats the header row (files joined with their headers?); remove it and keep the header "
        "on line 1 only."
    )


def check_text_numbers(frame: pd.DataFrame, path: str | os.PathLike[str], columns: Sequence[str]) -> None:
    """A column of numbers written with a decimal comma (alone or beside decimal points) is named with its line.

    pandas reads ``"3,14"`` as text, and the audit would report the column as non-numeric. Only
    columns pandas read as text are looked at.

    Raises
    ------
    DataError
        Naming the file, the column, the first line with a decimal comma and the fix.
    """
    import numpy as np

    for column in columns:
        if column not in frame.columns or pd.api.types.is_numeric_dtype(frame[column].dtype):
            continue
        values = frame[column]
        is_text = values.map(lambda v: isinstance(v, str)).to_numpy(dtype=bool)
        text = values[is_text].astype(str).str.strip()
        comma = text.str.fullmatch(_DECIMAL_COMMA).to_numpy(dtype=bool)
        if not comma.any():
            continue
        position = int(np.flatnonzero(is_text)[np.flatnonzero(comma)[0]])  # the row's position in the file
        line = csv_line(path, position)
        example = text[comma].iloc[0]
        others = text[~comma]
        points = others[pd.to_numeric(others, errors="coerce").notna() & others.str.contains(".", regex=False)]
        where = f" on line {line}" if line is not None else ""
        beside = f" beside numbers with a decimal point ({points.iloc[0]!r})" if len(points) else ""
        raise DataError(
            f"{path}: column {column!r} holds {example!r}{where}, a number with a decimal comma{beside}; write every "
            "number with a decimal point (and no thousands separator)."
        )


def screen_labels(
    frame: pd.DataFrame, target: str, path: str | os.PathLike[str], min_class_rows: int | None = None
) -> tuple[pd.DataFrame, list[str]]:
    """The rows to audit and notes, after checking that the target holds class labels.

    * ``min_class_rows``: rows of classes with fewer rows are dropped, with a note naming them.
    * A target with a class of one row and more than :data:`CONTINUOUS_DISTINCT` distinct values,
      most of them alone in their class or non-whole numbers, looks continuous (a measurement or
      an identifier): DataError saying so and naming columns that look like class labels.
    * A class with fewer than two rows beside larger ones: DataError naming them and the fixes.

    Returns
    -------
    (DataFrame, list of str)
        The frame (rows dropped when asked) and the notes for the report.
    """
    labels = frame[target]
    counts = labels.value_counts(dropna=True)
    notes: list[str] = []
    if min_class_rows is not None and min_class_rows > 1:
        small = counts[counts < min_class_rows]
        if len(small):
            frame = frame[~labels.isin(small.index)]
            notes.append(
                f"--min-class-rows {min_class_rows}: dropped {len(small)} class{'es' if len(small) > 1 else ''} with "
                f"fewer rows ({_counted(small)}), {int(small.sum())} rows in all."
            )
            counts = counts[counts >= min_class_rows]
    singles = counts[counts < 2]
    non_whole = pd.api.types.is_float_dtype(labels.dtype) and bool(((labels.dropna() % 1) != 0).any())
    # Only when the audit could not run anyway (a class of one row), so streamed and in-memory reading agree.
    if len(singles) and len(counts) > CONTINUOUS_DISTINCT and (len(singles) > len(counts) / 2 or non_whole):
        kind = "non-whole numbers" if non_whole else "values"
        raise DataError(
            f"{path}: target column {target!r} has {len(counts)} distinct {kind} in {int(counts.sum())} rows, "
            f"{len(singles)} of them on one row only: it looks like a measurement or an identifier, not a class "
            f"label.{_class_like(frame, target)}"
        )
    if len(singles) and len(counts) >= 2:
        big = counts.index[0]
        raise DataError(
            f"{path}: target column {target!r}: class{'es' if len(singles) > 1 else ''} {_counted(singles)} "
            f"{'have' if len(singles) > 1 else 'has'} fewer than two rows beside {big!r} ({int(counts.iloc[0])} rows); "
            "merge them into a larger class, or drop them with --min-class-rows 2."
        )
    return frame, notes


def _counted(counts: pd.Series, limit: int = 5) -> str:
    shown = ", ".join(f"{k!r} ({int(v)} row{'s' if v != 1 else ''})" for k, v in list(counts.items())[:limit])
    return shown + (f" and {len(counts) - limit} more" if len(counts) > limit else "")


def _class_like(frame: pd.DataFrame, target: str) -> str:
    """Columns that look like class labels: 2 to 20 distinct values, each on two rows or more."""
    found = []
    for column in frame.columns:
        if column == target:
            continue
        counts = frame[column].value_counts(dropna=True)
        if 2 <= len(counts) <= _CLASS_LIKE_MAX and counts.min() >= 2:
            found.append(f"{column!r} ({len(counts)} values)")
    if not found:
        return " Pass the column of class labels as --target."
    return f" Columns that look like class labels: {', '.join(found[:3])}; pass one of them as --target."


def no_data_rows(path: str | os.PathLike[str]) -> DataError:
    """The error for a file holding only a header (for readers other than pandas)."""
    return DataError(f"no data rows in {path} (only a header); an audit needs labelled rows.")
