"""Check ``covariance_homogeneity``: do the classes share one covariance matrix?"""

from __future__ import annotations

from typing import TYPE_CHECKING, Any

import numpy as np
from scipy import linalg

from discaudit.checks._robust import canonical_layout
from discaudit.dataset import AuditData
from discaudit.errors import DataError
from discaudit.findings import Finding, fmt, fmt_p, names
from discaudit.jsonable import label
from discaudit.stats._linalg import logdet_spd
from discaudit.stats.box_m import box_m_from_moments
from discaudit.stats.flury import flury_hierarchy
from discaudit.stats.gaussian_bic import covariance_bic
from discaudit.stats.moments import ClassMoments

if TYPE_CHECKING:
    from discaudit.config import Config

KEY = "covariance_homogeneity"


#: Features named for the direction in which a class differs most.
TOP_FEATURES = 3


def _spread(moments: ClassMoments, features: tuple[str, ...]) -> dict[Any, dict[str, Any]]:
    """Where each class's covariance differs: its size against the pooled and the other classes', and its
    most different direction.

    ``generalized_variance_ratio_to_pooled`` is (det S_k / det S_pooled)^(1/p), the ratio of the
    class's spread to the pooled one per dimension (variance units; above 1: wider). Against the
    pooled covariance of the *other* classes (S_-k) the eigenvalues of S_-k^-1 S_k are the variance
    ratios along the directions where the class differs most; the one farthest from 1 on a log
    scale is the class's most different direction, and its generalized eigenvector, in units of
    the pooled standard deviations, names the features that carry it.
    """
    p = moments.n_features
    covs = moments.class_covariances()
    pooled = moments.pooled_covariance
    ld_pooled = logdet_spd(pooled)
    sd = np.sqrt(np.diag(pooled))
    out: dict[Any, dict[str, Any]] = {}
    for k, cls in enumerate(moments.classes):
        others = np.delete(np.arange(moments.n_classes), k)
        scatter = moments.scatter[others].sum(axis=0)
        S_other = scatter / (moments.counts[others].sum() - others.size)
        ld_k, ld_other = logdet_spd(covs[k]), logdet_spd(S_other)
        try:
            values, vectors = linalg.eigh(covs[k], S_other)
        except (linalg.LinAlgError, ValueError):  # the other classes' pooled covariance is not positive definite
            values, vectors = np.ones(p), np.eye(p)
        values = np.clip(
            values, np.finfo(float).tiny, None
        )  # rounding can push a ratio of a near-singular class below 0
        j = int(np.argmax(np.abs(np.log(values))))
        loading = vectors[:, j] * sd
        loading = loading / np.max(np.abs(loading))
        top = np.argsort(-np.abs(loading), kind="stable")[:TOP_FEATURES]
        ratio_pooled = float(np.exp((ld_k - ld_pooled) / p))
        out[label(cls)] = {
            "generalized_variance_ratio_to_pooled": ratio_pooled,
            "direction": "wider" if ratio_pooled > 1 else "narrower",
            "generalized_variance_ratio_to_other_classes": float(np.exp((ld_k - ld_other) / p)),
            "most_different_direction_variance_ratio": float(values[j]),
            "most_different_direction": "wider" if values[j] > 1 else "narrower",
            "most_different_direction_features": {features[i]: float(loading[i]) for i in top},
        }
    return out


def _most_different(spread: dict[Any, dict[str, Any]], rank: dict[Any, int]) -> Any:
    """The class whose most different direction is farthest from 1 (log scale); ties go to the wider class,
    then to the class first in the canonical order (content, never names)."""
    return max(
        spread,
        key=lambda c: (
            round(abs(np.log(spread[c]["most_different_direction_variance_ratio"])), 12),
            spread[c]["most_different_direction_variance_ratio"] > 1,
            -rank[c],
        ),
    )


#: How each Flury model reads, for a sentence.
_FLURY_WORDS = {
    "equal": "they share one covariance",
    "proportional": "they differ in size only (proportional covariances)",
    "cpc": "they share principal axes and differ in the spread along them (common principal components)",
    "unrelated": "they differ in orientation as well (no common principal axes)",
}


def _flury(sub: ClassMoments) -> dict[str, Any]:
    """Flury's hierarchy in plain values (or why it could not be fitted: nearly singular classes)."""
    try:
        with np.errstate(over="raise", invalid="raise", divide="raise", under="ignore"):
            fl = flury_hierarchy(sub)
    except (DataError, linalg.LinAlgError, np.linalg.LinAlgError, FloatingPointError) as exc:
        return {"not_computed": f"the class covariances are too close to singular for the model fits ({exc})"}
    return {
        "best_by_bic": fl.best,
        "meaning": _FLURY_WORDS[fl.best],
        "bic": fl.bic,
        "loglik": fl.loglik,
        "n_params": fl.n_params,
        "steps": fl.steps,
        "proportional_factors": {label(c): float(r) for c, r in zip(sub.classes, fl.proportional_factors, strict=True)},
        "cpc_converged": fl.cpc_converged,
        "cpc_sweeps": fl.cpc_sweeps,
        "models": "equal: one covariance; proportional: Sigma_k = rho_k Sigma (size only); cpc: common principal "
        "axes, class-specific spreads along them; unrelated: free covariances. Maximum likelihood from the class "
        "scatter matrices (divisor n_k); nested likelihood-ratio tests; lowest BIC chosen",
    }


def _plane_arrays(moments: ClassMoments) -> dict[str, Any]:
    """Class means and covariances on the discriminant plane, for the ellipse plot.

    Not part of the JSON: ``plane_basis`` (p, 2), ``plane_axis_labels``, ``plane_means``
    (K, 2) and ``plane_covariances`` (K, 2, 2, unbiased) for every class, singular ones
    included. Empty when there is no plane (see :func:`discaudit.stats.plane.discriminant_plane`).
    """
    from discaudit.stats.plane import discriminant_plane, project_moments

    plane = discriminant_plane(moments)
    if plane is None:
        return {}
    means, covariances = project_moments(plane, moments)
    return {
        "plane_basis": plane.basis,
        "plane_axis_labels": plane.axis_labels,
        "plane_means": means,
        "plane_covariances": covariances,
    }


def run(data: AuditData, config: Config, random_state: int | None = None) -> Finding:
    """Box's M (significance) beside a BIC comparison of shared vs separate covariances (size).

    Box's M at ``box_m_alpha`` (common practice 0.001) alone rejects almost everything at
    large N and under non-normality, so the status weighs both: fail when M rejects and
    the BIC favours separate covariances by more than ``bic_margin``; warn when only one
    of them does. Classes with a singular covariance are left out of both and named.
    """
    m = data.moments
    arrays = _plane_arrays(m)
    logdets = [
        logdet_spd(S) if n > m.n_features else float("-inf")
        for n, S in zip(m.counts, m.class_covariances(), strict=True)
    ]
    ok = np.array([np.isfinite(v) for v in logdets])
    excluded = [label(c) for c, good in zip(m.classes, ok, strict=True) if not good]
    details: dict[str, Any] = {
        "alpha": config.box_m_alpha,
        "bic_margin": config.bic_margin,
        "excluded_singular_classes": excluded,
        "rule": "fail when Box's M p < alpha and BIC(shared) - BIC(separate) > bic_margin; warn when only one holds",
    }
    if ok.sum() < 2:
        return Finding(
            KEY,
            "warn",
            f"Class covariances are singular in {names(excluded)} (too few rows or constant columns), so equality "
            "of covariances cannot be tested; QDA is not an option without regularization.",
            details,
            "untestable",
            arrays,
        )
    sub = ClassMoments(
        tuple(c for c, good in zip(m.classes, ok, strict=True) if good), m.counts[ok], m.means[ok], m.scatter[ok]
    )
    if not np.isfinite(logdet_spd(sub.pooled_covariance)):  # the classes Box's M would use
        return Finding(
            KEY, "skip", "The pooled covariance is singular (see collinearity); Box's M is undefined.", details, "-"
        )
    box = box_m_from_moments(sub)
    bic = covariance_bic(sub)
    spread = _spread(sub, data.features)
    _, ranks = canonical_layout(data)
    rank = {label(data.classes[k]): ranks[k] for k in range(len(data.classes))}
    worst = _most_different(spread, rank)
    details.update(
        {
            "box_m": {
                "statistic": box.statistic,
                "chi2": box.chi2,
                "df": box.df,
                "p_value": box.p_value,
                "f": box.f,
                "df1": box.df1,
                "df2": box.df2,
                "p_value_f": box.p_value_f,
                "f_branch": box.f_branch,
            },
            "bic": {
                "loglik_shared": bic.loglik_shared,
                "loglik_separate": bic.loglik_separate,
                "n_params_shared": bic.n_params_shared,
                "n_params_separate": bic.n_params_separate,
                "delta_bic": bic.delta_bic,
                "delta_bic_sign": "BIC(shared) - BIC(separate): positive favours separate covariances (QDA's model), "
                "negative one shared covariance (LDA's)",
                "delta_aic": bic.delta_aic,
                "gain_per_row": bic.gain_per_row,
            },
            "log_determinants": {label(c): v for c, v in zip(sub.classes, box.log_determinants, strict=True)},
            "spread": spread,
            "most_different_class": worst,
            "flury": _flury(sub)
            if box.p_value < config.box_m_alpha or bic.delta_bic > 0
            else {
                "not_computed": "Box's M does not reject and the BIC favours one shared covariance: no difference to locate"
            },
        }
    )
    rejects = box.p_value < config.box_m_alpha
    favours_separate = bic.delta_bic > config.bic_margin
    side = "separate" if bic.delta_bic > 0 else "shared"
    figure = f"BIC: {side} by {fmt(abs(bic.delta_bic))}"
    box_text = f"Box's M {fmt_p(box.p_value)}"
    bic_text = f"BIC favours {'separate covariances' if bic.delta_bic > 0 else 'one shared covariance'} by {fmt(abs(bic.delta_bic))}"
    w = spread[worst]
    where = (
        f"most in class {worst}: along its most different direction its variance is "
        f"{fmt(w['most_different_direction_variance_ratio'])} times that of the other classes "
        f"({w['most_different_direction']}; mostly {names(list(w['most_different_direction_features']))}), and its "
        f"generalized variance per feature is {fmt(w['generalized_variance_ratio_to_pooled'])} times the pooled one "
        f"({w['direction']})"
    )
    how = (
        f"by BIC among Flury's models, {details['flury']['meaning']}"
        if "meaning" in details["flury"]
        else "Flury's models could not be fitted (nearly singular classes)"
    )
    tail = f"; singular classes {names(excluded)} left out" if excluded else ""
    if rejects and favours_separate:
        text = f"Class covariances differ by more than their extra parameters cost ({box_text}; {bic_text}); {where}; {how}{tail}."
        return Finding(KEY, "fail", text, details, figure, arrays)
    if rejects:
        text = (
            f"Box's M detects unequal covariances ({box_text}), but {bic_text}, so separate covariances do not pay "
            f"for their parameters; the BIC is the one to trust here, as Box's M also rejects differences too small "
            f"to matter at this sample size and under non-normality; {where}{tail}."
        )
        return Finding(KEY, "warn", text, details, figure, arrays)
    if favours_separate:
        text = (
            f"{bic_text}, though Box's M does not reject ({fmt_p(box.p_value)} at alpha = {fmt(config.box_m_alpha)}): "
            f"the likelihood gain of separate covariances is large for its parameters, but the test cannot confirm it; "
            f"{where}{tail}."
        )
        return Finding(KEY, "warn", text, details, figure, arrays)
    if bic.delta_bic > 0:
        text = (
            f"Class covariances can be treated as equal: Box's M does not reject ({fmt_p(box.p_value)}), and although "
            f"{bic_text}, that is below the margin of {fmt(config.bic_margin)} for strong evidence{tail}."
        )
    else:
        text = f"No evidence that class covariances differ ({box_text}; {bic_text}){tail}."
    status = "warn" if excluded else "pass"
    return Finding(KEY, status, text, details, figure, arrays)
