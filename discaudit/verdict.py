"""The audit's result: a recommendation and the findings behind it."""

from __future__ import annotations

import json
from collections.abc import Callable, Mapping
from dataclasses import dataclass, field
from typing import TYPE_CHECKING, Any

from discaudit.findings import Finding
from discaudit.jsonable import plain

if TYPE_CHECKING:
    from discaudit.dataset import AuditData
    from discaudit.decision.remedies import Comparison, Remedy


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
    remedies : tuple of Remedy
        Suggested changes to the data, most helpful first, each with what to change (in the data's
        own names), the finding it addresses and its predicted effect (see
        :mod:`discaudit.decision.remedies`); empty when nothing warns or fails in a way a change
        of the data can answer.
    data : AuditData or None
        The validated data the verdict was computed from (moments, rows or a sample, a row pass),
        kept for :meth:`what_if`; not part of the JSON. It holds the rows the audit held (for an
        array given in memory, a read-only view of it), so a kept verdict keeps them alive.
    rerun : callable or None
        How :meth:`what_if` audits changed data: the audit's own settings and seed, bound by
        ``discaudit.audit`` (None for a verdict built without its data).
    """

    findings: Mapping[str, Finding]
    recommendation: Recommendation
    status: str
    meta: dict[str, Any]
    timings: dict[str, float] = field(default_factory=dict, compare=False)
    remedies: tuple[Remedy, ...] = ()
    data: AuditData | None = field(default=None, compare=False, repr=False)
    rerun: Callable[..., Verdict] | None = field(default=None, compare=False, repr=False)

    def what_if(
        self,
        drop_features: Any = None,
        drop_rows: Any = None,
        merge_classes: Any = None,
        standardize: Any = None,
        transform: Any = None,
    ) -> Verdict:
        """The verdict the data would get after a change, without re-reading the input where it can.

        The per-class moments are updated exactly (dropping features drops rows and columns of the
        moments; merging classes merges their moments; standardizing rescales them; dropping rows
        subtracts their contribution, found in one pass over the rows; a transform recomputes them
        in one pass), the rows held change with them, and every check runs again, with the same
        settings and seed. The result equals a fresh audit of the changed data on every
        moment-based figure, with the same statuses.

        Parameters
        ----------
        drop_features : str or list of str, optional
            Columns to remove.
        drop_rows : label or list of labels, optional
            Rows to remove, by the input's row labels.
        merge_classes : list of labels, list of lists, or dict, optional
            One group of classes to merge (``["PET", "PP"]``), several (``[["a", "b"], ["c", "d"]]``),
            or ``{"new label": ["a", "b"]}``; a merged class is labelled ``"a+b"`` unless named.
        standardize : True or list of str, optional
            Centre and scale every feature (True) or those named, as scikit-learn's StandardScaler.
        transform : list of str or dict, optional
            Yeo-Johnson transform of the features named (exponents estimated by maximum likelihood
            within classes, on the rows held), or ``{feature: exponent}``.

        Returns
        -------
        Verdict
            With ``meta["what_if"]`` listing what was changed (exponents, centres and scales).

        Raises
        ------
        DataError
            Naming the column, class or row that cannot be changed; also when the verdict does not
            hold its data (e.g. one rebuilt from JSON).
        """
        if self.rerun is None:
            from discaudit.errors import DataError

            raise DataError("This verdict does not hold its data; audit the data again to ask what if.")
        return self.rerun(
            drop_features=drop_features,
            drop_rows=drop_rows,
            merge_classes=merge_classes,
            standardize=standardize,
            transform=transform,
        )

    def compare(self, other: Verdict) -> Comparison:
        """What changed from this verdict to ``other``: gate status, check statuses, recommendation, key figures.

        Returns
        -------
        Comparison
            ``str()`` of it lists the changes one per line; ``to_dict()`` gives plain values.
        """
        from discaudit.decision.remedies import compare

        return compare(self, other)

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
            JSON details), with columns ``class``, ``distance`` (squared robust Mahalanobis),
            ``classical_distance``, ``cutoff`` and ``ratio`` (distance / cutoff), farthest first
            within each class. Empty when nothing was flagged or the check did not run.
        """
        import pandas as pd

        arrays = self.findings["outliers"].arrays if "outliers" in self.findings else {}
        columns = ["class", "distance", "classical_distance", "cutoff", "ratio"]
        if not arrays:
            return pd.DataFrame(columns=columns)
        mask = arrays["flagged"]
        frame = pd.DataFrame(
            {
                "class": arrays["class"][mask],
                "distance": arrays["distance"][mask],
                "classical_distance": arrays["classical_distance"][mask],
                "cutoff": arrays["cutoff"][mask],
            },
            index=arrays["row_label"][mask],
        )
        frame["ratio"] = frame["distance"] / frame["cutoff"]
        return frame.sort_values(["class", "distance"], ascending=[True, False], kind="stable")

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
