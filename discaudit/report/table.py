"""The verdict table as data, built once; every renderer formats this structure."""

from __future__ import annotations

from dataclasses import dataclass, field
from typing import TYPE_CHECKING, Any

from discaudit.report.labels import CAUTION, MODEL_NAMES

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
class RemedyRow:
    """One remedy of the "What would help" section, in words."""

    rank: int
    description: str
    addresses: str
    changes: list[str]
    clears_addressed: bool
    accuracy: str | None
    recommendation: str | None
    spec: str
    needs_row_pass: bool
    rows: str
    helps: bool = True


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
    remedies: list[RemedyRow] = field(default_factory=list)


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
        [_remedy_row(r) for r in getattr(verdict, "remedies", ())],
    )


def _remedy_row(remedy: Any) -> RemedyRow:
    """The words of one remedy: what to do, what it addresses, the statuses it is predicted to change."""
    effect = remedy.effect
    changes = [f"{k} {a.upper()} -> {b.upper()}" for k, (a, b) in effect.changed.items()]
    if not remedy.addressed_evaluated:
        changes.insert(0, f"{remedy.addresses} not re-evaluated here (large data: --what-if re-audits it)")
    accuracy = None
    if effect.accuracy is not None:
        acc = effect.accuracy
        accuracy = (
            f"predicted accuracy of {MODEL_NAMES.get(acc['model'], acc['model'])} "
            f"{100 * acc['before']:.1f}% -> {100 * acc['after']:.1f}%"
        )
    recommendation = None
    if effect.recommendation is not None:
        a, b = effect.recommendation
        recommendation = (
            "recommendation unchanged" if a == b else f"recommendation would change to {MODEL_NAMES.get(b, b)}"
        )
    return RemedyRow(
        rank=remedy.rank,
        description=remedy.description,
        addresses=remedy.addresses,
        changes=changes,
        clears_addressed=remedy.clears_addressed,
        accuracy=accuracy,
        recommendation=recommendation,
        spec=remedy.spec,
        needs_row_pass=remedy.needs_row_pass,
        rows=effect.rows,
        helps=remedy.helps,
    )
