"""The audit's result: a recommendation and the findings behind it."""

from __future__ import annotations

import dataclasses
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
class Gate:
    """What the gate decided, for the model it judged (built by :func:`discaudit.decision.gate.judge`).

    Attributes
    ----------
    model : str or None
        The model the gate judged (``Config.model``); None: any candidate.
    fail_on : str
        ``"fail"`` or ``"warn"``: the lowest status of a check that matters that fails it.
    passed : bool
        The data are fit for the model (or for some candidate) and, when a baseline was
        compared, the batch has not drifted from it in a way that matters.
    failing_checks : list of str
        The checks whose findings fail the data gate, in table order (empty when it passes).
    rule : str
        The gate's rule in one line ("gated for QDA: fails on ...").
    outcome : str
        The result in words: "The data are fit for QDA." or "The data are not fit for LDA: ...".
    headline : str
        The result without its reasons, for a one-line summary ("the data are not fit for LDA").
    reasons : list of str
        One clause per failure (empty when the data gate passes).
    fit_for : list of str
        The candidates whose own gate passes (for a gate with a model: that model, or none).
    drifted : bool or None
        Whether the comparison with a baseline found drift that matters; None when none was made.
    """

    model: str | None
    fail_on: str
    passed: bool
    failing_checks: list[str]
    rule: str
    outcome: str
    headline: str = ""
    reasons: list[str] = field(default_factory=list)
    fit_for: list[str] = field(default_factory=list)
    drifted: bool | None = None

    @property
    def data_passed(self) -> bool:
        """The data gate alone (without the comparison with a baseline)."""
        return not self.reasons

    def with_drift(self, drifted: bool) -> Gate:
        """The same gate after a comparison with a baseline."""
        return dataclasses.replace(self, passed=self.data_passed and not drifted, drifted=drifted)

    def to_dict(self) -> dict[str, Any]:
        out: dict[str, Any] = plain(
            {
                "model": self.model,
                "fail_on": self.fail_on,
                "passed": self.passed,
                "data_passed": self.data_passed,
                "failing_checks": self.failing_checks,
                "rule": self.rule,
                "outcome": self.outcome,
                "headline": self.headline,
                "reasons": self.reasons,
                "fit_for": self.fit_for,
                "drifted": self.drifted,
            }
        )
        return out


@dataclass(frozen=True)
class Drift:
    """One difference between a batch and its accepted baseline.

    Attributes
    ----------
    kind : str
        ``"features"``, ``"recommendation"``, ``"check"``, ``"class"``, ``"prior"``, ``"mean"``
        or ``"covariance"``.
    subject : str
        What moved: a check key, a class label, or ``"recommendation"``.
    counts : bool
        Whether it fails the comparison (False: a difference within noise or that does not matter).
    figure : str
        The key figure, short enough for a table cell.
    summary : str
        One sentence.
    """

    kind: str
    subject: str
    counts: bool
    figure: str
    summary: str

    def to_dict(self) -> dict[str, Any]:
        return {
            "kind": self.kind,
            "subject": self.subject,
            "counts": self.counts,
            "figure": self.figure,
            "summary": self.summary,
        }


@dataclass(frozen=True)
class BaselineComparison:
    """A batch compared with the JSON report of an accepted run (:mod:`discaudit.decision.baseline`).

    Attributes
    ----------
    source : str
        Where the accepted report came from (its file name).
    accepted : dict
        What the accepted report says about itself: version, rows, classes, recommendation, fingerprint.
    drifted : bool
        Whether any difference counts.
    changes : list of Drift
        Every difference found, those that count first.
    classes : list of dict
        Per class: rows and shares then and now, and the two-sample tests of its mean and covariance.
    rule : str
        The comparison's rule in one line.
    outcome : str
        The result in words.
    headline : str
        The result without its reasons, for a one-line summary.
    thresholds : dict
        The settings the comparison applied.
    """

    source: str
    accepted: dict[str, Any]
    drifted: bool
    changes: list[Drift]
    classes: list[dict[str, Any]]
    rule: str
    outcome: str
    thresholds: dict[str, Any]
    headline: str = ""

    def to_dict(self) -> dict[str, Any]:
        out: dict[str, Any] = plain(
            {
                "source": self.source,
                "accepted": self.accepted,
                "drifted": self.drifted,
                "changes": [c.to_dict() for c in self.changes],
                "classes": self.classes,
                "rule": self.rule,
                "outcome": self.outcome,
                "headline": self.headline,
                "thresholds": self.thresholds,
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
    gate : Gate or None
        The gate for ``Config.model`` at ``Config.fail_on`` (``discaudit check`` exits 1 when it
        does not pass). ``status`` keeps its meaning beside it: the worst status over every
        gating check, whatever the model.
    baseline : BaselineComparison or None
        The comparison with an accepted baseline, when one was made (``discaudit check
        --baseline FILE`` or :func:`discaudit.decision.baseline.compare`).
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
    gate: Gate | None = None
    baseline: BaselineComparison | None = None
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
        code = arrays["code"][mask]
        frame = pd.DataFrame(
            {
                "class": arrays["classes"][code],
                "squared_distance": arrays["squared_distance"][mask],
                "classical_squared_distance": arrays["classical_squared_distance"][mask],
                "cutoff": arrays["class_cutoff"][code],
                "far_out_fence": arrays["class_fence"][code],
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

    def _repr_markdown_(self) -> str:
        """The verdict as Markdown, for notebooks and viewers that render it (see ``discaudit.report.markdown``)."""
        return self.to_markdown()

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

    def to_junit(self) -> str:
        """The verdict as JUnit XML, one test case per check and one for the gate (see ``discaudit.report.junit``).

        A check's test case fails when its finding fails the gate (``gate.failing_checks``); the
        gate's test case fails when the gate does. To gate at another level or for a model, audit
        with ``Config(fail_on=..., model=...)`` or use :func:`discaudit.decision.gate.regate`.
        """
        from discaudit.report.junit import render

        return render(self)
