"""A Dask DataFrame: summarized where it lives; nothing collects the full data on the client.

Each partition is summarized on its worker (exact moments plus a seeded per-class sample, by
the same rules as any chunk, :mod:`discaudit.sources.chunks`), the summaries are merged in a
tree, and ``all_rows`` maps a function over the partitions on the workers, so only summaries,
samples and per-partition results (e.g. flagged rows) travel to the client. Works the same on a
local or a remote scheduler: connect a ``distributed.Client`` first. Needs the optional extra
``discaudit[dask]``.
"""

from __future__ import annotations

import dataclasses
import functools
from collections.abc import Callable
from dataclasses import dataclass
from typing import Any, TypeVar, cast

import pandas as pd

from discaudit.config import Config
from discaudit.dataset import AuditData, RowBlock
from discaudit.errors import DataError
from discaudit.sources.chunks import BlockSpec, ChunkSummary, block_spec, merge, summarize, to_audit_data
from discaudit.stats.seeds import CHUNK_SAMPLE, PARTITION_MERGE, stream_rng

T = TypeVar("T")


def _dask() -> tuple[Callable[..., tuple[Any, ...]], Callable[[Callable[..., Any]], Callable[..., Any]]]:
    try:
        from dask.base import compute
        from dask.delayed import delayed
    except ImportError as exc:  # pragma: no cover - only without the extra
        raise ImportError("Auditing a Dask DataFrame needs the extra: pip install discaudit[dask]") from exc
    # dask ships py.typed but leaves compute and delayed unannotated: state the types used here.
    return (
        cast("Callable[..., tuple[Any, ...]]", compute),
        cast("Callable[[Callable[..., Any]], Callable[..., Any]]", delayed),
    )


def _summarize_partition(
    part: pd.DataFrame,
    target: str,
    config: Config,
    random_state: int | None,
    i: int,
    first: ChunkSummary | None = None,
) -> ChunkSummary:
    rng = stream_rng(random_state, CHUNK_SAMPLE, i)
    if first is None:
        return summarize(part, target, config, config.sample_rows_per_class, rng)
    return summarize(part, target, config, config.sample_rows_per_class, rng, first.features, first.coordinates)


def _merge_pair(a: ChunkSummary, b: ChunkSummary, random_state: int | None, level: int, j: int) -> ChunkSummary:
    return merge(a, b, stream_rng(random_state, PARTITION_MERGE, level, j))


def _on_partition(fn: Callable[[RowBlock], T], spec: BlockSpec, part: pd.DataFrame) -> T:
    return fn(spec.block(part))


@dataclass(frozen=True)
class PartitionRows:
    """A :class:`~discaudit.dataset.RowPass` that runs the function on each partition's worker."""

    parts: list[Any]
    spec: BlockSpec

    def map_reduce(self, fn: Callable[[RowBlock], T], combine: Callable[[T, T], T]) -> T:
        compute, delayed = _dask()
        task = functools.partial(_on_partition, fn, self.spec)
        results = compute(*[delayed(task)(part) for part in self.parts])
        out: T = functools.reduce(combine, results)
        return out


def load_dask(ddf: Any, *, target: str | None, config: Config, random_state: int | None) -> AuditData:
    """Validate a Dask DataFrame holding the target column (see module docstring)."""
    compute, delayed = _dask()
    if target is None:
        raise DataError("A Dask DataFrame needs target='<column>' naming the class column.")
    if target not in ddf.columns:
        raise DataError(f"Target column {target!r} not found; the columns are: {', '.join(map(str, ddf.columns[:8]))}.")
    parts = ddf.to_delayed()
    # The first partition is summarized first: its coordinates (where each feature is audited, see
    # Coordinates) and columns fix those of every other partition, so all summaries merge exactly.
    (first,) = compute(delayed(_summarize_partition)(parts[0], target, config, random_state, 0))
    nodes = [first] + [
        delayed(_summarize_partition)(part, target, config, random_state, i, first)
        for i, part in enumerate(parts)
        if i > 0
    ]
    level = 0
    while len(nodes) > 1:
        paired = [
            delayed(_merge_pair)(nodes[j], nodes[j + 1], random_state, level, j) for j in range(0, len(nodes) - 1, 2)
        ]
        nodes = paired + ([nodes[-1]] if len(nodes) % 2 else [])
        level += 1
    (summary,) = compute(nodes[0])
    data = to_audit_data(summary, config, random_state)
    return dataclasses.replace(data, all_rows=PartitionRows(parts, block_spec(summary, data, target, config)))
