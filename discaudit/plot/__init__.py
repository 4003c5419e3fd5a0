"""Diagnostic plots of a verdict, drawn with matplotlib (``pip install 'discaudit[plot]'``).

:func:`plot_verdict` draws one check (``check="outliers"``, ...) or, by default, a one-page
overview of the checks that warn or fail. Everything drawn comes from the verdict's findings
(their ``details`` and per-row ``arrays``); nothing is recomputed from the data.

Plots and what they show:

``outliers``
    Per class, the squared robust (MCD) distance of every row against its classical
    distance, the class's cut-off as a horizontal line and the flagged rows labelled with
    their index labels (at most :data:`discaudit.plot.outliers.LABEL_CAP` per class,
    farthest first); and a chi-square Q-Q plot of the robust distances.
``covariance_homogeneity``
    Each class's 95% covariance ellipse (solid) and its robust MCD ellipse (dashed) on the
    first two discriminant directions (see :mod:`discaudit.stats.plane`).
``collinearity``
    VIF per feature on a log axis with the warn and fail thresholds, and the near
    dependencies of the condition-index analysis.
``scale_disparity``
    Pooled within-class standard deviation per feature on a log axis.
``normality``
    Per class, a Q-Q plot of the classical squared Mahalanobis distances against
    chi-square(p).

Colours follow the Okabe-Ito palette, readable with the common colour-vision deficiencies;
status is always written out (``"✗ FAIL"``) and classes differ by marker as well as colour.
Figures are :class:`matplotlib.figure.Figure` objects not registered with pyplot: a notebook
shows the returned figure, a script saves it with ``fig.savefig(...)``.

This package imports matplotlib only when a plot is drawn; :mod:`discaudit.stats.plane`
(numbers only) is used by the checks while the audit runs.
"""

from __future__ import annotations

from typing import TYPE_CHECKING

if TYPE_CHECKING:  # pragma: no cover
    from matplotlib.axes import Axes
    from matplotlib.figure import Figure

    from discaudit.verdict import Verdict


from discaudit.plot.registry import PLOTTED_CHECKS, plot_module

__all__ = ["PLOTTED_CHECKS", "plot_verdict", "plottable", "require_matplotlib"]

_INSTALL_HINT = (
    "discaudit's plots need matplotlib, which is not installed; install it with "
    "pip install 'discaudit[plot]' (or pip install matplotlib)."
)


def require_matplotlib() -> None:
    """Raise ImportError with an install hint when matplotlib is missing."""
    try:
        import matplotlib
        import matplotlib.figure  # noqa: F401
    except ImportError as exc:
        raise ImportError(_INSTALL_HINT) from exc


def plottable(verdict: Verdict) -> list[str]:
    """Checks of this verdict that have a plot with something to draw, in display order.

    A check is left out when it was skipped or when the numbers its plot needs are not
    in the findings (e.g. no discriminant plane for a single feature). Needs no matplotlib.
    """
    from discaudit.plot import _available

    return [key for key in PLOTTED_CHECKS if _available.available(verdict, key)]


def plot_verdict(verdict: Verdict, check: str | None = None, ax: Axes | None = None) -> Figure:
    """Draw one check of a verdict, or an overview of the checks that warn or fail.

    Parameters
    ----------
    verdict : Verdict
        The result of :func:`discaudit.preflight`.
    check : str, optional
        One of :data:`PLOTTED_CHECKS`. None draws the overview: one panel per plotted
        check that warns or fails, and a text panel for other checks that warn or fail.
    ax : matplotlib Axes, optional
        Draw the check's main panel on this axes (all classes together) instead of a
        new figure; not allowed for the overview, which needs several panels.

    Returns
    -------
    matplotlib.figure.Figure
        The new figure, or ``ax.figure`` when ``ax`` was given.

    Raises
    ------
    ImportError
        When matplotlib is not installed (``pip install 'discaudit[plot]'``).
    ValueError
        For a check without a plot, or ``ax`` given with ``check=None``.

    See Also
    --------
    discaudit.verdict.Verdict.to_html : a self-contained report with these plots embedded.

    Examples
    --------
    >>> fig = verdict.plot("outliers")  # doctest: +SKIP
    >>> fig.savefig("outliers.png")  # doctest: +SKIP
    """
    if check is not None and check not in PLOTTED_CHECKS:
        raise ValueError(f"No plot for check {check!r}; plots exist for: {', '.join(PLOTTED_CHECKS)}.")
    if check is None and ax is not None:
        raise ValueError(
            "The overview (check=None) draws several panels and cannot use one axes; pass check=... with ax."
        )
    require_matplotlib()
    from discaudit.plot import _common

    if check is None:
        from discaudit.plot.overview import draw_overview

        return draw_overview(verdict)
    module = plot_module(check)
    from discaudit.plot import _available

    if ax is not None:
        if _available.available(verdict, check):
            module.draw(verdict, ax)
        else:
            _common.message(ax, _available.why_not(verdict, check), title=check)
        return ax.figure  # type: ignore[return-value]
    if not _available.available(verdict, check):
        fig, axes = _common.new_figure(1)
        _common.message(axes[0], _available.why_not(verdict, check), title=check)
        return fig
    return module.draw_figure(verdict)  # type: ignore[no-any-return]
