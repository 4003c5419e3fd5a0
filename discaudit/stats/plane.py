"""The plane the covariance-ellipse plot projects on: the first two discriminant directions.

Numbers only (numpy and scipy, no matplotlib), so a check can store the projected class
means and covariances in its ``Finding.arrays`` while the audit runs, and the plot can draw
them later without the data.
"""

from __future__ import annotations

from dataclasses import dataclass

import numpy as np
import numpy.typing as npt
from scipy import linalg

from discaudit.stats.moments import ClassMoments

FloatArray = npt.NDArray[np.float64]

#: Axis label of a discriminant direction; ``{i}`` is its rank (1 = largest Fisher criterion).
DIRECTION_LABEL = "discriminant direction {i} (pooled within-class SD units)"
#: Axis label of the second axis when there is only one discriminant direction (two classes).
COMPONENT_LABEL = (
    "top within-class principal component of the standardized features, orthogonal to direction 1 "
    "(pooled within-class SD units)"
)


@dataclass(frozen=True)
class DiscriminantPlane:
    """Two axes in feature space on which classes are compared.

    Attributes
    ----------
    basis : ndarray, shape (p, 2)
        Column j maps a feature vector x to its coordinate ``x @ basis[:, j]``. Each column
        has unit pooled within-class variance (``b' S b = 1`` with S = W / (N - K)).
    axis_labels : tuple of str
        What each axis is, for the plot.
    n_directions : int
        Discriminant directions among the two axes: 2 when min(p, K - 1) >= 2, else 1 (the
        second axis is then a within-class principal component).
    """

    basis: FloatArray
    axis_labels: tuple[str, str]
    n_directions: int


def discriminant_plane(moments: ClassMoments) -> DiscriminantPlane | None:
    """The first two discriminant directions, or one direction and a principal component.

    Parameters
    ----------
    moments : ClassMoments
        Per-class counts, means and scatter matrices.

    Returns
    -------
    DiscriminantPlane or None
        None when there is no plane: fewer than two features, or a singular within-class
        scatter W (the discriminant directions are then undefined).

    Notes
    -----
    The discriminant directions solve the symmetric-definite problem B v = l W v (Fisher's
    criterion, as in :func:`discaudit.stats.wilks_lambda`), sorted by decreasing l and
    rescaled so that v' S v = 1 with S = W / (N - K): one unit on an axis is one pooled
    within-class standard deviation, and the pooled covariance projects to the identity
    when both axes are directions. With two classes there is a single direction d; the
    second axis is then the top eigenvector of the pooled within-class *correlation*
    restricted to the (standardized) orthogonal complement of d, mapped back to the raw
    features and rescaled to unit pooled variance. Standardizing first makes the whole
    plane invariant to a rescaling of any feature, as LDA is; the raw covariance would let
    the feature with the largest units decide the second axis. Each axis is signed so that
    the last class mean lies at or above the first one.

    References
    ----------
    Fisher, R. A. (1936). The use of multiple measurements in taxonomic problems. Annals of
    Eugenics 7, 179-188.

    Examples
    --------
    >>> from sklearn.datasets import load_iris  # doctest: +SKIP
    >>> X, y = load_iris(return_X_y=True)  # doctest: +SKIP
    >>> plane = discriminant_plane(ClassMoments.from_arrays(X, y, (0, 1, 2)))  # doctest: +SKIP
    >>> plane.basis.shape  # doctest: +SKIP
    (4, 2)
    """
    p, K, N = moments.n_features, moments.n_classes, moments.n_total
    if p < 2 or N - K < 1:
        return None
    W, B = moments.within_scatter, moments.between_scatter
    if not (np.all(np.isfinite(W)) and np.all(np.isfinite(B))):
        return None
    try:
        values, vectors = linalg.eigh(B, W, check_finite=False)
    except (linalg.LinAlgError, ValueError):
        return None
    S = W / (N - K)
    order = np.argsort(values)[::-1]
    if min(p, K - 1) >= 2:
        basis = vectors[:, order[:2]] * np.sqrt(N - K)
        labels = (DIRECTION_LABEL.format(i=1), DIRECTION_LABEL.format(i=2))
        used = 2
    else:
        d = vectors[:, order[0]] * np.sqrt(N - K)
        sd = np.sqrt(np.diag(S))
        if not np.all(sd > 0):
            return None
        R = S / np.outer(sd, sd)
        d_std = d * sd  # the same direction in standardized coordinates z = x / sd
        u_hat = d_std / np.linalg.norm(d_std)
        P = np.eye(p) - np.outer(u_hat, u_hat)
        M = P @ R @ P
        vals, vecs = np.linalg.eigh((M + M.T) / 2.0)
        u = vecs[:, -1] / sd  # back to raw coordinates
        scale = float(u @ S @ u)
        if not scale > 0:
            return None
        basis = np.column_stack([d, u / np.sqrt(scale)])
        labels = (DIRECTION_LABEL.format(i=1), COMPONENT_LABEL)
        used = 1
    spread = (moments.means[-1] - moments.means[0]) @ basis
    basis = basis * np.where(spread < 0, -1.0, 1.0)
    return DiscriminantPlane(np.ascontiguousarray(basis, dtype=np.float64), labels, used)


def project(plane: DiscriminantPlane, location: FloatArray, covariance: FloatArray) -> tuple[FloatArray, FloatArray]:
    """A centre (p,) and covariance (p, p) on the plane: ``(location @ A, A' C A)``."""
    A = plane.basis
    with np.errstate(all="ignore"):
        centre = np.asarray(location, dtype=np.float64) @ A
        cov = A.T @ np.asarray(covariance, dtype=np.float64) @ A
    return centre, (cov + cov.T) / 2.0


def project_moments(plane: DiscriminantPlane, moments: ClassMoments) -> tuple[FloatArray, FloatArray]:
    """Class means (K, 2) and unbiased class covariances (K, 2, 2) on the plane."""
    A = plane.basis
    with np.errstate(all="ignore"):
        means = moments.means @ A
        covs = np.einsum("pi,kpq,qj->kij", A, moments.class_covariances(), A)
    return means, (covs + np.transpose(covs, (0, 2, 1))) / 2.0
