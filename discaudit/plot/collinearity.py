"""Collinearity plot: VIF per feature on a log axis, thresholds marked, near dependencies named.

Reads ``vif_within`` (VIF of the pooled within-class correlation, the matrix LDA inverts),
``vif_total``, ``thresholds``, ``near_dependencies``, ``condition_number`` and
``vanishing_combinations`` from the ``collinearity`` finding's details. A VIF that is
infinite (exact dependency; JSON null) is drawn to the right edge and marked ``inf``.
"""

from __future__ import annotations

from typing import Any

import numpy as np
from matplotlib.artist import Artist
from matplotlib.axes import Axes
from matplotlib.figure import Figure
from matplotlib.lines import Line2D
from matplotlib.patches import Patch

from discaudit.findings import fmt
from discaudit.plot import _common as c
from discaudit.plot._remedies import dropped_features

KEY = "collinearity"
#: Features shown; beyond this the largest VIFs are kept (and the rest counted).
MAX_FEATURES = 40
#: Near dependencies annotated, strongest first.
MAX_DEPENDENCIES = 5


def _level(value: float, warn: float, fail: float) -> str:
    return "fail" if value > fail else "warn" if value > warn else "pass"


def draw(verdict: Any, ax: Axes) -> None:
    details = verdict.findings[KEY].details
    vif = {str(k): (float("inf") if v is None else float(v)) for k, v in details["vif_within"].items()}
    total = details.get("vif_total") or {}
    th = details.get("thresholds", {})
    warn, fail = float(th.get("vif_warn", 5.0)), float(th.get("vif_fail", 10.0))
    names = list(vif)
    hidden = 0
    if len(names) > MAX_FEATURES:
        keep = sorted(names, key=lambda n: -vif[n])[:MAX_FEATURES]
        hidden = len(names) - len(keep)
        names = [n for n in names if n in set(keep)]
    values = np.array([vif[n] for n in names])
    finite = values[np.isfinite(values)]
    cap = max(float(finite.max()) if finite.size else fail, fail) * 3.0
    right = cap * 2.0  # room for the inf marks and dependency tags
    shown = np.where(np.isfinite(values), values, cap)
    pos = np.arange(len(names))[::-1]
    for y, name, v, s in zip(pos, names, values, shown, strict=True):
        colour, hatch, _ = c.LEVELS[_level(v, warn, fail)]
        ax.barh(y, s, color=colour, hatch=hatch, edgecolor="black", linewidth=0.5, height=0.7, gid=f"vif-bar:{name}")
        if not np.isfinite(v):
            ax.text(s, y, " inf", va="center", fontsize=7)
    ax.set_xscale("log")
    totals = [(y, float(total[n])) for y, n in zip(pos, names, strict=True) if total.get(n) is not None]
    if totals:
        ax.plot(
            [t for _, t in totals],
            [y for y, _ in totals],
            marker="|",
            markersize=9,
            color="black",
            linestyle="none",
            gid="vif-total",
        )
    ax.axvline(warn, color=c.GREY, linestyle="--", linewidth=1.0, gid="vif-warn")
    ax.axvline(fail, color=c.GREY, linestyle="-", linewidth=1.2, gid="vif-fail")
    ax.set_yticks(pos, labels=[c.short(n, 22) for n in names], fontsize=7)
    ax.set_xlim(left=min(0.8, float(shown.min()) * 0.8), right=right)

    deps = details.get("near_dependencies") or []
    tags: dict[str, list[str]] = {}
    lines = []
    for i, dep in enumerate(deps[:MAX_DEPENDENCIES], start=1):
        for feature in dep.get("features", []):
            tags.setdefault(str(feature), []).append(str(i))
        lines.append(
            f"[{i}] index {fmt(dep.get('condition_index'))}: "
            + ", ".join(c.short(f, 16) for f in dep.get("features", [])[:6])
            + (" ..." if len(dep.get("features", [])) > 6 else "")
        )
    for y, name, s in zip(pos, names, shown, strict=True):
        if name in tags:
            ax.annotate(
                "[" + ",".join(tags[name]) + "]",
                (s, y),
                xytext=(3, -3),
                textcoords="offset points",
                fontsize=7,
                gid=f"dependency-tag:{name}",
            )
    rank, drop = dropped_features(verdict)
    for y, name, s in zip(pos, names, shown, strict=True):
        if name in drop:  # what the remedy would remove
            ax.annotate(
                f"drop (remedy {rank})",
                (s, y),
                xytext=(3, 3),
                textcoords="offset points",
                fontsize=6.5,
                color=c.GREY,
                gid=f"remedy-drop:{name}",
            )
    ci_warn = th.get("condition_index_warn", 10)
    prop = th.get("variance_proportion", 0.5)
    if lines:
        head = f"near dependencies (condition index > {fmt(ci_warn)}, variance proportion > {fmt(prop)}):"
        body = "\n".join([head, *lines])
    else:
        body = (
            f"no near dependency joins two or more features\n(condition index > {fmt(ci_warn)}, "
            f"variance proportion > {fmt(prop)})"
        )
    body += f"\ncondition number {fmt(details.get('condition_number'))}"
    for combo in (details.get("vanishing_combinations") or [])[:2]:
        body += "\nexact dependency: " + ", ".join(c.short(k, 14) for k in list(combo)[:5])
    if hidden:
        body += f"\n{hidden} features with smaller VIF not shown"
    if drop:
        body += f"\n'drop (remedy {rank})': the features remedy {rank} would remove"
    # the figures go under the axis label and the legend beside the axes: neither covers a bar
    ax.set_xlabel("VIF, pooled within-class correlation (log scale)\n" + body, fontsize=8)
    handles: list[Artist] = [
        Patch(facecolor=c.LEVELS[lv][0], hatch=c.LEVELS[lv][1], edgecolor="black", label=label)
        for lv, label in (
            ("pass", f"VIF <= {fmt(warn)}"),
            ("warn", f"{fmt(warn)} < VIF <= {fmt(fail)} (worth a look)"),
            ("fail", f"VIF > {fmt(fail)} (serious)"),
        )
    ]
    handles += [
        Line2D([], [], color=c.GREY, linestyle="--", label=f"{fmt(warn)}: worth a look"),
        Line2D([], [], color=c.GREY, linestyle="-", label=f"{fmt(fail)}: serious"),
    ]
    if totals:
        handles.append(Line2D([], [], marker="|", color="black", linestyle="none", label="VIF ignoring classes"))
    ax.legend(handles=handles, fontsize=7, loc="upper left", bbox_to_anchor=(1.01, 1.0), borderaxespad=0.0)
    c.status_title(ax, "Collinearity: VIF per feature", verdict, KEY)


def draw_figure(verdict: Any) -> Figure:
    n = len(verdict.findings[KEY].details["vif_within"])
    height = min(max(4.2, 0.24 * min(n, MAX_FEATURES) + 2.0), 12.0)
    fig, axes = c.new_figure(1, panel=(8.0, height))
    draw(verdict, axes[0])
    return fig
