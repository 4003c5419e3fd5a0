"""The audit's result: a recommendation and the findings behind it."""

from __future__ import annotations

import json
from collections.abc import Mapping
from dataclasses import dataclass, field
from typing import Any

from discaudit.findings import Finding
from discaudit.jsonable import plain


@dataclass(frozen=True)
class Recommendation:
    """Which classifier to fit and how.

    Attributes
    ----------
    model : str
        ``"lda"``, ``"regularized_lda"``, ``"qda"`` or ``"logistic_regression"``.
    params : dict
        Suggested settings (e.g. ``{"shrinkage": 0.31, "solver": "lsqr"}``).
    reasons : list of str
        Plain-language sentences, each tied to a finding.
    alternatives : list of dict
        The other models, best first, each ``{"model": ..., "reason": ...}``.
    rules_fired : list of str
        How the choice was made: ``["predicted_performance"]``, or the assumption rules that fired.
    close_to : list of str
        Other models whose predicted accuracy is within noise of the recommended one (empty when
        the choice is clear).
    param_notes : dict
        Why each setting in ``params`` has its value.
    """

    model: str
    params: dict[str, Any]
    reasons: list[str]
    alternatives: list[dict[str, str]]
    rules_fired: list[str] = field(default_factory=list)
    close_to: list[str] = field(default_factory=list)
    param_notes: dict[str, str] = field(default_factory=dict)

    def estimator(self) -> Any:
        """An unfitted scikit-learn estimator configured as recommended.

        A Pipeline with a StandardScaler when the settings advise standardizing. Needs
        scikit-learn (``pip install discaudit[sklearn]``); raises ImportError saying so
        otherwise. Nothing is fitted.
        """
        from discaudit.estimator import build_estimator

        return build_estimator(self.model, self.params)

    def to_dict(self) -> dict[str, Any]:
        out: dict[str, Any] = plain(  # plain() maps a dict to a dict
            {
                "model": self.model,
                "params": self.params,
                "reasons": self.reasons,
                "alternatives": self.alternatives,
                "rules_fired": self.rules_fired,
                "close_to": self.close_to,
                "param_notes": self.param_notes,
            }
        )
        return out


@dataclass(frozen=True)
class Verdict:
    """Result of :func:`discaudit.preflight`.

    Attributes
    ----------
    findings : mapping
        Check key -> :class:`~discaudit.findings.Finding`, in table order.
    recommendation : Recommendation
    status : str
        Worst status over the findings that gate (``"pass"``, ``"warn"`` or ``"fail"``);
        checks set to ``advisory`` in ``Config.severity`` are shown but do not count.
    meta : dict
        Data shape, classes, seed, configuration and version.
    timings : dict
        Seconds spent in each check (not part of the JSON, which stays reproducible).
    """

    findings: Mapping[str, Finding]
    recommendation: Recommendation
    status: str
    meta: dict[str, Any]
    timings: dict[str, float] = field(default_factory=dict, compare=False)

    def to_dict(self) -> dict[str, Any]:
        """Plain JSON-able content (no numpy types, no NaN or infinity)."""
        from discaudit.report.json import verdict_to_dict

        return verdict_to_dict(self)

    def outlier_rows(self) -> Any:
        """Rows flagged by the ``outliers`` check, ready to inspect or drop.

        Returns
        -------
        pandas.DataFrame
            Indexed by the input's row labels (all flagged rows, not only those listed in the
            JSON details), farthest first within each class, with columns

            ``class``
                the row's class label;
            ``squared_distance``
                squared robust Mahalanobis distance from the class's robust (MCD) centre and
                covariance (classical for a class too small for a robust fit), on the features
                that class's fit used;
            ``classical_squared_distance``
                the same from the class's classical mean and covariance;
            ``cutoff``
                the class's Gaussian cut-off for ``squared_distance``;
            ``far_out_fence``
                the class's far-out fence (a row is flagged beyond both);
            ``ratio``
                ``squared_distance / cutoff``.

            Empty when nothing was flagged or the check did not run.
        """
        import pandas as pd

        arrays = self.findings["outliers"].arrays if "outliers" in self.findings else {}
        columns = ["class", "squared_distance", "classical_squared_distance", "cutoff", "far_out_fence", "ratio"]
        if not arrays:
            return pd.DataFrame(columns=columns)
        mask = arrays["flagged"]
        frame = pd.DataFrame(
            {
                "class": arrays["class"][mask],
                "squared_distance": arrays["squared_distance"][mask],
                "classical_squared_distance": arrays["classical_squared_distance"][mask],
                "cutoff": arrays["cutoff"][mask],
                "far_out_fence": arrays["fence"][mask],
            },
            index=arrays["row_label"][mask],
        )
        frame["ratio"] = frame["squared_distance"] / frame["cutoff"]
        order = sorted(range(len(frame)), key=lambda i: (str(frame["class"].iloc[i]), -frame["ratio"].iloc[i]))
        return frame.iloc[order]

    def to_json(self, indent: int | None = 2) -> str:
        """The verdict as JSON text (see ``discaudit.report.json`` for the schema)."""
        return json.dumps(self.to_dict(), indent=indent, allow_nan=False)

    def __str__(self) -> str:
        from discaudit.report.text import render

        return render(self)

    def _repr_html_(self) -> str:
        """The verdict table as HTML, for notebooks (see ``discaudit.report.html_table``)."""
        from discaudit.report.html_table import render

        return render(self)

    def to_frame(self) -> Any:
        """One row per check: ``check``, ``status``, ``figure``, ``summary``, ``severity``.

        Returns
        -------
        pandas.DataFrame
            In table order, with a default integer index.
        """
        import pandas as pd

        from discaudit.report.table import build

        rows = [(r.check, r.status, r.figure, r.summary, r.severity) for r in build(self).rows]
        return pd.DataFrame(rows, columns=["check", "status", "figure", "summary", "severity"])

    def plot(self, check: str | None = None, ax: Any = None) -> Any:
        """Diagnostic plot of one check, or an overview of the checks that warn or fail.

        Thin wrapper of :func:`discaudit.plot.plot_verdict` (see there for each plot).
        Needs matplotlib (``pip install 'discaudit[plot]'``); raises ImportError saying so
        otherwise.

        Parameters
        ----------
        check : str, optional
            ``"outliers"``, ``"covariance_homogeneity"``, ``"collinearity"``,
            ``"scale_disparity"`` or ``"normality"``; None for the overview.
        ax : matplotlib Axes, optional
            Draw the check's main panel on this axes.

        Returns
        -------
        matplotlib.figure.Figure
        """
        from discaudit.plot import plot_verdict

        return plot_verdict(self, check=check, ax=ax)

    def to_html(self) -> str:
        """A self-contained HTML report: table, findings, figures, settings, data fingerprint.

        See :mod:`discaudit.report.html`. Figures need matplotlib; without it the report
        is written without them and says so.
        """
        from discaudit.report.html import render

        return render(self)

    def to_markdown(self) -> str:
        """The verdict as Markdown for a pull-request comment (see ``discaudit.report.markdown``)."""
        from discaudit.report.markdown import render

        return render(self)

    def to_junit(self, fail_on: str = "fail") -> str:
        """The verdict as JUnit XML, one test case per check (see ``discaudit.report.junit``).

        Parameters
        ----------
        fail_on : {"fail", "warn"}, default "fail"
            Lowest status reported as a ``<failure>``; ``warn`` findings pass otherwise.
        """
        from discaudit.report.junit import render

        return render(self, fail_on=fail_on)
