"""Shared versus separate class covariances compared by BIC (Schwarz 1978), from moments alone."""

from __future__ import annotations

from dataclasses import dataclass

import numpy as np

from discaudit.stats._linalg import logdet_spd
from discaudit.stats.moments import ClassMoments


@dataclass(frozen=True)
class CovarianceBICResult:
    """Maximized Gaussian log-likelihoods and BICs of the two covariance models.

    Attributes
    ----------
    loglik_shared, loglik_separate : float
        Maximized log-likelihoods (MLE covariances, divisor n) of the model with one shared
        covariance and of the model with one covariance per class; the class means are free
        in both.
    n_params_shared, n_params_separate : int
        Free parameters: Kp + p(p+1)/2 and Kp + Kp(p+1)/2.
    bic_shared, bic_separate : float
        -2 loglik + n_params ln N.
    delta_bic : float
        bic_shared - bic_separate: positive favours separate covariances (QDA's model).
    delta_aic : float
        aic_shared - aic_separate with AIC = -2 loglik + 2 n_params (Akaike 1974): the
        predictive counterpart of ``delta_bic`` (positive favours separate covariances).
    gain_per_row : float
        (loglik_separate - loglik_shared) / N, in nats per row: the size of the covariance
        difference, independent of N.
    """

    loglik_shared: float
    loglik_separate: float
    n_params_shared: int
    n_params_separate: int
    bic_shared: float
    bic_separate: float
    delta_bic: float
    delta_aic: float
    gain_per_row: float


def covariance_bic(moments: ClassMoments) -> CovarianceBICResult:
    """Compare the homoscedastic and heteroscedastic Gaussian class models by BIC.

    Parameters
    ----------
    moments : ClassMoments
        Per-class moments; every class covariance must be nonsingular.

    Returns
    -------
    CovarianceBICResult

    Notes
    -----
    With MLE covariances the maximized log-likelihood of a Gaussian sample of n rows is
    -n/2 (p ln 2 pi + ln det S_mle + p), so both models follow from the scatter matrices.
    Unlike Box's M, whose p-value shrinks with N for a fixed small difference, the BIC
    charges the separate model its K p (p+1)/2 extra parameters, so a negligible
    difference does not win at large N. Singular class covariances give ``-inf``
    log-determinants and are the caller's to exclude.

    References
    ----------
    Schwarz, G. (1978). Estimating the dimension of a model. Annals of Statistics 6, 461-464.
    Akaike, H. (1974). A new look at the statistical model identification. IEEE Transactions
    on Automatic Control 19, 716-723.
    Kass, R. E. & Raftery, A. E. (1995). Bayes factors. JASA 90, 773-795.
    """
    counts = moments.counts.astype(np.float64)
    K, p, N = moments.n_classes, moments.n_features, float(moments.n_total)
    const = p * np.log(2.0 * np.pi) + p
    shared = -N / 2.0 * (const + logdet_spd(moments.within_scatter / N))
    separate = float(sum(-n / 2.0 * (const + logdet_spd(S / n)) for n, S in zip(counts, moments.scatter, strict=True)))
    k_shared = K * p + p * (p + 1) // 2
    k_separate = K * p + K * p * (p + 1) // 2
    bic_shared = -2.0 * shared + k_shared * np.log(N)
    bic_separate = -2.0 * separate + k_separate * np.log(N)
    return CovarianceBICResult(
        loglik_shared=float(shared),
        loglik_separate=separate,
        n_params_shared=int(k_shared),
        n_params_separate=int(k_separate),
        bic_shared=float(bic_shared),
        bic_separate=float(bic_separate),
        delta_bic=float(bic_shared - bic_separate),
        delta_aic=float(2.0 * (separate - shared) - 2.0 * (k_separate - k_shared)),
        gain_per_row=float((separate - shared) / N),
    )
