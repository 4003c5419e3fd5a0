"""The sums of fourth powers behind both Ledoit-Wolf intensities of an audit, from one pass per audit.

The collinearity check reports the Ledoit-Wolf intensity of the pooled within-class covariance on
the raw and on the standardized scale; the expected-performance check scores shrinkage LDA at the
standardized one. Both need sum_i ||z_i||^4 of the class-centred rows z_i on those scales, a pass
over every row: :func:`ledoit_wolf_sums` makes it once per audit, for both scales, and memoizes it
on the data (:meth:`discaudit.dataset.AuditData.shared`). When the rows held are a per-class
sample of a larger input, each class's sum is estimated from its sample rows, scaled by its row
count (the moments count every row; the sample's own sum would understate the fourth moment).
"""

from __future__ import annotations

from dataclasses import dataclass

import numpy as np
import numpy.typing as npt

from discaudit.dataset import AuditData
from discaudit.stats.shrinkage import class_centred_fourth_sums, ledoit_wolf_scales

#: The two scales, in this order: one common power of two (raw), each feature's pooled
#: within-class standard deviation (standardized).
SCALES = (False, True)


@dataclass(frozen=True)
class LedoitWolfSums:
    """Scales (one row per entry of :data:`SCALES`) and the sum of fourth powers on each."""

    scales: npt.NDArray[np.float64]
    sums: npt.NDArray[np.float64]


def ledoit_wolf_sums(data: AuditData) -> LedoitWolfSums | None:
    """The sums on both scales, once per audit; None when a feature does not vary within classes
    (no standardized scale) or none varies at all.

    References
    ----------
    Ledoit, O. and Wolf, M. (2004). A well-conditioned estimator for large-dimensional covariance
    matrices. Journal of Multivariate Analysis 88, 365-411.
    """
    return data.shared("ledoit_wolf_sums", lambda: _compute(data))


def _compute(data: AuditData) -> LedoitWolfSums | None:
    m = data.moments
    if not np.all(np.diag(m.within_scatter) > 0.0):
        return None
    exponents = None if data.coordinates is None else data.coordinates.exponents
    scales = ledoit_wolf_scales(m, SCALES, exponents)
    if scales is None:
        return None
    if data.sample is None:
        return LedoitWolfSums(scales, class_centred_fourth_sums(data.values, data.codes, m.means, scales))
    total = np.zeros(scales.shape[0])
    for k in range(len(data.classes)):
        rows = data.class_rows(k)
        if rows.size:
            part = class_centred_fourth_sums(data.values[rows], data.codes[rows], m.means, scales)
            total += part * float(m.counts[k]) / rows.size
    return LedoitWolfSums(scales, total)
