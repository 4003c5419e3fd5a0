"""Per-class counts, means and centred scatter matrices: the sufficient statistics of LDA.

Every closed-form check reads a :class:`ClassMoments`; none re-reads the raw data. Moments
are mergeable: two partial results over disjoint rows combine exactly (Chan, Golub & LeVeque
1979), so chunked, streamed and distributed input can reuse them.

Exact facts come before rounded ones: each class also keeps its per-feature minimum and
maximum, and a feature whose minimum equals its maximum in a class has, in that class, a mean
equal to that value and a scatter row and column of exact zeros (not the rounding residue of
subtracting a mean that was itself rounded). Sums are accumulated after shifting each feature
by a location (the first row of the block), so a feature far from zero (1e15 plus unit noise)
keeps the digits that vary.
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
    minimum, maximum : ndarray, shape (K, p), or None
        Per-class smallest and largest value of each feature (+inf and -inf for a class with
        no rows); None when the moments were built from means and scatter alone.

    References
    ----------
    Chan, T. F., Golub, G. H. & LeVeque, R. J. (1979). Updating formulae and a pairwise
    algorithm for computing sample variances. Stanford CS report STAN-CS-79-773.
    """

    classes: tuple[Any, ...]
    counts: npt.NDArray[np.int64]
    means: FloatArray
    scatter: FloatArray
    minimum: FloatArray | None = None
    maximum: FloatArray | None = None

    @classmethod
    def from_arrays(cls, X: FloatArray, codes: npt.NDArray[np.intp], classes: tuple[Any, ...]) -> ClassMoments:
        """Moments of ``X`` (n, p) grouped by integer ``codes`` into ``len(classes)`` classes.

        Two passes over blocks of rows: class sums of the rows shifted by a location first (the
        first row of X, so an offset of 1e15 does not swamp unit variation), then scatter about
        the class means with the corrected two-pass formula ``sum d d' - (sum d)(sum d)' / n``
        (Chan, Golub & LeVeque 1979), which removes the rounding of the mean to first order.
        Temporary arrays stay at one block of rows, whatever n is.
        """
        K, p = len(classes), X.shape[1]
        n = X.shape[0]
        counts = np.bincount(codes, minlength=K).astype(np.int64)
        location = np.array(X[0], dtype=np.float64) if n else np.zeros(p)
        sums = np.zeros((K, p))
        for a in range(0, n, _ROW_BLOCK):
            c = codes[a : a + _ROW_BLOCK]
            sums += (c[None, :] == np.arange(K)[:, None]).astype(np.float64) @ (X[a : a + _ROW_BLOCK] - location)
        means = location + sums / np.maximum(counts, 1)[:, None]
        scatter = np.zeros((K, p, p))
        residual = np.zeros((K, p))
        low, high = np.full((K, p), np.inf), np.full((K, p), -np.inf)
        for a in range(0, n, _ROW_BLOCK):  # as class_centred_blocks, with the exact range of the raw rows
            block, c = X[a : a + _ROW_BLOCK], codes[a : a + _ROW_BLOCK]
            for k in np.unique(c):
                part = np.compress(c == k, block, axis=0)
                np.minimum(low[k], part.min(axis=0), out=low[k])
                np.maximum(high[k], part.max(axis=0), out=high[k])
                part -= means[k]
                scatter[k] += part.T @ part
                residual[k] += part.sum(axis=0)
        scatter -= residual[:, :, None] * residual[:, None, :] / np.maximum(counts, 1)[:, None, None]
        return cls(tuple(classes), counts, means, (scatter + scatter.transpose(0, 2, 1)) / 2.0, low, high)._exact()

    @classmethod
    def from_summaries(
        cls,
        classes: tuple[Any, ...],
        counts: npt.NDArray[np.int64],
        means: FloatArray,
        scatter: FloatArray,
        minimum: FloatArray,
        maximum: FloatArray,
    ) -> ClassMoments:
        """Moments computed elsewhere (e.g. inside a database engine), with the exact facts of
        constant features imposed as :meth:`from_arrays` imposes them."""
        return cls(tuple(classes), counts, means, scatter, minimum, maximum)._exact()

    def _exact(self) -> ClassMoments:
        """The same moments with the exact facts imposed where a feature is constant in a class.

        Where a class's minimum equals its maximum, its mean is that value and its scatter row
        and column are zero; everything else is returned unchanged (a new object only if needed).
        """
        if self.minimum is None or self.maximum is None:
            return self
        flat = (self.minimum == self.maximum) & (self.counts[:, None] > 0)
        if not flat.any():
            return self
        means = np.where(flat, self.minimum, self.means)
        keep = (~flat).astype(np.float64)
        scatter = self.scatter * keep[:, :, None] * keep[:, None, :]
        return ClassMoments(self.classes, self.counts, means, scatter, self.minimum, self.maximum)

    def merge(self, other: ClassMoments) -> ClassMoments:
        """Exact moments of the union of two disjoint sets of rows.

        Classes present in only one part are carried over; the result lists classes in
        the order of ``self`` followed by new classes of ``other``. Per-class ranges are
        kept only when both parts have them.
        """
        classes = list(self.classes) + [c for c in other.classes if c not in self.classes]
        p = self.means.shape[1]
        K = len(classes)
        counts = np.zeros(K, dtype=np.int64)
        means = np.zeros((K, p))
        scatter = np.zeros((K, p, p))
        ranged = all(m.minimum is not None and m.maximum is not None for m in (self, other))
        low, high = np.full((K, p), np.inf), np.full((K, p), -np.inf)
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
                if ranged:
                    assert part.minimum is not None and part.maximum is not None
                    low[k] = np.minimum(low[k], part.minimum[j])
                    high[k] = np.maximum(high[k], part.maximum[j])
        if not ranged:
            return ClassMoments(tuple(classes), counts, means, scatter)
        return ClassMoments(tuple(classes), counts, means, scatter, low, high)._exact()

    def take_classes(self, order: list[int], classes: tuple[Any, ...] | None = None) -> ClassMoments:
        """The moments of the classes at positions ``order`` (renamed to ``classes`` if given)."""
        idx = np.asarray(order, dtype=np.intp)
        names = tuple(self.classes[i] for i in order) if classes is None else classes
        low = None if self.minimum is None else self.minimum[idx]
        high = None if self.maximum is None else self.maximum[idx]
        return ClassMoments(names, self.counts[idx], self.means[idx], self.scatter[idx], low, high)

    def downdate(
        self, removed: ClassMoments, minimum: FloatArray | None = None, maximum: FloatArray | None = None
    ) -> ClassMoments:
        """Exact moments of these rows without the rows ``removed`` summarizes (same classes, a subset).

        The inverse of :meth:`merge`: per class, n = n - n_r, m = (n m - n_r m_r) / (n - n_r) and
        S = S - S_r - (n_kept n_r / n) (m_kept - m_r)(m_kept - m_r)'. The ranges of the rows kept
        cannot follow from the moments; give them (``minimum``, ``maximum``, shape (K, p)) to impose
        the exact facts of features constant in a class, as :meth:`from_arrays` does. A class left
        with no rows gets zero mean and scatter.
        """
        counts = self.counts - removed.counts
        means = self.means.copy()
        scatter = self.scatter.copy()
        for k in np.flatnonzero(removed.counts):
            n, nr, na = float(self.counts[k]), float(removed.counts[k]), float(counts[k])
            if na == 0:
                means[k], scatter[k] = 0.0, 0.0
                continue
            means[k] = (n * self.means[k] - nr * removed.means[k]) / na
            d = means[k] - removed.means[k]
            s = self.scatter[k] - removed.scatter[k] - np.outer(d, d) * (na * nr / n)
            scatter[k] = (s + s.T) / 2.0
        if minimum is None or maximum is None:
            return ClassMoments(self.classes, counts, means, scatter)
        return ClassMoments(self.classes, counts, means, scatter, minimum, maximum)._exact()

    def affine(self, centre: FloatArray, scale: FloatArray) -> ClassMoments:
        """Moments of the features mapped as x -> (x - centre) / scale (scale > 0, per feature); ranges too."""
        low = None if self.minimum is None else (self.minimum - centre) / scale
        high = None if self.maximum is None else (self.maximum - centre) / scale
        return ClassMoments(
            self.classes, self.counts, (self.means - centre) / scale, self.scatter / np.outer(scale, scale), low, high
        )

    @property
    def constant_in_class(self) -> npt.NDArray[np.bool_] | None:
        """(K, p): the feature takes a single value in the class (exact: minimum == maximum)."""
        if self.minimum is None or self.maximum is None:
            return None
        flat: npt.NDArray[np.bool_] = (self.minimum == self.maximum) & (self.counts[:, None] > 0)
        return flat

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
        low = None if self.minimum is None else self.minimum[:, idx]
        high = None if self.maximum is None else self.maximum[:, idx]
        return ClassMoments(self.classes, self.counts, self.means[:, idx], self.scatter[:, idx][:, :, idx], low, high)
