"""The figures the decision reads from the findings, declared once with their check and detail path.

A rule reads a finding's details only through a :class:`Figure` listed here, so a misspelt path
is a name error, not a rule that silently never fires; ``tests/test_decision.py`` checks that
every declared figure is written by its check.
"""

from __future__ import annotations

from collections.abc import Mapping
from dataclasses import dataclass
from typing import Any

from discaudit.findings import Finding

Findings = Mapping[str, Finding]


@dataclass(frozen=True)
class Figure:
    """One value in a check's details: ``findings[check].details[path[0]][path[1]]...``."""

    check: str
    path: tuple[str, ...]

    def read(self, findings: Findings) -> Any:
        """The value, or None when the check did not run or did not write it."""
        value: Any = findings[self.check].details if self.check in findings else {}
        for part in self.path:
            if not isinstance(value, Mapping):
                return None
            value = value.get(part)
        return value


def status(findings: Findings, check: str) -> str:
    """A check's status; ``skip`` when it is absent."""
    return findings[check].status if check in findings else "skip"


ERROR_DF = Figure("sample_size", ("error_df",))
N_FEATURES = Figure("sample_size", ("n_features",))
ROWS_PER_FEATURE = Figure("sample_size", ("rows_per_feature",))
SMALLEST_CLASS_ROWS_PER_FEATURE = Figure("sample_size", ("smallest_class_rows_per_feature",))
RANK_DEFICIENT = Figure("collinearity", ("rank_deficient",))
MAX_VIF = Figure("collinearity", ("max_vif",))
CONDITION_NUMBER = Figure("collinearity", ("condition_number",))
SHRINKAGE = Figure("collinearity", ("shrinkage",))
RETAINED_SEPARATION = Figure("collinearity", ("shrinkage", "retained_separation"))
SHRINKAGE_STANDARDIZED = Figure("collinearity", ("shrinkage", "ledoit_wolf_standardized"))
DELTA_BIC = Figure("covariance_homogeneity", ("bic", "delta_bic"))
MOST_DIFFERENT_CLASS = Figure("covariance_homogeneity", ("most_different_class",))
ANY_COMPLETE_SEPARATION = Figure("separation", ("any_complete",))
ANY_QUASI_COMPLETE_SEPARATION = Figure("separation", ("any_quasi_complete",))
DISCRETE_FEATURES = Figure("normality", ("discrete_features",))
#: Features with one value per class that vary across classes: plain LDA's pooled covariance is singular.
CLASS_ENCODING_FEATURES = Figure("data_hygiene", ("class_encoding_features",))
#: Wilks' Lambda below machine precision: the classes separate exactly (a rounding-level figure).
EXACT_SEPARATION = Figure("discriminant_signal", ("exact_separation",))

# Read by the remedies (decision/remedies.py).
N_TOTAL = Figure("sample_size", ("n_total",))
SD_RATIO = Figure("scale_disparity", ("sd_ratio",))
REMOVAL_PLAN = Figure("collinearity", ("removal_plan",))
OUTLIER_PER_CLASS = Figure("outliers", ("per_class",))
OUTLIER_N_FLAGGED = Figure("outliers", ("n_flagged",))
OUTLIER_MAX_SHIFT = Figure("outliers", ("max_mean_shift",))
OUTLIER_LOGDET_EXCESS = Figure("outliers", ("pooled_logdet_excess_per_feature",))
NORMALITY_PER_CLASS = Figure("normality", ("per_class",))
PAIRWISE = Figure("discriminant_signal", ("pairwise",))
WILKS_LAMBDA = Figure("discriminant_signal", ("wilks_lambda",))

CANDIDATE_FIGURES = Figure("expected_performance", ("candidates",))
PAIRED = Figure("expected_performance", ("paired",))
BEST = Figure("expected_performance", ("best",))
MOST_EFFICIENT_WITHIN_NOISE = Figure("expected_performance", ("most_efficient_within_noise",))
SWITCH_SE = Figure("expected_performance", ("switch_se",))
COMPETITIVE = Figure("expected_performance", ("competitive_by_log_loss",))
LOWEST_LOG_LOSS = Figure("expected_performance", ("lowest_log_loss",))
#: Candidates the log-loss rules out: the candidate each loses to, why, and the paired figures.
NOT_CONTENDERS = Figure("expected_performance", ("not_contenders",))
NO_FEATURE_LOG_LOSS = Figure("expected_performance", ("no_feature_log_loss",))
BEATS_MAJORITY = Figure("expected_performance", ("beats_majority_rule",))
MAJORITY_ACCURACY = Figure("expected_performance", ("majority_rule_accuracy",))

#: Every figure the decision reads.
FIGURES: tuple[Figure, ...] = (
    ERROR_DF,
    N_FEATURES,
    ROWS_PER_FEATURE,
    SMALLEST_CLASS_ROWS_PER_FEATURE,
    RANK_DEFICIENT,
    MAX_VIF,
    CONDITION_NUMBER,
    SHRINKAGE,
    RETAINED_SEPARATION,
    SHRINKAGE_STANDARDIZED,
    DELTA_BIC,
    MOST_DIFFERENT_CLASS,
    ANY_COMPLETE_SEPARATION,
    ANY_QUASI_COMPLETE_SEPARATION,
    DISCRETE_FEATURES,
    CANDIDATE_FIGURES,
    PAIRED,
    BEST,
    MOST_EFFICIENT_WITHIN_NOISE,
    SWITCH_SE,
    BEATS_MAJORITY,
    MAJORITY_ACCURACY,
    COMPETITIVE,
    LOWEST_LOG_LOSS,
    NOT_CONTENDERS,
    NO_FEATURE_LOG_LOSS,
    CLASS_ENCODING_FEATURES,
    EXACT_SEPARATION,
    N_TOTAL,
    SD_RATIO,
    REMOVAL_PLAN,
    OUTLIER_PER_CLASS,
    OUTLIER_N_FLAGGED,
    OUTLIER_MAX_SHIFT,
    OUTLIER_LOGDET_EXCESS,
    NORMALITY_PER_CLASS,
    PAIRWISE,
    WILKS_LAMBDA,
)
