"""Check ``collinearity``: VIF and condition indices of the pooled within-class covariance."""

from __future__ import annotations

from typing import TYPE_CHECKING, Any

import numpy as np

from discaudit.checks._fourth_sums import ledoit_wolf_sums
from discaudit.dataset import AuditData
from discaudit.findings import Finding, fmt, names
from discaudit.stats.condition_indices import ConditionIndicesResult, condition_indices_from_covariance
from discaudit.stats.feature_removal import backward_elimination
from discaudit.stats.shrinkage import intensities_from_sums
from discaudit.stats.shrinkage_retention import shrinkage_retention
from discaudit.stats.vif import vif_from_covariance

if TYPE_CHECKING:
    from discaudit.config import Config

KEY = "collinearity"
_RANK_TOLERANCE = 1e-10


def _dependencies(ci: ConditionIndicesResult, features: list[str], config: Config) -> list[dict[str, Any]]:
    """Near dependencies: dimensions above the warn index with features of proportion > cut.

    When several dimensions with high indices share the variance of the same coefficients
    (coexisting dependencies), no single dimension may pass the proportion cut; Belsley,
    Kuh & Welsch then sum the proportions over those dimensions, which is reported as one
    combined dependency.
    """
    out: list[dict[str, Any]] = []
    props = ci.variance_proportions.to_numpy()
    high = np.flatnonzero(ci.indices > config.condition_index_warn)[::-1]
    for k in high:
        involved = np.flatnonzero(props[k] > config.variance_proportion)
        if len(involved) >= 2:
            out.append(
                {
                    "condition_index": float(ci.indices[k]),
                    "features": [features[j] for j in involved],
                    "proportions": {features[j]: float(props[k, j]) for j in involved},
                    "dimensions": 1,
                }
            )
    if len(high) > 1:
        combined = props[high].sum(axis=0)
        involved = np.flatnonzero(combined > config.variance_proportion)
        covered = {f for d in out for f in d["features"]}
        if len(involved) >= 2 and not {features[j] for j in involved} <= covered:
            out.append(
                {
                    "condition_index": float(ci.indices[high[0]]),
                    "features": [features[j] for j in involved],
                    "proportions": {features[j]: float(combined[j]) for j in involved},
                    "dimensions": len(high),
                }
            )
    return out


def _best_removal(S: np.ndarray, used: list[str], candidates: list[str]) -> dict[str, Any]:
    """Of ``candidates``, the one feature whose removal lowers the largest VIF most, and that VIF.

    VIFs are those of the pooled within-class covariance without the feature (an infinite VIF,
    from a remaining exact dependency, counts as the largest); ties go to the feature listed first.
    """
    best: tuple[float, str] | None = None
    for feature in candidates:
        keep = [i for i, f in enumerate(used) if f != feature]
        if len(keep) < 1:
            continue
        after = float(np.max(vif_from_covariance(S[np.ix_(keep, keep)]))) if len(keep) > 1 else 1.0
        after = after if np.isfinite(after) else float("inf")
        if best is None or after < best[0]:
            best = (after, feature)
    assert best is not None
    return {"feature": best[1], "max_vif_after": best[0]}


def _vanishing_combinations(ci: ConditionIndicesResult, sd: np.ndarray, features: list[str]) -> list[dict[str, float]]:
    """Linear combinations of the raw features that are (numerically) constant within classes.

    An eigenvector v of the correlation matrix with a zero eigenvalue says sum_j v_j x_j / sd_j
    is constant within every class; coefficients are scaled so the largest is 1.
    """
    out = []
    zero = ci.eigenvalues <= _RANK_TOLERANCE * ci.eigenvalues[0]
    for k in np.flatnonzero(zero):
        coef = ci.eigenvectors[:, k] / sd
        coef = coef / coef[np.argmax(np.abs(coef))]
        terms = {features[j]: float(coef[j]) for j in np.argsort(-np.abs(coef)) if abs(coef[j]) > 1e-6}
        out.append(terms)
    return out


def _combination_text(terms: dict[str, float]) -> str:
    parts = [f"{'-' if c < 0 else '+'} {fmt(abs(c))}*{name}" for name, c in list(terms.items())[:5]]
    text = " ".join(parts).lstrip("+ ")
    return text + (" ..." if len(terms) > 5 else "") + " = const"


def _removal_plan(
    S: np.ndarray,
    used: list[str],
    dependencies: list[dict[str, Any]],
    vanishing: list[dict[str, float]],
    vifs: np.ndarray,
    config: Config,
) -> dict[str, Any]:
    """Features to remove, one at a time, each lowering the largest VIF most, until the check would pass.

    Candidates are the features of the near dependencies and vanishing combinations (in that
    order), else the features whose VIF is above ``vif_warn``; computed from the pooled covariance.
    """
    candidates: list[str] = []
    for group in [d["features"] for d in dependencies] + [list(c) for c in vanishing]:
        candidates += [f for f in group if f not in candidates]
    if not candidates:
        candidates = [used[j] for j in np.argsort(-vifs, kind="stable") if vifs[j] > config.vif_warn]
    plan = backward_elimination(S, used, candidates, config.vif_warn, config.condition_index_warn)
    return {
        "removed": list(plan.removed),
        "max_vif_after": list(plan.max_vif),
        "condition_number_after": list(plan.condition_number),
        "reaches_pass": plan.reached,
        "candidates": candidates,
        "rule": "greedy backward elimination from the pooled within-class covariance: each step removes the candidate "
        "whose removal lowers the largest VIF most, until max VIF <= vif_warn and condition number <= "
        "condition_index_warn or no candidate is left",
    }


def _shrinkage(data: AuditData) -> dict[str, Any]:
    """Ledoit-Wolf intensities of the pooled within-class covariance, raw and standardized."""
    m = data.moments
    sums = ledoit_wolf_sums(data)  # shared with the expected-performance check: one pass for both
    raw, standardized = (0.0, 0.0) if sums is None else intensities_from_sums(m, sums.scales, sums.sums)
    retention = shrinkage_retention(m, standardized)
    return {
        "retained_separation": None if retention is None else retention.retained,
        "low_variance_separation_share": None if retention is None else retention.low_variance_share,
        "ledoit_wolf_raw": raw,
        "ledoit_wolf_standardized": standardized,
        "estimator": "Ledoit-Wolf (2004) intensity of the pooled within-class covariance (class-centred rows, "
        "divisor N); 'standardized' scales each feature to unit pooled within-class variance first; "
        "retained_separation: share of the noise-corrected between-class Mahalanobis separation kept by LDA "
        "with the standardized intensity",
    }


def run(data: AuditData, config: Config, random_state: int | None = None) -> Finding:
    """VIF and Belsley-Kuh-Welsch condition indices of the pooled within-class correlation.

    LDA inverts the pooled within-class covariance, so that is the matrix audited; the VIFs
    of the total covariance (ignoring classes) are reported beside it. Fails above
    ``vif_fail`` or ``condition_index_fail`` or on exact rank deficiency (naming the
    vanishing combination); warns above the warn thresholds.
    """
    S = data.moments.pooled_covariance
    features = list(data.features)
    if data.p < 2:
        return Finding(KEY, "pass", "A single feature cannot be collinear.", {"n_features": data.p}, "p = 1")
    sd = np.sqrt(np.clip(np.diag(S), 0.0, None))
    usable = sd > 0
    details: dict[str, Any] = {
        "matrix": "pooled within-class covariance W/(N-K), as correlation (centred, unit-variance columns)",
        "thresholds": {
            "vif_warn": config.vif_warn,
            "vif_fail": config.vif_fail,
            "condition_index_warn": config.condition_index_warn,
            "condition_index_fail": config.condition_index_fail,
            "variance_proportion": config.variance_proportion,
        },
    }
    if usable.all():
        details["shrinkage"] = _shrinkage(data)
    else:
        details["excluded_no_within_class_variance"] = [f for f, u in zip(features, usable, strict=True) if not u]
    idx = np.flatnonzero(usable)
    used = [features[j] for j in idx]
    if len(idx) < 2:
        return Finding(KEY, "skip", "Fewer than two features vary within classes.", details, "-")
    S_used = S[np.ix_(idx, idx)]
    vifs = vif_from_covariance(S_used)
    total = data.moments.total_covariance[np.ix_(idx, idx)]
    ci = condition_indices_from_covariance(S_used, used)
    dependencies = _dependencies(ci, used, config)
    vanishing = _vanishing_combinations(ci, sd[idx], used)
    for dep in dependencies:
        dep["drop_to_lower_max_vif"] = _best_removal(S_used, used, dep["features"])
    vanishing_drops = [_best_removal(S_used, used, list(c)) for c in vanishing]
    worst_j = int(np.argmax(vifs))
    details.update(
        {
            "vif_within": dict(zip(used, vifs.tolist(), strict=True)),
            "vif_total": dict(zip(used, vif_from_covariance(total).tolist(), strict=True)),
            "max_vif": float(vifs[worst_j]),
            "max_vif_feature": used[worst_j],
            "condition_number": ci.condition_number,
            "condition_indices": ci.indices.tolist(),
            "near_dependencies": dependencies,
            "rank_deficient": bool(vanishing),
            "vanishing_combinations": vanishing,
            "vanishing_combinations_drop": vanishing_drops,
        }
    )
    if vanishing or float(np.max(vifs)) > config.vif_warn or ci.condition_number > config.condition_index_warn:
        try:
            details["removal_plan"] = _removal_plan(S_used, used, dependencies, vanishing, vifs, config)
        except (np.linalg.LinAlgError, ValueError) as exc:  # the plan is advice: its failure is not the check's
            details["removal_plan_error"] = f"{type(exc).__name__}: {exc}"
    if vanishing:
        details["rank_deficient_reason"] = "pooled within-class covariance is singular: VIF is infinite"
        return Finding(
            KEY,
            "fail",
            f"Exact linear dependency within classes: {_combination_text(vanishing[0])}; dropping "
            f"{vanishing_drops[0]['feature']} lowers the largest VIF most (to {fmt(vanishing_drops[0]['max_vif_after'])}).",
            details,
            "rank deficient",
        )
    max_vif, cond = float(vifs[worst_j]), ci.condition_number
    figure = f"max VIF {fmt(max_vif)}"
    high = [f for f, v in zip(used, vifs, strict=True) if v > config.vif_warn]
    dep_text = ""
    if dependencies:
        first = dependencies[0]
        spread = f" over {first['dimensions']} dimensions" if first["dimensions"] > 1 else ""
        drop = first["drop_to_lower_max_vif"]
        dep_text = (
            f"; strongest near dependency (condition index {fmt(first['condition_index'])}{spread}) joins "
            f"{names(first['features'])}; dropping {drop['feature']} lowers the largest VIF most, to "
            f"{fmt(drop['max_vif_after'])}"
        )
        if len(dependencies) > 1:
            dep_text += f" ({len(dependencies) - 1} more near dependenc{'ies' if len(dependencies) > 2 else 'y'} in the details)"
    if max_vif > config.vif_fail or cond > config.condition_index_fail:
        return Finding(
            KEY,
            "fail",
            f"Serious collinearity: VIF up to {fmt(max_vif)} ({used[worst_j]}), condition number {fmt(cond)}{dep_text}.",
            details,
            figure,
        )
    if max_vif > config.vif_warn or cond > config.condition_index_warn:
        return Finding(
            KEY,
            "warn",
            f"Moderate collinearity: VIF above {fmt(config.vif_warn)} for {names(high) or 'none'}, condition "
            f"number {fmt(cond)}{dep_text}.",
            details,
            figure,
        )
    return Finding(
        KEY, "pass", f"No collinearity of note: max VIF {fmt(max_vif)}, condition number {fmt(cond)}.", details, figure
    )
