"""From findings to a decision: the recommendation with its settings, and the gate.

=============  ==============================================================
module         holds
=============  ==============================================================
``figures``    the detail values the decision reads, declared once
``choose``     the choice from predicted performance, with reasons citing the figures
``rules``      the assumption rules, used when no predicted performance exists
``settings``   the suggested estimator settings
``gate``       gate status and levels
``remedies``   remedies proposed and ranked from the findings; two verdicts compared
=============  ==============================================================

The decision reads finished findings only; it never reads input or runs a statistic.
"""

from __future__ import annotations

import dataclasses
from collections.abc import Mapping
from typing import TYPE_CHECKING

from discaudit.decision import choose
from discaudit.decision.choose import NAMES
from discaudit.decision.gate import unmet_assumptions
from discaudit.decision.rules import MODELS, decide
from discaudit.decision.settings import rule_settings, scored_settings
from discaudit.findings import Finding
from discaudit.verdict import Gate, Recommendation

if TYPE_CHECKING:
    from discaudit.config import Config

__all__ = ["MODELS", "recommend", "with_gate"]


def recommend(findings: Mapping[str, Finding], config: Config) -> Recommendation:
    """The recommended model, its settings, reasons, ranked alternatives and near ties.

    From the predicted performance when the ``expected_performance`` check scored the candidates
    (:mod:`discaudit.decision.choose`); otherwise from the assumption rules
    (:mod:`discaudit.decision.rules`), which then say so.
    """
    if choose.available(findings):
        made = choose.choose(findings)
        params, notes = scored_settings(made.model, made.settings, findings)
        return Recommendation(
            model=made.model,
            params=params,
            reasons=made.reasons,
            alternatives=made.alternatives,
            rules_fired=["predicted_performance"],
            close_to=made.close_to,
            param_notes=notes,
        )
    decision = decide(findings, config)
    params, notes = rule_settings(decision.model, findings, config)
    why_rules = (
        "The predicted performance could not be measured (see expected_performance); the assumption rules decide."
    )
    return Recommendation(
        model=decision.model,
        params=params,
        reasons=[*decision.reasons, why_rules],
        alternatives=decision.alternatives,
        rules_fired=decision.fired,
        param_notes=notes,
    )


def with_gate(
    recommendation: Recommendation, gate: Gate, findings: Mapping[str, Finding], config: Config
) -> Recommendation:
    """The recommendation with one more reason when its model is not among those the gate finds the data fit for.

    The gate judges each model's assumptions; the recommendation weighs predicted accuracy. When they
    part, the reasons say so, so a reader never sees "not fit for LDA" beside an unexplained LDA.
    """
    model = recommendation.model
    if model in gate.fit_for:
        return recommendation
    unmet = unmet_assumptions(model, findings, config)
    if not unmet:
        return recommendation
    note = (
        f"{NAMES[model][:1].upper()}{NAMES[model][1:]}'s own assumption checks do not all hold ({', '.join(unmet)}), "
        f"so the gate does not list it among the models the data are fit for; its predicted accuracy is nevertheless "
        f"within noise of the best, so those departures do not cost accuracy on these data. Gate with "
        f"--model {model} to hold the data to its assumptions."
    )
    return dataclasses.replace(recommendation, reasons=[*recommendation.reasons, note])
