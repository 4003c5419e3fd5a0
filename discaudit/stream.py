"""Audit input that does not fit in memory: chunks of rows, read once or twice.

Pass 1 folds chunk summaries (:mod:`discaudit.sources.chunks`): exact per-class moments for the
closed-form checks and a seeded uniform sample per class for the robust and pairwise ones.
When the chunks can be read again, checks that must see every row (outlier scoring) read
them again through the data's row pass, so flagged rows are exact row labels of the input and
the outlier counts are over all rows. Memory is bounded by the chunk and sample sizes, not by
the number of rows.
"""

from __future__ import annotations

from collections.abc import Callable

from discaudit.audit import audit
from discaudit.config import Config
from discaudit.sources.chunks import ChunkSource, load_chunks
from discaudit.sources.files import file_chunks
from discaudit.verdict import Verdict

__all__ = ["file_chunks", "preflight_chunks"]


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
