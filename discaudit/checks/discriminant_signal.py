"""Check ``discriminant_signal``: is there anything to discriminate?"""

from __future__ import annotations

from typing import TYPE_CHECKING, Any

import numpy as np

from discaudit.dataset import AuditData
from discaudit.errors import DataError
from discaudit.findings import Finding, fmt, fmt_p
from discaudit.jsonable import label
from discaudit.stats.pairwise_hotelling import pairwise_hotelling
from discaudit.stats.wilks_lambda import wilks_lambda_from_moments

if TYPE_CHECKING:
    from discaudit.config import Config

KEY = "discriminant_signal"
#: Pairs of classes listed in the details, least distinct first (all pairs are counted).
_MAX_LISTED_PAIRS = 20


def _pairwise(data: AuditData, alpha: float) -> dict[str, Any]:
    """Hotelling's T^2 between every pair of class means (pooled covariance), Holm-adjusted.

    A pair whose adjusted p-value is not below ``alpha`` has no detectable signal between its
    two classes: the data cannot tell them apart by their means.
    """
    try:
        h = pairwise_hotelling(data.moments)
    except (DataError, np.linalg.LinAlgError, ValueError) as exc:
        return {"skipped": str(exc)}
    order = np.argsort(-h.p_adjusted, kind="stable")
    pairs = [
        {
            "classes": [label(data.classes[h.pairs[i][0]]), label(data.classes[h.pairs[i][1]])],
            "mahalanobis": float(np.sqrt(h.mahalanobis_sq[i])),
            "f": float(h.f[i]),
            "p_value": float(h.p_value[i]),
            "p_adjusted": float(h.p_adjusted[i]),
        }
        for i in order[:_MAX_LISTED_PAIRS]
    ]
    return {
        "pairs": pairs,
        "n_pairs": len(h.pairs),
        "indistinct_pairs": [
            [label(data.classes[a]), label(data.classes[b])]
            for (a, b), q in zip(h.pairs, h.p_adjusted, strict=True)
            if not q < alpha
        ],
        "df1": h.df1,
        "df2": h.df2,
        "alpha": alpha,
        "definition": "Hotelling's T^2 between two class means with the pooled within-class covariance of all "
        "classes, F(p, N - K - p + 1); p-values Holm-adjusted over the pairs; a pair is indistinct when its "
        "adjusted p-value is not below alpha",
    }


#: Wilks' Lambda below this (float64's machine epsilon) is a rounding-level figure: "exact separation".
_ROUNDING_LAMBDA = float(np.finfo(np.float64).eps)


def run(data: AuditData, config: Config, random_state: int | None = None) -> Finding:
    """Wilks' Lambda with Rao's F, Fisher's criterion per direction and canonical correlations.

    Fails when Lambda is not significant at ``signal_alpha`` (the class means may be
    equal: any classifier would be guessing); warns when Lambda exceeds
    ``weak_signal_lambda`` (under 10% of the generalized variance lies between classes).
    A Lambda below machine precision (or an infinite F) is reported as exact separation (warn),
    never as an ordinary pass: those figures come from rounding, not from a test.
    """
    try:
        w = wilks_lambda_from_moments(data.moments)
    except DataError as exc:
        return Finding(
            KEY,
            "skip",
            "The pooled covariance is singular (see collinearity); Wilks' Lambda is undefined.",
            {"reason": str(exc)},
            "-",
        )
    share = w.eigenvalues / w.eigenvalues.sum() if w.eigenvalues.sum() > 0 else np.zeros_like(w.eigenvalues)
    details: dict[str, Any] = {
        "wilks_lambda": w.statistic,
        "f": w.f,
        "df1": w.df1,
        "df2": w.df2,
        "p_value": w.p_value,
        "eigenvalues": w.eigenvalues.tolist(),
        "canonical_correlations": w.canonical_correlations.tolist(),
        "share_of_discrimination": share.tolist(),
        "alpha": config.signal_alpha,
        "weak_signal_lambda": config.weak_signal_lambda,
        "definition": "Lambda = det W / det(W + B); eigenvalues of W^-1 B; Rao's F approximation",
        "pairwise": _pairwise(data, config.signal_alpha),
    }
    # Lambda = prod 1 / (1 + l_i): below machine precision, 1 + l_i has lost every digit of the
    # within-class spread, so Lambda, F and its p-value only say "separated exactly": a rounding-
    # level figure, not a significance level.
    exact = not w.statistic >= _ROUNDING_LAMBDA or not np.isfinite(w.f)
    details["exact_separation"] = exact
    details["rounding_level_lambda"] = _ROUNDING_LAMBDA
    if exact:
        details["f"] = None
        details["p_value"] = None
        details["f_note"] = "beyond any finite meaning: Lambda is below machine precision"
        return Finding(
            KEY,
            "warn",
            f"Exact separation: Wilks' Lambda {fmt(w.statistic)} is below machine precision ({fmt(_ROUNDING_LAMBDA)}), "
            "so the class means lie apart by many times any within-class spread and F has no finite meaning; every "
            "linear rule separates the rows, and an estimate of accuracy from them is optimistic.",
            details,
            "exact separation",
        )
    figure = f"Lambda {fmt(w.statistic)}"
    text = (
        f"Wilks' Lambda {fmt(w.statistic)} (F = {fmt(w.f)} on {fmt(w.df1)} and {fmt(w.df2)} df, {fmt_p(w.p_value)}); "
        f"first canonical correlation {fmt(float(w.canonical_correlations[0]))}"
    )
    if not w.p_value < config.signal_alpha:
        return Finding(KEY, "fail", f"No significant difference between class means: {text}.", details, figure)
    if w.statistic > config.weak_signal_lambda:
        return Finding(KEY, "warn", f"Weak discriminant signal: {text}.", details, figure)
    return Finding(KEY, "pass", f"Clear discriminant signal: {text}.", details, figure)
