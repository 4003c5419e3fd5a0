"""From findings to a decision: the recommendation with its settings, and the gate.

=============  ==============================================================
module         holds
=============  ==============================================================
``figures``    the detail values the decision reads, declared once
``rules``      the rule table and :func:`~discaudit.decision.rules.decide`
``settings``   the suggested estimator settings
``gate``       gate status and levels
=============  ==============================================================

The decision reads finished findings only; it never reads input or runs a statistic.
"""

from __future__ import annotations

from collections.abc import Mapping
from typing import TYPE_CHECKING

from discaudit.decision.rules import MODELS, decide
from discaudit.decision.settings import suggested_params
from discaudit.findings import Finding
from discaudit.verdict import Recommendation

if TYPE_CHECKING:
    from discaudit.config import Config

__all__ = ["MODELS", "recommend"]


def recommend(findings: Mapping[str, Finding], config: Config) -> Recommendation:
    """The recommended model, its settings, reasons and ranked alternatives."""
    decision = decide(findings, config)
    return Recommendation(
        model=decision.model,
        params=suggested_params(decision.model, findings, config),
        reasons=decision.reasons,
        alternatives=decision.alternatives,
        rules_fired=decision.fired,
    )
