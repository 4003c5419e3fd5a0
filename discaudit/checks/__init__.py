"""The checks, one module each, in the order the verdict table shows them.

Each module exposes ``KEY`` and ``run(data, config, random_state) -> Finding``: it reads the
shared :class:`~discaudit.intake.AuditData` (moments computed once) and judges it against
:class:`~discaudit.config.Config`. To add a check, write the module and list it here.
"""

from __future__ import annotations

from collections.abc import Callable
from types import ModuleType

from discaudit.checks import (
    collinearity,
    covariance_homogeneity,
    data_hygiene,
    discriminant_signal,
    normality,
    outliers,
    sample_size,
    scale_disparity,
    separation,
)
from discaudit.config import CHECK_KEYS, Config

__all__ = ["CHECK_KEYS", "CheckFunction", "not_yet_audited", "registry"]
from discaudit.findings import Finding, skipped
from discaudit.intake import AuditData

CheckFunction = Callable[[AuditData, Config, "int | None"], Finding]

_MODULES: dict[str, ModuleType] = {
    module.KEY: module
    for module in (
        data_hygiene,
        sample_size,
        scale_disparity,
        collinearity,
        outliers,
        normality,
        covariance_homogeneity,
        separation,
        discriminant_signal,
    )
}


def registry() -> list[tuple[str, CheckFunction | None]]:
    """(key, run function) in table order; ``None`` for a check not yet available."""
    return [(key, _MODULES[key].run if key in _MODULES else None) for key in CHECK_KEYS]


def not_yet_audited(key: str) -> Finding:
    """The finding shown for a check this version does not run yet."""
    return skipped(key, "Not yet audited in this version of discaudit.")
