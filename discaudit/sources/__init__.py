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


def _is_dask_frame(X: Any) -> bool:
    frames = sys.modules.get("dask.dataframe")  # a Dask frame exists only once its package is imported
    return frames is not None and isinstance(X, frames.DataFrame)


def open_source(
    X: Any, y: Any = None, *, target: str | None = None, config: Config, random_state: int | None
) -> AuditData:
    """Validated data from any supported input, chosen by the input's type."""
    if _is_dask_frame(X):
        from discaudit.sources.dask import load_dask

        return load_dask(X, target=target, config=config, random_state=random_state)
    from discaudit.sources.memory import load

    return load(X, y, target=target, config=config)
