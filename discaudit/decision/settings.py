"""Settings for the recommended model, each traceable to a finding."""

from __future__ import annotations

from typing import TYPE_CHECKING, Any

from discaudit.decision.figures import (
    ANY_COMPLETE_SEPARATION,
    ANY_QUASI_COMPLETE_SEPARATION,
    ROWS_PER_FEATURE,
    SHRINKAGE,
    SMALLEST_CLASS_ROWS_PER_FEATURE,
    Findings,
    status,
)

if TYPE_CHECKING:
    from discaudit.config import Config


def suggested_params(model: str, findings: Findings, config: Config) -> dict[str, Any]:
    """Settings for the recommended model, each traceable to a finding."""
    standardize = status(findings, "scale_disparity") == "warn"
    shrink = SHRINKAGE.read(findings) or {}
    if model == "lda":
        return {"solver": "svd", "standardize": standardize}
    if model == "regularized_lda":
        return {
            "solver": "lsqr",
            "shrinkage": round(float(shrink.get("ledoit_wolf_standardized", 0.0)), 4) if shrink else "auto",
            "shrinkage_estimator": "Ledoit-Wolf on the pooled within-class covariance of standardized features",
            "standardize": True,
        }
    if model == "qda":
        smallest = SMALLEST_CLASS_ROWS_PER_FEATURE.read(findings) or 1.0
        reg = min(0.5, 1.0 / float(smallest))
        return {
            "reg_param": round(reg, 4),
            "reg_param_rule": "1 / (rows per feature in the smallest class), capped at 0.5 (heuristic)",
            "standardize": True,
        }
    needs_penalty = bool(ANY_COMPLETE_SEPARATION.read(findings) or ANY_QUASI_COMPLETE_SEPARATION.read(findings)) or (
        (ROWS_PER_FEATURE.read(findings) or 0) < config.rows_per_feature_warn
    )
    return {
        "standardize": True,
        "penalty": "l2",
        "C": 1.0 if needs_penalty else 100.0,
        "penalty_rule": "C = 1 when the classes separate or rows per feature are few, else a light penalty (C = 100)",
    }
