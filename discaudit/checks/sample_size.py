"""Check ``sample_size``: rows against the parameters LDA and QDA estimate."""

from __future__ import annotations

from typing import TYPE_CHECKING

from discaudit.checks._robust import canonical_layout
from discaudit.dataset import AuditData
from discaudit.findings import Finding, fmt, sentence
from discaudit.jsonable import label

if TYPE_CHECKING:
    from discaudit.config import Config

KEY = "sample_size"


def run(data: AuditData, config: Config, random_state: int | None = None) -> Finding:
    """Compare N - K, N / p and the smallest class with the number of features.

    LDA needs N - K > p for a nonsingular pooled covariance (fail otherwise); fewer than
    ``rows_per_feature_warn`` rows per feature, a smallest class with no more rows than
    features (QDA impossible), or an imbalance above ``imbalance_warn`` warn. The rows-per-
    feature rule is common practice, not a theorem.
    """
    m = data.moments
    counts = m.counts
    N, K, p = m.n_total, m.n_classes, m.n_features
    _, ranks = canonical_layout(data)  # equal sizes: the first in the canonical order (content, not names)
    smallest = min(range(len(counts)), key=lambda k: (int(counts[k]), ranks[k]))
    rows_per_feature = N / p
    imbalance = float(counts.max() / counts.min())
    details = {
        "n_total": N,
        "n_classes": K,
        "n_features": p,
        "class_counts": {label(c): int(n) for c, n in zip(m.classes, counts, strict=True)},
        "priors": {label(c): float(n / N) for c, n in zip(m.classes, counts, strict=True)},
        "error_df": N - K,
        "rows_per_feature": rows_per_feature,
        "smallest_class": label(m.classes[smallest]),
        "smallest_class_rows_per_feature": float(counts[smallest] / p),
        "imbalance_ratio": imbalance,
        "rule": (
            f"LDA needs N - K > p; at least {fmt(config.rows_per_feature_warn)} rows per feature overall and "
            f"{fmt(config.qda_rows_per_feature)} per feature in the smallest class for QDA (common practice)."
        ),
        "thresholds": {
            "rows_per_feature_warn": config.rows_per_feature_warn,
            "qda_rows_per_feature": config.qda_rows_per_feature,
            "imbalance_warn": config.imbalance_warn,
        },
    }
    figure = f"N/p = {fmt(rows_per_feature)}"
    if p >= N - K:
        return Finding(
            KEY,
            "fail",
            f"N - K = {N - K} is not above p = {p}: the pooled covariance is singular and plain LDA cannot be fit.",
            details,
            figure,
        )
    notes = []
    if rows_per_feature < config.rows_per_feature_warn:
        notes.append(f"only {fmt(rows_per_feature)} rows per feature (rule: {fmt(config.rows_per_feature_warn)})")
    if counts[smallest] <= p:
        notes.append(f"class {m.classes[smallest]} has {int(counts[smallest])} rows for {p} features, too few for QDA")
    if imbalance > config.imbalance_warn:
        notes.append(f"classes are imbalanced {fmt(imbalance)} to 1; LDA's priors follow the class shares")
    if notes:
        return Finding(KEY, "warn", sentence(notes), details, figure)
    return Finding(
        KEY,
        "pass",
        f"{N} rows in {K} classes for {p} features ({fmt(rows_per_feature)} per feature; smallest class "
        f"{int(counts[smallest])}).",
        details,
        figure,
    )
