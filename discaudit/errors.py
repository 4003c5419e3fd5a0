"""Exceptions and warnings raised by discaudit."""

from __future__ import annotations

from collections.abc import Sequence
from typing import Any


class DataError(ValueError):
    """Input that makes an audit impossible.

    The message always names what was observed (column, class, row or shape), what is
    required, and one concrete fix. ``rows`` holds the labels of the rows at fault, when the
    error is about rows (the command line turns them into line numbers of a CSV file).
    """

    def __init__(self, message: str, *, rows: Sequence[Any] = ()) -> None:
        super().__init__(message)
        self.rows = tuple(rows)


class DiscauditWarning(UserWarning):
    """Base class of the warnings discaudit emits from its public statistics."""


class DegenerateDataWarning(DiscauditWarning):
    """The data are degenerate for the statistic (singular covariance, ties, n <= p)."""
