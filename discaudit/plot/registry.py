"""Which checks have a plot, and the module that draws each (imported only when a plot is drawn).

To give a check a plot: write ``discaudit/plot/<name>.py`` with ``draw(verdict, ax)`` and
``draw_figure(verdict)``, state what it needs in ``_available``, and add one line to :data:`PLOTS`.
"""

from __future__ import annotations

import importlib
from types import ModuleType

#: Check key -> module that draws it, in the order the overview and the HTML report show them.
PLOTS = {
    "scale_disparity": "discaudit.plot.scale",
    "collinearity": "discaudit.plot.collinearity",
    "outliers": "discaudit.plot.outliers",
    "normality": "discaudit.plot.normality",
    "covariance_homogeneity": "discaudit.plot.covariance",
    "expected_performance": "discaudit.plot.performance",
}

#: Checks that have a plot, in display order.
PLOTTED_CHECKS = tuple(PLOTS)


def plot_module(check: str) -> ModuleType:
    """The module that draws ``check`` (imports matplotlib)."""
    return importlib.import_module(PLOTS[check])
