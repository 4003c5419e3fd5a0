"""The gate: which statuses count, and when a verdict fails a gate set at a level."""

from __future__ import annotations

from collections.abc import Mapping
from typing import TYPE_CHECKING

from discaudit.errors import DataError
from discaudit.findings import STATUS_RANK, Finding, worst

if TYPE_CHECKING:
    from discaudit.config import Config

#: Gate levels: the lowest status that fails the gate.
FAIL_ON_LEVELS = ("warn", "fail")


def gate_status(findings: Mapping[str, Finding], config: Config) -> str:
    """Worst status over the findings whose severity is ``gate`` (advisory and off never count)."""
    return worst([f.status for k, f in findings.items() if config.severity_of(k) == "gate"])


def fails_gate(status: str, fail_on: str = "fail") -> bool:
    """Whether a (gating) status fails a gate set at ``fail_on`` (``"warn"`` or ``"fail"``)."""
    if fail_on not in FAIL_ON_LEVELS:
        raise DataError(f"fail_on must be one of {list(FAIL_ON_LEVELS)}; got {fail_on!r}.")
    return STATUS_RANK[status] >= STATUS_RANK[fail_on]
