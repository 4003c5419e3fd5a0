"""Thread use inside an audit: one BLAS thread per worker, and classes fitted side by side.

An audit runs many small linear-algebra calls (p x p factorizations, triangular solves on
blocks of rows). With a multi-threaded BLAS each call pays for waking and synchronising its
threads, which on a shared 2-core machine made the audit up to five times slower than with
one thread (benchmarks/RESULTS.md). The audit therefore limits BLAS to one thread while it
runs and instead spreads independent work (one robust fit per class) over the cores.
"""

from __future__ import annotations

import os
from collections.abc import Callable, Iterator, Sequence
from concurrent.futures import ThreadPoolExecutor
from contextlib import contextmanager
from typing import TypeVar

from threadpoolctl import threadpool_limits

T = TypeVar("T")
R = TypeVar("R")


@contextmanager
def one_blas_thread() -> Iterator[None]:
    """Limit the BLAS thread pools to one thread inside the block (restored on exit)."""
    with threadpool_limits(limits=1, user_api="blas"):
        yield


def usable_cores() -> int:
    """Cores this process may run on."""
    try:
        return len(os.sched_getaffinity(0))
    except AttributeError:  # not on Linux
        return os.cpu_count() or 1


def map_in_threads(fn: Callable[[T], R], items: Sequence[T]) -> list[R]:
    """``[fn(x) for x in items]``, run on up to ``usable_cores()`` threads, in order.

    numpy, scipy and BLAS release the GIL in their kernels, so independent per-class work
    overlaps. Results do not depend on the number of threads: every item carries its own seed.
    """
    workers = min(len(items), usable_cores())
    if workers <= 1:
        return [fn(x) for x in items]
    with ThreadPoolExecutor(max_workers=workers, thread_name_prefix="discaudit") as pool:
        return list(pool.map(fn, items))
