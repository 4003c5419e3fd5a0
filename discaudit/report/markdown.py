"""Markdown verdict for a pull-request or merge-request comment.

Formats the verdict table of :func:`discaudit.report.table.build` (nothing is computed
here): a heading with the gate status, a table ``check | status | key figure | summary``,
then the recommendation, the reasons, the suggested settings, the alternatives and the
notes (advisory checks, the caution). Every user-supplied string (column names and class
labels end up in summaries) is escaped so it renders as text: Markdown punctuation is
backslash-escaped (CommonMark lets any ASCII punctuation be escaped, which also stops raw
HTML such as ``<script>``), and line breaks become spaces so a table row stays one row.
"""

from __future__ import annotations

import re
from typing import TYPE_CHECKING

from discaudit.report.labels import MODEL_NAMES, format_params, status_label
from discaudit.report.remedies import markdown_lines as remedy_lines
from discaudit.report.table import VerdictTable, build

if TYPE_CHECKING:
    from discaudit.verdict import Verdict

_SPECIAL = re.compile(r"([\\`*_\[\]<>#|~&])")
_SPACE = re.compile(r"\s+")


def escape(text: object) -> str:
    """Text for a Markdown paragraph or table cell: punctuation escaped, one line."""
    return _SPECIAL.sub(r"\\\1", _SPACE.sub(" ", str(text)).strip())


def render(verdict: Verdict) -> str:
    """The verdict as Markdown (GitHub-flavoured tables)."""
    return format_table(build(verdict))


def format_table(table: VerdictTable) -> str:
    """Markdown text of an already built verdict table."""
    lines = [f"### {escape(table.title)}", ""]
    if table.gate_outcome:
        lines += [f"**{escape(table.gate_outcome)}**", ""]
    lines += [f"Worst check status: {status_label(table.status)}", ""]
    lines += ["| check | status | key figure | summary |", "|---|---|---|---|"]
    for row in table.rows:
        cells = (f"`{row.check}`", status_label(row.status, row.severity), escape(row.figure), escape(row.summary))
        lines.append("| " + " | ".join(cells) + " |")
    if table.gate_rule:
        lines += ["", f"_{escape(table.gate_rule)}_"]
    if table.baseline is not None:
        lines += ["", *_baseline_lines(table)]
    lines += ["", f"**Recommendation:** {escape(MODEL_NAMES[table.model])} (`{table.model}`)", ""]
    if table.reasons:
        lines.append("**Why:**")
        lines += [f"- {escape(reason)}" for reason in table.reasons]
        lines.append("")
    if table.close_to:
        lines += [f"**Within noise of it:** {escape(', '.join(MODEL_NAMES[m] for m in table.close_to))}", ""]
    lines += [f"**Suggested settings:** {escape(format_params(table.params))}", ""]
    lines += [f"- `{escape(key)}`: {escape(note)}" for key, note in table.param_notes.items()]
    if table.param_notes:
        lines.append("")
    if table.alternatives:
        lines.append("**Alternatives, best first:**")
        lines += [
            f"{i}. {escape(MODEL_NAMES[alt['model']])}: {escape(alt['reason'])}"
            for i, alt in enumerate(table.alternatives, 1)
        ]
        lines.append("")
    lines += remedy_lines(table, escape)
    lines += [f"> {escape(note)}" for note in table.notes]
    return "\n".join(lines) + "\n"


def _baseline_lines(table: VerdictTable) -> list[str]:
    """The 'compared with the baseline' section as Markdown."""
    b = table.baseline
    assert b is not None
    word = "drifted" if b.drifted else "within noise"
    lines = [f"#### Compared with the baseline ({escape(b.source)}): {word}", "", escape(b.outcome), ""]
    for c in b.changes:
        lines.append(f"- {'**counts**' if c.counts else 'noted'}: {escape(c.summary)}")
    if b.changes:
        lines.append("")
    if b.classes:
        lines += ["| class | rows then -> now | share then -> now | mean shift | covariance |", "|---|---|---|---|---|"]
        for r in b.classes:
            name = f"**{escape(r.label)}**" if r.drifted else escape(r.label)
            cells = (name, escape(r.rows), escape(r.share), escape(r.mean), escape(r.covariance))
            lines.append("| " + " | ".join(cells) + " |")
        lines.append("")
    lines.append(f"_{escape(b.rule)}_")
    return lines
