"""Normality plot: per-class Q-Q of classical squared Mahalanobis distances against chi-square(df).

Under a df-variate Gaussian class the squared distance of a row from the class mean, in the
metric of the class covariance, is approximately chi-square(df) (exactly a scaled Beta when the
mean and covariance are estimated from the same n rows: Gnanadesikan & Kettenring 1972); the
points then follow the line y = x. Heavy tails bend the top of the plot upwards, light tails
downwards. The distances are the ``classical_squared_distance`` array of the ``normality``
finding (unbiased class covariance, on the features the tests used: discrete features left
out); rows the outlier check flags are filled, so a bend made by a few of them shows as such.
Every panel uses the same axes, and the figures that describe a class are in its title.

References
----------
Gnanadesikan, R. & Kettenring, J. R. (1972). Robust estimates, residuals, and outlier detection
with multiresponse data. Biometrics 28, 81-124.
"""

from __future__ import annotations

from typing import Any

import numpy as np
from matplotlib.axes import Axes
from matplotlib.figure import Figure
from matplotlib.lines import Line2D

from discaudit.findings import fmt, fmt_p
from discaudit.plot import _common as c
from discaudit.plot.outliers import qq_quantiles, qq_scatter
from discaudit.report.labels import status_label

KEY = "normality"
MAX_CLASS_PANELS = 8


def _series(verdict: Any) -> list[tuple[int, str, np.ndarray, np.ndarray]]:
    """(class position, name, sorted distances, flags in the same order) per class."""
    arrays = verdict.findings[KEY].arrays
    d = np.asarray(arrays["classical_squared_distance"], dtype=float)
    flagged = np.asarray(arrays.get("flagged", np.zeros(d.size, dtype=bool)), dtype=bool)
    out = []
    for k, name, rows in c.class_groups(verdict, arrays["class"]):
        values, flags = d[rows], flagged[rows]
        keep = np.isfinite(values)
        order = np.argsort(values[keep], kind="stable")
        out.append((k, name, values[keep][order], flags[keep][order]))
    return out


def _df(verdict: Any) -> int:
    return int(verdict.findings[KEY].arrays.get("df", verdict.meta.get("n_features", 1)))


def _identity(ax: Axes, top: float) -> None:
    line = np.linspace(0.0, top, 200)
    ax.plot(line, line, color=c.GREY, linestyle=":", linewidth=0.8, gid="identity", scalex=False, scaley=False)


def _mark_flagged(ax: Axes, k: int, d: np.ndarray, flags: np.ndarray, df: int) -> None:
    if flags.any():
        q = qq_quantiles(d.size, df)
        ax.scatter(q[flags], d[flags], s=16, marker=c.class_marker(k), color=c.class_color(k), edgecolors="black",
                   linewidths=0.6, gid=f"normal-qq-flagged:{k}")  # fmt: skip


def _axes_labels(ax: Axes, df: int) -> None:
    ax.set_xlabel(f"chi-square({df}) quantile", fontsize=8)
    ax.set_ylabel("classical squared distance, sorted", fontsize=8)


def _legend(fig_or_ax: Any, outside_below: bool) -> None:
    handles = [
        Line2D([], [], color=c.GREY, linestyle=":", label="y = x (a Gaussian class)"),
        Line2D([], [], marker="o", color="black", linestyle="none", label="rows the outlier check flags (filled)"),
    ]
    if outside_below:
        fig_or_ax.legend(handles=handles, loc="outside lower center", ncols=2, fontsize=8, frameon=False)
    else:
        fig_or_ax.legend(handles=fig_or_ax.get_legend_handles_labels()[0] + handles, fontsize=7, loc="upper left",
                         bbox_to_anchor=(1.01, 1.0), borderaxespad=0.0)  # fmt: skip


def draw(verdict: Any, ax: Axes) -> None:
    """Every class's Q-Q series on one axes."""
    df = _df(verdict)
    top = 0.0
    for k, name, d, flags in _series(verdict):
        top = max(top, qq_scatter(ax, k, name, d, df, gid=f"normal-qq:{k}"))
        _mark_flagged(ax, k, d, flags, df)
    _identity(ax, top)
    _axes_labels(ax, df)
    _legend(ax, outside_below=False)
    c.status_title(ax, "Normality: Mahalanobis Q-Q per class", verdict, KEY)


def _class_title(name: str, info: dict[str, Any], shown: int | None = None) -> str:
    if "status" not in info:
        return f"Normality, class {c.short(name, 20)} [tests not run]\n{c.wrap(c.short(info.get('skipped', ''), 140))}"
    judged = "" if info.get("rows_judged") == "all rows" else f" ({info.get('rows_judged')})"
    head = f"Normality, class {c.short(name, 20)} [{status_label(info['status'])}: {info.get('grade', '')}]"
    second = (
        f"|skewness| {fmt(info.get('max_abs_skewness'))} ({c.short(info.get('max_abs_skewness_feature', ''), 14)}), "
        f"Mardia kurtosis {fmt(info.get('mardia_kurtosis_ratio'))} x normal, "
        f"Henze-Zirkler {fmt_p(info.get('henze_zirkler_p_value'))}"
    )
    sample = (
        f"; Q-Q of a seeded subsample of {shown} rows" if shown is not None and shown < info.get("n", shown) else ""
    )
    return f"{head}\n{c.wrap(second + judged + sample)}"


def draw_figure(verdict: Any) -> Figure:
    """One Q-Q panel per class on one shared scale, each with the class's own grade written out."""
    series = _series(verdict)
    if len(series) > MAX_CLASS_PANELS:
        fig, axes = c.new_figure(1)
        draw(verdict, axes[0])
        return fig
    df = _df(verdict)
    per_class = verdict.findings[KEY].details.get("per_class", {})
    fig, axes = c.new_figure(len(series), ncols=3 if len(series) >= 3 else 2)
    top_q = max((float(qq_quantiles(d.size, df).max()) for _, _, d, _ in series if d.size), default=1.0)
    top_d = max((float(d.max()) for _, _, d, _ in series if d.size), default=1.0)
    for ax, (k, name, d, flags) in zip(axes, series, strict=True):
        qq_scatter(ax, k, name, d, df, gid=f"normal-qq:{k}")
        _mark_flagged(ax, k, d, flags, df)
        ax.set_xlim(0.0, top_q * 1.05)
        ax.set_ylim(0.0, max(top_d, top_q) * 1.05)
        _identity(ax, max(top_d, top_q) * 1.05)
        _axes_labels(ax, df)
        ax.set_title(_class_title(name, per_class.get(name, {}), d.size), loc="left", fontsize=9)
    _legend(fig, outside_below=True)
    c.figure_title(
        fig, "Normality: per-class Q-Q of classical squared Mahalanobis distances (same scale)", verdict, KEY
    )
    return fig
