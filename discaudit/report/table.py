"""The verdict table as data, built once; every renderer formats this structure."""

from __future__ import annotations

from dataclasses import dataclass
from typing import TYPE_CHECKING, Any

from discaudit.report.labels import CAUTION

if TYPE_CHECKING:
    from discaudit.verdict import Verdict


@dataclass(frozen=True)
class TableRow:
    check: str
    status: str
    figure: str
    summary: str
    severity: str


@dataclass(frozen=True)
class VerdictTable:
    """Rows, recommendation block and notes of a verdict, ready to format."""

    title: str
    status: str
    rows: list[TableRow]
    model: str
    params: dict[str, Any]
    reasons: list[str]
    alternatives: list[dict[str, str]]
    notes: list[str]
    close_to: list[str]
    param_notes: dict[str, str]


def build(verdict: Verdict) -> VerdictTable:
    meta = verdict.meta
    severity = meta.get("severity", {})
    rows = [
        TableRow(key, f.status, f.figure, f.summary, severity.get(key, "gate")) for key, f in verdict.findings.items()
    ]
    title = (
        f"discaudit pre-flight audit: {meta.get('n_rows', '?')} rows, {meta.get('n_features', '?')} features, "
        f"{meta.get('n_classes', '?')} classes"
    )
    rec = verdict.recommendation
    notes = [CAUTION]
    advisory = [r.check for r in rows if r.severity == "advisory"]
    if advisory:
        notes.insert(0, f"Advisory checks (shown, not gating): {', '.join(advisory)}.")
    return VerdictTable(
        title,
        verdict.status,
        rows,
        rec.model,
        rec.params,
        rec.reasons,
        rec.alternatives,
        notes,
        list(rec.close_to),
        dict(rec.param_notes),
    )
