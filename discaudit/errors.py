"""Exceptions and warnings raised by discaudit."""

from __future__ import annotations


class DataError(ValueError):
    """Input that makes an audit impossible.

    The message always names what was observed (column, class, row or shape), what is
    required, and one concrete fix.
    """


class DiscauditWarning(UserWarning):
    """Base class of the warnings discaudit emits from its public statistics."""


class DegenerateDataWarning(DiscauditWarning):
    """The data are degenerate for the statistic (singular covariance, ties, n <= p)."""
