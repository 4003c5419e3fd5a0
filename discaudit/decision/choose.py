"""The decision from predicted performance: the assumption findings explain, the predictions decide.

The ``expected_performance`` check measures each candidate's predicted held-out accuracy and
which candidates are within noise of the best (``Config.performance_switch_se`` paired standard
errors). The recommendation is the most efficient candidate within noise of the best, in the
order LDA, shrinkage LDA, QDA, logistic regression: a less efficient model is chosen only when
its predicted gain over every more efficient one exceeds the stated multiple of its paired
standard error. Each assumption finding that warns or fails then says which model it argues for
and whether the predictions bear it out.
"""

from __future__ import annotations

from dataclasses import dataclass
from typing import Any

from discaudit.decision.figures import (
    BEATS_MAJORITY,
    BEST,
    CANDIDATE_FIGURES,
    CLASS_ENCODING_FEATURES,
    COMPETITIVE,
    DELTA_BIC,
    MAJORITY_ACCURACY,
    MOST_EFFICIENT_WITHIN_NOISE,
    NO_FEATURE_LOG_LOSS,
    NOT_CONTENDERS,
    PAIRED,
    SWITCH_SE,
    Findings,
    status,
)
from discaudit.findings import fmt

#: Candidates from the most to the least efficient (see ``checks.expected_performance``).
ORDER = ("lda", "regularized_lda", "qda", "logistic_regression")

NAMES = {"lda": "LDA", "regularized_lda": "shrinkage LDA", "qda": "QDA", "logistic_regression": "logistic regression"}

#: Assumption findings that argue for a model when they warn or fail, in words of the trade.
_ARGUES_FOR = {
    "sample_size": ("regularized_lda", "few rows per feature argue", ("warn", "fail")),
    "collinearity": ("regularized_lda", "strong collinearity argues", ("fail",)),
    "covariance_homogeneity": ("qda", "unequal class covariances argue", ("warn", "fail")),
    "normality": ("logistic_regression", "class shapes far from Gaussian argue", ("fail",)),
    "outliers": ("logistic_regression", "influential outliers argue", ("fail",)),
}

#: Why a model needs more rows than the one before it, for the sentence that prefers it.
_EFFICIENCY = {
    "lda": "it estimates one shared covariance, the fewest parameters, and is the most efficient model when the "
    "classes are close to Gaussian (Efron 1975)",
    "regularized_lda": "it estimates one shared covariance, shrunk towards a multiple of the identity",
    "qda": "it estimates a covariance per class but still uses the Gaussian likelihood",
    "logistic_regression": "it assumes nothing about the feature distribution",
}


@dataclass(frozen=True)
class Choice:
    """The model chosen from predicted performance, with its reasons, alternatives and near ties."""

    model: str
    reasons: list[str]
    alternatives: list[dict[str, str]]
    close_to: list[str]
    settings: dict[str, Any]


def _pct(x: float) -> str:
    return f"{100 * x:.1f}%"


def _pts(x: float) -> str:
    return fmt(100 * x, 2)


def available(findings: Findings) -> bool:
    """Whether the predicted-performance figures exist (the check ran and scored something)."""
    return status(findings, "expected_performance") in ("pass", "warn") and bool(CANDIDATE_FIGURES.read(findings))


def choose(findings: Findings) -> Choice:
    """The most efficient candidate within noise of the best, with reasons citing the figures."""
    candidates: dict[str, Any] = CANDIDATE_FIGURES.read(findings)
    paired: dict[str, Any] = PAIRED.read(findings)
    best: str = BEST.read(findings)
    model: str = MOST_EFFICIENT_WITHIN_NOISE.read(findings)
    encoders = CLASS_ENCODING_FEATURES.read(findings) or []
    if encoders and model == "lda":
        # A feature constant within every class makes the pooled covariance singular: plain LDA is
        # not a model of these data whatever its scored accuracy.
        model = next((c for c in ORDER if c in candidates and c != "lda"), model)

    def versus(a: str, b: str) -> dict[str, float]:
        return dict(paired[a][b])

    listing = "; ".join(
        f"{NAMES[c]} {_pct(candidates[c]['accuracy'])} (SE {_pts(candidates[c]['accuracy_se'])} points)"
        for c in ORDER
        if c in candidates
    )
    reasons = [f"Predicted held-out accuracy: {listing}."]
    competitive = COMPETITIVE.read(findings) or list(candidates)
    ruled_out: dict[str, Any] = NOT_CONTENDERS.read(findings) or {}
    close = [c for c in ORDER if c in candidates and c in competitive and c != model and _within(versus(c, model))]
    if encoders:
        reasons.append(
            f"{_join([str(e) for e in encoders])} {'encodes' if len(encoders) == 1 else 'encode'} the class "
            "(constant within every class, different between them): the pooled covariance is singular, so plain "
            "LDA is ruled out; check whether the column leaks the label."
        )
    not_scored = dict(findings["expected_performance"].details.get("not_scored") or {})
    for c, why in not_scored.items():
        reasons.insert(0, f"{_cap(NAMES[c])} could not be scored: {why}.")
    if BEATS_MAJORITY.read(findings) is False:
        reasons.append(
            f"No candidate predicts better than always choosing the largest class "
            f"({_pct(MAJORITY_ACCURACY.read(findings))}) by two standard errors: the differences between them are "
            f"noise, so {NAMES[model]}, the most efficient model that can be fitted, is kept ({_EFFICIENCY[model]})."
        )
    elif model == best:
        # "best" is the best contender: a candidate ruled out by its log-loss may classify more rows right.
        above = any(c in ruled_out and candidates[c]["accuracy"] > candidates[model]["accuracy"] for c in candidates)
        best_words = "predicts best of the contenders" if above else "predicts best"
        if close:
            reasons.append(
                f"{_cap(NAMES[model])} {best_words}, but {_join([NAMES[c] for c in close])} "
                f"{'is' if len(close) == 1 else 'are'} within noise of it: too close to call; {NAMES[model]} is "
                f"preferred because it {best_words} and is the more efficient model."
            )
        else:
            near = [c for c in ORDER if c in ruled_out and c != model and _within(versus(c, model))]
            reasons.append(
                f"{_cap(NAMES[model])} {best_words}; no other contender comes within {fmt(SWITCH_SE.read(findings))} "
                "paired SE of it"
                + (
                    f" ({_join([NAMES[c] for c in near])} {'does' if len(near) == 1 else 'do'} in accuracy, but "
                    f"{'fits' if len(near) == 1 else 'fit'} the class probabilities clearly worse by log-loss)."
                    if near
                    else "."
                )
            )
    else:
        lead = versus(best, model)
        reasons.append(
            f"Too close to call between {NAMES[model]} and {NAMES[best]}: {NAMES[best]} leads by "
            f"{_pts(lead['accuracy_difference'])} points with a paired SE of {_pts(lead['accuracy_se'])} points, "
            f"less than the {fmt(SWITCH_SE.read(findings))} SE needed to switch; {NAMES[model]} "
            f"is preferred because {_EFFICIENCY[model]}."
        )
    guard = fmt(findings["expected_performance"].details.get("log_loss_guard_se", 1.0))
    no_signal = BEATS_MAJORITY.read(findings) is False  # then every candidate is kept as a fallback
    for c in ORDER:
        if (
            c != model
            and not no_signal
            and c in ruled_out
            and candidates[c]["accuracy"] >= candidates[model]["accuracy"]
        ):
            reasons.append(_ruled_out_sentence(c, ruled_out[c], candidates, guard, NO_FEATURE_LOG_LOSS.read(findings)))
    for check, (argued, words, statuses) in _ARGUES_FOR.items():
        if status(findings, check) not in statuses:
            continue
        delta_bic = DELTA_BIC.read(findings) if check == "covariance_homogeneity" else None
        if check == "covariance_homogeneity" and delta_bic is None:
            continue  # the comparison could not be made (a singular class covariance): no argument
        figure = findings[check].figure
        opening = _lead(words, figure)
        if delta_bic is not None and delta_bic < 0:
            # Box's M rejects while BIC prefers one shared covariance: a weak argument, said as such.
            opening = f"Unequal class covariances by Box's M test, though BIC favours one shared covariance ({figure}), argue weakly"
        if argued not in candidates:
            reasons.append(f"{opening} for {NAMES[argued]}, which could not be scored.")
        elif argued == model:
            reasons.append(f"{opening} for {NAMES[argued]}, as chosen.")
        else:
            d = versus(argued, model)
            verdict = (
                "within noise, not enough to switch"
                if _within(d) and d["accuracy_difference"] >= 0
                else "so the prediction does not bear it out"
                if d["accuracy_difference"] <= 0
                else "not enough to switch"
            )
            reasons.append(
                f"{opening} for {NAMES[argued]}, predicted at "
                f"{_pct(candidates[argued]['accuracy'])}: {_signed(d['accuracy_difference'])} points against "
                f"{NAMES[model]} (paired SE {_pts(d['accuracy_se'])}), {verdict}."
            )
    alternatives = []
    for c in sorted((c for c in candidates if c != model), key=lambda c: -candidates[c]["accuracy"]):
        d = versus(c, model)
        why = (
            f"predicted {_pct(candidates[c]['accuracy'])}, {_signed(d['accuracy_difference'])} points against "
            f"{NAMES[model]} (paired SE {_pts(d['accuracy_se'])}); "
            + (
                "within noise of the recommendation"
                if c in close
                else f"not a contender: its log-loss is higher than {NAMES[ruled_out[c]['against']]}'s by "
                f"{fmt(ruled_out[c]['log_loss_difference'], 2)} (paired SE {fmt(ruled_out[c]['log_loss_se'], 2)})"
                if c in ruled_out
                else "not a contender"
                if c not in competitive
                else "outside the noise of the recommendation"
            )
        )
        alternatives.append({"model": c, "reason": why})
    for c in ORDER:
        if c not in candidates:
            alternatives.append({"model": c, "reason": "could not be scored (see expected_performance)"})
    return Choice(model, reasons, alternatives, close, dict(candidates[model]["settings"]))


def _ruled_out_sentence(
    c: str, why: dict[str, Any], candidates: dict[str, Any], guard: str, no_feature: float | None
) -> str:
    """Why a candidate predicted at least as accurate as the recommendation is not a contender."""
    other = why["against"]
    gap = (
        f"its log-loss ({fmt(candidates[c]['log_loss'], 3)}) is higher than {NAMES[other]}'s by "
        f"{fmt(why['log_loss_difference'], 2)} (paired SE {fmt(why['log_loss_se'], 2)}, more than the {guard} SE "
        "allowed)"
    )
    if why["why"] == "collapsed":
        floor = f" ({fmt(no_feature, 3)})" if no_feature is not None else ""
        return (
            f"{_cap(NAMES[c])} is predicted at {_pct(candidates[c]['accuracy'])}, but {gap} and worse than predicting "
            f"the class shares for every row{floor}: its predicted probabilities have collapsed, so its accuracy is "
            "not to be trusted and it is not a contender."
        )
    return (
        f"{_cap(NAMES[c])} is predicted at {_pct(candidates[c]['accuracy'])}, {_signed(why['accuracy_difference'])} "
        f"points against {NAMES[other]} (paired SE {_pts(why['accuracy_se'])}), but {gap}, the stronger evidence: "
        f"{NAMES[other]}'s model fits the class probabilities of the held-out rows better, so {NAMES[c]} is not a "
        "contender."
    )


def _lead(words: str, figure: str) -> str:
    """'Strong collinearity (max VIF 41) argues': the finding's words with its key figure."""
    subject, verb = words.rsplit(" ", 1)
    return f"{subject[:1].upper()}{subject[1:]} ({figure}) {verb}"


def _within(d: dict[str, float]) -> bool:
    """|difference| within the switching multiple of its paired SE (as the check judged it)."""
    return bool(d.get("within_noise", False))


def _cap(text: str) -> str:
    return text[:1].upper() + text[1:]


def _signed(x: float) -> str:
    return ("+" if x > 0 else "") + _pts(x)


def _join(items: list[str]) -> str:
    return items[0] if len(items) == 1 else ", ".join(items[:-1]) + " and " + items[-1]
