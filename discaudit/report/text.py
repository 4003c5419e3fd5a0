"""Plain-text verdict table, readable at 100 columns without colour."""

from __future__ import annotations

import textwrap
from typing import TYPE_CHECKING

from discaudit.report.labels import MODEL_NAMES, format_params
from discaudit.report.remedies import text_lines as remedy_lines
from discaudit.report.table import VerdictTable, build

if TYPE_CHECKING:
    from discaudit.verdict import Verdict

WIDTH = 100
_CHECK_W, _STATUS_W, _FIGURE_W = 22, 6, 20


def render(verdict: Verdict, width: int = WIDTH) -> str:
    """The verdict as text: one row per check, then the recommendation and the caution."""
    table = build(verdict)
    summary_w = width - _CHECK_W - _STATUS_W - _FIGURE_W - 3
    lines = [table.title]
    lines += textwrap.wrap(table.gate_outcome, width) if table.gate_outcome else []
    lines += [f"Worst check status: {table.status.upper()}", ""]
    header = f"{'check':<{_CHECK_W}} {'status':<{_STATUS_W}} {'key figure':<{_FIGURE_W}} summary"
    lines += [header, "-" * width]
    for row in table.rows:
        status = row.status.upper() + ("*" if row.severity == "advisory" else "")
        wrapped = textwrap.wrap(row.summary, summary_w) or [""]
        figure = textwrap.wrap(row.figure, _FIGURE_W) or [""]  # wrapped, never cut
        lines.append(f"{row.check:<{_CHECK_W}} {status:<{_STATUS_W}} {figure[0]:<{_FIGURE_W}} {wrapped[0]}")
        for i in range(1, max(len(wrapped), len(figure))):
            more = figure[i] if i < len(figure) else ""
            text = wrapped[i] if i < len(wrapped) else ""
            lines.append(f"{'':<{_CHECK_W}} {'':<{_STATUS_W}} {more:<{_FIGURE_W}} {text}".rstrip())
    lines.append("-" * width)
    if table.gate_rule:
        lines += textwrap.wrap(table.gate_rule, width)
    lines.append("")
    if table.baseline is not None:
        lines += _baseline_lines(table, width) + [""]
    lines.append(f"Recommendation: {MODEL_NAMES[table.model]} ({table.model})")
    if table.close_to:
        lines.append("Within noise of it: " + ", ".join(MODEL_NAMES[m] for m in table.close_to))
    lines.append(f"Suggested settings: {format_params(table.params)}")
    for key, note in table.param_notes.items():
        lines += textwrap.wrap(f"{key}: {note}", width, initial_indent="  ", subsequent_indent="    ")
    lines.append("Why:")
    for reason in table.reasons:
        lines += textwrap.wrap(reason, width, initial_indent="  - ", subsequent_indent="    ")
    lines.append("Alternatives, best first:")
    for i, alt in enumerate(table.alternatives, 1):
        lines += textwrap.wrap(
            f"{MODEL_NAMES[alt['model']]}: {alt['reason']}", width, initial_indent=f"  {i}. ", subsequent_indent="     "
        )
    lines += remedy_lines(table, width)
    lines.append("")
    for note in table.notes:
        lines += textwrap.wrap(note, width)
    return "\n".join(lines)


def _baseline_lines(table: VerdictTable, width: int) -> list[str]:
    """The 'compared with the baseline' section: outcome, what changed, the classes, the rule."""
    b = table.baseline
    assert b is not None
    lines = [f"Compared with the baseline ({b.source}): {'DRIFTED' if b.drifted else 'within noise'}"]
    lines += textwrap.wrap(b.outcome, width, initial_indent="  ", subsequent_indent="  ")
    for c in b.changes:
        mark = "counts" if c.counts else "noted"
        lines += textwrap.wrap(c.summary, width, initial_indent=f"  - [{mark}] ", subsequent_indent="      ")
    if b.classes:
        head = ("class", "rows then -> now", "share then -> now", "mean shift", "covariance")
        cells = [
            head,
            *[(r.label + (" *" if r.drifted else ""), r.rows, r.share, r.mean, r.covariance) for r in b.classes],
        ]
        widths = [min(max(len(row[j]) for row in cells), 28) for j in range(len(head))]
        for row in cells:
            lines.append("  " + "  ".join(cell[: widths[j]].ljust(widths[j]) for j, cell in enumerate(row)).rstrip())
    lines += textwrap.wrap(b.rule, width, initial_indent="  ", subsequent_indent="  ")
    return lines
