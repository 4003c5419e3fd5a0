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

from collections.abc import Mapping
from typing import TYPE_CHECKING

from discaudit.decision import choose
from discaudit.decision.rules import MODELS, decide
from discaudit.decision.settings import rule_settings, scored_settings
from discaudit.findings import Finding
from discaudit.verdict import Recommendation

if TYPE_CHECKING:
    from discaudit.config import Config

__all__ = ["MODELS", "recommend"]


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
