"""``preflight`` on a Dask DataFrame: nothing collects the full data on the client.

Each partition is summarized where it lives (exact moments plus a seeded per-class
sample, :mod:`discaudit.summary`), the summaries are merged in a tree, the checks run on
the merged summary, and a second map over the partitions scores every row for outliers
against the robust fits; only summaries and flagged rows travel to the client. Works the
same on a local or a remote scheduler: connect a ``distributed.Client`` first.
Needs the optional extra ``discaudit[dask]``.
"""

from __future__ import annotations

import functools
import operator
from collections.abc import Callable
from typing import Any, cast

import numpy as np
import pandas as pd

from discaudit.audit import audit
from discaudit.config import Config
from discaudit.errors import DataError
from discaudit.result import Verdict
from discaudit.stream import has_fits, rejudge_outliers, tally_chunk
from discaudit.summary import ChunkSummary, merge, summarize, to_audit_data


def _rng(random_state: int | None, *key: int) -> np.random.Generator:
    entropy = None if random_state is None else [int(random_state) % 2**32, *key]
    return np.random.default_rng(np.random.SeedSequence(entropy))


def _summarize_partition(
    part: pd.DataFrame, target: str, config: Config, random_state: int | None, i: int
) -> ChunkSummary:
    return summarize(part, target, config, config.sample_rows_per_class, _rng(random_state, 1, i))


def _merge_pair(a: ChunkSummary, b: ChunkSummary, random_state: int | None, level: int, j: int) -> ChunkSummary:
    return merge(a, b, _rng(random_state, 3, level, j))


def preflight_dask(ddf: Any, *, target: str | None, config: Config, random_state: int | None) -> Verdict:
    """Audit a Dask DataFrame holding the target column (see module docstring)."""
    try:
        from dask.base import compute as untyped_compute
        from dask.delayed import delayed as untyped_delayed
    except ImportError as exc:  # pragma: no cover - only without the extra
        raise ImportError("Auditing a Dask DataFrame needs the extra: pip install discaudit[dask]") from exc
    # dask ships py.typed but leaves compute and delayed unannotated: state the types used here.
    compute = cast("Callable[..., tuple[Any, ...]]", untyped_compute)
    delayed = cast("Callable[[Callable[..., Any]], Callable[..., Any]]", untyped_delayed)
    if target is None:
        raise DataError("A Dask DataFrame needs target='<column>' naming the class column.")
    if target not in ddf.columns:
        raise DataError(f"Target column {target!r} not found; the columns are: {', '.join(map(str, ddf.columns[:8]))}.")
    parts = ddf.to_delayed()
    nodes = [delayed(_summarize_partition)(part, target, config, random_state, i) for i, part in enumerate(parts)]
    level = 0
    while len(nodes) > 1:
        paired = [
            delayed(_merge_pair)(nodes[j], nodes[j + 1], random_state, level, j) for j in range(0, len(nodes) - 1, 2)
        ]
        nodes = paired + ([nodes[-1]] if len(nodes) % 2 else [])
        level += 1
    (summary,) = compute(nodes[0])
    data = to_audit_data(summary, config, random_state)
    verdict = audit(data, config, random_state)
    if not has_fits(verdict):
        return verdict
    fits = verdict.findings["outliers"].arrays["fits"]
    tallies = compute(*[delayed(tally_chunk)(part, target, data, fits) for part in parts])
    return rejudge_outliers(verdict, data, functools.reduce(operator.add, tallies), config)
