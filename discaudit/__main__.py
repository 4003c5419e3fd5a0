"""``python -m discaudit`` and the ``discaudit`` console script: the command line of :mod:`discaudit.cli`.

The command line is imported inside :func:`run`, so Ctrl-C while numpy, scipy and pandas load
(start-up takes about a second) ends the command as it does later: exit status 130 and one line
on stderr, no traceback. The package's ``__init__`` loads its names lazily for the same reason.
"""

from __future__ import annotations

import sys

#: Exit status of an interrupted command (128 + SIGINT, the shell's convention).
INTERRUPTED = 130


def run() -> int:
    """Run the command line; return its exit status (130 when interrupted, at any point)."""
    try:
        from discaudit.cli import main

        status = main()
    except KeyboardInterrupt:
        status = INTERRUPTED
        try:
            sys.stderr.write("discaudit: error: interrupted\n")
            sys.stderr.flush()
        except (OSError, KeyboardInterrupt):  # pragma: no cover - stderr gone, or a second Ctrl-C
            pass
    _ignore_late_interrupts()
    return status


def _ignore_late_interrupts() -> None:
    """The command has finished and said so: a Ctrl-C while the interpreter shuts down changes nothing."""
    try:
        import signal

        signal.signal(signal.SIGINT, signal.SIG_IGN)
    except (ValueError, OSError, KeyboardInterrupt):  # pragma: no cover - not the main thread, or too late
        pass


def entry() -> None:
    """The console script and ``python -m discaudit``: run, then end the process with the status.

    An interrupted run ends with ``os._exit(130)`` once its streams are flushed. CPython keeps a flag
    when a KeyboardInterrupt leaves code that an extension module ran during import, even after the
    exception is caught, and then ends the interpreter by re-raising SIGINT at exit: status -2
    instead of 130. Nothing is left to clean up at that point (reports are written to a temporary
    name and renamed only when complete, and the temporary file is removed on the way out).
    """
    status = run()
    if status == INTERRUPTED:
        import contextlib
        import os

        for stream in (sys.stdout, sys.stderr):
            with contextlib.suppress(OSError, ValueError):  # the stream may be gone
                stream.flush()
        os._exit(INTERRUPTED)
    raise SystemExit(status)


if __name__ == "__main__":
    entry()
