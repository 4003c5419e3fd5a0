"""Audit input that does not fit in memory: chunks of rows, read once or twice.

Pass 1 folds chunk summaries (:mod:`discaudit.summary`): exact per-class moments for the
closed-form checks and a seeded uniform sample per class for the robust and pairwise ones.
Pass 2 (when the chunks can be read again) scores every row against the robust fits of
the sample, so flagged rows are exact row labels of the input and the outlier counts are
over all rows. Memory is bounded by the chunk and sample sizes, not by the number of rows.
"""

from __future__ import annotations

import dataclasses
import functools
import operator
from collections.abc import Callable, Iterable, Iterator
from dataclasses import dataclass
from pathlib import Path
from typing import Any

import numpy as np
import numpy.typing as npt
import pandas as pd

from discaudit.audit import assemble, audit
from discaudit.checks import outliers
from discaudit.config import Config
from discaudit.errors import DataError
from discaudit.intake import AuditData
from discaudit.result import Verdict
from discaudit.stats._linalg import mahalanobis_sq
from discaudit.summary import ChunkSummary, merge, summarize, to_audit_data

ChunkSource = Callable[[], Iterable[pd.DataFrame]] | Iterable[pd.DataFrame]


def _rng(random_state: int | None, *key: int) -> np.random.Generator:
    entropy = None if random_state is None else [int(random_state) % 2**32, *key]
    return np.random.default_rng(np.random.SeedSequence(entropy))


def summarize_chunks(
    chunks: Iterable[pd.DataFrame],
    target: str,
    config: Config,
    random_state: int | None,
    progress: Callable[[int], None] | None = None,
) -> ChunkSummary:
    """Fold the summaries of all chunks (pass 1)."""
    total: ChunkSummary | None = None
    for i, chunk in enumerate(chunks):
        part = summarize(
            chunk,
            target,
            config,
            config.sample_rows_per_class,
            _rng(random_state, 1, i),
            None if total is None else total.features,
        )
        total = part if total is None else merge(total, part, _rng(random_state, 2, i))
        if progress is not None:
            progress(len(chunk))
    if total is None:
        raise DataError("The input has no rows.")
    return total


@dataclass(frozen=True)
class OutlierTally:
    """Pass-2 counts for the outliers check over some rows; tallies add up exactly."""

    n: npt.NDArray[np.int64]
    n_flagged: npt.NDArray[np.int64]
    masked: npt.NDArray[np.int64]
    kept_sum: npt.NDArray[np.float64]
    kept_n: npt.NDArray[np.int64]
    listed: list[list[dict[str, Any]]]
    flagged: pd.DataFrame

    def __add__(self, other: OutlierTally) -> OutlierTally:
        listed = [
            sorted(a + b, key=lambda r: -r["distance"])[: outliers.MAX_LISTED_ROWS]
            for a, b in zip(self.listed, other.listed, strict=True)
        ]
        return OutlierTally(
            self.n + other.n,
            self.n_flagged + other.n_flagged,
            self.masked + other.masked,
            self.kept_sum + other.kept_sum,
            self.kept_n + other.kept_n,
            listed,
            pd.concat([self.flagged, other.flagged], ignore_index=True),
        )


_FLAGGED_COLUMNS = ["row_label", "class", "distance", "classical_distance", "cutoff"]


def tally_chunk(chunk: pd.DataFrame, target: str, data: AuditData, fits: list[outliers.ClassFit]) -> OutlierTally:
    """Score every row of one chunk against the robust fits (pass 2)."""
    data = outliers.continuous_part(data)
    K, p = len(fits), data.p
    n, n_flagged, masked, kept_n = (np.zeros(K, dtype=np.int64) for _ in range(4))
    kept_sum = np.zeros((K, p))
    listed: list[list[dict[str, Any]]] = [[] for _ in fits]
    parts = [pd.DataFrame(columns=_FLAGGED_COLUMNS)]
    labels = chunk[target]
    values = chunk[list(data.features)].to_numpy(dtype=np.float64, na_value=np.nan)
    usable = np.isfinite(values).all(axis=1) & labels.notna().to_numpy()
    for k, fit in enumerate(fits):
        cls = data.classes[fit.code]
        rows = np.flatnonzero(usable & (labels == cls).to_numpy())
        X = values[rows]
        d = mahalanobis_sq(X, fit.location, fit.covariance) if rows.size else None
        if d is None:
            continue
        out, flags, d_classical = outliers.score_rows(X, d, fit, data.moments, chunk.index[rows])
        n[k], n_flagged[k], masked[k] = out.n, out.n_flagged, out.masked
        kept_sum[k], kept_n[k] = X[~flags].sum(axis=0), int((~flags).sum())
        listed[k] = out.listed
        if flags.any():
            parts.append(
                pd.DataFrame(
                    {
                        "row_label": chunk.index[rows][flags],
                        "class": cls,
                        "distance": d[flags],
                        "classical_distance": d_classical[flags],
                        "cutoff": fit.cutoff,
                    }
                )
            )
    flagged = pd.concat(parts, ignore_index=True) if len(parts) > 1 else parts[0]
    return OutlierTally(n, n_flagged, masked, kept_sum, kept_n, listed, flagged)


def rejudge_outliers(verdict: Verdict, data: AuditData, tally: OutlierTally, config: Config) -> Verdict:
    """Replace the sample-based outliers finding by one over every row, and re-assemble."""
    fits: list[outliers.ClassFit] = verdict.findings["outliers"].arrays["fits"]
    full = data
    data = outliers.continuous_part(data)
    outcomes = [
        outliers.ClassOutcome(
            int(tally.n[k]),
            int(tally.n_flagged[k]),
            tally.listed[k],
            tally.kept_sum[k] / tally.kept_n[k] if tally.kept_n[k] > 1 else None,
            int(tally.masked[k]),
        )
        for k in range(len(fits))
    ]
    rows = tally.flagged
    arrays = {
        "row_label": pd.Index(rows["row_label"]),
        "class": rows["class"].to_numpy(dtype=object),
        "distance": rows["distance"].to_numpy(dtype=float),
        "classical_distance": rows["classical_distance"].to_numpy(dtype=float),
        "cutoff": rows["cutoff"].to_numpy(dtype=float),
        "flagged": np.ones(len(rows), dtype=bool),
        "fits": fits,
    }
    judged = outliers.judge(data, config, fits, outcomes, arrays)
    details = {
        **judged.details,
        "scored_rows": "every row of the input (second pass), against robust fits on the sample",
    }
    discrete = [f for f in full.features if f not in data.features]
    if discrete:
        details["discrete_features_left_out"] = discrete
    findings = dict(verdict.findings)
    findings["outliers"] = dataclasses.replace(judged, details=details)
    return assemble(findings, full, config, verdict.meta["random_state"], verdict.timings)


def has_fits(verdict: Verdict) -> bool:
    """True when the outliers check ran and left robust fits to score more rows with."""
    finding = verdict.findings.get("outliers")
    return finding is not None and "fits" in finding.arrays


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
    source = chunks if callable(chunks) else None
    first = source() if source is not None else chunks
    summary = summarize_chunks(first, target, config, random_state, progress)  # type: ignore[arg-type]
    data = to_audit_data(summary, config, random_state)
    verdict = audit(data, config, random_state)
    if source is not None and has_fits(verdict):
        fits = verdict.findings["outliers"].arrays["fits"]
        tally = functools.reduce(operator.add, (tally_chunk(c, target, data, fits) for c in source()))
        return rejudge_outliers(verdict, data, tally, config)
    finding = verdict.findings["outliers"]
    note = "flagged rows come from the per-class sample only: pass a function returning the chunks to score every row"
    findings = dict(verdict.findings)
    findings["outliers"] = dataclasses.replace(finding, details={**finding.details, "scored_rows": note})
    return assemble(findings, data, config, random_state, verdict.timings)


def file_chunks(
    path: str | Path, batch_rows: int = 200_000, index_col: str | None = None, columns: list[str] | None = None
) -> Callable[[], Iterator[pd.DataFrame]]:
    """A function returning a fresh iterator over batches of a CSV (pandas) or Parquet (pyarrow) file.

    Each batch's index is the 0-based row number in the file (or ``index_col``'s values);
    ``columns`` limits what is read (the index column is added when given).
    """
    path = Path(path)
    suffixes = "".join(path.suffixes[-2:]).lower()
    wanted = None if columns is None else list(dict.fromkeys([*columns, *([index_col] if index_col else [])]))

    def batches() -> Iterator[pd.DataFrame]:
        start = 0
        for frame in _read_batches(path, suffixes, batch_rows, wanted):
            if index_col is not None:
                if index_col not in frame.columns:
                    raise DataError(f"{path}: index column {index_col!r} not found.")
                frame = frame.set_index(index_col)
            else:
                frame.index = pd.RangeIndex(start, start + len(frame))
            start += len(frame)
            yield frame

    return batches


def _read_batches(path: Path, suffixes: str, batch_rows: int, columns: list[str] | None) -> Iterator[pd.DataFrame]:
    if suffixes.endswith((".parquet", ".pq")):
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
