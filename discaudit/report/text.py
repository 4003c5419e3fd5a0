"""Plain-text verdict table, readable at 100 columns without colour."""

from __future__ import annotations

import textwrap
from typing import TYPE_CHECKING

from discaudit.report.labels import MODEL_NAMES, format_params
from discaudit.report.remedies import text_lines as remedy_lines
from discaudit.report.table import build

if TYPE_CHECKING:
    from discaudit.verdict import Verdict

WIDTH = 100
_CHECK_W, _STATUS_W, _FIGURE_W = 22, 6, 20


def render(verdict: Verdict, width: int = WIDTH) -> str:
    """The verdict as text: one row per check, then the recommendation and the caution."""
    table = build(verdict)
    summary_w = width - _CHECK_W - _STATUS_W - _FIGURE_W - 3
    lines = [table.title, f"Gate status: {table.status.upper()}", ""]
    header = f"{'check':<{_CHECK_W}} {'status':<{_STATUS_W}} {'key figure':<{_FIGURE_W}} summary"
    lines += [header, "-" * width]
    for row in table.rows:
        status = row.status.upper() + ("*" if row.severity == "advisory" else "")
        wrapped = textwrap.wrap(row.summary, summary_w) or [""]
        figure = row.figure if len(row.figure) <= _FIGURE_W else row.figure[: _FIGURE_W - 1] + "~"
        lines.append(f"{row.check:<{_CHECK_W}} {status:<{_STATUS_W}} {figure:<{_FIGURE_W}} {wrapped[0]}")
        indent = " " * (width - summary_w)
        lines += [indent + w for w in wrapped[1:]]
    lines += ["-" * width, ""]
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
