"""``python -m discaudit`` and the ``discaudit`` console script: the command line of :mod:`discaudit.cli`.

The command line is imported inside :func:`run`, so Ctrl-C while numpy, scipy and pandas load
(start-up takes about a second) ends the command as it does later: exit status 130 and one line
on stderr, no traceback. The package's ``__init__`` loads its names lazily for the same reason.
"""

from __future__ import annotations

import sys


def run() -> int:
    """Run the command line; return its exit status (130 when interrupted, at any point)."""
    try:
        from discaudit.cli import main

        status = main()
    except KeyboardInterrupt:
        status = 130
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


if __name__ == "__main__":
    raise SystemExit(run())
