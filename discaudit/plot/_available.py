"""Whether a check's plot has something to draw (no matplotlib needed)."""

from __future__ import annotations

from typing import Any

import numpy as np


def why_not(verdict: Any, key: str) -> str:
    """Why the plot of ``key`` cannot be drawn, or ``""`` when it can."""
    finding = verdict.findings.get(key)
    if finding is None:
        return f"The check {key} is not in this verdict."
    if finding.status == "skip":
        return f"The check {key} did not run: {finding.summary}"
    details, arrays = finding.details, finding.arrays
    if key == "scale_disparity":
        sd = details.get("pooled_within_sd") or {}
        if not any(v is not None and v > 0 for v in sd.values()):
            return "No feature varies within classes; there is no spread to show."
    elif key == "collinearity":
        if not details.get("vif_within"):
            return "No VIF was computed (fewer than two features vary within classes)."
    elif key == "outliers":
        if len(arrays.get("squared_distance", ())) == 0:
            return "The per-row distances of the outliers check are not available."
    elif key == "normality":
        classical = arrays.get("classical_squared_distance")
        if classical is None or not np.isfinite(np.asarray(classical, dtype=float)).any():
            return "No class had its squared distances computed (too few rows, or a singular class covariance)."
    elif key == "expected_performance":
        if not details.get("candidates"):
            return "No candidate could be scored."
    elif key == "covariance_homogeneity":
        if "plane_means" not in arrays:
            return "There is no discriminant plane to project on (a single feature, or a singular pooled covariance)."
    return ""


def available(verdict: Any, key: str) -> bool:
    """True when the plot of ``key`` has something to draw."""
    return why_not(verdict, key) == ""
