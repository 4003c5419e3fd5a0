"""Every threshold the audit applies, with its default and its source.

``Config`` is frozen and validated when it is made, so a bad value fails at once with a
message naming the field, never deep inside a check.
"""

from __future__ import annotations

import dataclasses
from dataclasses import dataclass, field
from typing import Any

from discaudit.checks import CHECK_KEYS
from discaudit.errors import DataError

__all__ = [
    "CATEGORICAL_POLICIES",
    "CHECK_KEYS",
    "FAIL_ON_LEVELS",
    "GATE_MODELS",
    "LOGISTIC_SCORING",
    "MISSING_POLICIES",
    "NON_NUMERIC_POLICIES",
    "OUTLIER_CUTOFFS",
    "REMEDY_EFFECTS",
    "SEVERITIES",
    "Config",
]


MISSING_POLICIES = ("error", "drop_rows")
NON_NUMERIC_POLICIES = ("error", "drop")
CATEGORICAL_POLICIES = ("non_numeric", "codes")
SEVERITIES = ("gate", "advisory", "off")
OUTLIER_CUTOFFS = ("small_sample_f", "chi2", "hardin_rocke")
REMEDY_EFFECTS = ("statuses", "performance")
#: How logistic regression's held-out figures are estimated (``Config.logistic_scoring``).
LOGISTIC_SCORING = ("leave_one_out", "k_fold")
#: Models a gate can judge: the four candidates (as the audit hands them out) and plain
#: maximum-likelihood logistic regression, for teams that fit it without a penalty.
GATE_MODELS = ("lda", "regularized_lda", "qda", "logistic_regression", "unpenalized_logistic_regression")
#: Gate levels: the lowest status of a check that matters that fails the gate.
FAIL_ON_LEVELS = ("warn", "fail")


def _threshold(default: Any, doc: str, source: str) -> Any:
    return field(default=default, metadata={"doc": doc, "source": source})


@dataclass(frozen=True)
class Config:
    """Thresholds and policies of the audit.

    Every field documents its default and where the default comes from; a field marked
    *common practice* has no single published source. See ``Config.describe()``.
    """

    missing: str = _threshold(
        "error", "NaN/inf in a feature: 'error' raises DataError, 'drop_rows' drops those rows.", "design choice"
    )
    non_numeric: str = _threshold(
        "error", "Non-numeric feature columns: 'error' raises DataError, 'drop' sets them aside.", "design choice"
    )
    categorical: str = _threshold(
        "non_numeric",
        "pandas categorical feature columns: 'non_numeric' treats them as non-numeric (see non_numeric); "
        "'codes' audits their category codes as numbers (unused categories keep their codes, missing ones "
        "become missing values).",
        "design choice",
    )
    vif_warn: float = _threshold(5.0, "VIF above this is worth a look.", "common practice")
    vif_fail: float = _threshold(
        10.0,
        "VIF above this is serious collinearity.",
        "Kutner, Nachtsheim, Neter & Li, Applied Linear Statistical Models",
    )
    condition_index_warn: float = _threshold(
        10.0, "Condition index above this is a moderate near dependency.", "Belsley, Kuh & Welsch (1980)"
    )
    condition_index_fail: float = _threshold(
        30.0, "Condition index above this is a strong near dependency.", "Belsley, Kuh & Welsch (1980)"
    )
    variance_proportion: float = _threshold(
        0.5,
        "A feature belongs to a near dependency when its variance proportion exceeds this.",
        "Belsley, Kuh & Welsch (1980)",
    )
    scale_ratio_warn: float = _threshold(
        1e3, "Largest over smallest pooled within-class SD above this: standardize.", "common practice"
    )
    box_m_alpha: float = _threshold(
        0.001, "Significance level for Box's M.", "Tabachnick & Fidell, Using Multivariate Statistics (common practice)"
    )
    bic_margin: float = _threshold(
        10.0,
        "BIC difference (shared minus separate covariances) above which separate covariances are strongly favoured.",
        "Kass & Raftery (1995, JASA 90:773-795): a BIC difference above 10 is very strong evidence",
    )
    rows_per_feature_warn: float = _threshold(
        10.0,
        "Total rows per feature below this: the pooled covariance is poorly estimated.",
        "common practice (5 to 20 is quoted)",
    )
    qda_rows_per_feature: float = _threshold(
        5.0, "QDA needs at least this many rows per feature in its smallest class.", "common practice"
    )
    shrinkage_retained_min: float = _threshold(
        0.9,
        "Recommend shrinkage for collinearity only when it keeps at least this share of the class separation.",
        "design choice, tuned on the even-seed scenarios of the validation study",
    )
    shrinkage_useful_min: float = _threshold(
        0.01,
        "Recommend shrinkage for collinearity only when the Ledoit-Wolf intensity is at least this: a smaller "
        "intensity says the pooled covariance is already well estimated.",
        "design choice",
    )
    imbalance_warn: float = _threshold(
        10.0, "Largest over smallest class size above this: report the imbalance.", "common practice"
    )
    signal_alpha: float = _threshold(0.05, "Significance level for Wilks' Lambda.", "conventional 5% level")
    weak_signal_lambda: float = _threshold(
        0.9, "Wilks' Lambda above this (under 10% of variance between classes) is a weak signal.", "common practice"
    )
    outlier_quantile: float = _threshold(
        0.975, "Chi-square quantile for flagging robust squared distances.", "Rousseeuw & van Zomeren (1990)"
    )
    outlier_fraction_warn: float = _threshold(
        0.05, "Share of a class flagged as outlying above this: warn.", "common practice"
    )
    robust_min_rows_per_feature: float = _threshold(
        10.0,
        "A class gets a robust (MCD) fit only with at least this many rows per feature; fewer use classical distances.",
        "design choice: on seeded Gaussian classes with 6 rows per feature the reweighted MCD still flagged "
        "10-30% of clean rows, so we ask for 10",
    )
    robust_fit_max_rows: int = _threshold(
        10000,
        "Rows per class above which the robust (MCD) fit uses a seeded random subset of this many rows; every row "
        "of the class is still scored against that fit.",
        "design choice (bounds the cost of the C-steps: 0.38 s per class at p = 30 against 0.58 s at 20,000 rows; "
        "at 10,000 rows the sampling error of the fit is a few per cent of a covariance entry, well inside what "
        "the F cut-off allows for; streamed input applies the same cap to its sample)",
    )
    robust_min_distinct: int = _threshold(
        10,
        "A feature with fewer distinct values than this within a class (or than half the class's rows, in a class "
        "of fewer than twice this many rows) is left out of that class's robust fit, as is one whose most common "
        "value is held by at least the h rows the fit rests on (an exact fit).",
        "design choice: on seeded Gaussian classes (n = 300, 3 of 4 features rounded to k levels) the reweighted "
        "MCD flagged half the class in 2 of 8 classes at k = 6 and about the nominal share from k = 7; 10 leaves "
        "room for lumpier ordinal scales. The exact-fit "
        "rule is the MCD's breakdown property (Rousseeuw & Leroy 1987)",
    )
    robust_max_skewness: float = _threshold(
        0.45,
        "A feature whose octile skewness within a class exceeds this in absolute value is left out of that class's "
        "robust fit: on its raw scale the fit reads the long tail as outliers (a log or similar transform may suit it).",
        "design choice: on seeded classes with one lognormal feature the fit flagged about 5% of the rows at octile "
        "skewness 0.41 and 10% at 0.52 (Hinkley 1975 for the measure)",
    )
    outlier_far_out_mads: float = _threshold(
        3.0,
        "A row is flagged only when its squared robust distance is beyond the cut-off and also far out among the "
        "class's own distances: beyond the median plus this many normalized MADs of their cube roots.",
        "Hampel identifier (Hampel 1974; Davies & Gather 1993) on the Wilson & Hilferty (1931) cube-root scale; "
        "3 is common practice",
    )
    outlier_cutoff: str = _threshold(
        "small_sample_f",
        "Cut-off for robust squared distances: 'small_sample_f' (the F law of a new observation's distance from "
        "m fitted rows, tending to chi-square(p)), 'chi2' (chi-square(p) quantile) or 'hardin_rocke' (F-based).",
        "Rousseeuw & van Zomeren (1990); Hardin & Rocke (2005, JCGS 14:928-946); the F law of a new "
        "observation's Mahalanobis distance (e.g. Mardia, Kent & Bibby 1979, Multivariate Analysis)",
    )
    outlier_mean_shift_warn: float = _threshold(
        0.1,
        "Shift of a class mean when its flagged rows are removed, in pooled-Mahalanobis units: warn.",
        "design choice",
    )
    outlier_mean_shift_fail: float = _threshold(
        0.25,
        "Shift of a class mean when its flagged rows are removed, in pooled-Mahalanobis units: fail.",
        "design choice",
    )
    outlier_logdet_warn: float = _threshold(
        0.1,
        "Per-feature log-determinant excess of the classical over the robust pooled covariance: warn.",
        "design choice (0.1 is about 10% variance inflation per dimension)",
    )
    outlier_logdet_fail: float = _threshold(
        0.2,
        "Per-feature log-determinant excess of the classical over the robust pooled covariance: fail.",
        "design choice (0.2 is about 22% variance inflation per dimension)",
    )
    normality_alpha: float = _threshold(
        0.001, "Significance level for the multivariate normality tests.", "common practice"
    )
    skew_large: float = _threshold(
        2.0, "Absolute per-feature skewness above this is a substantial departure.", "West, Finch & Curran (1995)"
    )
    kurtosis_large: float = _threshold(
        7.0, "Per-feature excess kurtosis above this is a substantial departure.", "West, Finch & Curran (1995)"
    )
    mardia_kurtosis_ratio_large: float = _threshold(
        1.5,
        "Mardia's b2,p over its normal expectation p(p+2) above this (or below its inverse): heavy (light) tails.",
        "design choice (a multivariate t with 8 df gives about 1.5)",
    )
    few_distinct_values: int = _threshold(
        5, "A feature with at most this many distinct values is treated as discrete.", "common practice"
    )
    pairwise_max_rows: int = _threshold(
        1000,
        "Rows per class above which pairwise statistics use a seeded random subsample.",
        "design choice on simulation (benchmarks/bench_normality_rows.py, 200 replicates a cell, alpha 0.001): "
        "at p = 5 to 30, 1,000 rows give the statuses 2,500 rows give (multivariate t5 fails in 199-200 of 200, "
        "chi-square coordinates warn in all, Gaussian rows pass as often) at a quarter of the time (cost grows "
        "as rows squared); at p = 50 Gaussian rows warn in about 2 % against about 0 % at 2,500 rows",
    )
    sample_rows_per_class: int = _threshold(
        20000,
        "Streamed or distributed input: rows per class kept in the seeded sample for the robust and pairwise checks.",
        "design choice (bounds memory; moments stay exact)",
    )
    separation_max_rows: int = _threshold(
        500,
        "Rows per comparison above which separation is first tested on a seeded subsample (the working set then "
        "grows with violated rows until every row is certified).",
        "design choice (the start size changes only the time, not the answer; 500 rows took a third of the time "
        "of 2000 on the benchmark data, separated or not)",
    )
    performance_switch_se: float = _threshold(
        1.0,
        "A candidate is within noise of the best when its predicted accuracy is lower by at most this many paired "
        "standard errors; the recommendation is the most efficient candidate within noise of the best.",
        "the one-standard-error rule (Breiman, Friedman, Olshen & Stone 1984, Classification and Regression Trees, "
        "ch. 3; Hastie, Tibshirani & Friedman 2009, The Elements of Statistical Learning, sec. 7.10; cited from "
        "memory): the simplest model within one standard error of the best. On the tuning split of the validation "
        "study (57 families after the first held-out batch was retired) 0.75 to 1.5 did about equally well and 0.5 "
        "worse (benchmarks/validation/tune.py)",
    )
    log_loss_guard_se: float = _threshold(
        1.0,
        "A candidate whose leave-one-out log-loss exceeds another's by more than this many paired standard errors "
        "is not a contender when its log-loss is also worse than predicting the class shares (its probabilities "
        "have collapsed), or when the other is of a different kind and it does not out-predict that one by more "
        "than performance_switch_se paired standard errors of accuracy.",
        "design choice, set on the tuning families of the validation study: with performance_switch_se at 1, a "
        "guard of 1 did better than 0.5, 1.5, 2 and 3 (benchmarks/validation/tune.py)",
    )
    performance_max_rows: int = _threshold(
        20000,
        "Rows above which the leave-one-out predictions are scored on a seeded sample of about this many rows "
        "(each refit still leaves out only the scored row).",
        "design choice (the standard error of an accuracy on 20,000 rows is at most 0.35 points)",
    )
    logistic_max_rows: int = _threshold(
        4000,
        "Rows of the seeded, class-proportional subsample on which logistic regression is cross-validated.",
        "design choice (bounds the cost; the standard error of an accuracy near 0.9 on 4000 rows is 0.5 points)",
    )
    logistic_scoring: str = _threshold(
        "leave_one_out",
        "How logistic regression is scored on its subsample: 'leave_one_out' (one fit per C, each row's "
        "leave-one-out fit by one Newton step from it, rows the step moves far refitted exactly; "
        "discaudit.stats.logistic_leave_one_out) or 'k_fold' (stratified cross-validation in "
        "logistic_folds folds).",
        "design choice: leave-one-out scores logistic regression trained on n - 1 rows, as the Gaussian "
        "candidates are scored, at about a tenth of the fits of ten-fold cross-validation (Pregibon 1981; "
        "Rad & Maleki 2020)",
    )
    logistic_folds: int = _threshold(
        10,
        "Folds of the stratified cross-validation of logistic regression when logistic_scoring is 'k_fold' "
        "(fewer when a class has fewer rows).",
        "design choice (ten folds, also the default of R caret's trainControl(method = 'cv'))",
    )
    remedy_candidates: int = _threshold(
        6,
        "Proposed remedies whose effect is evaluated on the changed data (the most pressing first).",
        "design choice (one proposal per kind of remedy fits; each costs the moment-based checks once)",
    )
    remedy_gross_outlier_ratio: float = _threshold(
        2.0,
        "A flagged row is a gross outlier, proposed for removal, when its squared robust distance is at least this "
        "many times its class's cut-off (only when the outliers check judged the flagged rows influential, and "
        "only in classes where such rows are at most outlier_fraction_warn of the class).",
        "design choice (twice the chi-square(p) 0.975 quantile has a Gaussian tail probability of 1.5e-3 at p = 1, "
        "6e-4 at p = 2 and 1e-5 at p = 10)",
    )
    remedy_effects: str = _threshold(
        "statuses",
        "What a remedy's predicted effect holds: 'statuses' (the statuses of the cheap checks the change can move; "
        "the covariance check, whose model fits iterate, is left to Verdict.what_if) or 'performance' (also the "
        "covariance check and the expected_performance check recomputed on the changed data: the accuracy of the "
        "recommended model and whether the recommendation changes).",
        "design choice: 'statuses' by default because each recomputation costs about as much as the audit's own "
        "expected_performance check, most of an audit below 10,000 rows; Verdict.what_if and --what-if always "
        "recompute it",
    )
    remedy_rows_per_class: int = _threshold(
        500,
        "A remedy's effect includes the row-reading check it addresses (outliers, normality) only while every class "
        "has at most this many rows (or twice the rows a robust fit needs, if more); larger data leave it to "
        "Verdict.what_if. Also the rows per class held while the moment-based checks run, and the per-class sample "
        "on which remedy_effects='performance' recomputes the predicted performance on larger data.",
        "design choice: that check costs about what it costs in the audit, so this keeps ranking the remedies near a "
        "fifth of the audit's time at every size measured (benchmarks/bench_what_if.py)",
    )
    model: str | None = _threshold(
        None,
        "The model the gate judges: 'lda', 'regularized_lda', 'qda', 'logistic_regression' (L2-penalized, as the "
        "audit scores and hands it out) or 'unpenalized_logistic_regression'; only the findings that bear on that "
        "model fail the gate (discaudit.decision.gate.MATTERS). None: the gate fails only when the data are "
        "unusable or no candidate is fit.",
        "design choice (discaudit.decision.gate documents the reason for every check of every model)",
    )
    fail_on: str = _threshold(
        "fail",
        "Lowest status of a check that matters for the gated model that fails the gate: 'fail' or 'warn'.",
        "design choice",
    )
    baseline_alpha: float = _threshold(
        0.01,
        "Family-wise significance level of the comparison with a baseline: every two-sample test (class priors; "
        "each class's mean and covariance) is made at this level divided by the number of tests (Bonferroni).",
        "design choice; Bonferroni's inequality bounds the chance that a batch from the accepted population fails "
        "any test by this level",
    )
    baseline_mean_shift: float = _threshold(
        0.2,
        "Smallest shift of a class mean, as a Mahalanobis distance in units of the class's pooled (accepted and new) "
        "standard deviation, that counts as drift when it is also significant.",
        "Cohen (1988, Statistical Power Analysis for the Behavioral Sciences): d = 0.2 is a small effect",
    )
    baseline_spread_ratio: float = _threshold(
        1.5,
        "Smallest typical change of a class covariance that counts as drift when it is also significant: exp of "
        "the root mean square of the log variance ratios along the eigen-directions of S_accepted^-1 S_new "
        "(1 when the covariances are equal; 2 when one is doubled).",
        "design choice (variances 50% larger or a third smaller in a typical direction: SDs off by more than 20%)",
    )
    baseline_prior_tolerance: float = _threshold(
        0.05,
        "Largest move of a class's share of the rows (absolute, e.g. 0.30 -> 0.35) tolerated; a larger move "
        "counts as drift when the chi-square test of equal class shares is also significant.",
        "design choice (5 percentage points)",
    )
    severity: dict[str, str] = field(
        default_factory=dict,
        metadata={
            "doc": "Per-check severity: 'gate' (default), 'advisory' (never fails the gate) or 'off' (skipped).",
            "source": "design choice",
        },
    )

    def __post_init__(self) -> None:
        if self.missing not in MISSING_POLICIES:
            raise DataError(f"Config.missing must be one of {MISSING_POLICIES}; got {self.missing!r}.")
        if self.outlier_cutoff not in OUTLIER_CUTOFFS:
            raise DataError(f"Config.outlier_cutoff must be one of {OUTLIER_CUTOFFS}; got {self.outlier_cutoff!r}.")
        if self.remedy_effects not in REMEDY_EFFECTS:
            raise DataError(f"Config.remedy_effects must be one of {REMEDY_EFFECTS}; got {self.remedy_effects!r}.")
        if self.logistic_scoring not in LOGISTIC_SCORING:
            raise DataError(
                f"Config.logistic_scoring must be one of {LOGISTIC_SCORING}; got {self.logistic_scoring!r}."
            )
        if self.model is not None and self.model not in GATE_MODELS:
            raise DataError(f"Config.model must be one of {list(GATE_MODELS)} or None; got {self.model!r}.")
        if self.fail_on not in FAIL_ON_LEVELS:
            raise DataError(f"Config.fail_on must be one of {list(FAIL_ON_LEVELS)}; got {self.fail_on!r}.")
        if self.non_numeric not in NON_NUMERIC_POLICIES:
            raise DataError(f"Config.non_numeric must be one of {NON_NUMERIC_POLICIES}; got {self.non_numeric!r}.")
        if self.categorical not in CATEGORICAL_POLICIES:
            raise DataError(f"Config.categorical must be one of {CATEGORICAL_POLICIES}; got {self.categorical!r}.")
        for f in dataclasses.fields(self):
            value = getattr(self, f.name)
            if f.type in ("float", "int"):
                if isinstance(value, bool) or not isinstance(value, (int, float)):
                    raise DataError(f"Config.{f.name} must be a number; got {value!r}.")
                if not value > 0:
                    raise DataError(f"Config.{f.name} must be positive; got {value!r}.")
        for name in (
            "box_m_alpha",
            "signal_alpha",
            "normality_alpha",
            "outlier_fraction_warn",
            "variance_proportion",
            "baseline_alpha",
            "baseline_prior_tolerance",
        ):
            if not 0 < getattr(self, name) < 1:
                raise DataError(f"Config.{name} must lie strictly between 0 and 1; got {getattr(self, name)!r}.")
        if not 0.5 < self.outlier_quantile < 1:
            raise DataError(f"Config.outlier_quantile must lie in (0.5, 1); got {self.outlier_quantile!r}.")
        if not self.baseline_spread_ratio > 1:
            raise DataError(f"Config.baseline_spread_ratio must exceed 1; got {self.baseline_spread_ratio!r}.")
        if self.vif_fail < self.vif_warn:
            raise DataError("Config.vif_fail must not be below Config.vif_warn.")
        if self.condition_index_fail < self.condition_index_warn:
            raise DataError("Config.condition_index_fail must not be below Config.condition_index_warn.")
        if not isinstance(self.severity, dict):
            raise DataError(f"Config.severity must be a mapping of check to severity; got {self.severity!r}.")
        for key, level in self.severity.items():
            if key not in CHECK_KEYS:
                raise DataError(f"Config.severity names an unknown check {key!r}; checks are {list(CHECK_KEYS)}.")
            if level not in SEVERITIES:
                raise DataError(f"Config.severity[{key!r}] must be one of {SEVERITIES}; got {level!r}.")

    def severity_of(self, check: str) -> str:
        """Severity of a check: 'gate', 'advisory' or 'off'."""
        return self.severity.get(check, "gate")

    @classmethod
    def describe(cls) -> list[dict[str, Any]]:
        """Each field with its default, meaning and source."""
        out = []
        for f in dataclasses.fields(cls):
            default = f.default if f.default_factory is dataclasses.MISSING else f.default_factory()
            out.append({"name": f.name, "default": default, "doc": f.metadata["doc"], "source": f.metadata["source"]})
        return out

    def to_dict(self) -> dict[str, Any]:
        """Plain mapping of every field (used in reports)."""
        return {f.name: getattr(self, f.name) for f in dataclasses.fields(self)}
