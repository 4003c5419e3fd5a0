"""JSON form of a verdict: a documented, versioned format with a JSON Schema shipped in the package.

The schema is ``discaudit/report/verdict.schema.json`` (JSON Schema draft 2020-12; :func:`schema`
loads it); every report the tests write validates against it.

Top level: ``{"schema_version", "discaudit_version", "status", "gate", "baseline",
"recommendation", "findings", "meta", "caution"}``. Keys are stable; non-finite numbers are
written as null.

How ``schema_version`` changes
------------------------------
It is raised only when a key is renamed or removed or its meaning changes. New keys may appear
within a version (``gate``, ``baseline`` and ``meta.class_moments`` arrived within version 1),
so readers should ignore keys they do not know. A report with a higher version than the reader
knows is refused by ``--baseline`` with a message saying so.

Fields
------
schema_version : int
    1.
discaudit_version : str
    The version that wrote the report.
status : str
    ``"pass"``, ``"warn"`` or ``"fail"``: the worst status over the checks that gate
    (advisory and turned-off checks excluded), whatever the model gated.
gate : object
    What the gate decided (:class:`discaudit.verdict.Gate`): ``model`` (null: any candidate),
    ``fail_on``, ``passed`` (``discaudit check`` exits 1 when false), ``data_passed``,
    ``failing_checks``, ``rule`` (one line), ``outcome`` (a sentence), ``reasons``, ``fit_for``,
    ``drifted`` (null without a baseline).
baseline : object or null
    The comparison with an accepted report (:class:`discaudit.verdict.BaselineComparison`):
    ``source``, ``accepted``, ``drifted``, ``changes`` (``kind``, ``subject``, ``counts``,
    ``figure``, ``summary``), ``classes`` (per class: rows and shares then and now, the mean and
    covariance tests), ``rule``, ``outcome``, ``thresholds``.
recommendation : object
    ``model`` (``"lda"``, ``"regularized_lda"``, ``"qda"`` or ``"logistic_regression"``),
    ``params`` (suggested settings), ``reasons`` (sentences), ``alternatives`` (list of
    ``{"model", "reason"}``, best first), ``rules_fired`` (rule names, in order), ``close_to``,
    ``param_notes``.
findings : object
    One entry per check key, in table order. Each has ``check``, ``status`` (``"pass"``,
    ``"warn"``, ``"fail"`` or ``"skip"``), ``figure`` (the key figure as text), ``summary`` (one
    sentence) and ``details`` (the check's statistics, p-values, thresholds and affected
    features or rows; its keys are described by each check).
meta : object
    ``n_rows``, ``n_features``, ``n_classes``, ``classes``, ``features`` (audited, in order),
    ``random_state``, ``severity`` (check -> ``"gate"``, ``"advisory"`` or ``"off"``),
    ``config`` (every :class:`~discaudit.config.Config` field used), ``fingerprint`` and
    ``class_moments`` (per class: ``count``, ``mean`` and unbiased ``covariance``, exact over all
    rows, full precision; what ``--baseline`` compares a later batch with; above 200 features
    only ``variance``). Nothing that varies between runs (timings) is written, so the same data,
    settings and seed give the same JSON.
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

import json
from importlib import resources
from typing import TYPE_CHECKING, Any

from discaudit.jsonable import plain
from discaudit.report.labels import CAUTION

if TYPE_CHECKING:
    from discaudit.verdict import Verdict

SCHEMA_VERSION = 1
#: The JSON Schema of the report, inside the package.
SCHEMA_FILE = "verdict.schema.json"


def schema() -> dict[str, Any]:
    """The JSON Schema (draft 2020-12) every JSON report validates against."""
    text = resources.files("discaudit.report").joinpath(SCHEMA_FILE).read_text(encoding="utf-8")
    loaded: dict[str, Any] = json.loads(text)
    return loaded


def verdict_to_dict(verdict: Verdict) -> dict[str, Any]:
    from discaudit.report.labels import VERSION as __version__

    return {
        "schema_version": SCHEMA_VERSION,
        "discaudit_version": __version__,
        "status": verdict.status,
        "gate": verdict.gate.to_dict() if verdict.gate is not None else None,
        "baseline": verdict.baseline.to_dict() if verdict.baseline is not None else None,
        "recommendation": verdict.recommendation.to_dict(),
        "findings": {key: f.to_dict() for key, f in verdict.findings.items()},
        "meta": plain(verdict.meta),
        "remedies": [r.to_dict() for r in getattr(verdict, "remedies", ())],
        "caution": CAUTION,
    }
