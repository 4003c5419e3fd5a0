"""Which squared distances are far out even for the class's own spread of distances.

A cut-off such as chi-square(p) 0.975 says how far a row may lie from its class *if the class is
Gaussian*. In a skewed or heavy-tailed class a large share of rows lies beyond it without any of
them being a gross error: the tail is the distribution. :func:`far_out_fence` judges a distance
against the other distances of the class instead: the Hampel identifier (median plus k
normalized median absolute deviations; Hampel 1974, Davies & Gather 1993) applied to the cube
roots of the squared distances, which Wilson & Hilferty (1931) showed to be close to Gaussian
for a chi-square variable. Median and MAD have a 50% breakdown point, so up to half the rows
may be gross outliers without moving the fence towards them. For a Gaussian class the fence
with k = 3 lies beyond the 0.998 quantile of the distances, above the usual cut-offs.

References
----------
Wilson, E. B. & Hilferty, M. M. (1931). The distribution of chi-square. Proceedings of the
National Academy of Sciences 17, 684-688.

Hampel, F. R. (1974). The influence curve and its role in robust estimation. Journal of the
American Statistical Association 69, 383-393.

Davies, L. & Gather, U. (1993). The identification of multiple outliers. Journal of the American
Statistical Association 88, 782-792.
"""

from __future__ import annotations

from dataclasses import dataclass

import numpy as np
import numpy.typing as npt
from scipy import stats as sps

__all__ = ["FarOutFence", "far_out_fence"]

#: 1 / Phi^-1(3/4): makes the MAD estimate the standard deviation of a Gaussian sample.
MAD_TO_SD = float(1.0 / sps.norm.ppf(0.75))


@dataclass(frozen=True)
class FarOutFence:
    """The fence and the figures it was built from.

    Attributes
    ----------
    centre : float
        Median of the cube roots of the squared distances.
    spread : float
        Their median absolute deviation times 1 / Phi^-1(3/4).
    multiplier : float
        k.
    fence : float
        (centre + k spread)^3, in squared-distance units; ``inf`` when ``spread`` is 0 (at least
        half the distances are equal, so the class gives no spread to judge by).
    """

    centre: float
    spread: float
    multiplier: float
    fence: float


def far_out_fence(squared_distances: npt.ArrayLike, multiplier: float = 3.0) -> FarOutFence:
    """The Hampel fence of squared distances on the Wilson-Hilferty (cube-root) scale.

    Parameters
    ----------
    squared_distances : array-like, shape (n,)
        Non-negative squared distances of the rows of one class (non-finite values are ignored).
    multiplier : float, default 3
        k, in normalized MADs.

    Returns
    -------
    FarOutFence
    """
    d = np.asarray(squared_distances, dtype=np.float64)
    roots = np.cbrt(np.clip(d[np.isfinite(d)], 0.0, None))
    if roots.size == 0:
        return FarOutFence(float("nan"), float("nan"), float(multiplier), float("inf"))
    centre = float(np.median(roots))
    spread = float(np.median(np.abs(roots - centre)) * MAD_TO_SD)
    fence = (centre + multiplier * spread) ** 3 if spread > 0 else float("inf")
    return FarOutFence(centre, spread, float(multiplier), float(fence))
