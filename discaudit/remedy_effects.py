"""The predicted effect of each proposed remedy: the core's own checks, run again on the data the remedy leaves.

The decision proposes remedies from the finished findings (:func:`discaudit.decision.remedies.propose`);
here each of the first ``Config.remedy_candidates`` proposals is applied to the audited data by the
what-if source (:func:`discaudit.sources.what_if.apply`, moments updated exactly) and judged by the
same checks:

* the checks that read the moments only (:data:`MOMENT_CHECKS`) always: exact, and cheap (no pass
  over the rows);
* the checks that read rows and that the remedy may alter (outliers and normality, for removing rows
  or a transform), on every row or, for classes larger than ``Config.remedy_rows_per_class``, on a
  seeded sample of them (moments stay exact);
* a power transform only when normality still fails once the gross outliers are removed (when that
  remedy is proposed too), since the skew of a few contaminated rows is not a shape to transform;
* with ``Config.remedy_effects = "performance"``, the ``expected_performance`` check on the changed data (on the
  same per-class sample, with its own moments, when classes are larger; the audit's figures are then
  recomputed on the same sample of the unchanged data, so before and after see the same rows), so the
  effect says how the predicted accuracy of the recommended model moves and whether the
  recommendation changes.

The decision then ranks them (:func:`discaudit.decision.remedies.rank`). ``Verdict.what_if`` gives the
complete re-audit of any change.
"""

from __future__ import annotations

from collections.abc import Callable, Mapping
from dataclasses import replace
from typing import TYPE_CHECKING

import numpy as np

from discaudit import checks
from discaudit.dataset import AuditData
from discaudit.decision import recommend
from discaudit.decision.remedies import Effect, Proposal, Remedy, effect_of, propose, rank
from discaudit.errors import DataError
from discaudit.findings import Finding
from discaudit.sources.what_if import Change, apply, estimate_transform, subsample

if TYPE_CHECKING:
    from discaudit.config import Config

#: Checks whose findings follow from the moments alone (the rows they may read, such as the
#: collinearity check's Ledoit-Wolf intensity, do not enter their status).
MOMENT_CHECKS = (
    "data_hygiene",
    "sample_size",
    "scale_disparity",
    "collinearity",
    "covariance_homogeneity",
    "discriminant_signal",
)
PERFORMANCE = "expected_performance"

RunCheck = Callable[[str, "checks.CheckFunction", AuditData, "Config", "int | None"], Finding]


def evaluate(
    findings: Mapping[str, Finding],
    recommended: str,
    data: AuditData,
    config: Config,
    random_state: int | None,
    run_check: RunCheck,
) -> tuple[Remedy, ...]:
    """Ranked remedies for the findings of ``data``, each with its predicted effect."""
    proposals = propose(findings, config)[: config.remedy_candidates]
    if not proposals:
        return ()
    proposals.sort(key=lambda p: p.action != "drop_rows")  # rows first: a transform may then be moot
    registry = dict(checks.registry())
    cap = config.remedy_rows_per_class
    capped = data.sample is not None or bool((data.moments.counts > cap).any())
    rows = (
        f"the checks that read rows saw a seeded sample of {cap} rows per class (moments over every row)"
        if capped
        else "every row"
    )
    before = dict(findings)
    before_model = recommended
    performance = (
        config.remedy_effects == "performance" and PERFORMANCE in registry and config.severity_of(PERFORMANCE) != "off"
    )
    if performance and capped:
        before[PERFORMANCE] = run_check(
            PERFORMANCE, registry[PERFORMANCE], subsample(data, cap, random_state), config, random_state
        )
        before_model = recommend(before, config).model
    kept: list[Proposal] = []
    effects: list[Effect] = []
    specs: list[str] = []
    for proposal in proposals:
        if proposal.action == "transform" and _outliers_explain_shape(kept, effects):
            continue
        proposal = _fix_exponents(proposal, data)
        change = Change.of(**proposal.change)
        try:
            changed = apply(
                data,
                change,
                few_distinct_values=config.few_distinct_values,
                rows_per_class=cap,
                random_state=random_state,
            )
        except (DataError, ValueError, ArithmeticError, np.linalg.LinAlgError):
            continue  # a change the data do not allow (e.g. it would empty a class) is not a remedy
        keys = [
            k for k in registry if (k in MOMENT_CHECKS or k in proposal.row_checks) and config.severity_of(k) != "off"
        ]
        after = dict(findings)
        for k in keys:
            after[k] = run_check(k, registry[k], changed, config, random_state)
        model_after = None
        if performance:
            target = subsample(changed, cap, random_state) if capped else changed
            after[PERFORMANCE] = run_check(PERFORMANCE, registry[PERFORMANCE], target, config, random_state)
            keys.append(PERFORMANCE)
            model_after = recommend(after, config).model
        kept.append(proposal)
        effects.append(effect_of(before, after, keys, before_model, model_after, rows))
        specs.append(change.to_spec())
    return rank(kept, effects, specs)


def _outliers_explain_shape(proposals: list[Proposal], effects: list[Effect]) -> bool:
    """Whether removing the gross outliers, evaluated already, stops the normality check failing: a power
    transform is then not proposed (the skew came from those rows)."""
    return any(
        p.action == "drop_rows" and e.statuses.get("normality", ("fail", "fail"))[1] in ("pass", "warn")
        for p, e in zip(proposals, effects, strict=True)
    )


def _fix_exponents(proposal: Proposal, data: AuditData) -> Proposal:
    """A transform with its exponents estimated once, on the rows the source holds, so that
    ``Verdict.what_if(**remedy.change)`` reproduces the change exactly."""
    names = proposal.change.get("transform")
    if proposal.action != "transform" or not isinstance(names, list):
        return proposal
    lambdas = estimate_transform(data, names)
    return replace(proposal, change={**proposal.change, "transform": lambdas})
