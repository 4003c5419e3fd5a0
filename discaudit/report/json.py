"""JSON form of a verdict, with a versioned schema.

Schema (``schema_version`` 1): ``{"schema_version", "discaudit_version", "status",
"recommendation": {"model", "params", "reasons", "alternatives", "rules_fired"},
"findings": {check: {"check", "status", "figure", "summary", "details"}}, "meta": {...},
"caution"}``. Keys are stable; non-finite numbers are written as null.

Fields
------
schema_version : int
    1. Raised only when a key is renamed or removed or its meaning changes; new keys may
    appear within a version, so readers should ignore keys they do not know.
discaudit_version : str
    The version that wrote the report.
status : str
    ``"pass"``, ``"warn"`` or ``"fail"``: the worst status over the checks that gate
    (advisory and turned-off checks excluded). ``discaudit check`` exits 1 when it reaches
    ``--fail-on``.
recommendation : object
    ``model`` (``"lda"``, ``"regularized_lda"``, ``"qda"`` or ``"logistic_regression"``),
    ``params`` (suggested settings), ``reasons`` (sentences), ``alternatives`` (list of
    ``{"model", "reason"}``, best first), ``rules_fired`` (rule names, in order).
findings : object
    One entry per check key, in table order (``data_hygiene``, ``sample_size``,
    ``scale_disparity``, ``collinearity``, ``outliers``, ``normality``,
    ``covariance_homogeneity``, ``separation``, ``discriminant_signal``). Each has ``check``,
    ``status`` (``"pass"``, ``"warn"``, ``"fail"`` or ``"skip"``), ``figure`` (the key figure
    as text), ``summary`` (one sentence) and ``details`` (the check's statistics, p-values,
    thresholds and affected features or rows; its keys are described by each check).
meta : object
    ``n_rows``, ``n_features``, ``n_classes``, ``classes``, ``features`` (audited, in order),
    ``random_state``, ``severity`` (check -> ``"gate"``, ``"advisory"`` or ``"off"``) and
    ``config`` (every :class:`~discaudit.config.Config` field used). Nothing that varies
    between runs (timings) is written, so the same data, settings and seed give the same
    JSON.
remedies : list
    Suggested changes to the data, most helpful first (may be empty): ``rank``, ``action``,
    ``change`` (the keyword arguments of ``Verdict.what_if``), ``spec`` (the same for
    ``--what-if``), ``addresses`` (a check key), ``description``, ``reason``,
    ``needs_row_pass`` and ``effect`` (``statuses``, ``changed``, ``figures``, ``clears``,
    ``worsens``, ``evaluated``, ``not_evaluated``, ``accuracy``, ``recommendation``, ``rows``).
    A what-if verdict's ``meta`` also has ``what_if``: the changes applied.
caution : str
    What the audit does not establish.
"""

from __future__ import annotations

from typing import TYPE_CHECKING, Any

from discaudit.jsonable import plain
from discaudit.report.labels import CAUTION

if TYPE_CHECKING:
    from discaudit.verdict import Verdict

SCHEMA_VERSION = 1


def verdict_to_dict(verdict: Verdict) -> dict[str, Any]:
    from discaudit.report.labels import VERSION as __version__

    return {
        "schema_version": SCHEMA_VERSION,
        "discaudit_version": __version__,
        "status": verdict.status,
        "recommendation": verdict.recommendation.to_dict(),
        "findings": {key: f.to_dict() for key, f in verdict.findings.items()},
        "meta": plain(verdict.meta),
        "remedies": [r.to_dict() for r in getattr(verdict, "remedies", ())],
        "caution": CAUTION,
    }
