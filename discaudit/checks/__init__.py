"""The checks and their registry: one module each, listed once, in the order the verdict table shows them.

Each module exposes ``KEY`` and ``run(data, config, random_state) -> Finding``: it reads the
shared :class:`~discaudit.dataset.AuditData` (moments computed once) and judges it against
:class:`~discaudit.config.Config`. A module that reads every row also exposes
``row_task(data, config, random_state) -> RowTask | None``, what its ``run`` will ask
``data.pass_result`` for, so that :func:`row_tasks` can hand the core every such task before the
checks run and a streamed input is read once for all of them. To add a check, write the module and add it to
:data:`REGISTRY`; its key then exists everywhere (``Config.severity``, every report, the table).
"""

from __future__ import annotations

from collections.abc import Callable
from types import ModuleType
from typing import TYPE_CHECKING, Any

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
from discaudit.dataset import AuditData, RowTask
from discaudit.findings import Finding

if TYPE_CHECKING:
    from discaudit.config import Config

__all__ = ["CHECK_KEYS", "REGISTRY", "CheckFunction", "registry", "row_tasks"]

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


def row_tasks(data: AuditData, config: Config, random_state: int | None) -> list[RowTask[Any]]:
    """The row tasks of the checks that are on and read every row of these data.

    A task that cannot be stated (its preparation raises) is left out: its check meets the same
    error on its own and reports it as a skip.
    """
    tasks = []
    for module in REGISTRY:
        state = getattr(module, "row_task", None)
        if state is None or config.severity_of(module.KEY) == "off":
            continue
        try:
            task = state(data, config, random_state)
        except Exception:  # reported by the check itself (audit._run_check)
            continue
        if task is not None:
            tasks.append(task)
    return tasks
