"""Outlier plots: robust against classical distance per class, and a chi-square Q-Q plot.

Reads the per-row arrays of the ``outliers`` finding: ``distance`` (squared robust
Mahalanobis distance from the class's MCD estimate, or classical for classes too small for
a robust fit), ``classical_distance``, ``cutoff`` (the class's cut-off, per row),
``flagged``, ``class`` and ``row_label``.
"""

from __future__ import annotations

from typing import Any

import numpy as np
from matplotlib.axes import Axes
from matplotlib.figure import Figure
from matplotlib.lines import Line2D
from scipy import stats as sps

from discaudit.findings import fmt
from discaudit.plot import _common as c
from discaudit.plot._remedies import dropped_rows

KEY = "outliers"
#: At most this many flagged rows per class are labelled, farthest first (per-class panels).
LABEL_CAP = 15
#: The same on the single panel that holds every class (overview, ``ax=``), to stay legible.
COMBINED_LABEL_CAP = 3
#: Above this many classes the per-class panels give way to one panel with every class.
MAX_CLASS_PANELS = 8
#: Plotting positions of the Q-Q plot: (i - 0.5) / n (Hazen).
QQ_OFFSET = 0.5
#: Distance plots switch to log axes when the largest distance exceeds this many cut-offs.
LOG_FACTOR = 5.0
_FLOOR = 1e-3
#: A label to place: (x, y, text, gid).
_Label = tuple[float, float, str, str]


def _arrays(verdict: Any) -> dict[str, Any]:
    return verdict.findings[KEY].arrays  # type: ignore[no-any-return]


def _per_class(verdict: Any, name: str) -> dict[str, Any]:
    return verdict.findings[KEY].details.get("per_class", {}).get(name, {})  # type: ignore[no-any-return]


def _draw_class(ax: Axes, verdict: Any, k: int, name: str, rows: np.ndarray, cap: int, log: bool) -> list[_Label]:
    """Scatter and cut-off line of one class on ``ax``; returns the labels to place.

    Each label is ``(x, y, text, gid)`` for one of the ``cap`` farthest flagged rows.
    """
    a = _arrays(verdict)
    x = np.asarray(a["classical_distance"], dtype=float)[rows]
    y = np.asarray(a["distance"], dtype=float)[rows]
    flagged = np.asarray(a["flagged"], dtype=bool)[rows]
    labels = np.asarray(a["row_label"], dtype=object)[rows]
    cut = float(np.asarray(a["cutoff"], dtype=float)[rows][0])
    colour, marker = c.class_color(k), c.class_marker(k)
    ok = np.isfinite(x) & np.isfinite(y)
    if log:
        x, y = np.clip(x, _FLOOR, None), np.clip(y, _FLOOR, None)
    ax.scatter(
        x[ok & ~flagged],
        y[ok & ~flagged],
        s=14,
        marker=marker,
        facecolors="none",
        edgecolors=colour,
        linewidths=0.8,
        label=c.short(name),
        gid=f"rows:{k}",
    )
    ax.scatter(
        x[ok & flagged],
        y[ok & flagged],
        s=22,
        marker=marker,
        color=colour,
        edgecolors="black",
        linewidths=0.6,
        gid=f"flagged:{k}",
    )
    ax.axhline(cut, color=colour, linestyle="--", linewidth=1.0, gid=f"cutoff:{k}")
    _, drop = dropped_rows(verdict)
    removed = ok & np.isin(np.array([str(v) for v in labels], dtype=object), list(drop)) if drop else None
    if removed is not None and removed.any():  # what the remedy would remove
        ax.scatter(
            x[removed],
            y[removed],
            s=80,
            marker="o",
            facecolors="none",
            edgecolors="black",
            linewidths=1.2,
            gid=f"remedy-rows:{k}",
        )
    chosen = np.flatnonzero(ok & flagged)
    chosen = chosen[np.argsort(-y[chosen], kind="stable")][:cap]
    return [(float(x[i]), float(y[i]), c.short(labels[i], 16), f"flag-label:{k}") for i in chosen]


def _unlabelled_note(ax: Axes, verdict: Any, n_labelled: int, cap: int) -> None:
    total = int(np.asarray(_arrays(verdict)["flagged"], dtype=bool).sum())
    if total > n_labelled:
        ax.annotate(
            f"labelled: the {cap} farthest flagged rows per class; {total - n_labelled} more flagged "
            "(verdict.outlier_rows() lists all)",
            (0.02, 0.98),
            xycoords="axes fraction",
            va="top",
            fontsize=7,
        )


def place_labels(ax: Axes, requests: list[_Label], gap: float = 9.0, layout: bool = True) -> None:
    """Annotate points with labels placed so that they do not overprint each other.

    Farthest points first, each label tries positions right then left of its point, at
    growing vertical offsets (in approximate points), and takes the first one whose box
    overlaps no label placed before; a leader line joins a label that moved away.
    """
    if not requests:
        return
    fig = ax.figure
    if not isinstance(fig, Figure):  # a SubFigure: size and layout belong to its top-level figure
        fig = fig.figure
    engine = fig.get_layout_engine() if hasattr(fig, "get_layout_engine") else None
    if layout and engine is not None:
        engine.execute(fig)  # final axes positions, so distances in points are right
    width, height = fig.get_size_inches() * 72.0
    box = ax.get_position()
    to_axes = ax.transScale + ax.transLimits
    anchors = to_axes.transform(np.array([[x, y] for x, y, _, _ in requests]))
    px, py = anchors[:, 0] * width * box.width, anchors[:, 1] * height * box.height
    placed: list[tuple[float, float, float, float]] = []
    offsets = [3.0 + gap * j * sign for j in range(8) for sign in ((1,) if j == 0 else (1, -1))]
    for i in np.argsort(-py, kind="stable"):
        x, y, label, gid = requests[i]
        w = 4.6 * len(label) + 2.0
        best = None
        for dy in offsets:
            for dx, ha in ((4.0, "left"), (-4.0, "right")):
                x0 = px[i] + dx if ha == "left" else px[i] + dx - w
                y0 = py[i] + dy
                if not any(x0 < bx1 and bx0 < x0 + w and y0 < by1 and by0 < y0 + gap for bx0, by0, bx1, by1 in placed):
                    best = (dx, dy, ha, x0, y0)
                    break
            if best is not None:
                break
        if best is None:
            best = (4.0, 3.0, "left", px[i] + 4.0, py[i] + 3.0)
        dx, dy, ha, x0, y0 = best
        placed.append((x0, y0, x0 + w, y0 + gap))
        arrow = {"arrowstyle": "-", "color": c.GREY, "linewidth": 0.5} if abs(dy) > 6.0 else None
        ax.annotate(
            label,
            (x, y),
            xytext=(dx, dy),
            textcoords="offset points",
            fontsize=7,
            ha=ha,
            va="bottom",
            arrowprops=arrow,
            gid=gid,
        )


def _finish_distance_axes(ax: Axes, log: bool, robust: bool) -> None:
    if log:
        ax.set_xscale("log")
        ax.set_yscale("log")
    lo = min(ax.get_xlim()[0], ax.get_ylim()[0])
    hi = max(ax.get_xlim()[1], ax.get_ylim()[1])
    ax.plot([lo, hi], [lo, hi], color=c.GREY, linestyle=":", linewidth=0.8, gid="diagonal")
    ax.set_xlabel("classical squared Mahalanobis distance")
    ax.set_ylabel(
        "robust squared distance (MCD)" if robust else "squared distance (classical: class too small for MCD)"
    )


def _log_for(verdict: Any, rows: np.ndarray) -> bool:
    a = _arrays(verdict)
    y = np.asarray(a["distance"], dtype=float)[rows]
    cut = float(np.nanmin(np.asarray(a["cutoff"], dtype=float)[rows])) if rows.size else 1.0
    return c.use_log(y, cut, LOG_FACTOR)


def _robust(verdict: Any, name: str) -> bool:
    return "MCD" in str(_per_class(verdict, name).get("method", "MCD"))


def draw(verdict: Any, ax: Axes) -> None:
    """Every class on one axes: robust vs classical distance, cut-offs, labelled flags."""
    groups = c.class_groups(verdict, _arrays(verdict)["class"])
    log = _log_for(verdict, np.arange(len(_arrays(verdict)["distance"])))
    requests = []
    for k, name, rows in groups:
        requests += _draw_class(ax, verdict, k, name, rows, COMBINED_LABEL_CAP, log)
    _finish_distance_axes(ax, log, all(_robust(verdict, name) for _, name, _ in groups))
    place_labels(ax, requests)
    _unlabelled_note(ax, verdict, len(requests), COMBINED_LABEL_CAP)
    handles, _ = ax.get_legend_handles_labels()
    handles += [
        Line2D([], [], color=c.GREY, linestyle="--", label="cut-off (per class)"),
        Line2D([], [], marker="o", color="black", linestyle="none", label="flagged (filled, labelled)"),
    ]
    rank, drop = dropped_rows(verdict)
    if drop:
        handles.append(
            Line2D(
                [],
                [],
                marker="o",
                markerfacecolor="none",
                markeredgecolor="black",
                linestyle="none",
                markersize=9,
                label=f"removed by remedy {rank}",
            )
        )
    ax.legend(handles=handles, fontsize=7, loc="lower right")
    c.status_title(ax, "Outliers: robust vs classical distance", verdict, KEY)


def draw_qq(verdict: Any, ax: Axes) -> None:
    """Chi-square Q-Q plot of the robust squared distances, one series per class.

    Classes whose robust fit was exact (rows on a hyperplane) are left out: their
    distances live in fewer dimensions than p.
    """
    a = _arrays(verdict)
    p = int(verdict.meta.get("n_features", 1))
    groups = c.class_groups(verdict, a["class"])
    distance = np.asarray(a["distance"], dtype=float)
    top = 0.0
    left_out = []
    for k, name, rows in groups:
        if _per_class(verdict, name).get("exact_fit"):
            left_out.append(name)
            continue
        d = np.sort(distance[rows][np.isfinite(distance[rows])])
        top = max(top, qq_scatter(ax, k, name, d, p, gid=f"qq:{k}"))
    cuts = sorted({float(v) for v in np.asarray(a["cutoff"], dtype=float) if v > 0})
    for cut in cuts:
        ax.axhline(cut, color=c.GREY, linestyle="--", linewidth=0.9, gid="qq-cutoff")
    if c.use_log(distance, min(cuts) if cuts else 1.0):
        ax.set_yscale("log")
    ax.plot([0, top], [0, top], color=c.GREY, linestyle=":", linewidth=0.8, gid="identity")
    ax.set_xlabel(f"chi-square({p}) quantile")
    ax.set_ylabel("robust squared distance, sorted")
    ax.legend(fontsize=7, loc="upper left")
    extra = f"; exact fits left out: {', '.join(c.short(n, 16) for n in left_out)}" if left_out else ""
    c.note(ax, f"dotted: y = x (Gaussian class); dashed: cut-off{extra}")
    c.status_title(ax, "Outliers: chi-square Q-Q of robust distances", verdict, KEY)


def qq_scatter(ax: Axes, k: int, name: str, d: np.ndarray, p: int, *, gid: str) -> float:
    """Sorted squared distances of class k against chi-square(p) quantiles; returns the top quantile."""
    q = qq_quantiles(d.size, p)
    ax.scatter(
        q,
        d,
        s=10,
        marker=c.class_marker(k),
        facecolors="none",
        edgecolors=c.class_color(k),
        linewidths=0.7,
        label=c.short(name),
        gid=gid,
    )
    return float(q.max()) if q.size else 0.0


def qq_quantiles(n: int, df: int) -> np.ndarray:
    """Chi-square(df) quantiles at the plotting positions (i - 0.5) / n, i = 1..n."""
    return np.asarray(sps.chi2.ppf((np.arange(1, n + 1) - QQ_OFFSET) / n, df), dtype=float)


def draw_figure(verdict: Any) -> Figure:
    """One panel per class (robust vs classical distance) and a Q-Q panel."""
    groups = c.class_groups(verdict, _arrays(verdict)["class"])
    if len(groups) > MAX_CLASS_PANELS:
        fig, axes = c.new_figure(2)
        draw(verdict, axes[0])
        draw_qq(verdict, axes[1])
        return fig
    fig, axes = c.new_figure(len(groups) + 1, ncols=3 if len(groups) >= 3 else 2)
    pending = []
    for ax, (k, name, rows) in zip(axes, groups, strict=False):
        log = _log_for(verdict, rows)
        requests = _draw_class(ax, verdict, k, name, rows, LABEL_CAP, log)
        _finish_distance_axes(ax, log, _robust(verdict, name))
        pending.append((ax, requests))
        n_flagged = int(np.asarray(_arrays(verdict)["flagged"], dtype=bool)[rows].sum())
        if n_flagged > len(requests):
            ax.annotate(
                f"labelled: the {LABEL_CAP} farthest; {n_flagged - len(requests)} more flagged",
                (0.02, 0.98),
                xycoords="axes fraction",
                va="top",
                fontsize=7,
            )
        info = _per_class(verdict, name)
        cut = float(np.asarray(_arrays(verdict)["cutoff"], dtype=float)[rows][0])
        c.note(
            ax,
            f"cut-off {fmt(cut)}: {info.get('cutoff_rule', '')}\n"
            f"{info.get('n_flagged', 0)} of {len(rows)} rows flagged (filled, labelled)",
            loc="lower right",
        )
        c.status_title(ax, f"Outliers in class {c.short(name, 20)}", verdict, KEY)
    draw_qq(verdict, axes[len(groups)])
    c.figure_title(fig, "Outliers: robust distances per class", verdict, KEY)
    engine = fig.get_layout_engine()
    if engine is not None:
        engine.execute(fig)  # once, so that label spacing uses the final panel sizes
    for ax, requests in pending:
        place_labels(ax, requests, layout=False)
    return fig
