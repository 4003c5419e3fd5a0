"""Check ``covariance_homogeneity``: do the classes share one covariance matrix?"""

from __future__ import annotations

from typing import TYPE_CHECKING, Any

import numpy as np
from scipy import linalg

from discaudit.dataset import AuditData
from discaudit.findings import Finding, fmt, fmt_p, names
from discaudit.jsonable import label
from discaudit.stats._linalg import logdet_spd
from discaudit.stats.box_m import box_m_from_moments
from discaudit.stats.gaussian_bic import covariance_bic
from discaudit.stats.moments import ClassMoments

if TYPE_CHECKING:
    from discaudit.config import Config

KEY = "covariance_homogeneity"


def _divergence_from_pooled(moments: ClassMoments) -> np.ndarray:
    """Gaussian KL divergence of each class covariance from the pooled one (equal means).

    0.5 (tr(Sp^-1 Sk) - p - ln det(Sp^-1 Sk)), via a Cholesky solve; 0 when equal.
    """
    Sp = moments.pooled_covariance
    L = linalg.cholesky(Sp, lower=True)
    ld_p = logdet_spd(Sp)
    p = moments.n_features
    out = []
    for Sk in moments.class_covariances():
        tr = float(np.trace(linalg.cho_solve((L, True), Sk)))
        out.append(0.5 * (tr - p - (logdet_spd(Sk) - ld_p)))
    return np.asarray(out)


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
    divergence = _divergence_from_pooled(sub)
    worst = int(np.argmax(divergence))
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
                "delta_aic": bic.delta_aic,
                "gain_per_row": bic.gain_per_row,
            },
            "log_determinants": {label(c): v for c, v in zip(sub.classes, box.log_determinants, strict=True)},
            "divergence_from_pooled": {label(c): float(d) for c, d in zip(sub.classes, divergence, strict=True)},
            "most_different_class": label(sub.classes[worst]),
        }
    )
    rejects = box.p_value < config.box_m_alpha
    favours_separate = bic.delta_bic > config.bic_margin
    figure = f"dBIC {fmt(bic.delta_bic)}"
    tail = f" (Box's M {fmt_p(box.p_value)}; BIC favours {'separate' if bic.delta_bic > 0 else 'shared'} covariances by {fmt(abs(bic.delta_bic))})"
    if excluded:
        tail += f"; singular classes {names(excluded)} left out"
    if rejects and favours_separate:
        return Finding(
            KEY,
            "fail",
            f"Class covariances differ, most in class {sub.classes[worst]}, by more than their extra parameters cost"
            + tail
            + ".",
            details,
            figure,
            arrays,
        )
    if rejects:
        return Finding(
            KEY,
            "warn",
            "Box's M detects unequal covariances, but separate covariances do not pay for their parameters"
            + tail
            + ".",
            details,
            figure,
            arrays,
        )
    if favours_separate:
        return Finding(
            KEY,
            "warn",
            "BIC favours separate covariances though Box's M does not reject" + tail + ".",
            details,
            figure,
            arrays,
        )
    status = "warn" if excluded else "pass"
    return Finding(KEY, status, "No evidence that class covariances differ" + tail + ".", details, figure, arrays)
