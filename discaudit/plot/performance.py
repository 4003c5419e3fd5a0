"""Predicted performance plot: each candidate's predicted accuracy with a 95% interval.

Reads ``candidates`` (accuracy and its standard error), ``best`` and ``within_noise_of_best``
from the ``expected_performance`` finding and the recommended model from the verdict. Dots are
point predictions, bars +-1.96 SE; the recommended model is drawn filled and labelled, the
candidates within noise of the best with a hollow marker, the others with a cross.
"""

from __future__ import annotations

from typing import Any

import numpy as np
from matplotlib.axes import Axes
from matplotlib.figure import Figure
from matplotlib.lines import Line2D

from discaudit.plot import _common as c
from discaudit.report.labels import MODEL_NAMES

KEY = "expected_performance"
#: Normal quantile of a two-sided 95% interval.
Z95 = 1.959963984540054


def draw(verdict: Any, ax: Axes) -> None:
    details = verdict.findings[KEY].details
    candidates = details["candidates"]
    order = [m for m in ("lda", "regularized_lda", "qda", "logistic_regression") if m in candidates]
    within = set(details.get("within_noise_of_best", []))
    chosen = verdict.recommendation.model
    acc = np.array([100 * candidates[m]["accuracy"] for m in order])
    half = np.array([100 * Z95 * candidates[m]["accuracy_se"] for m in order])
    y = np.arange(len(order))[::-1]
    for yi, m, a, h in zip(y, order, acc, half, strict=True):
        marker, fill = ("o", "black") if m == chosen else (("o", "white") if m in within else ("X", c.GREY))
        low_end, high_end = max(a - h, 0.0), min(a + h, 100.0)  # an accuracy lies in [0, 100]
        ax.errorbar(a, yi, xerr=[[a - low_end], [high_end - a]], fmt="none", ecolor=c.GREY, elinewidth=1.2, capsize=3)
        ax.plot([a], [yi], marker=marker, markersize=8, markerfacecolor=fill, markeredgecolor="black", linestyle="")
    ax.set_yticks(y, labels=[MODEL_NAMES[m] + (" (recommended)" if m == chosen else "") for m in order], fontsize=8)
    low, high = max(float((acc - half).min()), 0.0), min(float((acc + half).max()), 100.0)
    pad = max(0.5, 0.08 * (high - low))
    ax.set_xlim(low - pad, min(high + pad, 100.0 + pad / 2))
    ax.set_ylim(-0.7, len(order) - 0.3)
    ax.set_xlabel("predicted held-out accuracy, % (dot) with 95% interval (bar)")
    ax.grid(axis="x", color="#dddddd", linewidth=0.6)
    handles = [
        Line2D([], [], marker="o", linestyle="", markerfacecolor="black", markeredgecolor="black", label="recommended"),
        Line2D(
            [],
            [],
            marker="o",
            linestyle="",
            markerfacecolor="white",
            markeredgecolor="black",
            label="within noise of the best",
        ),
        Line2D([], [], marker="X", linestyle="", markerfacecolor=c.GREY, markeredgecolor="black", label="outside"),
    ]
    ax.legend(handles=handles, fontsize=7, loc="upper center", bbox_to_anchor=(0.5, -0.28), ncol=3, frameon=False)
    c.status_title(ax, "Predicted performance of the four candidates", verdict, KEY)


def draw_figure(verdict: Any) -> Figure:
    fig, axes = c.new_figure(1, panel=(7.5, 3.6))
    draw(verdict, axes[0])
    return fig
