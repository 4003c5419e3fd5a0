"""HTML verdict table for notebooks (``Verdict._repr_html_``).

Formats the verdict table of :func:`discaudit.report.table.build` (nothing is computed
here). Status reads without colour: a word and a symbol (``✓ PASS``, ``⚠ WARN``,
``✗ FAIL``, ``– SKIP``), with ``(advisory)`` for checks that do not gate. Every string is
HTML-escaped, quotes included, because column names and class labels come from the user and
appear in summaries. No script and no external resource; the only styling is inline
alignment, so the table also reads in a plain HTML viewer.
"""

from __future__ import annotations

from html import escape
from typing import TYPE_CHECKING

from discaudit.report.labels import MODEL_NAMES, format_params, status_label
from discaudit.report.remedies import html_section as remedy_section
from discaudit.report.table import VerdictTable, build

if TYPE_CHECKING:
    from discaudit.verdict import Verdict

_CELL = 'style="text-align:left; vertical-align:top"'
#: The status cell keeps its symbol and word on one line.
_STATUS_CELL = 'style="text-align:left; vertical-align:top; white-space:nowrap"'


def render(verdict: Verdict) -> str:
    """The verdict as an HTML fragment (a ``<div>`` holding the table and notes)."""
    return format_table(build(verdict))


def format_table(table: VerdictTable) -> str:
    """HTML fragment of an already built verdict table."""
    e = _text
    parts = [
        '<div class="discaudit-verdict">',
        f"<p><strong>{e(table.title)}</strong><br>"
        + (
            f'<strong class="gate" data-passed="{str(table.gate_passed).lower()}">{e(table.gate_outcome)}</strong><br>'
            if table.gate_outcome
            else ""
        )
        + f'Worst check status: <strong style="white-space:nowrap">{e(status_label(table.status))}</strong></p>',
        "<table>",
        "<thead><tr>"
        + "".join(f"<th {_CELL}>{h}</th>" for h in ("check", "status", "key figure", "summary"))
        + "</tr></thead>",
        "<tbody>",
    ]
    for row in table.rows:
        parts.append(
            f'<tr data-status="{e(row.status)}">'
            f"<td {_CELL}><code>{e(row.check)}</code></td>"
            f"<td {_STATUS_CELL}>{e(status_label(row.status, row.severity))}</td>"
            f"<td {_CELL}>{e(row.figure)}</td>"
            f"<td {_CELL}>{e(row.summary)}</td></tr>"
        )
    parts += ["</tbody>", "</table>"]
    if table.gate_rule:
        parts.append(f'<p class="gate-rule"><em>{e(table.gate_rule)}</em></p>')
    if table.baseline is not None:
        parts.append(format_baseline(table))
    parts.append(
        f"<p><strong>Recommendation:</strong> {e(MODEL_NAMES[table.model])} (<code>{e(table.model)}</code>)<br>"
        f"<strong>Suggested settings:</strong> {e(format_params(table.params))}"
        + (
            f"<br><strong>Within noise of it:</strong> {e(', '.join(MODEL_NAMES[m] for m in table.close_to))}"
            if table.close_to
            else ""
        )
        + "</p>"
    )
    if table.param_notes:
        notes = "".join(f"<li><code>{e(k)}</code>: {e(v)}</li>" for k, v in table.param_notes.items())
        parts.append(f"<ul>{notes}</ul>")
    if table.reasons:
        parts.append("<p><strong>Why:</strong></p><ul>" + "".join(f"<li>{e(r)}</li>" for r in table.reasons) + "</ul>")
    if table.alternatives:
        items = "".join(f"<li>{e(MODEL_NAMES[a['model']])}: {e(a['reason'])}</li>" for a in table.alternatives)
        parts.append(f"<p><strong>Alternatives, best first:</strong></p><ol>{items}</ol>")
    if table.remedies:
        parts.append(remedy_section(table))
    parts += [f"<p><small>{e(note)}</small></p>" for note in table.notes]
    parts.append("</div>")
    return "\n".join(parts)


def format_baseline(table: VerdictTable) -> str:
    """The 'compared with the baseline' section as an HTML fragment."""
    e = _text
    b = table.baseline
    assert b is not None
    word = "drifted" if b.drifted else "within noise"
    parts = [
        f'<section class="baseline" data-drifted="{str(b.drifted).lower()}">',
        f"<h3>Compared with the baseline (<code>{e(b.source)}</code>): {e(word)}</h3>",
        f"<p>{e(b.outcome)}</p>",
    ]
    if b.changes:
        items = "".join(
            f'<li data-counts="{str(c.counts).lower()}">{"<strong>counts</strong>" if c.counts else "noted"}: '
            f"{e(c.summary)}</li>"
            for c in b.changes
        )
        parts.append(f"<ul>{items}</ul>")
    if b.classes:
        head = "".join(
            f"<th {_CELL}>{h}</th>"
            for h in ("class", "rows then -> now", "share then -> now", "mean shift", "covariance")
        )
        body = "".join(
            f'<tr data-drifted="{str(r.drifted).lower()}">'
            + "".join(f"<td {_CELL}>{e(v)}</td>" for v in (r.label, r.rows, r.share, r.mean, r.covariance))
            + "</tr>"
            for r in b.classes
        )
        parts.append(f"<table><thead><tr>{head}</tr></thead><tbody>{body}</tbody></table>")
    parts += [f"<p><em>{e(b.rule)}</em></p>", "</section>"]
    return "\n".join(parts)


def _text(value: object) -> str:
    return escape(str(value), quote=True)
