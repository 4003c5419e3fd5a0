"""Thread use inside an audit, and the process state audits share.

BLAS on one thread, classes side by side. An audit runs many small linear-algebra calls (p x p
factorizations, triangular solves on blocks of rows). With a multi-threaded BLAS each call pays
for waking and synchronising its threads, which on a shared 2-core machine made the audit up to
five times slower than with one thread (benchmarks/RESULTS.md). The audit therefore limits BLAS
to one thread while it runs and instead spreads independent work (one robust fit per class) over
the cores.

Shared process state, changed once and restored once. The BLAS thread limit and Python's warnings
machinery (``warnings.filters``, ``warnings.showwarning``) belong to the whole process, so
concurrent audits must not each save and restore them: with nested save/restore pairs from two
threads, the one that leaves last restores the other's changes (an ``always`` filter left
installed, BLAS left on one thread). Here the first audit to enter changes the state and the last
to leave restores exactly what it found, under one lock (:class:`_Shared`), also when an audit
raises.

Warnings per audit. Python 3.11's warnings have no per-thread filters, and a caller's
``simplefilter("error")`` would otherwise abort a statistic that warns, so while any audit runs
the filters list is one ``always`` entry and :func:`_route` receives every warning. Each check
runs inside :func:`recorded_warnings`, which sets a context variable to its own list; ``_route``
appends a warning to the list of the context it was issued in (worker threads of
:func:`map_in_threads` run in a copy of their caller's context), so two audits never see each
other's warnings. A warning issued outside any audit while one runs (another thread of the
caller's) is judged by the caller's own saved filters: raised for ``error``, dropped for
``ignore``, shown by the caller's ``showwarning`` otherwise (``once`` and ``default`` then show it
each time). A filter the caller adds from another thread while an audit runs is lost when the
last audit leaves.
"""

from __future__ import annotations

import contextvars
import os
import queue
import threading
import warnings
from collections.abc import Callable, Iterable, Iterator, Sequence
from concurrent.futures import Future, ThreadPoolExecutor
from contextlib import contextmanager
from typing import Any, Generic, TypeVar

from threadpoolctl import ThreadpoolController

T = TypeVar("T")
R = TypeVar("R")
S = TypeVar("S")

#: One lock for every piece of shared process state below.
_STATE_LOCK = threading.Lock()


class _Shared(Generic[S]):
    """Process state changed by the first audit to enter and restored by the last to leave."""

    def __init__(self, install: Callable[[], S], restore: Callable[[S], None]) -> None:
        self._install, self._restore = install, restore
        self._count = 0
        self._saved: S | None = None

    @contextmanager
    def held(self) -> Iterator[None]:
        with _STATE_LOCK:
            try:
                if self._count == 0:
                    self._saved = self._install()
                self._count += 1
            except BaseException:  # Ctrl-C between installing and counting: undo, then go on raising
                if self._count == 0:
                    self._release()
                raise
        try:
            yield
        finally:
            with _STATE_LOCK:
                self._count -= 1
                if self._count == 0:
                    self._release()

    def _release(self) -> None:
        saved, self._saved = self._saved, None
        if saved is not None:
            self._restore(saved)


class _BlasPools:
    """The thread pools of the loaded libraries, found once per process (on first use).

    Finding them reads the list of every loaded shared library (about 2 ms with numpy, scipy and
    pandas loaded, twice per audit before); numpy's and scipy's BLAS, the ones the audit calls,
    are loaded with ``discaudit``, so a pool loaded after the first audit (another library's) is
    the only one a later audit leaves unlimited. Used under ``_STATE_LOCK`` only.
    """

    controller: ThreadpoolController | None = None

    @classmethod
    def limit(cls) -> Any:
        if cls.controller is None:
            cls.controller = ThreadpoolController()
        return cls.controller.limit(limits=1, user_api="blas")


def _limit_blas() -> Any:
    return _BlasPools.limit()


def _restore_blas(limiter: Any) -> None:
    limiter.restore_original_limits()


_BLAS = _Shared(_limit_blas, _restore_blas)


@contextmanager
def one_blas_thread() -> Iterator[None]:
    """Limit the BLAS thread pools to one thread inside the block (restored when the last leaves)."""
    with _BLAS.held():
        yield


# ------------------------------------------------------------------------------------ warnings

#: The list of the audit check whose context this is (None outside any audit).
_RECORDER: contextvars.ContextVar[list[str] | None] = contextvars.ContextVar("discaudit_warnings", default=None)


class _SavedWarnings:
    def __init__(self) -> None:
        self.filters: Any = warnings.filters
        self.showwarning: Callable[..., Any] = warnings.showwarning


def _install_warnings() -> _SavedWarnings:
    saved = _SavedWarnings()
    warnings.filters = [("always", None, Warning, None, 0)]
    warnings._filters_mutated()  # type: ignore[attr-defined]  # as catch_warnings does
    warnings.showwarning = _route
    return saved


def _restore_warnings(saved: _SavedWarnings) -> None:
    warnings.filters = saved.filters  # the caller's very list object, as it was
    warnings.showwarning = saved.showwarning
    warnings._filters_mutated()  # type: ignore[attr-defined]


_WARNINGS = _Shared(_install_warnings, _restore_warnings)


def _caller_action(message: Any, category: type[Warning], filename: str, lineno: int) -> str:
    """What the caller's own filters (saved when the first audit entered) do with a warning."""
    saved = _WARNINGS._saved
    filters = saved.filters if saved is not None else []
    text = str(message)
    module = os.path.splitext(os.path.basename(filename))[0]
    for action, msg, cat, mod, line in filters:
        if (
            (msg is None or msg.match(text))
            and issubclass(category, cat)
            and (mod is None or mod.match(module))
            and (line == 0 or lineno == line)
        ):
            return str(action)
    return "default"


def _route(
    message: Any, category: type[Warning], filename: str, lineno: int, file: Any = None, line: Any = None
) -> None:
    """``warnings.showwarning`` while an audit runs: into the list of the audit that issued it."""
    recorder = _RECORDER.get()
    if recorder is not None:
        recorder.append(f"{category.__name__}: {message}")
        return
    action = _caller_action(message, category, filename, lineno)
    if action == "error":
        raise message if isinstance(message, Warning) else category(message)
    if action == "ignore":
        return
    saved = _WARNINGS._saved
    show = saved.showwarning if saved is not None else warnings._showwarning_orig  # type: ignore[attr-defined]
    show(message, category, filename, lineno, file, line)


@contextmanager
def recorded_warnings() -> Iterator[list[str]]:
    """Every warning issued in this context (this thread and the workers it starts) into a list.

    The caller's warnings filters and ``showwarning`` are exactly as before once the last
    concurrent audit leaves, also when the block raises (see the module docstring).
    """
    caught: list[str] = []
    token = _RECORDER.set(caught)
    try:
        with _WARNINGS.held():
            yield caught
    finally:
        _RECORDER.reset(token)


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
    Each item runs in a copy of the caller's context, so its warnings (and numpy's error state)
    are those of the audit that asked for it.
    """
    if min(len(items), usable_cores()) <= 1 or getattr(_IN_POOL, "active", False):
        return [fn(x) for x in items]  # one item, one core, or already on a pool thread (no nesting)
    contexts = [contextvars.copy_context() for _ in items]
    return list(_pool().map(lambda pair: pair[0].run(_on_pool, fn, pair[1]), zip(contexts, items, strict=True)))


#: Marks the threads of the shared pool, so work they start runs inline instead of waiting for the
#: pool it occupies.
_IN_POOL = threading.local()
_POOL: ThreadPoolExecutor | None = None
_POOL_PID: int | None = None


def _pool() -> ThreadPoolExecutor:
    """The process's pool of ``usable_cores()`` threads, started on first use (and again in a forked
    child, which inherits no threads): starting threads for every call cost a few milliseconds an
    audit."""
    global _POOL, _POOL_PID
    with _STATE_LOCK:
        if _POOL is None or os.getpid() != _POOL_PID:
            _POOL = ThreadPoolExecutor(max_workers=usable_cores(), thread_name_prefix="discaudit")
            _POOL_PID = os.getpid()
        return _POOL


def _on_pool(fn: Callable[[T], R], item: T) -> R:
    _IN_POOL.active = True
    try:
        return fn(item)
    finally:
        _IN_POOL.active = False


#: Items a :func:`read_ahead` worker may hold ready for its consumer (bounds the extra memory to
#: this many blocks; two keep the worker busy while one is consumed).
READ_AHEAD_DEPTH = 2
#: Seconds a blocked :func:`read_ahead` worker waits between looks at whether its consumer left.
_READ_AHEAD_POLL = 0.1


def read_ahead(items: Iterable[T], depth: int = READ_AHEAD_DEPTH) -> Iterator[T]:
    """The items of ``items`` in order, produced on a worker thread up to ``depth`` items ahead.

    Reading and converting the next block of rows (an engine's query, a file reader, an Arrow
    to numpy copy: work that releases the GIL) then overlaps with scoring the current one. The
    worker runs in a copy of the caller's context (its warnings are the audit's); an exception
    it meets is raised here, at the item where it occurred; a consumer that stops early stops the
    worker. On one core the items are produced inline.
    """
    if usable_cores() <= 1:
        yield from items
        return
    ready: queue.Queue[tuple[str, Any]] = queue.Queue(maxsize=depth)
    stop = threading.Event()

    def offer(entry: tuple[str, Any]) -> bool:
        while not stop.is_set():
            try:
                ready.put(entry, timeout=_READ_AHEAD_POLL)
                return True
            except queue.Full:
                continue
        return False

    def produce() -> None:
        try:
            for item in items:
                if not offer(("item", item)):
                    return
        except BaseException as exc:  # handed to the consumer, raised in its thread
            offer(("error", exc))
            return
        offer(("done", None))

    context = contextvars.copy_context()
    worker = threading.Thread(target=context.run, args=(produce,), name="discaudit-read-ahead", daemon=True)
    worker.start()
    try:
        while True:
            kind, value = ready.get()
            if kind == "done":
                return
            if kind == "error":
                raise value
            yield value
    finally:
        stop.set()
        worker.join()


def in_background(fn: Callable[[], R]) -> Callable[[], R]:
    """Start ``fn()`` on a thread of its own; return a function that waits for its result.

    For work that releases the GIL and that nothing needs until the end (hashing the audited data
    with hashlib, which releases it on large buffers): it then overlaps with the checks. The
    thread runs in a copy of the caller's context; an exception it meets is raised by the waiting
    function. On one core ``fn`` runs when its result is asked for.
    """
    if usable_cores() <= 1:
        return fn
    future: Future[R] = Future()

    def run() -> None:
        try:
            future.set_result(fn())
        except BaseException as exc:  # handed to the caller, raised where it waits
            future.set_exception(exc)

    context = contextvars.copy_context()
    threading.Thread(target=context.run, args=(run,), name="discaudit-background", daemon=True).start()
    return future.result
