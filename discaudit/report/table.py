"""The verdict table as data, built once; every renderer formats this structure."""

from __future__ import annotations

from dataclasses import dataclass, field
from typing import TYPE_CHECKING, Any

from discaudit.findings import fmt, fmt_p
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
    gates: bool = False  # the finding fails the gate


@dataclass(frozen=True)
class ChangeRow:
    """One difference from the baseline: counted or noted."""

    counts: bool
    kind: str
    subject: str
    figure: str
    summary: str


@dataclass(frozen=True)
class ClassRow:
    """One class compared with the baseline, as table cells."""

    label: str
    rows: str
    share: str
    mean: str
    covariance: str
    drifted: bool


@dataclass(frozen=True)
class BaselineSection:
    """The 'compared with the baseline' section."""

    source: str
    drifted: bool
    outcome: str
    rule: str
    changes: list[ChangeRow]
    classes: list[ClassRow]


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
    """Rows, recommendation block, gate, baseline and notes of a verdict, ready to format."""

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
    gate_passed: bool = True
    gate_outcome: str = ""
    gate_rule: str = ""
    baseline: BaselineSection | None = None
    failing_checks: list[str] = field(default_factory=list)
    remedies: list[RemedyRow] = field(default_factory=list)


def _cell_mean(test: Any) -> str:
    if not isinstance(test, dict):
        return "-"
    if "mahalanobis" not in test:
        return "not compared"
    return f"D {fmt(test['mahalanobis'], 2)} SD, {fmt_p(test['p_value'])}"


def _cell_covariance(test: Any) -> str:
    if not isinstance(test, dict):
        return "-"
    if "spread_ratio" not in test:
        return "not compared"
    return f"x{fmt(test['spread_ratio'], 2)}, {fmt_p(test['p_value'])}"


def _baseline(verdict: Verdict) -> BaselineSection | None:
    b = verdict.baseline
    if b is None:
        return None
    classes = [
        ClassRow(
            str(c["class"]),
            f"{c['n_accepted']} -> {c['n_current']}",
            f"{fmt(c['share_accepted'])} -> {fmt(c['share_current'])}",
            c["note"] if c.get("note") in ("appeared", "vanished") else _cell_mean(c.get("mean")),
            "-" if c.get("note") in ("appeared", "vanished") else _cell_covariance(c.get("covariance")),
            bool(c.get("drifted")),
        )
        for c in b.classes
    ]
    changes = [ChangeRow(c.counts, c.kind, c.subject, c.figure, c.summary) for c in b.changes]
    return BaselineSection(b.source, b.drifted, b.outcome, b.rule, changes, classes)


def build(verdict: Verdict) -> VerdictTable:
    meta = verdict.meta
    severity = meta.get("severity", {})
    gate = verdict.gate
    failing = list(gate.failing_checks) if gate is not None else []
    rows = [
        TableRow(key, f.status, f.figure, f.summary, severity.get(key, "gate"), key in failing)
        for key, f in verdict.findings.items()
    ]
    title = (
        f"discaudit pre-flight audit: {meta.get('n_rows', '?')} rows, {meta.get('n_features', '?')} features, "
        f"{meta.get('n_classes', '?')} classes"
    )
    rec = verdict.recommendation
    notes = [*[str(n) for n in meta.get("notes", [])], CAUTION]
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
        gate_passed=gate.passed if gate is not None else True,
        gate_outcome=gate.outcome if gate is not None else "",
        gate_rule=gate.rule if gate is not None else "",
        baseline=_baseline(verdict),
        failing_checks=failing,
        remedies=[_remedy_row(r) for r in getattr(verdict, "remedies", ())],
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
            + (f" (on {acc['rows']})" if acc.get("rows", "every row") != "every row" else "")
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
