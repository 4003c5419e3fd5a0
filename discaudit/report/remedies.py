"""The "What would help" section: the top remedies and their predicted effects, in text, Markdown and HTML.

Formats the remedy rows of :func:`discaudit.report.table.build` (nothing is computed here). Each
remedy says what to change, which finding it addresses, which statuses the change is predicted to
move, and, when the predicted performance was recomputed, how the accuracy of the recommended model
and the recommendation would change; then the ``--what-if`` spec that re-audits it in full.
"""

from __future__ import annotations

import textwrap
from collections.abc import Callable
from html import escape

from discaudit.report.labels import REMEDIES_NOTE, REMEDIES_TITLE
from discaudit.report.table import RemedyRow, VerdictTable

#: Remedies shown in a report, of those predicted to help (all are in the JSON, ``verdict.remedies``).
SHOWN = 3


def _shown(table: VerdictTable) -> list[RemedyRow]:
    return [r for r in table.remedies if r.helps][:SHOWN]


def _left_out(table: VerdictTable) -> str | None:
    """A note on the remedies not shown: beyond the first few, or predicted not to help."""
    shown = len(_shown(table))
    unhelpful = sum(1 for r in table.remedies if not r.helps)
    more = len(table.remedies) - shown - unhelpful
    parts = []
    if more:
        parts.append(f"{more} more")
    if unhelpful:
        parts.append(f"{unhelpful} predicted not to clear {'its' if unhelpful == 1 else 'their'} finding")
    return f"Not shown: {' and '.join(parts)} (verdict.remedies, the JSON report)." if parts else None


def _effect(row: RemedyRow) -> str:
    changes = "; ".join(row.changes) if row.changes else "no status changes"
    parts = [f"addresses {row.addresses}", f"predicted: {changes}"]
    if row.accuracy:
        parts.append(row.accuracy)
    if row.recommendation:
        parts.append(row.recommendation)
    if row.needs_row_pass:
        parts.append("needs a pass over the rows")
    return "; ".join(parts)


def _footer(table: VerdictTable) -> list[str]:
    shown = _shown(table)
    out = [REMEDIES_NOTE]
    left_out = _left_out(table)
    if left_out:
        out.insert(0, left_out)
    if any(r.accuracy is not None and r.recommendation is None for r in shown):
        out.append(
            "Predicted accuracy: the recommended model's exact leave-one-out on the changed data alone; whether "
            "the recommendation would change is found by Config(remedy_effects='performance'), --what-if SPEC "
            "or verdict.what_if."
        )
    if any(r.accuracy is None for r in shown):
        out.append(
            "The predicted accuracy was not recomputed for these remedies; Config(remedy_effects='performance'), "
            "--what-if SPEC or verdict.what_if recomputes it."
        )
    rows = {r.rows for r in shown}
    if rows and rows != {"every row"}:
        out.append("Rows: " + "; ".join(sorted(rows)) + ".")
    return out


def text_lines(table: VerdictTable, width: int) -> list[str]:
    """The section as wrapped text lines (empty when there is no remedy)."""
    if not table.remedies:
        return []
    lines = ["", f"{REMEDIES_TITLE}:"]
    if not _shown(table):
        lines.append("  No change of the data is predicted to clear a finding.")
    for row in _shown(table):
        lines += _wrap(row.description, width, f"  {row.rank}. ", "     ")
        lines += _wrap(_effect(row), width, "     ", "     ")
        lines.append(f'     --what-if "{row.spec}"' if len(row.spec) <= width - 17 else "     --what-if: see the JSON")
    for note in _footer(table):
        lines += _wrap(note, width, "  ", "  ")
    return lines


def _wrap(text: str, width: int, first: str, rest: str) -> list[str]:
    return textwrap.wrap(text, width, initial_indent=first, subsequent_indent=rest, break_on_hyphens=False)


def markdown_lines(table: VerdictTable, e: Callable[[object], str]) -> list[str]:
    """The section as Markdown lines; ``e`` is the Markdown renderer's escape function."""
    if not table.remedies:
        return []
    lines = [f"**{REMEDIES_TITLE}:**", ""]
    if not _shown(table):
        lines.append("No change of the data is predicted to clear a finding.")
    for row in _shown(table):
        lines.append(f"{row.rank}. {e(row.description)}")
        lines.append(f'   {e(_effect(row))}; --what-if "{e(row.spec)}"')
    lines.append("")
    lines += [f"_{e(note)}_" for note in _footer(table)]
    lines.append("")
    return lines


def html_section(table: VerdictTable) -> str:
    """The section as an HTML fragment (empty when there is no remedy)."""
    if not table.remedies:
        return ""
    items = []
    if not _shown(table):
        items.append("<li>No change of the data is predicted to clear a finding.</li>")
    for row in _shown(table):
        cleared = ' data-clears="true"' if row.clears_addressed else ""
        items.append(
            f'<li data-addresses="{escape(row.addresses, quote=True)}"{cleared}>{escape(row.description)}<br>'
            f"<small>{escape(_effect(row))}; <code>--what-if &quot;{escape(row.spec)}&quot;</code></small></li>"
        )
    notes = "".join(f"<p><small>{escape(n)}</small></p>" for n in _footer(table))
    return (
        f'<div class="discaudit-remedies"><p><strong>{escape(REMEDIES_TITLE)}:</strong></p>'
        f"<ol>{''.join(items)}</ol>{notes}</div>"
    )
