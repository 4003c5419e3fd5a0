"""Progress on stderr for long steps, shown only to a person at a terminal.

A progress line is written when stderr is a terminal and the ``CI`` environment variable
is unset (or empty); otherwise every call here is silent, so CI logs and redirected
output stay clean. The line is redrawn in place with a carriage return and erased when
the step ends, so it never mixes with the report on stdout.
"""

from __future__ import annotations

import os
import sys
import time
from types import TracebackType
from typing import TextIO


def enabled(stream: TextIO | None = None) -> bool:
    """Whether progress should be shown on ``stream`` (default: ``sys.stderr``).

    True only when the stream is a terminal and the ``CI`` environment variable is unset
    or empty.
    """
    if os.environ.get("CI"):
        return False
    stream = sys.stderr if stream is None else stream
    isatty = getattr(stream, "isatty", None)
    try:
        return bool(isatty is not None and isatty())
    except (OSError, ValueError):  # a closed or detached stream
        return False


class Progress:
    """A one-line progress indicator for one step.

    Parameters
    ----------
    label : str
        What is happening, e.g. ``"reading flakes.csv"``.
    total : float, optional
        The amount of work (e.g. bytes or row groups); without it only the label and the
        amount done are shown.
    unit : str, default ""
        Unit of ``total`` for display; ``"B"`` shows megabytes.
    stream : file-like, optional
        Where to write (default ``sys.stderr``).
    show : bool, optional
        Force the indicator on or off; by default :func:`enabled` decides.
    min_interval : float, default 0.1
        Seconds between redraws, so a fast loop does not flood the terminal.

    Examples
    --------
    >>> with Progress("reading data.csv", total=100, show=False) as bar:
    ...     bar.update(50)
    """

    def __init__(
        self,
        label: str,
        total: float | None = None,
        *,
        unit: str = "",
        stream: TextIO | None = None,
        show: bool | None = None,
        min_interval: float = 0.1,
    ) -> None:
        self.label = label
        self.total = total
        self.unit = unit
        self.stream = sys.stderr if stream is None else stream
        self.show = enabled(self.stream) if show is None else show
        self.min_interval = min_interval
        self._last = float("-inf")
        self._width = 0

    def __enter__(self) -> Progress:
        self._draw(f"{self.label}...", force=True)
        return self

    def __exit__(
        self, exc_type: type[BaseException] | None, exc: BaseException | None, tb: TracebackType | None
    ) -> None:
        self.close()

    def update(self, done: float) -> None:
        """Report the amount of work done so far."""
        if not self.show:
            return
        if self.total:
            share = min(max(done / self.total, 0.0), 1.0)
            text = f"{self.label}: {share:4.0%} ({self._amount(done)} of {self._amount(self.total)})"
        else:
            text = f"{self.label}: {self._amount(done)}"
        self._draw(text)

    def close(self) -> None:
        """Erase the line."""
        if self.show and self._width:
            self._write("\r" + " " * self._width + "\r")
            self._width = 0

    def _amount(self, value: float) -> str:
        if self.unit == "B":
            return f"{value / 1e6:.1f} MB"
        return f"{value:g}{(' ' + self.unit) if self.unit else ''}"

    def _draw(self, text: str, force: bool = False) -> None:
        if not self.show:
            return
        now = time.monotonic()
        if not force and now - self._last < self.min_interval:
            return
        self._last = now
        pad = max(self._width - len(text), 0)
        self._write("\r" + text + " " * pad)
        self._width = len(text)

    def _write(self, text: str) -> None:
        try:
            self.stream.write(text)
            self.stream.flush()
        except (OSError, ValueError):  # progress must never break the run
            self.show = False
