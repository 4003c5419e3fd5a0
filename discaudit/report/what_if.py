"""Two verdicts side by side: the audit and its what-if (``discaudit check ... --what-if SPEC``).

Formats two finished verdicts and their comparison (``before.compare(after)``); nothing is
computed here. Text: one row per check with the status and key figure before and after (changed
rows marked ``*``), the gate status and recommendation of each, then the list of changes. JSON: both
verdicts and the comparison. Markdown: the comparison table and the list of changes.
"""

from __future__ import annotations

import json
from typing import TYPE_CHECKING, Any

from discaudit.report.labels import MODEL_NAMES, status_label

if TYPE_CHECKING:
    from discaudit.verdict import Verdict

WIDTH = 100
_CHECK_W = 23


def _cell(status: str, figure: str, width: int) -> str:
    text = f"{status.upper():<5} {figure}"
    return text if len(text) <= width else text[: width - 1] + "~"


def render_text(before: Verdict, after: Verdict, spec: str, width: int = WIDTH) -> str:
    """Both verdicts as two columns, then what changed."""
    comparison = before.compare(after)
    col = (width - _CHECK_W - 2) // 2
    lines = [
        f"discaudit what-if: {spec}",
        f"before: {before.meta.get('n_rows', '?')} rows, {before.meta.get('n_features', '?')} features, "
        f"{before.meta.get('n_classes', '?')} classes; after: {after.meta.get('n_rows', '?')} rows, "
        f"{after.meta.get('n_features', '?')} features, {after.meta.get('n_classes', '?')} classes",
        "",
        f"{'check':<{_CHECK_W}}{'before':<{col}}  after",
        "-" * width,
    ]
    keys = list(dict.fromkeys([*before.findings, *after.findings]))
    for key in keys:
        a, b = before.findings.get(key), after.findings.get(key)
        left = _cell(a.status, a.figure, col) if a else "-"
        right = _cell(b.status, b.figure, col) if b else "-"
        mark = "*" if key in comparison.changed else " "
        lines.append(f"{key:<{_CHECK_W - 1}}{mark}{left:<{col}}  {right}")
    lines.append("-" * width)
    lines.append(f"{'worst status':<{_CHECK_W}}{before.status.upper():<{col}}  {after.status.upper()}")
    lines.append(f"{'gate':<{_CHECK_W}}{_clip(_gate(before), col):<{col}}  {_gate(after)}")
    lines.append(
        f"{'recommendation':<{_CHECK_W}}{MODEL_NAMES[before.recommendation.model]:<{col}}  "
        f"{MODEL_NAMES[after.recommendation.model]}"
    )
    lines += ["", "What changed:"]
    lines += [f"  {line}" for line in comparison.lines()]
    lines += ["", "* status changed. The what-if re-audits the changed data with the same settings and seed."]
    return "\n".join(lines) + "\n"


def _clip(text: str, width: int) -> str:
    return text if len(text) <= width else text[: width - 3] + "..."


def _gate(verdict: Verdict) -> str:
    """The gate in a few words: passes, with the candidates the data are fit for, or fails, with why."""
    gate = verdict.gate
    if gate is None:
        return "-"
    if gate.passed and gate.fit_for:
        return "fit for " + ", ".join(MODEL_NAMES[m] for m in gate.fit_for)
    return ("passes: " if gate.passed else "fails: ") + gate.headline


def render_json(before: Verdict, after: Verdict, spec: str) -> str:
    """``{"what_if", "before", "after", "comparison"}`` as JSON text."""
    out: dict[str, Any] = {
        "what_if": spec,
        "before": before.to_dict(),
        "after": after.to_dict(),
        "comparison": before.compare(after).to_dict(),
    }
    return json.dumps(out, indent=2, allow_nan=False) + "\n"


def render_markdown(before: Verdict, after: Verdict, spec: str) -> str:
    """A Markdown table of both verdicts' statuses, then the changes."""
    from discaudit.report.markdown import escape

    comparison = before.compare(after)
    lines = [f"### discaudit what-if: {escape(spec)}", "", "| check | before | after |", "|---|---|---|"]
    for key in dict.fromkeys([*before.findings, *after.findings]):
        a, b = before.findings.get(key), after.findings.get(key)
        cells = [
            f"`{key}`" + (" **(changed)**" if key in comparison.changed else ""),
            f"{status_label(a.status)} {escape(a.figure)}" if a else "-",
            f"{status_label(b.status)} {escape(b.figure)}" if b else "-",
        ]
        lines.append("| " + " | ".join(cells) + " |")
    lines.append(f"| worst status | {status_label(before.status)} | {status_label(after.status)} |")
    lines.append(f"| gate | {escape(_gate(before))} | {escape(_gate(after))} |")
    lines.append(
        f"| recommendation | {escape(MODEL_NAMES[before.recommendation.model])} | "
        f"{escape(MODEL_NAMES[after.recommendation.model])} |"
    )
    lines += ["", "**What changed:**", ""]
    lines += [f"- {escape(line)}" for line in comparison.lines()]
    return "\n".join(lines) + "\n"


#: ``--format`` name -> renderer of a what-if.
RENDERERS = {"text": render_text, "json": render_json, "markdown": render_markdown}
