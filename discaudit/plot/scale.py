"""Scale plot: pooled within-class standard deviation per feature on a log axis.

Reads ``pooled_within_sd``, ``threshold`` (``Config.scale_ratio_warn``), ``sd_ratio`` and the
condition numbers from the ``scale_disparity`` finding. The dashed line marks the smallest
SD times the threshold: features beyond it are more than ``threshold`` times as spread out
as the least spread-out one (hatched bars). Features that do not vary within classes have
no place on a log axis; they are listed in a note.
"""

from __future__ import annotations

from typing import Any

import numpy as np
from matplotlib.axes import Axes
from matplotlib.figure import Figure
from matplotlib.lines import Line2D
from matplotlib.patches import Patch

from discaudit.findings import fmt
from discaudit.plot import _common as c

KEY = "scale_disparity"
MAX_FEATURES = 40


def draw(verdict: Any, ax: Axes) -> None:
    details = verdict.findings[KEY].details
    sd = {str(k): (float("nan") if v is None else float(v)) for k, v in details["pooled_within_sd"].items()}
    zero = [n for n, v in sd.items() if not v > 0]
    names = [n for n in sd if sd[n] > 0]
    hidden = 0
    if len(names) > MAX_FEATURES:
        ranked = sorted(names, key=lambda n: sd[n])
        keep = set(ranked[: MAX_FEATURES // 2] + ranked[-MAX_FEATURES // 2 :])
        hidden = len(names) - len(keep)
        names = [n for n in names if n in keep]
    values = np.array([sd[n] for n in names])
    threshold = float(details.get("threshold", 1e3))
    smallest = float(min(v for v in sd.values() if v > 0))
    limit = smallest * threshold
    pos = np.arange(len(names))[::-1]
    for y, name, v in zip(pos, names, values, strict=True):
        level = "warn" if v > limit else "pass"
        colour, hatch, _ = c.LEVELS[level]
        ax.barh(y, v, color=colour, hatch=hatch, edgecolor="black", linewidth=0.5, height=0.7, gid=f"sd-bar:{name}")
    ax.set_xscale("log")
    ax.axvline(smallest, color=c.GREY, linestyle=":", linewidth=1.0, gid="sd-smallest")
    ax.axvline(limit, color=c.GREY, linestyle="--", linewidth=1.0, gid="sd-limit")
    ax.set_yticks(pos, labels=[c.short(n, 22) for n in names], fontsize=7)
    ax.set_xlim(left=float(values.min()) / 3.0, right=max(float(values.max()), limit) * 3.0)
    lines = [f"largest / smallest SD = {fmt(details.get('sd_ratio'))} (warn above {fmt(threshold)})"]
    if details.get("condition_number_raw") is not None:
        lines.append(
            f"condition number: {fmt(details.get('condition_number_raw'))} raw, "
            f"{fmt(details.get('condition_number_standardized'))} standardized"
        )
    if zero:
        lines.append("no within-class variation: " + ", ".join(c.short(z, 16) for z in zero[:5]))
    if hidden:
        lines.append(f"{hidden} features in the middle of the range not shown")
    # the figures go under the axis label and the legend beside the axes: neither covers a bar
    ax.set_xlabel("pooled within-class standard deviation (log scale, feature units)\n" + "\n".join(lines), fontsize=8)
    handles = [
        Patch(facecolor=c.LEVELS["pass"][0], edgecolor="black", label=f"within {fmt(threshold)} x smallest"),
        Patch(
            facecolor=c.LEVELS["warn"][0],
            hatch=c.LEVELS["warn"][1],
            edgecolor="black",
            label=f"beyond {fmt(threshold)} x smallest",
        ),
        Line2D([], [], color=c.GREY, linestyle=":", label="smallest SD"),
        Line2D([], [], color=c.GREY, linestyle="--", label=f"{fmt(threshold)} x smallest SD"),
    ]
    ax.legend(handles=handles, fontsize=7, loc="upper left", bbox_to_anchor=(1.01, 1.0), borderaxespad=0.0)
    c.status_title(ax, "Scale: spread of each feature", verdict, KEY)


def draw_figure(verdict: Any) -> Figure:
    n = len(verdict.findings[KEY].details["pooled_within_sd"])
    height = min(max(4.2, 0.24 * min(n, MAX_FEATURES) + 2.0), 12.0)
    fig, axes = c.new_figure(1, panel=(8.0, height))
    draw(verdict, axes[0])
    return fig
