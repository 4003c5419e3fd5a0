"""How much of the between-class Mahalanobis separation survives covariance shrinkage."""

from __future__ import annotations

from dataclasses import dataclass

import numpy as np

from discaudit.stats._linalg import correlation_from_covariance, symmetric_eigh
from discaudit.stats.moments import ClassMoments


@dataclass(frozen=True)
class ShrinkageRetention:
    """Separation kept by an LDA that uses the shrunk instead of the sample covariance.

    Attributes
    ----------
    retained : float
        Share (0 to 1) of the noise-corrected between-class Mahalanobis separation that the
        discriminant directions of the shrunk covariance still capture; 1 means shrinkage
        costs nothing, small values mean the classes differ along low-variance directions
        that shrinkage flattens.
    intensity : float
        The shrinkage intensity evaluated (towards the identity, standardized features).
    separation : float
        The noise-corrected squared Mahalanobis separation, sum_k n_k Delta_k^2 / N.
    low_variance_share : float
        Share of that separation carried by the directions whose eigenvalue is below the
        mean eigenvalue (where shrinkage acts most).
    """

    retained: float
    intensity: float
    separation: float
    low_variance_share: float


def shrinkage_retention(moments: ClassMoments, intensity: float) -> ShrinkageRetention | None:
    """Share of the class separation that survives shrinking the pooled correlation.

    Parameters
    ----------
    moments : ClassMoments
        Per-class moments; every feature must vary within classes.
    intensity : float
        Shrinkage intensity a in [0, 1]: R~ = (1 - a) R + a I on standardized features.

    Returns
    -------
    ShrinkageRetention or None
        None when the pooled correlation is singular (the separation is then unbounded and
        shrinkage is needed regardless).

    Notes
    -----
    In the eigenbasis R = V diag(l) V' of the pooled within-class correlation, the class
    offsets d_k = (m_k - m) / sd have components c_kj = v_j' d_k. Sampling noise adds
    about l_j (1/n_k - 1/N) to E[c_kj^2], so each squared component is corrected by that
    amount (floored at 0), the per-direction analogue of the Lachenbruch bias correction
    of the Mahalanobis distance. The LDA direction with the shrunk correlation,
    w_k = R~^-1 d_k, captures (w_k' d_k)^2 / (w_k' R w_k) of the separation d_k' R^-1 d_k
    (a ratio at most 1, by Cauchy-Schwarz); the class-size weighted ratio is ``retained``.
    This follows the observation that shrinkage helps when the class difference lies along
    high-variance directions and hurts when it lies along low-variance ones.

    References
    ----------
    Friedman, J. H. (1989). Regularized discriminant analysis. JASA 84, 165-175.
    Lachenbruch, P. A. (1968). On expected probabilities of misclassification in
    discriminant analysis, necessary sample size, and a relation with the multiple
    correlation coefficient. Biometrics 24, 823-834.
    """
    S = moments.pooled_covariance
    sd = np.sqrt(np.diag(S))
    if np.any(sd <= 0):
        return None
    values, vectors = symmetric_eigh(correlation_from_covariance(S))
    if values[-1] <= 1e-10 * values[0]:
        return None
    offsets = (moments.means - moments.grand_mean) / sd
    comps = offsets @ vectors
    counts = moments.counts.astype(np.float64)
    N = counts.sum()
    noise = values[None, :] * (1.0 / counts - 1.0 / N)[:, None]
    signal = np.clip(comps**2 - noise, 0.0, None)
    shrunk = (1.0 - intensity) * values + intensity
    full = signal / values
    captured_num = (signal / shrunk).sum(axis=1) ** 2
    captured_den = (signal * values / shrunk**2).sum(axis=1)
    total = float(counts @ full.sum(axis=1))
    if total <= 0:
        return ShrinkageRetention(1.0, float(intensity), 0.0, 0.0)
    with np.errstate(invalid="ignore", divide="ignore"):
        captured = np.where(captured_den > 0, captured_num / captured_den, 0.0)
    low = values < values.mean()
    return ShrinkageRetention(
        retained=float(counts @ captured / total),
        intensity=float(intensity),
        separation=total / N,
        low_variance_share=float(counts @ full[:, low].sum(axis=1) / total),
    )
