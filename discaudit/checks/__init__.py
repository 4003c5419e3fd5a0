"""The checks and their registry: one module each, listed once, in the order the verdict table shows them.

Each module exposes ``KEY`` and ``run(data, config, random_state) -> Finding``: it reads the
shared :class:`~discaudit.dataset.AuditData` (moments computed once) and judges it against
:class:`~discaudit.config.Config`. To add a check, write the module and add it to
:data:`REGISTRY`; its key then exists everywhere (``Config.severity``, every report, the table).
"""

from __future__ import annotations

from collections.abc import Callable
from types import ModuleType
from typing import TYPE_CHECKING

from discaudit.checks import (
    collinearity,
    covariance_homogeneity,
    data_hygiene,
    discriminant_signal,
    expected_performance,
    normality,
    outliers,
    sample_size,
    scale_disparity,
    separation,
)
from discaudit.dataset import AuditData
from discaudit.findings import Finding

if TYPE_CHECKING:
    from discaudit.config import Config

__all__ = ["CHECK_KEYS", "REGISTRY", "CheckFunction", "registry"]

CheckFunction = Callable[[AuditData, "Config", "int | None"], Finding]

#: The checks, in table order.
REGISTRY: tuple[ModuleType, ...] = (
    data_hygiene,
    sample_size,
    scale_disparity,
    collinearity,
    outliers,
    normality,
    covariance_homogeneity,
    separation,
    discriminant_signal,
    expected_performance,
)

CHECK_KEYS: tuple[str, ...] = tuple(module.KEY for module in REGISTRY)


def registry() -> list[tuple[str, CheckFunction]]:
    """(key, run function) of every check, in table order."""
    return [(module.KEY, module.run) for module in REGISTRY]
