"""Normality plot: per-class Q-Q of classical squared Mahalanobis distances against chi-square(p).

Under a p-variate Gaussian class the squared distance of a row from the class mean, in the
metric of the class covariance, is approximately chi-square(p) (exactly a scaled Beta when the
mean and covariance are estimated from the same n rows: Gnanadesikan & Kettenring 1972); the
points then follow the line y = x. Heavy tails bend the top of the plot upwards, light tails
downwards. The distances are the ``classical_distance`` array of the ``outliers`` finding
(unbiased class covariance, all audited features).

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

from discaudit.findings import fmt
from discaudit.plot import _common as c
from discaudit.plot.outliers import qq_scatter
from discaudit.report.labels import status_label

KEY = "normality"
MAX_CLASS_PANELS = 8


def _series(verdict: Any) -> list[tuple[int, str, np.ndarray]]:
    arrays = verdict.findings["outliers"].arrays
    d = np.asarray(arrays["classical_distance"], dtype=float)
    out = []
    for k, name, rows in c.class_groups(verdict, arrays["class"]):
        values = d[rows]
        out.append((k, name, np.sort(values[np.isfinite(values)])))
    return out


def _finish(ax: Axes, p: int, top: float, verdict: Any) -> None:
    ax.plot([0, top], [0, top], color=c.GREY, linestyle=":", linewidth=0.8, gid="identity")
    ax.set_xlabel(f"chi-square({p}) quantile")
    ax.set_ylabel("classical squared distance, sorted")
    discrete = verdict.findings[KEY].details.get("discrete_features") or []
    if discrete:
        c.note(
            ax,
            "distances include the discrete features "
            + ", ".join(c.short(f, 16) for f in discrete[:4])
            + (" ..." if len(discrete) > 4 else ""),
            loc="lower right",
        )


def draw(verdict: Any, ax: Axes) -> None:
    """Every class's Q-Q series on one axes."""
    p = int(verdict.meta.get("n_features", 1))
    top = max((qq_scatter(ax, k, name, d, p, gid=f"normal-qq:{k}") for k, name, d in _series(verdict)), default=0.0)
    _finish(ax, p, top, verdict)
    ax.legend(fontsize=7, loc="upper left")
    c.status_title(ax, "Normality: Mahalanobis Q-Q per class", verdict, KEY)


def draw_figure(verdict: Any) -> Figure:
    """One Q-Q panel per class, each with the class's own normality grade written out."""
    series = _series(verdict)
    if len(series) > MAX_CLASS_PANELS:
        fig, axes = c.new_figure(1)
        draw(verdict, axes[0])
        return fig
    p = int(verdict.meta.get("n_features", 1))
    per_class = verdict.findings[KEY].details.get("per_class", {})
    fig, axes = c.new_figure(len(series), ncols=3 if len(series) >= 3 else 2)
    for ax, (k, name, d) in zip(axes, series, strict=True):
        top = qq_scatter(ax, k, name, d, p, gid=f"normal-qq:{k}")
        _finish(ax, p, top, verdict)
        info = per_class.get(name, {})
        if "status" in info:
            ax.set_title(
                f"Normality, class {c.short(name, 20)} [{status_label(info['status'])}: {info.get('grade', '')}]",
                loc="left",
                fontsize=10,
            )
            c.note(
                ax,
                f"Mardia kurtosis {fmt(info.get('mardia_kurtosis_ratio'))} x normal\n"
                f"|skewness| up to {fmt(info.get('max_abs_skewness'))} ({c.short(info.get('max_abs_skewness_feature', ''), 16)})\n"
                f"Henze-Zirkler p = {fmt(info.get('henze_zirkler_p_value'), 2)}",
                loc="upper left",
            )
        else:
            ax.set_title(f"Normality, class {c.short(name, 20)} [tests not run]", loc="left", fontsize=10)
            if info.get("skipped"):
                c.note(ax, c.text(info["skipped"])[:80], loc="upper left")
    c.figure_title(fig, "Normality: per-class Q-Q of classical squared Mahalanobis distances", verdict, KEY)
    return fig
