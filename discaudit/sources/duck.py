"""Big files and SQL queries: DuckDB where it is installed, pyarrow's multithreaded readers otherwise.

* :func:`load_file` audits a CSV (``.csv``, ``.csv.gz``) or Parquet file without holding it in
  memory. With DuckDB (``discaudit[duckdb]``) the file becomes a DuckDB relation and is audited
  where it lives (:mod:`discaudit.sources.engines`): moments, sample and screens are queries on
  every core, and the rows are streamed back once for the row pass. Without DuckDB, pyarrow reads
  the file in record batches (its CSV reader parses on every core) and the chunked path summarizes
  them from float arrays. pandas' chunked reader is never used.
* :func:`load_sql` audits the result of a DuckDB query, e.g.
  ``SELECT * FROM 'data/*.parquet' WHERE year = 2024``.

Row labels are 0-based row positions in the file (or query result), or the values of
``index_col``. Column choice follows the command line's rules (:func:`~discaudit.sources.files.choose_columns`).
"""

from __future__ import annotations

import importlib.util
import os
from collections.abc import Iterator, Sequence
from pathlib import Path
from typing import Any

import numpy as np
import numpy.typing as npt
import pandas as pd

from discaudit.config import Config
from discaudit.dataset import AuditData, Coordinates
from discaudit.errors import DataError
from discaudit.sources.engines import load_lazy, raw_arrow_columns
from discaudit.sources.files import choose_columns, file_columns, kind, no_data_rows
from discaudit.sources.frame_schema import FrameColumns, judge_columns
from discaudit.sources.frames import load_batches
from discaudit.sources.screening import audit_values, choose_coordinates, exact_range

FloatArray = npt.NDArray[np.float64]

#: Rows per record batch read by pyarrow when DuckDB is not installed.
ARROW_BATCH_ROWS = 200_000
#: Bytes per block pyarrow's CSV reader parses at once (each block on its own thread).
_CSV_BLOCK_BYTES = 16 << 20

READERS = ("auto", "duckdb", "arrow")

#: Cells read as missing values in a CSV file: pandas' ``read_csv`` defaults (its ``na_values``
#: documentation), so that DuckDB and pyarrow read a file as the in-memory reader does.
CSV_MISSING = (
    "",
    "#N/A",
    "#N/A N/A",
    "#NA",
    "-1.#IND",
    "-1.#QNAN",
    "-NaN",
    "-nan",
    "1.#IND",
    "1.#QNAN",
    "<NA>",
    "N/A",
    "NA",
    "NULL",
    "NaN",
    "None",
    "n/a",
    "nan",
    "null",
)


def duckdb_installed() -> bool:
    return importlib.util.find_spec("duckdb") is not None


def _quoted(name: str) -> str:
    return '"' + name.replace('"', '""') + '"'


def _duckdb() -> Any:
    try:
        import duckdb
    except ImportError as exc:
        raise DataError("Reading through DuckDB needs the extra: pip install 'discaudit[duckdb]'.") from exc
    return duckdb


def _relation(path: Path) -> Any:
    duckdb = _duckdb()
    connection = duckdb.connect()
    try:
        if kind(path) == "parquet":
            relation = connection.read_parquet(str(path))
        else:
            relation = connection.read_csv(str(path), na_values=list(CSV_MISSING))
        if not relation.limit(1).fetchall():
            raise no_data_rows(path)
        return relation
    except duckdb.Error as exc:
        raise DataError(f"{path}: DuckDB cannot read it: {_first_line(exc)}") from None


def load_file(
    path: str | os.PathLike[str],
    *,
    target: str,
    features: Sequence[str] | None = None,
    exclude: Sequence[str] = (),
    index_col: str | None = None,
    config: Config,
    random_state: int | None,
    reader: str = "auto",
    batch_rows: int | None = None,
) -> AuditData:
    """Validate a big CSV or Parquet file, read through DuckDB (``reader='duckdb'``), pyarrow
    (``'arrow'``) or whichever is installed (``'auto'``: DuckDB first)."""
    path = Path(path)
    kind(path)  # an unknown suffix is a DataError before anything is opened
    if not path.exists():
        raise FileNotFoundError(2, "No such file or directory", str(path))
    if reader not in READERS:
        raise DataError(f"reader must be one of {READERS}; got {reader!r}.")
    if reader == "duckdb" or (reader == "auto" and duckdb_installed()):
        relation = _relation(path)
        names = [str(c) for c in relation.columns]
        stored: list[str] = []
        if kind(path) == "parquet":
            data_columns, stored = file_columns(path)
            names = [c for c in names if c in data_columns or c in stored]
        chosen = choose_columns(names, target, features, exclude, index_col, index_names=stored)
        wanted = [*chosen, target, *([index_col] if index_col else [])]
        relation = relation.select(*[_quoted(c) for c in wanted])
        return load_lazy(relation, target=target, config=config, random_state=random_state, label_column=index_col)
    columns, stored = file_columns(path)
    chosen = choose_columns(columns, target, features, exclude, index_col, index_names=stored)
    if batch_rows is not None and batch_rows < 1:
        raise DataError("batch_rows must be a positive number of rows.")
    return _load_arrow(path, chosen, target, index_col, config, random_state, batch_rows or ARROW_BATCH_ROWS)


def load_sql(
    query: str, *, target: str, index_col: str | None = None, config: Config, random_state: int | None
) -> AuditData:
    """Validate the result of a DuckDB SQL query holding the target column (every other column but
    ``index_col`` is a feature)."""
    duckdb = _duckdb()
    try:
        relation = duckdb.connect().sql(query)
    except duckdb.Error as exc:
        raise DataError(f"DuckDB cannot run the query: {_first_line(exc)}") from None
    if relation is None:
        raise DataError("The SQL statement returns no rows: give a SELECT query.")
    names = [str(c) for c in relation.columns]
    choose_columns(names, target, None, (), index_col)  # the target and label column must exist
    return load_lazy(relation, target=target, config=config, random_state=random_state, label_column=index_col)


# --- pyarrow, when DuckDB is not installed --------------------------------------------------------


class _ArrowBatches:
    """A CSV or Parquet file as float batches, read by pyarrow; labels indexed by row label."""

    def __init__(self, path: Path, columns: FrameColumns, index_col: str | None, batch_rows: int) -> None:
        self.path, self.columns, self.index_col, self.batch_rows = path, columns, index_col, batch_rows
        # Coordinates from the first batch, as the chunked path chooses them from its first chunk.
        first = next(iter(self._read(self._wanted())), None)
        ranges = [] if first is None else [exact_range(c) for c in raw_arrow_columns(first, columns.features)]
        self.coordinates = choose_coordinates(ranges) if first is not None else Coordinates.plain(len(columns.features))

    def _wanted(self) -> list[str]:
        assert self.columns.target is not None
        return [*self.columns.features, self.columns.target, *([self.index_col] if self.index_col else [])]

    def _read(self, wanted: list[str]) -> Iterator[Any]:
        if kind(self.path) == "parquet":
            import pyarrow.parquet as pq

            # pre_buffer=False with a small buffer: pre-buffered column chunks would stay alive.
            parquet = pq.ParquetFile(self.path, pre_buffer=False, buffer_size=1 << 20)
            yield from parquet.iter_batches(batch_size=self.batch_rows, columns=wanted)
            return
        import pyarrow as pa
        import pyarrow.csv as csv

        # Features are read as float64 in every block (types inferred from the first block alone
        # could turn a column of whole numbers into integers and fail on a later decimal point).
        floats = {c: pa.float64() for c in self.columns.features}
        reader = csv.open_csv(
            self.path,
            read_options=csv.ReadOptions(block_size=_CSV_BLOCK_BYTES, use_threads=True),
            convert_options=csv.ConvertOptions(
                include_columns=wanted, column_types=floats, null_values=list(CSV_MISSING), strings_can_be_null=True
            ),
        )
        yield from reader

    def __call__(self) -> Iterator[tuple[FloatArray, pd.Series]]:
        target = self.columns.target
        assert target is not None
        start = 0
        for batch in self._read(self._wanted()):
            n = batch.num_rows
            if self.index_col is not None:
                index = pd.Index(
                    batch.column(batch.schema.get_field_index(self.index_col)).to_numpy(zero_copy_only=False)
                )
            else:
                index = pd.RangeIndex(start, start + n)
            start += n
            raw = batch.column(batch.schema.get_field_index(target)).to_pylist()
            values = audit_values(raw_arrow_columns(batch, self.columns.features), self.coordinates)
            yield values, pd.Series(np.asarray(raw, dtype=object), index=index)


def _load_arrow(
    path: Path,
    chosen: list[str],
    target: str,
    index_col: str | None,
    config: Config,
    random_state: int | None,
    batch_rows: int,
) -> AuditData:
    import narwhals as nw

    head = nw.from_native(_arrow_head(path, [*chosen, target]), eager_only=True)
    columns = judge_columns(head, target, config)
    batches = _ArrowBatches(path, columns, index_col, batch_rows)
    return load_batches(batches, columns, batches.coordinates, config, random_state)


def _arrow_head(path: Path, wanted: list[str]) -> Any:
    """The file's first rows as an Arrow table of the ``wanted`` columns (a CSV's types as pyarrow
    infers them from its first block)."""
    import pyarrow as pa

    if kind(path) == "parquet":
        import pyarrow.parquet as pq

        batch = next(pq.ParquetFile(path).iter_batches(batch_size=16, columns=wanted), None)
    else:
        import pyarrow.csv as csv

        reader = csv.open_csv(
            path,
            read_options=csv.ReadOptions(block_size=_CSV_BLOCK_BYTES),
            convert_options=csv.ConvertOptions(
                include_columns=wanted, null_values=list(CSV_MISSING), strings_can_be_null=True
            ),
        )
        batch = next(iter(reader), None)
    if batch is None or batch.num_rows == 0:
        raise no_data_rows(path)
    return pa.Table.from_batches([batch]).select(wanted)


def _first_line(exc: BaseException) -> str:
    text = " ".join(str(exc).split())
    return text if len(text) <= 240 else text[:237] + "..."
