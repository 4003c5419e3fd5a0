"""Settings for the recommended model: keyword arguments the scikit-learn estimator accepts, and why.

``params`` holds only arguments of the estimator (plus ``standardize``, which puts a
StandardScaler in front of it); ``param_notes`` explains each. When the predicted performance
was measured, the settings are exactly those the model was scored at, so ``estimator()``
builds the scored model.
"""

from __future__ import annotations

from typing import TYPE_CHECKING, Any

from discaudit.decision.figures import (
    ANY_COMPLETE_SEPARATION,
    ANY_QUASI_COMPLETE_SEPARATION,
    ROWS_PER_FEATURE,
    SHRINKAGE_STANDARDIZED,
    SMALLEST_CLASS_ROWS_PER_FEATURE,
    Findings,
    status,
)

if TYPE_CHECKING:
    from discaudit.config import Config

#: Iterations allowed to scikit-learn's lbfgs for logistic regression (its default of 100 often
#: stops short on standardized data with many features; design choice).
LOGISTIC_MAX_ITER = 5000

_STANDARDIZE_NOTE = {
    True: "put a StandardScaler in front of the estimator; the predicted performance was scored on that scale",
    False: "not needed: LDA's predictions do not change with the scale of the features",
}


#: The ``standardize`` value that puts ``discaudit.estimator.WithinClassScaler`` in front.
WITHIN_CLASS = "within_class"

_WITHIN_CLASS_NOTE = (
    "put discaudit's WithinClassScaler in front of the estimator (each feature divided by its pooled "
    "within-class standard deviation, learned in fit from X and y); the predicted performance was scored on "
    "that scale"
)


def _standardize_lda(findings: Findings) -> bool:
    return status(findings, "scale_disparity") == "warn"


def scored_settings(model: str, scored: dict[str, Any], findings: Findings) -> tuple[dict[str, Any], dict[str, str]]:
    """``params`` and ``param_notes`` for a model at the settings it was scored at."""
    separated = bool(ANY_COMPLETE_SEPARATION.read(findings) or ANY_QUASI_COMPLETE_SEPARATION.read(findings))
    if model == "lda":
        standardize = _standardize_lda(findings)
        solver = scored.get("solver", "svd")
        params: dict[str, Any] = {"solver": solver, "standardize": standardize}
        notes = {
            "solver": "svd: no inverse of the pooled covariance is formed (stable when features are collinear)"
            if solver == "svd"
            else "lsqr without shrinkage: the class means nearly lie in a lower-dimensional subspace, where the svd "
            "solver would drop a between-class direction; lsqr fits the same full-rank LDA, the model scored",
            "standardize": _STANDARDIZE_NOTE[False]
            + ("; advised anyway because feature scales differ widely (numerical conditioning)" if standardize else ""),
        }
    elif model == "regularized_lda":
        standardize = scored.get("standardize", WITHIN_CLASS)
        params = {"solver": "lsqr", "shrinkage": scored["shrinkage"], "standardize": standardize}
        within = standardize == WITHIN_CLASS
        notes = {
            "solver": "lsqr: the solver of scikit-learn's LDA that accepts a shrinkage intensity",
            "shrinkage": "the Ledoit-Wolf intensity (Ledoit & Wolf 2004) of the pooled within-class covariance of "
            "features scaled to unit pooled within-class variance: correlations are shrunk toward 0 and the "
            "within-class variances kept, as scikit-learn's shrinkage='auto' does per class"
            if within
            else "the intensity with the lowest exact leave-one-out log-loss on the grid scored, on standardized "
            "features (a feature does not vary within the classes, so the within-class scale was not used)",
            "standardize": _WITHIN_CLASS_NOTE if within else _STANDARDIZE_NOTE[True],
        }
    elif model == "qda":
        params = {"solver": "svd", "reg_param": scored["reg_param"], "standardize": True}
        notes = {
            "solver": "svd with reg_param: each class covariance becomes (1 - reg_param) S_k + reg_param I, the form "
            "scored (scikit-learn's other shrinkage option of QDA was not scored)",
            "reg_param": "the value with the lowest exact leave-one-out log-loss on the grid scored, on standardized "
            "features",
            "standardize": _STANDARDIZE_NOTE[True],
        }
    else:
        params = {"C": scored["C"], "max_iter": LOGISTIC_MAX_ITER, "standardize": True}
        notes = {
            "C": "inverse L2 penalty with the lowest held-out log-loss on the grid scored"
            + ("; the penalty also keeps the fit finite where the classes separate" if separated else ""),
            "max_iter": "enough lbfgs iterations to converge on standardized features",
            "standardize": _STANDARDIZE_NOTE[True],
        }
    return params, notes


def rule_settings(model: str, findings: Findings, config: Config) -> tuple[dict[str, Any], dict[str, str]]:
    """Settings when no predicted performance exists: rules of thumb, each traceable to a finding."""
    if model == "lda":
        return scored_settings("lda", {}, findings)
    if model == "regularized_lda":
        intensity = SHRINKAGE_STANDARDIZED.read(findings)
        if intensity is not None:
            # The collinearity check's intensity is on features of unit pooled within-class variance.
            return scored_settings(
                model, {"shrinkage": round(float(intensity), 4), "standardize": WITHIN_CLASS}, findings
            )
        params, notes = scored_settings(model, {"shrinkage": "auto", "standardize": True}, findings)
        notes["shrinkage"] = "scikit-learn's Ledoit-Wolf estimate ('auto')"
        return params, notes
    if model == "qda":
        smallest = SMALLEST_CLASS_ROWS_PER_FEATURE.read(findings) or 1.0
        params, notes = scored_settings(model, {"reg_param": round(min(0.5, 1.0 / float(smallest)), 4)}, findings)
        notes["reg_param"] = "1 / (rows per feature in the smallest class), capped at 0.5 (a rule of thumb)"
        return params, notes
    separated = bool(ANY_COMPLETE_SEPARATION.read(findings) or ANY_QUASI_COMPLETE_SEPARATION.read(findings))
    few = (ROWS_PER_FEATURE.read(findings) or 0) < config.rows_per_feature_warn
    params, notes = scored_settings(model, {"C": 1.0 if separated or few else 100.0}, findings)
    notes["C"] = (
        "1 when the classes separate or rows per feature are few, else a light penalty of 100 (a rule of thumb)"
    )
    return params, notes
