"""Covariance-homogeneity plot: each class's 95% covariance ellipse on the discriminant plane.

Reads ``plane_basis``, ``plane_axis_labels``, ``plane_means`` and ``plane_covariances`` from
the ``covariance_homogeneity`` finding's arrays (see :mod:`discaudit.stats.plane`) and, when
the ``outliers`` finding holds robust per-class fits (``arrays["fits"]``), projects their MCD
location and covariance on the same plane for a dashed robust ellipse. Equal covariances draw
ellipses of one shape and size; a class with a wider or tilted ellipse is the one that differs.
"""

from __future__ import annotations

import textwrap
from typing import Any

import numpy as np
from matplotlib.axes import Axes
from matplotlib.figure import Figure
from matplotlib.lines import Line2D
from matplotlib.patches import Ellipse
from scipy import stats as sps

from discaudit.findings import fmt, fmt_p
from discaudit.plot import _common as c

KEY = "covariance_homogeneity"
#: Coverage of each ellipse under a bivariate Gaussian.
COVERAGE = 0.95


def ellipse_geometry(covariance: np.ndarray, coverage: float = COVERAGE) -> tuple[float, float, float]:
    """Width, height and angle (degrees) of the ``coverage`` ellipse of a 2 x 2 covariance.

    The ellipse {z : z' C^-1 z <= q} with q the chi-square(2) ``coverage`` quantile
    (q = -2 ln(1 - coverage)) holds that share of a bivariate Gaussian; its semi-axes are
    sqrt(q * eigenvalue) along the eigenvectors of C.
    """
    values, vectors = np.linalg.eigh((covariance + covariance.T) / 2.0)
    q = float(sps.chi2.ppf(coverage, 2))
    values = np.clip(values, 0.0, None)
    width, height = 2.0 * np.sqrt(q * values[1]), 2.0 * np.sqrt(q * values[0])
    angle = float(np.degrees(np.arctan2(vectors[1, 1], vectors[0, 1])))
    return float(width), float(height), angle


def boundary_point(covariance: np.ndarray, t: float, coverage: float = COVERAGE) -> np.ndarray:
    """The point at parameter ``t`` (radians) on the ``coverage`` ellipse of a centred 2 x 2 covariance."""
    values, vectors = np.linalg.eigh((covariance + covariance.T) / 2.0)
    q = float(sps.chi2.ppf(coverage, 2))
    radii = np.sqrt(q * np.clip(values, 0.0, None))
    return np.asarray(vectors @ (radii * np.array([np.cos(t), np.sin(t)])), dtype=float)


def robust_projections(verdict: Any) -> dict[int, tuple[np.ndarray, np.ndarray]]:
    """Class position -> (centre (2,), covariance (2, 2)) of the robust MCD fits on the plane."""
    arrays = verdict.findings[KEY].arrays
    outliers = verdict.findings.get("outliers")
    fits = outliers.arrays.get("fits") if outliers is not None and outliers.status != "skip" else None
    basis = np.asarray(arrays["plane_basis"], dtype=float)
    out: dict[int, tuple[np.ndarray, np.ndarray]] = {}
    for fit in fits or ():
        if not getattr(fit, "robust", False):
            continue
        location = np.asarray(fit.location, dtype=float)
        covariance = np.asarray(fit.covariance, dtype=float)
        if location.shape != (basis.shape[0],) or not np.all(np.isfinite(covariance)):
            continue
        with np.errstate(all="ignore"):
            cov = basis.T @ covariance @ basis
        out[int(fit.code)] = (location @ basis, (cov + cov.T) / 2.0)
    return out


def draw(verdict: Any, ax: Axes, centred: bool = False) -> None:
    """Classical (solid) and robust (dashed) 95% ellipses of every class, with labelled centres.

    With ``centred=True`` every ellipse is drawn around the origin, so that shapes and sizes
    compare directly even when the classes lie far apart.
    """
    finding = verdict.findings[KEY]
    arrays = finding.arrays
    means = np.asarray(arrays["plane_means"], dtype=float)
    covs = np.asarray(arrays["plane_covariances"], dtype=float)
    classes = [str(x) for x in verdict.meta.get("classes", range(len(means)))]
    robust = robust_projections(verdict)
    if centred:
        means = np.zeros_like(means)
        robust = {k: (np.zeros(2), cov) for k, (_, cov) in robust.items()}
    for k, name in enumerate(classes):
        colour = c.class_color(k)
        if np.all(np.isfinite(covs[k])):
            w, h, angle = ellipse_geometry(covs[k])
            ax.add_patch(
                Ellipse(
                    means[k],
                    w,
                    h,
                    angle=angle,
                    fill=False,
                    edgecolor=colour,
                    linewidth=1.6,
                    linestyle="-",
                    gid=f"ellipse:classical:{k}",
                )
            )
        if k in robust:
            centre, cov = robust[k]
            w, h, angle = ellipse_geometry(cov)
            ax.add_patch(
                Ellipse(
                    (float(centre[0]), float(centre[1])),
                    w,
                    h,
                    angle=angle,
                    fill=False,
                    edgecolor=colour,
                    linewidth=1.2,
                    linestyle="--",
                    gid=f"ellipse:robust:{k}",
                )
            )
        ax.plot(
            *means[k],
            marker=c.class_marker(k),
            color=colour,
            markeredgecolor="black",
            markersize=7,
            linestyle="none",
            label=c.short(name),
            gid=f"centre:{k}",
        )
        if np.all(np.isfinite(covs[k])):
            # name each ellipse on its outline too, at a different angle per class
            t = 2.0 * np.pi * k / max(len(classes), 1) + np.pi / 4.0
            # the name sits just outside its ellipse, in the class colour, without a box over the data
            edge = boundary_point(covs[k], t)
            away = edge / (np.linalg.norm(edge) or 1.0)
            ax.annotate(
                c.short(name, 16),
                means[k] + edge,
                xytext=(6.0 * away[0], 6.0 * away[1]),
                textcoords="offset points",
                fontsize=7,
                color=colour,
                fontweight="bold",
                ha="left" if away[0] >= 0 else "right",
                va="bottom" if away[1] >= 0 else "top",
                gid=f"ellipse-label:{k}",
            )
    ax.autoscale_view()
    ax.set_aspect("equal", adjustable="datalim")
    labels = arrays.get("plane_axis_labels", ("axis 1", "axis 2"))
    ax.set_xlabel(labels[0], fontsize=8)
    ax.set_ylabel(_wrap(labels[1]), fontsize=8)
    handles, _ = ax.get_legend_handles_labels()
    handles += [Line2D([], [], color=c.GREY, linestyle="-", label=f"classical {COVERAGE:.0%} ellipse")]
    if robust:
        handles += [Line2D([], [], color=c.GREY, linestyle="--", label=f"robust (MCD) {COVERAGE:.0%} ellipse")]
    if centred:  # one legend, beside the second panel, never over an ellipse
        ax.legend(handles=handles, fontsize=7, loc="upper left", bbox_to_anchor=(1.01, 1.0), borderaxespad=0.0)
    details = finding.details
    lines = []
    if "bic" in details:
        lines.append(f"BIC(shared) - BIC(separate) = {fmt(details['bic'].get('delta_bic'))}")
    if "box_m" in details:
        lines.append(f"Box's M {fmt_p(details['box_m'].get('p_value'))}")
    if details.get("most_different_class") is not None:
        lines.append(f"most different: {c.short(details['most_different_class'], 20)}")
    if centred:
        c.status_title(ax, "The same ellipses, centred: compare shapes and sizes", verdict, KEY)
    else:
        heading = "Class covariances on the discriminant plane"
        c.status_title(ax, heading + ("\n" + "; ".join(lines) if lines else ""), verdict, KEY)


def _wrap(label: str, width: int = 48) -> str:
    return textwrap.fill(label, width)


def draw_figure(verdict: Any) -> Figure:
    """The ellipses where the classes lie, and the same ellipses centred at the origin."""
    fig, axes = c.new_figure(2, panel=(6.4, 5.6))
    draw(verdict, axes[0])
    draw(verdict, axes[1], centred=True)
    c.figure_title(fig, f"Covariance homogeneity: {COVERAGE:.0%} covariance ellipses", verdict, KEY)
    return fig
