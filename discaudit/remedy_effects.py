"""The predicted effect of each proposed remedy: the core's own checks, run again on the data the remedy leaves.

The decision proposes remedies from the finished findings (:func:`discaudit.decision.remedies.propose`);
here each of the first ``Config.remedy_candidates`` proposals is applied to the audited data by the
what-if source (:func:`discaudit.sources.what_if.apply`, moments updated exactly) and judged by the
same checks:

* the checks that read the moments only (:data:`MOMENT_CHECKS`) always, exact, without a pass over
  the rows; but the costly ones (:data:`COSTLY_MOMENT_CHECKS`, the covariance check) only with
  ``Config.remedy_effects = "performance"``;
* the check that reads rows and that the remedy addresses (outliers for removing rows, normality for a
  transform) when every class holds at most ``Config.remedy_rows_per_class`` rows (at least twice the
  rows a robust fit needs): then on every row, exactly. It costs about what it costs in the audit, so on
  larger data it is left to ``Verdict.what_if`` and the effect says so;
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
from discaudit.checks.expected_performance import gaussian_accuracy
from discaudit.dataset import AuditData
from discaudit.decision import recommend
from discaudit.decision.figures import CANDIDATE_FIGURES, status
from discaudit.decision.remedies import Effect, Proposal, Remedy, accuracy_effect, effect_of, propose, rank
from discaudit.errors import DataError
from discaudit.findings import Finding
from discaudit.sources.what_if import Change, apply, cap_rows, estimate_transform, subsample

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
#: How a remedy's predicted accuracy is found without the full recomputation.
LOO_ONLY_METHOD = (
    "exact leave-one-out of the recommended model alone on the changed data; whether the recommendation "
    "changes is found with Config(remedy_effects='performance'), --what-if or verdict.what_if"
)
#: Decimal places of a proposed Yeo-Johnson exponent. The likelihood is flat near its maximum (the
#: exponent's standard error is of order 1/sqrt(n), 0.03 or more below 1,000 rows per class), so more
#: places would only make the --what-if spec unreadable (design choice).
EXPONENT_DECIMALS = 2
#: Moment-based checks too costly to re-run for every remedy by default: the covariance check fits
#: Flury's hierarchy (iterated common principal components), about an eighth of an audit's time at
#: p = 10 to 30; re-run with ``Config.remedy_effects = "performance"``, else left to the what-if.
COSTLY_MOMENT_CHECKS = ("covariance_homogeneity",)

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
    registry = dict(checks.registry())
    # Rows per class held while the moment-based checks run (their row-reading parts, such as a Ledoit-Wolf
    # intensity, do not enter their statuses): at least twice what a robust fit needs.
    cap = max(config.remedy_rows_per_class, int(np.ceil(2 * config.robust_min_rows_per_feature * data.p)))
    large = data.sample is not None or bool((data.moments.counts > cap).any())
    rows = (
        f"every row for the moment-based checks; the checks that read rows were left to verdict.what_if, since a "
        f"class holds more than {cap} rows (Config.remedy_rows_per_class)"
        if large
        else "every row"
    )
    performance = (
        config.remedy_effects == "performance" and PERFORMANCE in registry and config.severity_of(PERFORMANCE) != "off"
    )
    # On large data the predicted performance is found on a seeded sample of each class audited as data of
    # its own, before (the unchanged data) and after (the changed data) alike, so like is compared with like.
    before = dict(findings)
    before_model = recommended
    if performance and large:
        before[PERFORMANCE] = run_check(
            PERFORMANCE, registry[PERFORMANCE], subsample(data, cap, random_state), config, random_state
        )
        before_model = recommend(before, config).model
    # Without the full recomputation, a Gaussian recommendation's own exact leave-one-out accuracy is still
    # re-scored (one pass over the rows held, no logistic cross-validation), like with like as above.
    loo_only = (
        not performance
        and PERFORMANCE in registry
        and config.severity_of(PERFORMANCE) != "off"
        and status(findings, PERFORMANCE) in ("pass", "warn")
    )
    before_accuracy = None
    if loo_only:
        before_accuracy = (
            gaussian_accuracy(subsample(data, cap, random_state), recommended, config, random_state)
            if large
            else (CANDIDATE_FIGURES.read(findings) or {}).get(recommended)
        )
    kept: list[Proposal] = []
    effects: list[Effect] = []
    specs: list[str] = []
    for proposal in proposals:
        proposal = _fix_exponents(proposal, cap_rows(data, cap, random_state))
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
        on = [k for k in registry if config.severity_of(k) != "off"]
        keys = [k for k in on if k in MOMENT_CHECKS and (performance or k not in COSTLY_MOMENT_CHECKS)]
        # The row-reading check a remedy addresses costs about as much as in the audit: run it while every
        # class is small enough to be held whole (then it is exact), else leave it to the what-if.
        keys += [k for k in on if k in proposal.row_checks and not large]
        after = dict(findings)
        for k in keys:
            after[k] = run_check(k, registry[k], changed, config, random_state)
        model_after = None
        if performance:
            sample = subsample(changed, cap, random_state) if large else changed
            after[PERFORMANCE] = run_check(PERFORMANCE, registry[PERFORMANCE], sample, config, random_state)
            keys.append(PERFORMANCE)
            model_after = recommend(after, config).model
        accuracy = None
        if before_accuracy is not None:
            scored = gaussian_accuracy(
                subsample(changed, cap, random_state) if large else changed, recommended, config, random_state
            )
            if scored is not None:
                sampled = f"a seeded sample of at most {cap} rows per class, before and after"
                accuracy = accuracy_effect(
                    recommended, before_accuracy, scored, LOO_ONLY_METHOD, sampled if large else "every row"
                )
        kept.append(proposal)
        effects.append(effect_of(before, after, keys, before_model, model_after, rows, accuracy))
        specs.append(change.to_spec())
    return rank(kept, effects, specs)


def _fix_exponents(proposal: Proposal, data: AuditData) -> Proposal:
    """A transform with its exponents estimated once, on the rows ``data`` holds (at most
    ``Config.remedy_rows_per_class`` per class), so that ``Verdict.what_if(**remedy.change)`` reproduces the
    change exactly. The exponents are rounded to ``EXPONENT_DECIMALS`` places: the change proposed (and
    evaluated) is the rounded one, which a user can type."""
    names = proposal.change.get("transform")
    if proposal.action != "transform" or not isinstance(names, list):
        return proposal
    lambdas = {f: round(lam, EXPONENT_DECIMALS) for f, lam in estimate_transform(data, names).items()}
    return replace(proposal, change={**proposal.change, "transform": lambdas})
