"""Outlier plots: robust against classical squared distance per class, and a chi-square Q-Q plot.

Reads the per-row arrays of the ``outliers`` finding: ``squared_distance`` (squared robust
Mahalanobis distance from the class's MCD estimate, or classical for classes too small for a
robust fit), ``classical_squared_distance``, ``flagged``, ``row_label`` and ``code`` (the row's
class, a position in ``classes``); per class, ``class_cutoff`` and ``class_fence`` (the Gaussian
cut-off and far-out fence) and ``class_df`` (the number of features its distances use); and the
``method`` and ``usable`` facts of the details.

Layout rules: every class panel uses the same axis scale (so spreads compare across classes);
legends sit outside the axes, below the figure; the numbers that used to sit in boxes inside the
axes are in each panel's title; flagged rows are labelled with a repelling placement so that no
two labels overprint.
"""

from __future__ import annotations

from typing import Any

import numpy as np
from matplotlib.artist import Artist
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


#: Figures the outlier arrays hold once per class (``class_cutoff`` ...), indexed by each row's ``code``.
_PER_CLASS = ("cutoff", "fence", "df")


def _column(verdict: Any, key: str) -> np.ndarray:
    """A per-row figure of the outlier arrays; a per-class one is spread over the rows by their code."""
    a = _arrays(verdict)
    if key in _PER_CLASS:
        return np.asarray(a[f"class_{key}"], dtype=float)[np.asarray(a["code"], dtype=np.intp)]
    return np.asarray(a[key], dtype=float)


def _groups(verdict: Any) -> list[tuple[int, str, np.ndarray]]:
    a = _arrays(verdict)
    return c.code_groups(verdict, a["code"], a["classes"])


def _robust(verdict: Any, name: str) -> bool:
    return "MCD" in str(_per_class(verdict, name).get("method", "MCD"))


def _has_distances(verdict: Any, name: str) -> bool:
    info = _per_class(verdict, name)
    return bool(info.get("features_used")) and not info.get("exact_fit") and info.get("cutoff") is not None


def _limits(verdict: Any, rows: np.ndarray, log: bool) -> tuple[tuple[float, float], tuple[float, float]]:
    """x and y limits that hold every given row, the cut-offs and the fences."""
    x = _column(verdict, "classical_squared_distance")[rows]
    y = _column(verdict, "squared_distance")[rows]
    lines = np.concatenate([_column(verdict, "cutoff")[rows], _column(verdict, "fence")[rows]])
    xs = x[np.isfinite(x)]
    ys = np.concatenate([y[np.isfinite(y)], lines[np.isfinite(lines)]])
    if log:
        xs, ys = np.clip(xs, _FLOOR, None), np.clip(ys, _FLOOR, None)
        lo = float(min(xs.min(initial=1.0), ys.min(initial=1.0))) / 1.5
        return (lo, float(xs.max(initial=1.0)) * 2.0), (lo, float(ys.max(initial=1.0)) * 3.0)  # room for labels
    return (0.0, float(xs.max(initial=1.0)) * 1.08), (0.0, float(ys.max(initial=1.0)) * 1.15)


def _draw_class(ax: Axes, verdict: Any, k: int, name: str, rows: np.ndarray, cap: int, log: bool) -> list[_Label]:
    """Scatter, cut-off and fence of one class on ``ax``; returns the labels to place.

    Each label is ``(x, y, text, gid)`` for one of the ``cap`` farthest flagged rows.
    """
    a = _arrays(verdict)
    x = _column(verdict, "classical_squared_distance")[rows]
    y = _column(verdict, "squared_distance")[rows]
    flagged = np.asarray(a["flagged"], dtype=bool)[rows]
    labels = np.asarray(a["row_label"], dtype=object)[rows]
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
        x[ok & flagged], y[ok & flagged], s=22, marker=marker, color=colour, edgecolors="black", linewidths=0.6,
        gid=f"flagged:{k}",
    )  # fmt: skip
    if rows.size and _has_distances(verdict, name):
        ax.axhline(float(_column(verdict, "cutoff")[rows][0]), color=colour, linestyle="--", linewidth=1.0,
                   gid=f"cutoff:{k}")  # fmt: skip
        fence = float(_column(verdict, "fence")[rows][0])
        if np.isfinite(fence):
            ax.axhline(fence, color=colour, linestyle="-.", linewidth=1.0, gid=f"fence:{k}")
    _, drop = dropped_rows(verdict)
    removed = ok & np.isin(np.array([str(v) for v in labels], dtype=object), list(drop)) if drop else None
    if removed is not None and removed.any():  # what the remedy would remove
        ax.scatter(x[removed], y[removed], s=80, marker="o", facecolors="none", edgecolors="black", linewidths=1.2,
                   gid=f"remedy-rows:{k}")  # fmt: skip
    chosen = np.flatnonzero(ok & flagged)
    chosen = chosen[np.argsort(-y[chosen], kind="stable")][:cap]
    return [(float(x[i]), float(y[i]), c.short(labels[i], 16), f"flag-label:{k}") for i in chosen]


def place_labels(ax: Axes, requests: list[_Label], gap: float = 9.0, layout: bool = True) -> None:
    """Annotate points with labels placed so that they do not overprint each other.

    Farthest points first, each label tries positions right then left of its point, at
    growing vertical offsets (in approximate points), and takes the first one whose box
    overlaps no label placed before; a leader line joins a label that moved away. A label
    that finds no free place within 24 offsets is left out rather than drawn over another.
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
    offsets = [3.0 + gap * j * sign for j in range(12) for sign in ((1,) if j == 0 else (1, -1))]
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
            continue
        dx, dy, ha, x0, y0 = best
        placed.append((x0, y0, x0 + w, y0 + gap))
        arrow = {"arrowstyle": "-", "color": c.GREY, "linewidth": 0.5} if abs(dy) > 6.0 else None
        ax.annotate(
            label, (x, y), xytext=(dx, dy), textcoords="offset points", fontsize=7, ha=ha, va="bottom",
            arrowprops=arrow, gid=gid, annotation_clip=False,
        )  # fmt: skip


def _finish_distance_axes(ax: Axes, log: bool, robust: bool) -> None:
    if log:
        ax.set_xscale("log")
        ax.set_yscale("log")
    lo = min(ax.get_xlim()[0], ax.get_ylim()[0])
    hi = max(ax.get_xlim()[1], ax.get_ylim()[1])
    ax.plot([lo, hi], [lo, hi], color=c.GREY, linestyle=":", linewidth=0.8, gid="diagonal", scalex=False, scaley=False)
    ax.set_xlabel("classical squared Mahalanobis distance", fontsize=8)
    ax.set_ylabel(
        "robust squared distance (MCD)" if robust else "squared distance (classical: class too small for MCD)",
        fontsize=8,
    )


def _log_for(verdict: Any, rows: np.ndarray) -> bool:
    y = _column(verdict, "squared_distance")[rows]
    cuts = _column(verdict, "cutoff")[rows]
    cuts = cuts[np.isfinite(cuts)]
    return c.use_log(y, float(cuts.min()) if cuts.size else 1.0, LOG_FACTOR)


def _legend_handles(robust_any: bool, verdict: Any = None) -> list[Artist]:
    rank, drop = dropped_rows(verdict) if verdict is not None else (0, set())
    extra: list[Artist] = [
        Line2D([], [], marker="o", markerfacecolor="none", markeredgecolor="black", linestyle="none", markersize=9,
               label=f"removed by remedy {rank}")
    ] if drop else []  # fmt: skip
    return extra + [
        Line2D([], [], color=c.GREY, linestyle="--", label="Gaussian cut-off (per class)"),
        Line2D([], [], color=c.GREY, linestyle="-.", label="far-out fence (per class)"),
        Line2D([], [], marker="o", color="black", linestyle="none", label="flagged: beyond both (filled, labelled)"),
        Line2D([], [], color=c.GREY, linestyle=":", label="y = x"),
    ]


def draw(verdict: Any, ax: Axes, legend: bool = True) -> None:
    """Every class on one axes: robust vs classical distance, cut-offs, fences, labelled flags.

    ``legend=False`` leaves the legend to the caller (one legend under a whole figure).
    """
    groups = _groups(verdict)
    every = np.arange(len(_arrays(verdict)["squared_distance"]))
    log = _log_for(verdict, every)
    requests = []
    for k, name, rows in groups:
        requests += _draw_class(ax, verdict, k, name, rows, COMBINED_LABEL_CAP, log)
    xlim, ylim = _limits(verdict, every, log)
    ax.set_xlim(*xlim)
    ax.set_ylim(*ylim)
    _finish_distance_axes(ax, log, all(_robust(verdict, name) for _, name, _ in groups))
    if legend:
        handles, _ = ax.get_legend_handles_labels()
        ax.legend(handles=handles + _legend_handles(True, verdict), fontsize=7, loc="upper left",
                  bbox_to_anchor=(1.01, 1.0), borderaxespad=0.0)  # fmt: skip
    total = int(np.asarray(_arrays(verdict)["flagged"], dtype=bool).sum())
    shown = f"; {COMBINED_LABEL_CAP} farthest per class labelled" if total > len(requests) else ""
    kind = "robust" if any(_robust(verdict, name) for _, name, _ in groups) else "classical"
    c.status_title(ax, f"Outliers: {kind} vs classical distance\n{total} flagged{shown}", verdict, KEY)
    place_labels(ax, requests)  # last: the layout that spaces the labels is the final one


def draw_qq(
    verdict: Any, ax: Axes, ylim: tuple[float, float] | None = None, log: bool | None = None, legend: bool = True
) -> None:
    """Chi-square Q-Q plot of the robust squared distances, one series per class (its own df).

    Classes without usable distances (an exact fit, or no continuous feature) are left out.
    """
    groups = _groups(verdict)
    distance = _column(verdict, "squared_distance")
    df = _column(verdict, "df").astype(int)
    top = 0.0
    left_out = []
    for k, name, rows in groups:
        if not _has_distances(verdict, name) or rows.size == 0:
            left_out.append(name)
            continue
        d = np.sort(distance[rows][np.isfinite(distance[rows])])
        top = max(top, qq_scatter(ax, k, name, d, int(df[rows][0]), gid=f"qq:{k}"))
    cuts = sorted({float(v) for v in _column(verdict, "cutoff") if np.isfinite(v) and v > 0})
    for cut in cuts:
        ax.axhline(cut, color=c.GREY, linestyle="--", linewidth=0.9, gid="qq-cutoff")
    if log if log is not None else c.use_log(distance, min(cuts) if cuts else 1.0):
        ax.set_yscale("log")
    if ylim is not None:
        ax.set_ylim(*ylim)
    line = np.linspace(0.0, top, 200)[1:]  # many points: the line stays straight on a log axis
    ax.plot(line, line, color=c.GREY, linestyle=":", linewidth=0.8, gid="identity", scaley=False)
    dfs = sorted({int(df[rows][0]) for _, name, rows in groups if rows.size and name not in left_out})
    which = f"df {dfs[0]}" if len(dfs) == 1 else "each class at its own df: the features its distances use"
    ax.set_xlabel(f"chi-square quantile ({which})", fontsize=8)
    ax.set_ylabel("squared distance, sorted", fontsize=8)
    if legend:
        ax.legend(fontsize=7, loc="upper left", bbox_to_anchor=(1.01, 1.0), borderaxespad=0.0)
    extra = f"\nleft out (no distances): {', '.join(c.short(n, 16) for n in left_out)}" if left_out else ""
    kind = "robust " if any(_robust(verdict, name) for _, name, _ in groups) else ""
    c.status_title(ax, f"Outliers: chi-square Q-Q of the {kind}squared distances{extra}", verdict, KEY)


def qq_scatter(ax: Axes, k: int, name: str, d: np.ndarray, p: int, *, gid: str) -> float:
    """Sorted squared distances of class k against chi-square(p) quantiles; returns the top quantile."""
    q = qq_quantiles(d.size, p)
    ax.scatter(
        q, d, s=10, marker=c.class_marker(k), facecolors="none", edgecolors=c.class_color(k), linewidths=0.7,
        label=c.short(name), gid=gid,
    )  # fmt: skip
    return float(q.max()) if q.size else 0.0


def qq_quantiles(n: int, df: int) -> np.ndarray:
    """Chi-square(df) quantiles at the plotting positions (i - 0.5) / n, i = 1..n."""
    return np.asarray(sps.chi2.ppf((np.arange(1, n + 1) - QQ_OFFSET) / n, df), dtype=float)


def _panel_title(verdict: Any, name: str, rows: np.ndarray, n_labelled: int) -> str:
    info = _per_class(verdict, name)
    n_flagged = int(np.asarray(_arrays(verdict)["flagged"], dtype=bool)[rows].sum())
    if info.get("exact_fit"):
        second = "exact fit: no distances, nothing flagged"
    elif not info.get("features_used"):
        second = "no continuous feature: nothing flagged"
    else:
        second = (
            f"{n_flagged} of {info.get('n', rows.size)} flagged; cut-off {fmt(info.get('cutoff'))}, "
            f"fence {fmt(info.get('far_out_fence'))}"
        )
        if n_flagged > n_labelled:
            second += f"; {n_labelled} farthest labelled"
    return f"Outliers in class {c.short(name, 20)}\n{second}"


def draw_figure(verdict: Any) -> Figure:
    """One panel per class (robust vs classical distance, one scale for all) and a Q-Q panel."""
    groups = _groups(verdict)
    if len(groups) > MAX_CLASS_PANELS:
        fig, axes = c.new_figure(2)
        draw_qq(verdict, axes[1], legend=False)
        handles, _ = axes[1].get_legend_handles_labels()
        handles += _legend_handles(True, verdict)
        fig.legend(handles=handles, loc="outside lower center", ncols=min(len(handles), 7), fontsize=7, frameon=False)
        draw(verdict, axes[0], legend=False)  # last, so its labels are spaced in the final layout
        fig.set_layout_engine("none")
        return fig
    fig, axes = c.new_figure(len(groups) + 1, ncols=3 if len(groups) >= 3 else 2)
    every = np.arange(len(_arrays(verdict)["squared_distance"]))
    log = _log_for(verdict, every)
    xlim, ylim = _limits(verdict, every, log)
    pending = []
    for ax, (k, name, rows) in zip(axes, groups, strict=False):
        requests = _draw_class(ax, verdict, k, name, rows, LABEL_CAP, log)
        ax.set_xlim(*xlim)
        ax.set_ylim(*ylim)
        _finish_distance_axes(ax, log, _robust(verdict, name))
        pending.append((ax, requests))
        c.status_title(ax, _panel_title(verdict, name, rows, len(requests)), verdict, KEY)
    draw_qq(verdict, axes[len(groups)], ylim=ylim, log=log)
    handles = _legend_handles(True, verdict)
    fig.legend(handles=handles, loc="outside lower center", ncols=len(handles), fontsize=8, frameon=False)
    kind = "robust " if any(_robust(verdict, name) for _, name, _ in groups) else "classical "
    c.figure_title(fig, f"Outliers: {kind}squared distances per class (same scale in every panel)", verdict, KEY)
    engine = fig.get_layout_engine()
    if engine is not None:
        engine.execute(fig)  # once, so that label spacing uses the final panel sizes
    for ax, requests in pending:
        place_labels(ax, requests, layout=False)
    fig.set_layout_engine("none")  # keep the panels where the labels were placed apart
    return fig
