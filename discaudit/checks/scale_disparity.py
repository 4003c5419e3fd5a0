"""Check ``scale_disparity``: features on wildly different scales (a conditioning warning)."""

from __future__ import annotations

from typing import TYPE_CHECKING

import numpy as np

from discaudit.dataset import AuditData
from discaudit.findings import Finding, fmt
from discaudit.stats._linalg import correlation_from_covariance

if TYPE_CHECKING:
    from discaudit.config import Config

KEY = "scale_disparity"


def _condition_number(S: np.ndarray) -> float:
    """Largest over smallest eigenvalue; inf when the smallest is not above rounding noise.

    An eigenvalue below p * eps * largest cannot be told from zero, and dividing by it can
    overflow float64 when the largest is huge (features at 1e150 and at 1e-6).
    """
    values = np.linalg.eigvalsh((S + S.T) / 2.0)
    largest, smallest = float(values[-1]), float(values[0])
    if largest <= 0 or smallest <= S.shape[0] * np.finfo(np.float64).eps * largest:
        return float("inf")
    return largest / smallest


def run(data: AuditData, config: Config, random_state: int | None = None) -> Finding:
    """Ratio of the largest to the smallest pooled within-class standard deviation.

    Also reports the condition number of the raw and of the standardized pooled covariance:
    their gap is the part of the ill-conditioning that standardizing removes. LDA itself is
    invariant to rescaling, so this warns (advice to standardize) but never fails.
    Threshold ``scale_ratio_warn`` (common practice: 1e3).
    """
    S = data.moments.pooled_covariance
    audited_sd = np.sqrt(np.clip(np.diag(S), 0.0, None))
    # A feature audited after a power-of-two rescaling (tiny magnitudes) is compared in its own units.
    power = np.zeros(data.p, dtype=np.intp) if data.coordinates is None else np.asarray(data.coordinates.exponents)
    sd = np.ldexp(audited_sd, power)
    positive = audited_sd > 0
    raw_cond = _condition_number(np.ldexp(S, power[:, None] + power[None, :]) if power.any() else S)
    details: dict[str, object] = {
        "pooled_within_sd": dict(zip(data.features, sd.tolist(), strict=True)),
        "threshold": config.scale_ratio_warn,
        "condition_number_raw": raw_cond,
        "definition": "standard deviations from the pooled within-class covariance W/(N-K); "
        "condition numbers are eigenvalue ratios of that covariance and of its correlation matrix",
    }
    if not positive.all():
        zero = [data.features[j] for j in np.flatnonzero(~positive)]
        details["zero_within_class_sd"] = zero
        return Finding(
            KEY,
            "warn",
            f"{', '.join(zero)} do not vary within any class (each class has one value), so scales cannot be "
            "compared and the pooled covariance is singular.",
            details,
            "SD ratio n/a",
        )
    # log2 of each SD in its own units, so the ratio of a 1e-300 feature to a unit one is exact
    log2_sd = np.log2(audited_sd) + power
    top, bottom = int(np.argmax(log2_sd)), int(np.argmin(log2_sd))
    with np.errstate(over="ignore"):
        ratio = float(np.exp2(log2_sd[top] - log2_sd[bottom]))
    largest, smallest = data.features[top], data.features[bottom]
    std_cond = _condition_number(correlation_from_covariance(S))
    median_sd = float(np.median(sd))
    band = float(np.sqrt(config.scale_ratio_warn))
    off_scale = {
        f: float(v / median_sd)
        for f, v in sorted(zip(data.features, sd.tolist(), strict=True), key=lambda t: -abs(np.log(t[1] / median_sd)))
        if not 1.0 / band <= v / median_sd <= band
    }
    details.update(
        {
            "sd_ratio": ratio,
            "largest_sd_feature": largest,
            "smallest_sd_feature": smallest,
            "condition_number_standardized": std_cond,
            "median_sd": median_sd,
            "off_scale_features": off_scale,
            "off_scale_rule": f"pooled within-class SD more than sqrt({fmt(config.scale_ratio_warn)}) = {fmt(band)} times "
            "the median feature's SD, or less than its inverse: the features that drive the ratio",
        }
    )
    figure = f"SD ratio {fmt(ratio)}"
    if ratio > config.scale_ratio_warn:
        named = (
            "; the features off the common scale: "
            + ", ".join(f"{f} ({fmt(r)} times the median SD)" for f, r in list(off_scale.items())[:4])
            + (f" and {len(off_scale) - 4} more" if len(off_scale) > 4 else "")
            if off_scale
            else ""
        )
        return Finding(
            KEY,
            "warn",
            f"{largest} varies {fmt(ratio)} times more than {smallest}; standardize the features before fitting "
            f"(condition number {fmt(raw_cond)} raw, {fmt(std_cond)} standardized){named}.",
            details,
            figure,
        )
    return Finding(KEY, "pass", f"Feature scales differ at most {fmt(ratio)}-fold.", details, figure)
