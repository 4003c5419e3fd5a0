"""The audit's result: a recommendation and the findings behind it."""

from __future__ import annotations

import json
from collections.abc import Mapping
from dataclasses import dataclass, field
from typing import Any

from discaudit._plain import plain
from discaudit.findings import Finding

CAUTION = (
    "Caution: this audit checks statistical assumptions only; it does not validate a model for decisions about "
    "people (credit, diagnosis, hiring), test fairness, or replace the review required where the model is used."
)


@dataclass(frozen=True)
class Recommendation:
    """Which classifier to fit and how.

    Attributes
    ----------
    model : str
        ``"lda"``, ``"regularized_lda"``, ``"qda"`` or ``"logistic_regression"``.
    params : dict
        Suggested settings (e.g. ``{"shrinkage": 0.31, "solver": "lsqr"}``).
    reasons : list of str
        Plain-language sentences, each tied to a finding.
    alternatives : list of dict
        The other models, best first, each ``{"model": ..., "reason": ...}``.
    rules_fired : list of str
        Names of the verdict rules that fired, in order.
    """

    model: str
    params: dict[str, Any]
    reasons: list[str]
    alternatives: list[dict[str, str]]
    rules_fired: list[str] = field(default_factory=list)

    def to_dict(self) -> dict[str, Any]:
        return plain(
            {
                "model": self.model,
                "params": self.params,
                "reasons": self.reasons,
                "alternatives": self.alternatives,
                "rules_fired": self.rules_fired,
            }
        )


@dataclass(frozen=True)
class Verdict:
    """Result of :func:`discaudit.preflight`.

    Attributes
    ----------
    findings : mapping
        Check key -> :class:`~discaudit.findings.Finding`, in table order.
    recommendation : Recommendation
    status : str
        Worst status over the findings that gate (``"pass"``, ``"warn"`` or ``"fail"``);
        checks set to ``advisory`` in ``Config.severity`` are shown but do not count.
    meta : dict
        Data shape, classes, seed, configuration and version.
    """

    findings: Mapping[str, Finding]
    recommendation: Recommendation
    status: str
    meta: dict[str, Any]

    def to_dict(self) -> dict[str, Any]:
        """Plain JSON-able content (no numpy types, no NaN or infinity)."""
        from discaudit.report.json import verdict_to_dict

        return verdict_to_dict(self)

    def to_json(self, indent: int | None = 2) -> str:
        """The verdict as JSON text (see ``discaudit.report.json`` for the schema)."""
        return json.dumps(self.to_dict(), indent=indent, allow_nan=False)

    def __str__(self) -> str:
        from discaudit.report.text import render

        return render(self)
