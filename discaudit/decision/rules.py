"""From findings to a recommendation: an ordered table of rules, as data.

Each :class:`Rule` reads named findings and thresholds from :class:`Config` and, when it
fires, returns a reason sentence that cites the figure that fired. Rules are evaluated in
a fixed order (blocking data problems; dimensionality and conditioning; covariance
heterogeneity; distribution shape and outliers); the first rule that fires names the
model, later ones that fire become reasons or rank the alternatives. When none fires the
recommendation is plain LDA.
"""

from __future__ import annotations

from collections.abc import Callable
from dataclasses import dataclass

from discaudit.config import Config
from discaudit.decision.figures import (
    ANY_COMPLETE_SEPARATION,
    CONDITION_NUMBER,
    DELTA_BIC,
    DISCRETE_FEATURES,
    ERROR_DF,
    MAX_VIF,
    MOST_DIFFERENT_CLASS,
    N_FEATURES,
    RANK_DEFICIENT,
    RETAINED_SEPARATION,
    ROWS_PER_FEATURE,
    SHRINKAGE_STANDARDIZED,
    SMALLEST_CLASS_ROWS_PER_FEATURE,
    Findings,
    status,
)
from discaudit.findings import fmt, names

MODELS = ("lda", "regularized_lda", "qda", "logistic_regression")


@dataclass(frozen=True)
class Rule:
    """One row of the rule table.

    Attributes
    ----------
    name : str
        Stable identifier of the rule.
    stage : str
        Where it sits in the fixed order (for readers of the table).
    reads : tuple of str
        The findings it reads.
    model : str
        The model it argues for.
    test : callable
        ``test(findings, config) -> str | None``: the reason sentence when it fires.
    """

    name: str
    stage: str
    reads: tuple[str, ...]
    model: str
    test: Callable[[Findings, Config], str | None]


def _pooled_singular(f: Findings, c: Config) -> str | None:
    if status(f, "sample_size") == "fail":
        return (
            f"sample_size: N - K = {ERROR_DF.read(f)} does not exceed p = "
            f"{N_FEATURES.read(f)}, so the pooled covariance is singular; shrinkage makes it invertible."
        )
    if RANK_DEFICIENT.read(f):
        return "collinearity: an exact linear dependency makes the pooled covariance singular; shrinkage makes it invertible."
    return None


def _few_rows(f: Findings, c: Config) -> str | None:
    rpf = ROWS_PER_FEATURE.read(f)
    if rpf is not None and rpf < c.rows_per_feature_warn:
        return (
            f"sample_size: only {fmt(rpf)} rows per feature (rule of thumb {fmt(c.rows_per_feature_warn)}); "
            "a shrunk pooled covariance is estimated more stably."
        )
    return None


def _retained(f: Findings) -> float | None:
    value = RETAINED_SEPARATION.read(f)
    return None if value is None else float(value)


def _serious_collinearity(f: Findings, c: Config) -> str | None:
    if status(f, "collinearity") != "fail":
        return None
    retained = _retained(f)
    if retained is not None and retained < c.shrinkage_retained_min:
        return None
    intensity = SHRINKAGE_STANDARDIZED.read(f)
    if intensity is not None and intensity < c.shrinkage_useful_min:
        return None  # with this many rows the pooled covariance is already estimated well
    vif = MAX_VIF.read(f)
    cond = CONDITION_NUMBER.read(f)
    kept = f" and shrinkage keeps {fmt(100 * retained, 3)}% of the class separation" if retained is not None else ""
    return (
        f"collinearity: VIF up to {fmt(vif)} and condition number {fmt(cond)} make the inverse pooled covariance "
        f"unstable{kept}; shrinkage stabilizes it at little cost."
    )


def _costly_shrinkage(f: Findings, c: Config) -> str | None:
    if status(f, "collinearity") != "fail":
        return None
    retained = _retained(f)
    if retained is None or retained >= c.shrinkage_retained_min:
        return None
    return (
        f"collinearity: VIF up to {fmt(MAX_VIF.read(f))}, but the classes differ along "
        f"low-variance directions: shrinkage would keep only {fmt(100 * retained, 3)}% of the class separation, so "
        "the unshrunk pooled covariance is the better bet while rows per feature allow it."
    )


def _unequal_covariances(f: Findings, c: Config) -> str | None:
    if status(f, "covariance_homogeneity") != "fail":
        return None
    smallest = SMALLEST_CLASS_ROWS_PER_FEATURE.read(f) or 0.0
    if smallest < c.qda_rows_per_feature:
        return None
    dbic = DELTA_BIC.read(f)
    cls = MOST_DIFFERENT_CLASS.read(f)
    return (
        f"covariance_homogeneity: separate class covariances beat a shared one by {fmt(dbic)} BIC (most in class "
        f"{cls}), and the smallest class has {fmt(smallest)} rows per feature, enough for QDA."
    )


def _influential_outliers(f: Findings, c: Config) -> str | None:
    if status(f, "outliers") != "fail":
        return None
    return (
        f"outliers: {f['outliers'].summary} Logistic regression does not rest on class means and a pooled covariance."
    )


def _non_gaussian(f: Findings, c: Config) -> str | None:
    if status(f, "normality") != "fail":
        return None
    if ANY_COMPLETE_SEPARATION.read(f):
        return None
    discrete = DISCRETE_FEATURES.read(f) or []
    what = f"discrete features ({names(discrete)})" if discrete else "classes far from Gaussian"
    return f"normality: {what}; logistic regression assumes nothing about the feature distribution."


RULES: tuple[Rule, ...] = (
    Rule(
        "pooled_covariance_singular", "blocking", ("sample_size", "collinearity"), "regularized_lda", _pooled_singular
    ),
    Rule("few_rows_per_feature", "dimensionality", ("sample_size",), "regularized_lda", _few_rows),
    Rule("serious_collinearity", "conditioning", ("collinearity",), "regularized_lda", _serious_collinearity),
    # Under a strongly non-Gaussian shape the Gaussian covariance comparison (Box's M, BIC) is
    # not to be trusted, so the shape rules come before the covariance rule.
    Rule("non_gaussian_shape", "shape", ("normality", "separation"), "logistic_regression", _non_gaussian),
    Rule("influential_outliers", "shape", ("outliers",), "logistic_regression", _influential_outliers),
    Rule("unequal_covariances", "covariance", ("covariance_homogeneity", "sample_size"), "qda", _unequal_covariances),
    Rule("costly_shrinkage", "conditioning", ("collinearity",), "lda", _costly_shrinkage),
)

_DEFAULT_ORDER = ("lda", "regularized_lda", "logistic_regression", "qda")
_WHY_NOT = {
    "lda": "the rules that fired argue against one of its assumptions",
    "regularized_lda": "no rule found the pooled covariance poorly estimated, so shrinkage only adds bias",
    "qda": "no rule found unequal covariances that are worth their extra parameters",
    "logistic_regression": "less efficient than a discriminant model when the Gaussian model holds",
}


@dataclass(frozen=True)
class Decision:
    """The model, its reasons and the ranked alternatives, before settings are attached."""

    model: str
    reasons: list[str]
    alternatives: list[dict[str, str]]
    fired: list[str]


def decide(findings: Findings, config: Config, rules: tuple[Rule, ...] = RULES) -> Decision:
    """Evaluate the rule table in order."""
    fired = [(rule, reason) for rule in rules if (reason := rule.test(findings, config)) is not None]
    if not fired:
        model = "lda"
        reasons = [
            "No rule fired: no check found a singular or unstable pooled covariance, covariance differences "
            "worth their parameters, influential outliers or a strongly non-Gaussian shape, so plain LDA is "
            "the most efficient choice."
        ]
    else:
        model = fired[0][0].model
        reasons = [reason for rule, reason in fired if rule.model == model]
        reasons += [f"Also noted: {reason}" for rule, reason in fired if rule.model != model]
    ranked: list[dict[str, str]] = []
    for rule, _reason in fired:
        if rule.model != model and rule.model not in [a["model"] for a in ranked]:
            ranked.append(
                {
                    "model": rule.model,
                    "reason": f"addresses {rule.name.replace('_', ' ')}, but ranks below "
                    f"the first rule that fired ({fired[0][0].name.replace('_', ' ')})",
                }
            )
    for candidate in _DEFAULT_ORDER:
        if candidate != model and candidate not in [a["model"] for a in ranked]:
            ranked.append({"model": candidate, "reason": _WHY_NOT[candidate]})
    return Decision(model, reasons, ranked, [rule.name for rule, _ in fired])
