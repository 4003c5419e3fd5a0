"""One-page overview: a panel per plotted check that warns or fails, and the rest in words."""

from __future__ import annotations

import textwrap
from typing import Any

from matplotlib.figure import Figure

from discaudit.plot import _available
from discaudit.plot import _common as c
from discaudit.plot.registry import PLOTTED_CHECKS, plot_module
from discaudit.report.labels import MODEL_NAMES, status_label


def overview_checks(verdict: Any) -> tuple[list[str], list[str]]:
    """(plotted checks that warn or fail, other checks that warn or fail), in display order."""
    bad = [k for k, f in verdict.findings.items() if f.status in ("warn", "fail")]
    plotted = [k for k in PLOTTED_CHECKS if k in bad and _available.available(verdict, k)]
    return plotted, [k for k in bad if k not in plotted]


def draw_overview(verdict: Any) -> Figure:
    plotted, others = overview_checks(verdict)
    n_panels = len(plotted) + (1 if others or not plotted else 0)
    fig, axes = c.new_figure(n_panels, ncols=2, panel=(6.4, 4.8))
    for ax, key in zip(axes, plotted, strict=False):
        plot_module(key).draw(verdict, ax)
    if others or not plotted:
        ax = axes[len(plotted)]
        severity = verdict.meta.get("severity", {})
        if others:
            lines = []
            for key in others:
                f = verdict.findings[key]
                lines.append(f"{status_label(f.status, severity.get(key, 'gate'))}  {key}")
                lines.append(textwrap.fill(c.text(f.summary), 78, initial_indent="    ", subsequent_indent="    "))
            c.message(ax, "", title="Other checks that warn or fail (no plot)")
            ax.text(0.0, 0.92, "\n".join(lines), transform=ax.transAxes, va="top", ha="left", fontsize=7.5)
        else:
            c.message(ax, "No check warns or fails: nothing to show.", title="All checks pass")
    meta = verdict.meta
    rec = verdict.recommendation
    fig.suptitle(
        f"discaudit overview: {meta.get('n_rows', '?')} rows, {meta.get('n_features', '?')} features, "
        f"{meta.get('n_classes', '?')} classes. Gate status: {status_label(verdict.status)}. "
        f"Recommendation: {MODEL_NAMES.get(rec.model, rec.model)}.",
        x=0.01,
        ha="left",
        fontsize=11,
    )
    return fig
