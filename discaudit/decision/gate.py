"""The gate: which findings fail it, for the model a team ships or for any candidate.

A check's status says how far the data are from what that check looks for; whether that
matters depends on the model. Unequal class covariances are the reason to fit QDA, not a
reason to stop it; a non-Gaussian shape does not bear on logistic regression; separation
stops only a logistic regression fitted without a penalty. :data:`MATTERS` holds, for every
model a gate can judge, how each check bears on it and why: the lowest status of that check
that fails the model's gate, or ``None`` when the finding is shown but never fails it.

The models are the estimators the audit scores and hands out (``Recommendation.estimator()``):
shrinkage LDA with its intensity, QDA with its ``reg_param`` chosen by leave-one-out log-loss,
logistic regression with the L2 penalty chosen by held-out log-loss. Their settings answer some
findings (shrinkage answers collinearity and few rows per feature; the penalty answers
separation), so those findings do not fail their gates. A team that fits logistic regression by
plain maximum likelihood gates on ``unpenalized_logistic_regression``, whose estimate does not
exist under separation or with more coefficients than rows.

Every model's gate also fails when the model could not be scored by ``expected_performance``
(nothing estimable) or when no candidate predicts better than always choosing the largest
class (``beats_majority_rule``: the data hold no usable signal).

Without a model (``Config.model = None``) the gate asks whether the data are usable and some
candidate is safe: it fails when ``data_hygiene`` fails, when nothing could be scored, when no
candidate beats the majority rule, or when none of the four candidates passes its own gate.
Every finding is still shown; only the gate's verdict differs.

``Config.fail_on = "warn"`` lowers every level to ``warn``. Checks made ``advisory`` in
``Config.severity`` never fail a gate; a check that was skipped cannot fail it either (the gate
says it could not be judged).
"""

from __future__ import annotations

import dataclasses
from collections.abc import Mapping
from dataclasses import dataclass
from typing import TYPE_CHECKING

from discaudit.decision.figures import BEATS_MAJORITY, CANDIDATE_FIGURES
from discaudit.errors import DataError
from discaudit.findings import STATUS_RANK, Finding, worst
from discaudit.verdict import Gate, Verdict

if TYPE_CHECKING:
    from discaudit.config import Config

__all__ = [
    "CANDIDATES",
    "FAIL_ON_LEVELS",
    "MATTERS",
    "Bearing",
    "fails_gate",
    "gate_status",
    "judge",
    "regate",
]

#: Gate levels: the lowest status that fails the gate.
FAIL_ON_LEVELS = ("warn", "fail")
#: The candidates a gate without a model asks about (the four the audit scores).
CANDIDATES = ("lda", "regularized_lda", "qda", "logistic_regression")

#: Names in sentences.
MODEL_WORDS = {
    "lda": "LDA",
    "regularized_lda": "shrinkage LDA",
    "qda": "QDA",
    "logistic_regression": "logistic regression",
    "unpenalized_logistic_regression": "unpenalized logistic regression",
}
#: The ``expected_performance`` candidate that stands for each gated model.
SCORED_AS = {
    "lda": "lda",
    "regularized_lda": "regularized_lda",
    "qda": "qda",
    "logistic_regression": "logistic_regression",
    "unpenalized_logistic_regression": "logistic_regression",
}


@dataclass(frozen=True)
class Bearing:
    """How one check bears on one model.

    Attributes
    ----------
    fails_at : str or None
        Lowest status of the check that fails the model's gate (``"fail"``, or ``"warn"`` for a
        check that never fails but whose warning stops the model); None: shown, never gates.
    why : str
        The reason, in a few words.
    """

    fails_at: str | None
    why: str


def _gates(why: str, at: str = "fail") -> Bearing:
    return Bearing(at, why)


def _shown(why: str) -> Bearing:
    return Bearing(None, why)


_HYGIENE = _gates("a constant or duplicated column makes every covariance singular and the coefficients unidentified")
_SIGNAL = _gates("equal class means leave a linear rule nothing to separate")
_SCALE = _shown("a conditioning hint; the model is fitted on standardized features or is invariant to scale")
_PERFORMANCE = _shown("its estimability and the majority rule are judged separately; a near tie is not a defect")

#: Model -> check -> how the check bears on it. Checks not listed are shown and never gate.
MATTERS: dict[str, dict[str, Bearing]] = {
    "lda": {
        "data_hygiene": _HYGIENE,
        "sample_size": _gates("LDA inverts the pooled covariance, singular when N - K <= p"),
        "scale_disparity": _shown("LDA is invariant to rescaling a feature"),
        "collinearity": _gates("LDA inverts the pooled covariance; near dependencies make it unstable"),
        "outliers": _gates("LDA rests on class means and one pooled covariance, which outlying rows pull"),
        "normality": _gates("LDA's rule is optimal for Gaussian classes"),
        "covariance_homogeneity": _gates("LDA assumes one covariance shared by every class"),
        "separation": _shown("separated classes are good news for LDA"),
        "discriminant_signal": _SIGNAL,
        "expected_performance": _PERFORMANCE,
    },
    "regularized_lda": {
        "data_hygiene": _HYGIENE,
        "sample_size": _shown("shrinkage makes the pooled covariance invertible even when N - K <= p"),
        "scale_disparity": _SCALE,
        "collinearity": _shown("shrinkage is the remedy for an unstable pooled covariance"),
        "outliers": _gates("shrinkage LDA rests on class means and one pooled covariance, which outlying rows pull"),
        "normality": _gates("shrinkage LDA's rule is optimal for Gaussian classes"),
        "covariance_homogeneity": _gates("shrinkage LDA still assumes one covariance shared by every class"),
        "separation": _shown("separated classes are good news for a discriminant model"),
        "discriminant_signal": _SIGNAL,
        "expected_performance": _PERFORMANCE,
    },
    "qda": {
        "data_hygiene": _HYGIENE,
        "sample_size": _gates(
            "QDA estimates a covariance per class; when N - K <= p the smallest class has fewer rows than features"
        ),
        "scale_disparity": _shown("QDA is invariant to rescaling a feature"),
        "collinearity": _shown(
            "the check judges the pooled covariance LDA inverts; QDA's reg_param regularizes each class's"
        ),
        "outliers": _gates("QDA rests on each class's mean and covariance, which outlying rows pull"),
        "normality": _gates("QDA's rule is optimal for Gaussian classes"),
        "covariance_homogeneity": _shown("unequal class covariances are what QDA models"),
        "separation": _shown("separated classes are good news for a discriminant model"),
        "discriminant_signal": _shown(
            "QDA can separate classes by their spread when their means agree; its predicted accuracy decides"
        ),
        "expected_performance": _PERFORMANCE,
    },
    "logistic_regression": {
        "data_hygiene": _HYGIENE,
        "sample_size": _shown("the L2 penalty keeps the estimate finite with few rows per coefficient"),
        "scale_disparity": _SCALE,
        "collinearity": _shown("the L2 penalty keeps coefficients stable under collinearity"),
        "outliers": _shown("logistic regression does not rest on class means and covariances"),
        "normality": _shown("logistic regression assumes nothing about the feature distribution"),
        "covariance_homogeneity": _shown("logistic regression assumes nothing about class covariances"),
        "separation": _shown("the L2 penalty keeps the estimate finite under separation"),
        "discriminant_signal": _SIGNAL,
        "expected_performance": _PERFORMANCE,
    },
    "unpenalized_logistic_regression": {
        "data_hygiene": _HYGIENE,
        "sample_size": _gates("with N - K <= p there are more coefficients than rows and no unique estimate"),
        "scale_disparity": _SCALE,
        "collinearity": _gates("near dependencies make maximum-likelihood coefficients unstable or unidentified"),
        "outliers": _shown("logistic regression does not rest on class means and covariances"),
        "normality": _shown("logistic regression assumes nothing about the feature distribution"),
        "covariance_homogeneity": _shown("logistic regression assumes nothing about class covariances"),
        "separation": _gates(
            "under complete or quasi-complete separation the maximum-likelihood estimate does not exist", "warn"
        ),
        "discriminant_signal": _SIGNAL,
        "expected_performance": _PERFORMANCE,
    },
}


def gate_status(findings: Mapping[str, Finding], config: Config) -> str:
    """Worst status over the findings whose severity is ``gate`` (advisory and off never count)."""
    return worst([f.status for k, f in findings.items() if config.severity_of(k) == "gate"])


def fails_gate(status: str, fail_on: str = "fail") -> bool:
    """Whether a status reaches ``fail_on`` (``"warn"`` or ``"fail"``)."""
    if fail_on not in FAIL_ON_LEVELS:
        raise DataError(f"fail_on must be one of {list(FAIL_ON_LEVELS)}; got {fail_on!r}.")
    return STATUS_RANK[status] >= STATUS_RANK[fail_on]


@dataclass(frozen=True)
class _Failure:
    check: str
    text: str


def _level(bearing: Bearing, fail_on: str) -> str | None:
    if bearing.fails_at is None:
        return None
    return min(bearing.fails_at, fail_on, key=STATUS_RANK.__getitem__)


def _figure(finding: Finding) -> str:
    return f" ({finding.figure})" if finding.figure and finding.figure != "-" else ""


def _check_failures(model: str, findings: Mapping[str, Finding], config: Config) -> list[_Failure]:
    out = []
    for key, finding in findings.items():
        bearing = MATTERS[model].get(key)
        if bearing is None:
            continue
        level = _level(bearing, config.fail_on)
        if level is None or config.severity_of(key) != "gate" or finding.status == "skip":
            continue
        if STATUS_RANK[finding.status] >= STATUS_RANK[level]:
            out.append(_Failure(key, f"{key} {finding.status}s{_figure(finding)}: {bearing.why}"))
    return out


def _performance_counts(findings: Mapping[str, Finding], config: Config) -> bool:
    """Whether the expected_performance figures can fail a gate (present, run, and gating)."""
    return "expected_performance" in findings and config.severity_of("expected_performance") == "gate"


def _estimability(model: str, findings: Mapping[str, Finding], config: Config) -> list[_Failure]:
    if not _performance_counts(findings, config) or findings["expected_performance"].status == "skip":
        return []
    out = []
    scored = CANDIDATE_FIGURES.read(findings) or {}
    if SCORED_AS[model] not in scored:
        why = (findings["expected_performance"].details.get("not_scored") or {}).get(SCORED_AS[model], "not scored")
        out.append(_Failure("expected_performance", f"{MODEL_WORDS[model]} could not be scored ({why})"))
    out += _no_signal(findings, config)
    return out


def _no_signal(findings: Mapping[str, Finding], config: Config) -> list[_Failure]:
    if _performance_counts(findings, config) and BEATS_MAJORITY.read(findings) is False:
        return [
            _Failure(
                "expected_performance",
                "no candidate predicts better than always choosing the largest class by two standard errors",
            )
        ]
    return []


def _usability(findings: Mapping[str, Finding], config: Config) -> list[_Failure]:
    out = _check_failures("logistic_regression", {k: f for k, f in findings.items() if k == "data_hygiene"}, config)
    if _performance_counts(findings, config) and findings["expected_performance"].status == "skip":
        out.append(
            _Failure(
                "expected_performance",
                f"nothing could be scored ({findings['expected_performance'].summary.rstrip('.')})",
            )
        )
    return out + _no_signal(findings, config)


def _model_failures(model: str, findings: Mapping[str, Finding], config: Config) -> list[_Failure]:
    return _check_failures(model, findings, config) + _estimability(model, findings, config)


def unmet_assumptions(model: str, findings: Mapping[str, Finding], config: Config) -> list[str]:
    """The checks that would fail a gate for ``model`` (its own assumptions), in table order."""
    return _checks_of(_model_failures(model, findings, config))


def _checks_of(failures: list[_Failure]) -> list[str]:
    return list(dict.fromkeys(f.check for f in failures))


def _join(items: list[str], word: str) -> str:
    return items[0] if len(items) == 1 else ", ".join(items[:-1]) + f" {word} " + items[-1]


def rule(model: str | None, findings: Mapping[str, Finding], config: Config) -> str:
    """The gate's rule in one line: what fails it, and what is shown only."""
    level = config.fail_on
    keys = list(findings)
    advisory = [k for k in keys if config.severity_of(k) == "advisory"]
    tail = f"; advisory, never gating: {', '.join(advisory)}" if advisory else ""
    if model is None:
        return (
            f"gated for any candidate: fails when data_hygiene reaches {level}, nothing could be scored, no candidate "
            "beats the majority rule, or none of LDA, shrinkage LDA, QDA and logistic regression passes its own gate "
            f"(gate for one model to judge its assumptions); the other findings are shown{tail}"
        )
    by_level: dict[str, list[str]] = {"fail": [], "warn": []}
    shown = []
    for k in keys:
        bearing = MATTERS[model].get(k)
        level_k = None if bearing is None else _level(bearing, level)
        if level_k is None or config.severity_of(k) != "gate":
            if k not in advisory:
                shown.append(k)
        else:
            by_level[level_k].append(k)
    clauses = [f"{_join(ks, 'or')} reaches {lvl}" for lvl, ks in by_level.items() if ks]
    name = MODEL_WORDS[model]
    return (
        f"gated for {name}: fails when {'; '.join(clauses) or 'no check'}, {name} cannot be scored, or no candidate "
        f"beats the majority rule; shown, not gating for {name}: {', '.join(shown) or 'none'}{tail}"
    )


def _and(items: list[str]) -> str:
    return _join(items, "and")


def judge(findings: Mapping[str, Finding], config: Config) -> Gate:
    """The gate for ``config.model`` (None: any candidate) at ``config.fail_on``."""
    model = config.model
    words_rule = rule(model, findings, config)
    if model is not None:
        failures = _model_failures(model, findings, config)
        name = MODEL_WORDS[model]
        headline = f"the data are {'not ' if failures else ''}fit for {name}"
        outcome = _cap(headline) + (f": {'; '.join(f.text for f in failures)}." if failures else ".")
        return Gate(
            model,
            config.fail_on,
            not failures,
            _checks_of(failures),
            words_rule,
            outcome,
            headline,
            [f.text for f in failures],
            [] if failures else [model],
        )
    per_model = {m: _model_failures(m, findings, config) for m in CANDIDATES}
    fit = [m for m in CANDIDATES if not per_model[m]]
    usable = _usability(findings, config)
    if usable or not fit:
        headline = "the data are not fit for any candidate"
        if usable:
            failures = usable
            outcome = f"{_cap(headline)}: {'; '.join(f.text for f in usable)}."
        else:
            failures = [f for m in CANDIDATES for f in per_model[m]]
            listing = "; ".join(
                f"{MODEL_WORDS[m]}, as {_and([f.text.split(':')[0] for f in per_model[m]])}" for m in CANDIDATES
            )
            outcome = f"{_cap(headline)}: {listing}."
    else:
        failures = []
        headline = f"the data are fit for {_and([MODEL_WORDS[m] for m in fit])}"
        others = [m for m in CANDIDATES if per_model[m]]
        unfit = "; ".join(f"{MODEL_WORDS[m]}: {', '.join(_checks_of(per_model[m]))}" for m in others)
        outcome = _cap(headline) + (f" (not for {unfit})." if others else ".")
    return Gate(
        None,
        config.fail_on,
        not failures,
        _checks_of(failures),
        words_rule,
        outcome,
        headline,
        [f.text for f in failures],
        fit,
    )


def _cap(text: str) -> str:
    return text[:1].upper() + text[1:]


def regate(verdict: Verdict, config: Config) -> Verdict:
    """The same verdict gated for ``config.model`` at ``config.fail_on`` (findings and recommendation unchanged).

    A comparison with a baseline already attached is kept, and still fails the gate when it drifted.
    """
    gate = judge(verdict.findings, config)
    if verdict.baseline is not None:
        gate = gate.with_drift(verdict.baseline.drifted)
    return dataclasses.replace(verdict, gate=gate)
