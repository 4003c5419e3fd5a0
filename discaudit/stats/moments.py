"""Per-class counts, means and centred scatter matrices: the sufficient statistics of LDA.

Every closed-form check reads a :class:`ClassMoments`; none re-reads the raw data. Moments
are mergeable: two partial results over disjoint rows combine exactly (Chan, Golub & LeVeque
1979), so chunked, streamed and distributed input can reuse them.
"""

from __future__ import annotations

from collections.abc import Iterator
from dataclasses import dataclass
from typing import Any

import numpy as np
import numpy.typing as npt

from discaudit.stats.blocks import ROW_BLOCK as _ROW_BLOCK

FloatArray = npt.NDArray[np.float64]


def class_centred_blocks(
    X: FloatArray, codes: npt.NDArray[np.intp], means: FloatArray
) -> Iterator[tuple[int, FloatArray]]:
    """Pairs (k, rows of class k in one block of X minus the mean of class k), block by block.

    Each part is a fresh array (the caller may change it in place; X is left alone), and no
    temporary holds more than one block of ``_ROW_BLOCK`` rows.
    """
    for a in range(0, X.shape[0], _ROW_BLOCK):
        block, c = X[a : a + _ROW_BLOCK], codes[a : a + _ROW_BLOCK]
        for k in np.unique(c):
            part = np.compress(c == k, block, axis=0)
            part -= means[k]
            yield int(k), part


@dataclass(frozen=True)
class ClassMoments:
    """Counts, means and centred scatter matrices per class.

    Attributes
    ----------
    classes : tuple
        Class labels, in the order of the leading axis of the arrays.
    counts : ndarray, shape (K,)
        Rows per class.
    means : ndarray, shape (K, p)
        Class means.
    scatter : ndarray, shape (K, p, p)
        Centred scatter matrices ``sum_i (x_i - m_k)(x_i - m_k)'`` per class.

    References
    ----------
    Chan, T. F., Golub, G. H. & LeVeque, R. J. (1979). Updating formulae and a pairwise
    algorithm for computing sample variances. Stanford CS report STAN-CS-79-773.
    """

    classes: tuple[Any, ...]
    counts: npt.NDArray[np.int64]
    means: FloatArray
    scatter: FloatArray

    @classmethod
    def from_arrays(cls, X: FloatArray, codes: npt.NDArray[np.intp], classes: tuple[Any, ...]) -> ClassMoments:
        """Moments of ``X`` (n, p) grouped by integer ``codes`` into ``len(classes)`` classes.

        Two passes over blocks of rows: class sums first, then scatter about the class means
        (so the result does not suffer the cancellation of ``sum x x' - n m m'``). Temporary
        arrays stay at one block of rows, whatever n is.
        """
        K, p = len(classes), X.shape[1]
        n = X.shape[0]
        counts = np.bincount(codes, minlength=K).astype(np.int64)
        sums = np.zeros((K, p))
        for a in range(0, n, _ROW_BLOCK):
            c = codes[a : a + _ROW_BLOCK]
            sums += (c[None, :] == np.arange(K)[:, None]).astype(np.float64) @ X[a : a + _ROW_BLOCK]
        means = sums / np.maximum(counts, 1)[:, None]
        scatter = np.zeros((K, p, p))
        for k, part in class_centred_blocks(X, codes, means):
            scatter[k] += part.T @ part
        return cls(tuple(classes), counts, means, (scatter + scatter.transpose(0, 2, 1)) / 2.0)

    def merge(self, other: ClassMoments) -> ClassMoments:
        """Exact moments of the union of two disjoint sets of rows.

        Classes present in only one part are carried over; the result lists classes in
        the order of ``self`` followed by new classes of ``other``.
        """
        classes = list(self.classes) + [c for c in other.classes if c not in self.classes]
        p = self.means.shape[1]
        K = len(classes)
        counts = np.zeros(K, dtype=np.int64)
        means = np.zeros((K, p))
        scatter = np.zeros((K, p, p))
        for part in (self, other):
            for j, label in enumerate(part.classes):
                k = classes.index(label)
                na, nb = counts[k], part.counts[j]
                if nb == 0:
                    continue
                n = na + nb
                delta = part.means[j] - means[k]
                means[k] = means[k] + delta * (nb / n)
                scatter[k] = scatter[k] + part.scatter[j] + np.outer(delta, delta) * (na * nb / n)
                counts[k] = n
        return ClassMoments(tuple(classes), counts, means, scatter)

    @property
    def n_classes(self) -> int:
        return len(self.classes)

    @property
    def n_features(self) -> int:
        return int(self.means.shape[1])

    @property
    def n_total(self) -> int:
        return int(self.counts.sum())

    @property
    def grand_mean(self) -> FloatArray:
        return np.asarray(self.counts @ self.means / self.n_total, dtype=np.float64)

    @property
    def within_scatter(self) -> FloatArray:
        """W = sum of the class scatter matrices."""
        return np.asarray(self.scatter.sum(axis=0), dtype=np.float64)

    @property
    def between_scatter(self) -> FloatArray:
        """B = sum_k n_k (m_k - m)(m_k - m)'."""
        d = self.means - self.grand_mean
        return np.asarray((d * self.counts[:, None]).T @ d, dtype=np.float64)

    @property
    def pooled_covariance(self) -> FloatArray:
        """Pooled within-class covariance W / (N - K), the matrix LDA inverts."""
        return self.within_scatter / (self.n_total - self.n_classes)

    @property
    def total_covariance(self) -> FloatArray:
        """Total covariance (W + B) / (N - 1), ignoring class labels."""
        return (self.within_scatter + self.between_scatter) / (self.n_total - 1)

    def class_covariances(self) -> FloatArray:
        """Unbiased per-class covariances S_k / (n_k - 1), shape (K, p, p); NaN for a one-row class."""
        dof = (self.counts - 1).astype(np.float64)
        with np.errstate(divide="ignore", invalid="ignore"):
            return np.where(dof[:, None, None] > 0, self.scatter / np.maximum(dof, 1.0)[:, None, None], np.nan)

    def subset(self, features: npt.NDArray[np.intp]) -> ClassMoments:
        """Moments restricted to the given feature positions."""
        idx = np.asarray(features)
        return ClassMoments(self.classes, self.counts, self.means[:, idx], self.scatter[:, idx][:, :, idx])
