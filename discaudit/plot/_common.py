"""Shared drawing helpers: palette, markers, titles, text safety, figure layout."""

from __future__ import annotations

import math
import textwrap
from typing import Any

import numpy as np
import pandas as pd
from matplotlib.axes import Axes
from matplotlib.figure import Figure

from discaudit.jsonable import label
from discaudit.report.labels import status_label

#: Okabe & Ito (2008) colour-blind-safe palette, yellow moved last (weak on white).
OKABE_ITO = ("#0072B2", "#E69F00", "#009E73", "#D55E00", "#56B4E9", "#CC79A7", "#000000", "#F0E442")
#: Markers per class, so classes differ by shape as well as colour.
MARKERS = ("o", "s", "^", "D", "v", "P", "X", "*", "h", "<", ">", "p")
GREY = "#4D4D4D"
#: Colour, hatch and word of each status level (the word is always shown).
LEVELS = {
    "pass": (OKABE_ITO[0], "", "pass"),
    "warn": (OKABE_ITO[1], "//", "warn"),
    "fail": (OKABE_ITO[3], "xx", "fail"),
}
PANEL_SIZE = (5.6, 4.2)


def class_color(k: int) -> str:
    return OKABE_ITO[k % len(OKABE_ITO)]


def class_marker(k: int) -> str:
    return MARKERS[k % len(MARKERS)]


def text(value: Any) -> str:
    """A user-supplied string made literal for matplotlib (no mathtext from ``$``)."""
    return str(value).replace("$", r"\$")


def short(value: Any, width: int = 28) -> str:
    """A label cut to ``width`` characters for a crowded axis."""
    s = text(value)
    return s if len(s) <= width else s[: width - 1] + "…"


def status_title(ax: Axes, heading: str, verdict: Any, check: str) -> None:
    """Title ``heading`` with the check's status written out (never colour alone)."""
    finding = verdict.findings.get(check)
    severity = verdict.meta.get("severity", {}).get(check, "gate")
    status = status_label(finding.status, severity) if finding is not None else ""
    first, _, rest = heading.partition("\n")
    title = f"{first} [{status}]" if status else first
    ax.set_title(title + (f"\n{wrap(rest)}" if rest else ""), loc="left", fontsize=9 if rest else 10)


#: Characters per line of a panel title's second part (a panel is about 80 characters wide at 9 pt).
TITLE_WIDTH = 72


def wrap(body: str, width: int = TITLE_WIDTH) -> str:
    """Lines of at most ``width`` characters, so a panel's title never runs into the next panel."""
    return "\n".join(textwrap.fill(line, width, break_on_hyphens=False) for line in body.split("\n"))


def message(ax: Axes, body: str, title: str | None = None) -> None:
    """An empty panel that says why there is nothing to draw."""
    ax.set_axis_off()
    if title:
        ax.set_title(text(title), loc="left", fontsize=10)
    ax.text(0.02, 0.95, textwrap.fill(text(body), 60), transform=ax.transAxes, va="top", ha="left", fontsize=9)


def note(ax: Axes, body: str, loc: str = "lower right") -> None:
    """A small boxed note inside the axes."""
    x, ha = (0.98, "right") if "right" in loc else (0.02, "left")
    y, va = (0.02, "bottom") if "lower" in loc else (0.98, "top")
    ax.text(
        x,
        y,
        body,
        transform=ax.transAxes,
        ha=ha,
        va=va,
        fontsize=7,
        bbox={"boxstyle": "round,pad=0.3", "facecolor": "white", "edgecolor": "#BBBBBB", "alpha": 0.9},
    )


def new_figure(n_panels: int, ncols: int = 2, panel: tuple[float, float] = PANEL_SIZE) -> tuple[Figure, list[Axes]]:
    """A figure (not registered with pyplot) with ``n_panels`` axes in a grid."""
    ncols = max(1, min(ncols, n_panels))
    nrows = math.ceil(n_panels / ncols)
    fig = Figure(figsize=(panel[0] * ncols, panel[1] * nrows), layout="constrained")
    grid = fig.subplots(nrows, ncols, squeeze=False)
    axes = list(grid.ravel())
    for extra in axes[n_panels:]:
        extra.set_axis_off()
    return fig, axes[:n_panels]


def class_groups(verdict: Any, classes: Any) -> list[tuple[int, str, np.ndarray]]:
    """(position in ``meta['classes']``, class text, row positions) for a per-row class array."""
    codes, uniques = pd.factorize(np.asarray(classes, dtype=object), sort=False)
    meta_classes = [str(c) for c in verdict.meta.get("classes", [])]
    out = []
    for j, value in enumerate(uniques):
        name = str(label(value))
        k = meta_classes.index(name) if name in meta_classes else len(meta_classes) + j
        out.append((k, name, np.flatnonzero(codes == j)))
    return sorted(out, key=lambda t: t[0])


def code_groups(verdict: Any, codes: Any, classes: Any) -> list[tuple[int, str, np.ndarray]]:
    """As :func:`class_groups`, for rows that carry class codes into ``classes`` (no per-row labels)."""
    codes = np.asarray(codes, dtype=np.intp)
    meta_classes = [str(c) for c in verdict.meta.get("classes", [])]
    out = []
    present = np.flatnonzero(np.bincount(codes, minlength=len(classes))) if codes.size else np.zeros(0, dtype=np.intp)
    for j in present:
        name = str(label(classes[j]))
        k = meta_classes.index(name) if name in meta_classes else len(meta_classes) + int(j)
        out.append((k, name, np.flatnonzero(codes == j)))
    return sorted(out, key=lambda t: t[0])


def use_log(values: np.ndarray, reference: float, factor: float = 30.0) -> bool:
    """Log axes when the largest value dwarfs the reference (e.g. the cut-off)."""
    finite = values[np.isfinite(values) & (values > 0)]
    return bool(finite.size and reference > 0 and finite.max() > factor * reference)


def figure_title(fig: Figure, heading: str, verdict: Any, check: str) -> None:
    """Figure title with the check's status and one-sentence summary."""
    finding = verdict.findings.get(check)
    severity = verdict.meta.get("severity", {}).get(check, "gate")
    status = f" [{status_label(finding.status, severity)}]" if finding is not None else ""
    summary = textwrap.fill(text(finding.summary), 140) if finding is not None else ""
    fig.suptitle(f"{heading}{status}\n{summary}".strip(), x=0.01, ha="left", fontsize=10)
