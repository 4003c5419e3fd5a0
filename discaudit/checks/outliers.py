"""Check ``outliers``: robust Mahalanobis distances per class (FAST-MCD), and whether flagged rows matter."""

from __future__ import annotations

from typing import Any

import numpy as np
from scipy import linalg
from scipy import stats as sps

from discaudit._plain import label
from discaudit.checks._seeds import class_seeds
from discaudit.config import Config
from discaudit.findings import Finding, fmt, names
from discaudit.intake import AuditData
from discaudit.stats._linalg import logdet_spd
from discaudit.stats.mcd import mcd

KEY = "outliers"
_SALT = 3
_MAX_LISTED_ROWS = 100


def _mahalanobis_sq(X: np.ndarray, centre: np.ndarray, cov: np.ndarray) -> np.ndarray | None:
    """Squared Mahalanobis distances by a Cholesky triangular solve; None if cov is singular."""
    try:
        L = linalg.cholesky(cov, lower=True, check_finite=False)
    except linalg.LinAlgError:
        return None
    Z = linalg.solve_triangular(L, (X - centre).T, lower=True, check_finite=False)
    return np.einsum("ij,ij->j", Z, Z)


def _cutoff(config: Config, n: int, p: int, h: int | None) -> tuple[float, str]:
    if config.outlier_cutoff == "hardin_rocke" and h is not None:
        from discaudit.stats.hardin_rocke import hardin_rocke_cutoff

        hr = hardin_rocke_cutoff(n, p, h=h, alpha=1.0 - config.outlier_quantile)
        return float(hr.cutoff), f"Hardin & Rocke (2005) F-based cut-off at {config.outlier_quantile}"
    return float(sps.chi2.ppf(config.outlier_quantile, p)), f"chi-square({p}) {config.outlier_quantile} quantile"


def run(data: AuditData, config: Config, random_state: int | None = None) -> Finding:
    """Flag rows far from their own class by robust distance, and measure their influence on LDA.

    Each class with at least 2(p+1) rows gets a reweighted FAST-MCD fit (Rousseeuw & Van
    Driessen 1999) and squared robust distances; smaller classes fall back to classical
    distances from the class mean and covariance (noted). Influence on what LDA uses: the
    shift of each class mean when its flagged rows are removed, in pooled-Mahalanobis
    units, and the per-feature log-determinant excess of the classical pooled covariance
    over the robust one. Fails when the outliers move a mean by more than
    ``outlier_mean_shift_fail`` or inflate the pooled covariance beyond
    ``outlier_logdet_fail``; warns above the warn thresholds or when more than
    ``outlier_fraction_warn`` of a class is flagged.
    """
    m = data.moments
    n, p = data.n, data.p
    seeds = class_seeds(random_state, len(data.classes), _SALT)
    distance = np.zeros(n)
    classical = np.zeros(n)
    cutoffs = np.zeros(n)
    flagged = np.zeros(n, dtype=bool)
    robust_scatter = np.zeros((p, p))
    pooled = m.pooled_covariance
    per_class: dict[Any, Any] = {}
    shifts = []
    for k, cls in enumerate(data.classes):
        rows = data.class_rows(k)
        X = data.values[rows]
        nk = len(rows)
        info: dict[str, Any] = {"n": nk}
        d_classical = _mahalanobis_sq(X, m.means[k], m.class_covariances()[k])
        if d_classical is None:
            d_classical = _mahalanobis_sq(X, m.means[k], pooled)
            info["classical_covariance"] = "pooled (class covariance singular)"
        if nk >= 2 * (p + 1):
            fit = mcd(X, random_state=seeds[k], cutoff_quantile=config.outlier_quantile)
            d_robust, h = fit.distances, fit.h
            cut, rule = _cutoff(config, nk, fit.p_used, h)
            info.update(
                {
                    "method": "reweighted FAST-MCD",
                    "h": h,
                    "n_reweighted": fit.n_reweighted,
                    "corrections": list(fit.corrections),
                    "seed": seeds[k],
                    "exact_fit": fit.exact_fit,
                }
            )
            if fit.exact_fit and fit.hyperplane_normal is not None:
                info["hyperplane"] = {
                    "normal": dict(zip(data.features, fit.hyperplane_normal.tolist(), strict=True)),
                    "offset": fit.hyperplane_offset,
                    "n_on_hyperplane": fit.n_on_hyperplane,
                }
            robust_scatter += (nk - 1) * fit.covariance
        else:
            d_robust, h = d_classical, None
            cut, rule = _cutoff(config, nk, p, None)
            info["method"] = f"classical distances (fewer than 2(p+1) = {2 * (p + 1)} rows for a robust fit)"
            robust_scatter += m.scatter[k]
        if d_classical is None or d_robust is None:
            per_class[label(cls)] = {**info, "skipped": "covariance singular; distances undefined"}
            continue
        is_out = d_robust > cut
        distance[rows], classical[rows], cutoffs[rows], flagged[rows] = d_robust, d_classical, cut, is_out
        shift = 0.0
        if is_out.any() and (~is_out).sum() > 1:
            moved = X[~is_out].mean(axis=0) - m.means[k]
            shift = float(np.sqrt(_mahalanobis_sq(moved[None, :], np.zeros(p), pooled)[0])) if np.isfinite(
                logdet_spd(pooled)) else float("nan")
        shifts.append(shift)
        order = np.argsort(-d_robust[is_out])
        listed = [
            {"row": label(data.row_labels[rows[i]]), "distance": float(d_robust[i]), "classical_distance": float(d_classical[i])}
            for i in np.flatnonzero(is_out)[order][:_MAX_LISTED_ROWS]
        ]
        info.update(
            {
                "cutoff": cut,
                "cutoff_rule": rule,
                "n_flagged": int(is_out.sum()),
                "fraction_flagged": float(is_out.mean()),
                "flagged_rows": listed,
                "mean_shift": shift,
                "masked_by_classical": int((is_out & (d_classical <= cut)).sum()),
            }
        )
        per_class[label(cls)] = info
    ld_classical = logdet_spd(pooled)
    ld_robust = logdet_spd(robust_scatter / (m.n_total - m.n_classes))
    excess = (ld_classical - ld_robust) / p if np.isfinite(ld_classical) and np.isfinite(ld_robust) else float("nan")
    details: dict[str, Any] = {
        "per_class": per_class,
        "n_flagged": int(flagged.sum()),
        "pooled_logdet_excess_per_feature": excess,
        "robust_fit_rule": "reweighted FAST-MCD for classes with at least 2(p+1) rows, classical distances otherwise",
        "distance": "squared Mahalanobis distance from the class's own (robust) centre and covariance",
        "thresholds": {
            "quantile": config.outlier_quantile,
            "cutoff": config.outlier_cutoff,
            "fraction_warn": config.outlier_fraction_warn,
            "mean_shift_warn": config.outlier_mean_shift_warn,
            "mean_shift_fail": config.outlier_mean_shift_fail,
            "logdet_warn": config.outlier_logdet_warn,
            "logdet_fail": config.outlier_logdet_fail,
        },
    }
    arrays = {
        "row_label": data.row_labels,
        "class": np.asarray(data.classes, dtype=object)[data.codes],
        "distance": distance,
        "classical_distance": classical,
        "cutoff": cutoffs,
        "flagged": flagged,
    }
    total = int(flagged.sum())
    max_shift = max((s for s in shifts if np.isfinite(s)), default=0.0)
    fractions = {c: v.get("fraction_flagged", 0.0) for c, v in per_class.items()}
    worst_class = max(fractions, key=fractions.__getitem__) if fractions else None
    details["max_mean_shift"] = max_shift
    figure = f"{total} flagged ({fmt(100 * total / n, 2)}%)"
    influence = f"class means move up to {fmt(max_shift)} pooled SD, pooled log-det excess {fmt(excess)} per feature"
    flagged_text = _examples(per_class)
    if max_shift > config.outlier_mean_shift_fail or (np.isfinite(excess) and excess > config.outlier_logdet_fail):
        return Finding(KEY, "fail", f"{total} rows lie far from their class ({flagged_text}) and distort LDA's estimates: "
                       f"{influence}.", details, figure, arrays)
    wide = fractions.get(worst_class, 0.0) > config.outlier_fraction_warn if worst_class is not None else False
    if max_shift > config.outlier_mean_shift_warn or (np.isfinite(excess) and excess > config.outlier_logdet_warn) or wide:
        share = f"{fmt(100 * fractions[worst_class], 2)}% of class {worst_class} flagged; " if wide else ""
        return Finding(KEY, "warn", f"{total} rows flagged ({flagged_text}); {share}{influence}.", details, figure, arrays)
    return Finding(KEY, "pass", f"{total} rows beyond the cut-off, about what a Gaussian tail gives, with little "
                   f"influence ({influence}).", details, figure, arrays)


def _examples(per_class: dict[Any, Any]) -> str:
    rows = sorted(
        ((r["distance"], r["row"], c) for c, v in per_class.items() for r in v.get("flagged_rows", [])), reverse=True
    )
    return "farthest " + names([f"{row} ({c})" for _, row, c in rows], 3) if rows else "none"
