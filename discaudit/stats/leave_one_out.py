"""Exact leave-one-out performance of Gaussian class models from class moments and one pass over the rows.

Leaving row i out of a Gaussian class model changes one class mean, one scatter matrix (by a rank-one
term) and the class proportions, so the prediction of the refit for row i follows from the full-data
moments by rank-one downdates (Sherman & Morrison 1950; the matrix determinant lemma) instead of n
refits (Lachenbruch & Mickey 1968; McLachlan 1992, ch. 10). Each candidate reproduces one
scikit-learn 1.9 estimator refit on the other n - 1 rows.
"""

from __future__ import annotations

from collections.abc import Callable, Iterable, Iterator, Mapping, Sequence
from dataclasses import dataclass
from types import MappingProxyType
from typing import Literal

import numpy as np
import numpy.typing as npt

from discaudit.errors import DataError
from discaudit.stats._linalg import row_log_sum_exp, symmetric_eigh
from discaudit.stats.blocks import ROW_BLOCK

FloatArray = npt.NDArray[np.float64]
IntArray = npt.NDArray[np.intp]
BoolArray = npt.NDArray[np.bool_]
Block = tuple[npt.ArrayLike, npt.ArrayLike]
Blocks = Iterable[Block] | Callable[[], Iterable[Block]]
Metric = Literal["accuracy", "log_loss"]
Shrinkage = float | Sequence[float] | None

#: Default ``tol`` of scikit-learn's LinearDiscriminantAnalysis and QuadraticDiscriminantAnalysis (1.9):
#: singular values (LDA, svd solver) or regularized class-covariance eigenvalues (QDA) at or below it
#: make the fit drop a direction (LDA) or raise (QDA).
SKLEARN_TOL = 1.0e-4

#: Relative cutoff of scipy.linalg.lstsq with ``cond=None`` (machine epsilon times the largest singular
#: value), which the lsqr solver of LinearDiscriminantAnalysis uses to solve with the shrunk covariance.
LSTSQ_RCOND = float(np.finfo(np.float64).eps)

#: The svd solver of LinearDiscriminantAnalysis keeps between-class directions whose singular value
#: exceeds tol times the largest. A full-data ratio within this factor of tol is treated as one that a
#: refit could cross (project choice: a leave-one-out refit moves the ratio by O(1/n_k)).
BETWEEN_RANK_MARGIN = 10.0

#: Grid of QDA ``reg_param`` values scored by default (project choice, from no to strong regularization).
DEFAULT_QDA_REG_GRID: tuple[float, ...] = (0.0, 0.01, 0.05, 0.1, 0.3, 0.6, 0.9)

METRICS: tuple[Metric, ...] = ("accuracy", "log_loss")


def _readonly(a: FloatArray) -> FloatArray:
    """A read-only copy, so a frozen result cannot be changed through its arrays."""
    out = np.array(a, dtype=np.float64)
    out.setflags(write=False)
    return out


def _check_metric(metric: str) -> str:
    if metric not in METRICS:
        raise ValueError(f"metric must be one of {METRICS}; got {metric!r}")
    return metric


def _stays_above(diag: FloatArray, beta: FloatArray, w2: FloatArray, threshold: FloatArray | float) -> BoolArray:
    """Rows for which every eigenvalue of diag(d) - beta w w' exceeds the threshold.

    ``diag`` is (p,) or (b, p), ``beta`` (b,), ``w2 = w * w`` (b, p), ``threshold`` a scalar or (b,).
    A rank-one downdate lowers the eigenvalues and interlaces them with d (Golub 1973), so only the
    smallest can cross t; when every d_j > t, the sign of det(diag(d - t) - beta w w') =
    prod(d - t) (1 - beta sum_j w_j^2 / (d_j - t)) decides. O(p) per row.
    """
    t = np.asarray(threshold, dtype=np.float64)
    gap = diag - (t[:, None] if t.ndim else t)
    gap_ok = np.all(gap > 0.0, axis=-1)
    secular = 1.0 - beta * np.sum(w2 / np.where(gap > 0.0, gap, 1.0), axis=-1)
    return np.asarray(gap_ok & (secular > 0.0), dtype=np.bool_)


def _linear_forms(
    z: FloatArray,
    class_rot: FloatArray,
    codes: IntArray,
    diag: FloatArray,
    beta: FloatArray,
    gamma: FloatArray,
    fails: BoolArray,
) -> FloatArray:
    """d_k' (diag(D) - beta w w')^-1 d_k for every class k, in an eigenbasis of the full-data matrix.

    ``z`` are the rotated rows and ``class_rot`` the rotated class means (same centre), so
    w = z - class_rot[c] is the rotated deviation of each row from its own class mean and
    d_k = z - class_rot[k]; for the own class the left-out mean moves, d_c = gamma w with
    gamma = n_c / (n_c - 1). Sherman-Morrison: the form is q_k + beta r_k^2 / (1 - beta g) with
    q_k = sum d_k^2 / D, r_k = sum d_k w / D, g = sum w^2 / D; for the own class it is
    gamma^2 g / (1 - beta g). Rows flagged in ``fails`` get a placeholder denominator of 1.
    """
    w = z - class_rot[codes]
    inv = 1.0 / diag
    wi = w * inv
    g = np.einsum("ij,ij->i", w, wi)
    denom = np.where(fails, 1.0, 1.0 - beta * g)
    forms = np.empty((z.shape[0], class_rot.shape[0]))
    for k in range(class_rot.shape[0]):
        d = z - class_rot[k]
        r = np.einsum("ij,ij->i", d, wi)
        forms[:, k] = np.sum(d * d * inv, axis=1) + beta * r * r / denom
    rows = np.arange(z.shape[0])
    forms[rows, codes] = gamma * gamma * g / denom
    return forms


@dataclass(frozen=True)
class LeaveOneOutRows:
    """Leave-one-out predictions for the rows of one block, one column per candidate.

    Attributes
    ----------
    names : tuple[str, ...]
        Candidates in column order (those not skipped before the pass).
    correct : ndarray of bool, shape (b, M)
        Whether the refit without the row predicts its class (first maximal score, as numpy's argmax).
    neg_log_prob : ndarray, shape (b, M)
        -ln of the refit's predicted probability of the row's class (natural log, no clipping).
    refit_fails : ndarray of bool, shape (b, M)
        Rows whose refit scikit-learn would reject (QDA) or reduce in rank (LDA); their ``correct``
        and ``neg_log_prob`` are 0 placeholders.
    """

    names: tuple[str, ...]
    correct: BoolArray
    neg_log_prob: FloatArray
    refit_fails: BoolArray


@dataclass(frozen=True)
class LeaveOneOutResult:
    """Leave-one-out accuracy and log-loss of each candidate model, with standard errors.

    Attributes
    ----------
    names : tuple[str, ...]
        Scored candidates: ``"lda"``, ``"regularized_lda"`` (one shrinkage value) or
        ``"regularized_lda(shrinkage=a)"`` (a grid of them), ``"qda(reg_param=r)"``.
    models : tuple[str, ...]
        ``"lda"``, ``"regularized_lda"`` or ``"qda"`` for each name.
    settings : tuple[float | None, ...]
        The setting each was scored at: for LDA None (scikit-learn's svd solver) or 0.0 (its lsqr
        solver without shrinkage, used when the class means nearly lie in a lower-dimensional
        subspace, where the svd solver's refits could reduce the rank); the shrinkage intensity;
        or QDA's reg_param.
    accuracy, log_loss : ndarray, shape (M,)
        Mean over the rows used of the leave-one-out correctness (0/1) and of -ln p(class | row).
    accuracy_se, log_loss_se : ndarray, shape (M,)
        Standard errors of those means, s / sqrt(n) with s the sample standard deviation (divisor n - 1)
        of the per-row values.
    accuracy_paired_se, log_loss_paired_se : ndarray, shape (M, M)
        Standard error of the difference of two means, from the per-row differences (paired).
    n_used : int
        Rows scored.
    skipped : Mapping[str, str]
        Candidates that could not be scored, with the reason.
    """

    names: tuple[str, ...]
    models: tuple[str, ...]
    settings: tuple[float | None, ...]
    accuracy: FloatArray
    log_loss: FloatArray
    accuracy_se: FloatArray
    log_loss_se: FloatArray
    accuracy_paired_se: FloatArray
    log_loss_paired_se: FloatArray
    n_used: int
    skipped: Mapping[str, str]

    def index(self, name: str) -> int:
        """Position of a scored candidate; KeyError naming the skip reason if it was skipped."""
        if name in self.names:
            return self.names.index(name)
        if name in self.skipped:
            raise KeyError(f"{name} was not scored: {self.skipped[name]}")
        raise KeyError(f"no candidate {name!r}; scored: {', '.join(self.names)}")

    def paired_se(self, a: str, b: str, metric: Metric = "log_loss") -> float:
        """Standard error of metric(a) - metric(b) over the same rows."""
        table = self.log_loss_paired_se if _check_metric(metric) == "log_loss" else self.accuracy_paired_se
        return float(table[self.index(a), self.index(b)])

    def best_qda_reg_param(self, metric: Metric = "log_loss") -> float | None:
        """QDA's reg_param with the lowest leave-one-out log-loss (or highest accuracy); first of ties.

        None when no QDA setting was scored.
        """
        return self._best_setting("qda", metric)

    def best_shrinkage(self, metric: Metric = "log_loss") -> float | None:
        """Regularized LDA's shrinkage with the lowest leave-one-out log-loss (or highest accuracy); first of ties.

        None when no shrinkage value was scored.
        """
        return self._best_setting("regularized_lda", metric)

    def _best_setting(self, model: str, metric: Metric) -> float | None:
        """The setting of ``model`` with the lowest log-loss (or highest accuracy); first of ties."""
        idx = [i for i, m in enumerate(self.models) if m == model]
        if not idx:
            return None
        values = self.log_loss[idx] if _check_metric(metric) == "log_loss" else -self.accuracy[idx]
        return self.settings[idx[int(np.argmin(values))]]


@dataclass(frozen=True)
class LeaveOneOutTally:
    """Mergeable sums of one leave-one-out pass (or of part of one).

    Tallies of disjoint sets of rows scored with the same :class:`LeaveOneOutScorer` add up
    (``a + b``, ``sum(tallies)``) to the tally of their union; means and centred sums of squares
    are combined as in Chan, Golub & LeVeque (1983).

    Attributes
    ----------
    names, models, settings : tuple
        Candidates scored in the pass (see :class:`LeaveOneOutResult`).
    skipped : Mapping[str, str]
        Candidates skipped before the pass, with the reason.
    fail_reasons : tuple[str, ...]
        For each candidate, why a refit counted in ``failed_rows`` is rejected.
    n : int
        Rows tallied.
    class_rows : ndarray of int, shape (K,)
        Rows tallied per class code.
    failed_rows : ndarray of int, shape (M,)
        Rows whose refit scikit-learn would reject or reduce in rank, per candidate.
    n_correct : ndarray of int, shape (M,)
        Rows predicted correctly, per candidate (the accuracy is n_correct / n exactly).
    mean, m2 : ndarray, shape (2, M)
        Mean and centred sum of squares of the per-row accuracy (row 0) and neg-log-prob (row 1).
    pair_m2 : ndarray, shape (2, M, M)
        Centred sums of squares of the per-row differences between two candidates.
    """

    names: tuple[str, ...]
    models: tuple[str, ...]
    settings: tuple[float | None, ...]
    skipped: Mapping[str, str]
    fail_reasons: tuple[str, ...]
    n: int
    class_rows: npt.NDArray[np.int64]
    failed_rows: npt.NDArray[np.int64]
    n_correct: npt.NDArray[np.int64]
    mean: FloatArray
    m2: FloatArray
    pair_m2: FloatArray

    @classmethod
    def _of_rows(cls, template: LeaveOneOutTally, rows: LeaveOneOutRows, codes: IntArray) -> LeaveOneOutTally:
        values = np.stack([rows.correct.astype(np.float64), rows.neg_log_prob])  # (2, b, M)
        b = values.shape[1]
        mean = values.mean(axis=1)
        centred = values - mean[:, None, :]
        diff = centred[:, :, :, None] - centred[:, :, None, :]
        return cls(
            names=template.names,
            models=template.models,
            settings=template.settings,
            skipped=template.skipped,
            fail_reasons=template.fail_reasons,
            n=b,
            class_rows=np.bincount(codes, minlength=template.class_rows.size).astype(np.int64),
            failed_rows=rows.refit_fails.sum(axis=0).astype(np.int64),
            n_correct=rows.correct.sum(axis=0).astype(np.int64),
            mean=mean,
            m2=np.einsum("sbm,sbm->sm", centred, centred),
            pair_m2=np.einsum("sbij,sbij->sij", diff, diff),
        )

    def __add__(self, other: LeaveOneOutTally) -> LeaveOneOutTally:
        if not isinstance(other, LeaveOneOutTally):
            return NotImplemented
        if (self.names, self.settings, self.class_rows.size) != (other.names, other.settings, other.class_rows.size):
            raise ValueError("only tallies of the same scorer can be added (candidates or classes differ)")
        n = self.n + other.n
        if n == 0:
            return self
        w1, w2 = self.n / n, other.n / n
        delta = other.mean - self.mean
        pair_delta = delta[:, :, None] - delta[:, None, :]
        cross = self.n * other.n / n
        return LeaveOneOutTally(
            names=self.names,
            models=self.models,
            settings=self.settings,
            skipped=self.skipped,
            fail_reasons=self.fail_reasons,
            n=n,
            class_rows=self.class_rows + other.class_rows,
            failed_rows=self.failed_rows + other.failed_rows,
            n_correct=self.n_correct + other.n_correct,
            mean=w1 * self.mean + w2 * other.mean,
            m2=self.m2 + other.m2 + cross * delta * delta,
            pair_m2=self.pair_m2 + other.pair_m2 + cross * pair_delta * pair_delta,
        )

    def __radd__(self, other: object) -> LeaveOneOutTally:
        if isinstance(other, int) and other == 0:  # lets sum(tallies) start from 0
            return self
        return NotImplemented

    def result(self) -> LeaveOneOutResult:
        """Means and standard errors of the candidates whose every tallied refit was accepted.

        Raises
        ------
        DataError
            If fewer than 2 rows were tallied (no standard error).
        """
        if self.n < 2:
            raise DataError(f"{self.n} rows were scored; a leave-one-out summary needs at least 2 rows.")
        skipped = dict(self.skipped)
        keep = []
        for j, name in enumerate(self.names):
            if self.failed_rows[j]:
                skipped[name] = f"{self.failed_rows[j]} of {self.n} leave-one-out refits: {self.fail_reasons[j]}"
            else:
                keep.append(j)
        k = np.asarray(keep, dtype=np.intp)
        denom = (self.n - 1) * self.n
        se = np.sqrt(self.m2[:, k] / denom)
        pair_se = np.sqrt(self.pair_m2[:, k][:, :, k] / denom)
        return LeaveOneOutResult(
            names=tuple(self.names[j] for j in keep),
            models=tuple(self.models[j] for j in keep),
            settings=tuple(self.settings[j] for j in keep),
            accuracy=_readonly(self.n_correct[k] / self.n),
            log_loss=_readonly(self.mean[1, k]),
            accuracy_se=_readonly(se[0]),
            log_loss_se=_readonly(se[1]),
            accuracy_paired_se=_readonly(pair_se[0]),
            log_loss_paired_se=_readonly(pair_se[1]),
            n_used=self.n,
            skipped=MappingProxyType(skipped),
        )


def array_blocks(X: npt.ArrayLike, codes: npt.ArrayLike, block_rows: int = ROW_BLOCK) -> Iterator[Block]:
    """Blocks ``(X[a:a+block_rows], codes[a:a+block_rows])`` of in-memory arrays, for :func:`leave_one_out`."""
    X_arr, c_arr = np.asarray(X), np.asarray(codes)
    for a in range(0, X_arr.shape[0], block_rows):
        yield X_arr[a : a + block_rows], c_arr[a : a + block_rows]


@dataclass(frozen=True)
class LeaveOneOutScorer:
    """Full-data factorizations for scoring leave-one-out refits row by row.

    Build it with :meth:`from_moments`; score blocks of rows with :meth:`score_block` or a whole pass
    with :meth:`tally`. Attributes are internal factorizations (all in the fitted units, i.e. after
    dividing by ``scale``).
    """

    names: tuple[str, ...]
    models: tuple[str, ...]
    settings: tuple[float | None, ...]
    skipped: Mapping[str, str]
    fail_reasons: tuple[str, ...]
    counts: FloatArray
    scale: FloatArray | None
    centre: FloatArray
    tol: float
    shrinkage_grid: tuple[float, ...]
    qda_grid: tuple[float, ...]
    # LDA (svd solver): eigenbasis of the within-class scatter in correlation units.
    lda_sd: FloatArray
    lda_values: FloatArray
    lda_vectors: FloatArray
    lda_means: FloatArray
    # Regularized LDA (lsqr solver): eigenbasis of the within-class scatter, in the units divided
    # further by ``shrinkage_scale`` (1 when not given).
    shrinkage_scale: FloatArray
    within_values: FloatArray
    within_vectors: FloatArray
    within_means: FloatArray
    within_trace: float
    # QDA (svd solver): eigenbasis of each class scatter.
    class_values: FloatArray
    class_vectors: FloatArray
    class_means: FloatArray

    @classmethod
    def from_moments(
        cls,
        counts: npt.ArrayLike,
        means: npt.ArrayLike,
        scatter: npt.ArrayLike,
        *,
        shrinkage: Shrinkage = None,
        qda_reg_grid: Iterable[float] = DEFAULT_QDA_REG_GRID,
        scale: npt.ArrayLike | None = None,
        shrinkage_scale: npt.ArrayLike | None = None,
        tol: float = SKLEARN_TOL,
    ) -> LeaveOneOutScorer:
        """Factorize the full-data moments once (O(K p^3)).

        Parameters are those of :func:`leave_one_out`.
        """
        n, M, S, sc, shrink_grid, grid = _check_moments(counts, means, scatter, shrinkage, qda_reg_grid, scale, tol)
        K, p = M.shape
        ss = np.ones(p) if shrinkage_scale is None else np.asarray(shrinkage_scale, dtype=np.float64)
        if ss.shape != (p,) or not np.all(np.isfinite(ss)) or np.any(ss <= 0.0):
            raise DataError(f"shrinkage_scale must hold {p} finite positive values; got shape {ss.shape}.")
        if sc is not None:
            M = M / sc
            S = S / np.outer(sc, sc)
        N = float(n.sum())
        centre = (n @ M) / N
        W = S.sum(axis=0)

        names: list[str] = []
        models: list[str] = []
        settings: list[float | None] = []
        reasons: list[str] = []
        skipped: dict[str, str] = {}
        singletons = [k for k in range(K) if n[k] < 2]

        # LDA, svd solver: Sigma = W / N; the rank test is on the within-class correlation matrix.
        sd = np.sqrt(np.maximum(np.diag(W), 0.0))
        sd_safe = np.where(sd > 0.0, sd, 1.0)
        lda_values, lda_vectors = symmetric_eigh(W / np.outer(sd_safe, sd_safe))
        lda_means = ((M - centre) / sd_safe) @ lda_vectors
        # When only the between-class rank is in doubt, LDA is scored as the lsqr solver without
        # shrinkage (setting 0.0): the same full-rank rule, Sigma = W / N, with no rank to reduce.
        lda_reason = _lda_static_reason(n, sd, lda_values, singletons, tol)
        lsqr = lda_reason is None and _between_rank_reason(n, lda_values, lda_means, tol) is not None
        if lda_reason is None:
            names.append("lda")
            models.append("lda")
            settings.append(0.0 if lsqr else None)
            reasons.append(
                "the pooled covariance is singular at scipy.linalg.lstsq's rank cutoff"
                if lsqr
                else f"the within-class correlation matrix may have an eigenvalue at or below tol^2 = {tol**2:g}, "
                "where scikit-learn's svd solver drops a direction"
            )
        else:
            skipped["lda"] = lda_reason

        # Regularized LDA, lsqr solver: Sigma = (1 - a) W / N + a trace(W) / (N p) I, W in the units divided
        # by shrinkage_scale. One eigenbasis of W serves every shrinkage value.
        W_shrunk = W / np.outer(ss, ss)
        within_values, within_vectors = symmetric_eigh(W_shrunk)
        for a in shrink_grid:
            name = f"regularized_lda(shrinkage={a:g})" if _is_grid(shrinkage) else "regularized_lda"
            if singletons:
                skipped[name] = _singleton_reason(singletons, n)
            else:
                names.append(name)
                models.append("regularized_lda")
                settings.append(a)
                reasons.append("the shrunk covariance is singular at scipy.linalg.lstsq's rank cutoff")

        # QDA, svd solver: Sigma_k = (1 - r) S_k / n_k + r I.
        class_values = np.empty((K, p))
        class_vectors = np.empty((K, p, p))
        for k in range(K):
            class_values[k], class_vectors[k] = symmetric_eigh(S[k])
        for r in grid:
            name = f"qda(reg_param={r:g})"
            reason = _qda_static_reason(n, class_values, r, tol)
            if reason is None:
                names.append(name)
                models.append("qda")
                settings.append(r)
                reasons.append(f"a regularized class covariance has an eigenvalue at or below tol = {tol:g}")
            else:
                skipped[name] = reason

        return cls(
            names=tuple(names),
            models=tuple(models),
            settings=tuple(settings),
            skipped=MappingProxyType(skipped),
            fail_reasons=tuple(reasons),
            counts=n,
            scale=sc,
            centre=centre,
            tol=float(tol),
            shrinkage_grid=tuple(
                a for a, m in zip(settings, models, strict=True) if m == "regularized_lda" and a is not None
            ),
            qda_grid=tuple(r for r, m in zip(settings, models, strict=True) if m == "qda" and r is not None),
            lda_sd=sd_safe,
            lda_values=lda_values,
            lda_vectors=lda_vectors,
            lda_means=lda_means,
            shrinkage_scale=ss,
            within_values=within_values,
            within_vectors=within_vectors,
            within_means=((M - centre) / ss) @ within_vectors,
            within_trace=float(np.trace(W_shrunk)),
            class_values=class_values,
            class_vectors=class_vectors,
            class_means=M,
        )

    @property
    def n_classes(self) -> int:
        """Number of classes K."""
        return int(self.counts.size)

    @property
    def n_features(self) -> int:
        """Number of features p."""
        return int(self.centre.size)

    def _check_block(self, X: npt.ArrayLike, codes: npt.ArrayLike) -> tuple[FloatArray, IntArray]:
        Xa = np.asarray(X, dtype=np.float64)
        ca = np.asarray(codes)
        if Xa.ndim != 2 or Xa.shape[1] != self.n_features:
            raise DataError(f"a block has shape {Xa.shape}; expected (rows, {self.n_features}).")
        if ca.shape != (Xa.shape[0],):
            raise DataError(f"a block has {Xa.shape[0]} rows but codes of shape {ca.shape}; give one code per row.")
        if ca.size and not np.issubdtype(ca.dtype, np.integer):
            raise DataError(f"class codes must be integers 0..{self.n_classes - 1}; got dtype {ca.dtype}.")
        if ca.size and (ca.min() < 0 or ca.max() >= self.n_classes):
            raise DataError(f"class codes must lie in 0..{self.n_classes - 1}; got {ca.min()}..{ca.max()}.")
        if not np.all(np.isfinite(Xa)):
            raise DataError("a block holds NaN or infinite values; the moments describe finite rows only.")
        if self.scale is not None:
            Xa = Xa / self.scale
        return Xa, ca.astype(np.intp)

    def score_block(self, X: npt.ArrayLike, codes: npt.ArrayLike) -> LeaveOneOutRows:
        """Leave-one-out predictions for the rows of one block (rows of the data the moments describe).

        Parameters
        ----------
        X : array-like, shape (b, p)
            Rows in the original units (``scale`` is applied here).
        codes : array-like of int, shape (b,)
            Class code 0..K-1 of each row.

        Returns
        -------
        LeaveOneOutRows
        """
        Xa, ca = self._check_block(X, codes)
        b, M = Xa.shape[0], len(self.names)
        correct = np.zeros((b, M), dtype=np.bool_)
        nll = np.zeros((b, M))
        fails = np.zeros((b, M), dtype=np.bool_)
        if M == 0 or b == 0:
            return LeaveOneOutRows(self.names, correct, nll, fails)
        n = self.counts
        N = float(n.sum())
        rows = np.arange(b)
        gamma = n[ca] / (n[ca] - 1.0)
        own = np.zeros((b, self.n_classes), dtype=np.bool_)
        own[rows, ca] = True
        log_prior = np.log(n[None, :] - own) - np.log(N - 1.0)

        def record(j: int, scores: FloatArray, fail: BoolArray) -> None:
            fails[:, j] = fail
            correct[:, j] = (np.argmax(scores, axis=1) == ca) & ~fail
            nll[:, j] = np.where(fail, 0.0, row_log_sum_exp(scores) - scores[rows, ca])

        shared: tuple[FloatArray, FloatArray, FloatArray] | None = None  # rotation shared by the shrinkage values
        for j, (model, setting) in enumerate(zip(self.models, self.settings, strict=True)):
            if model == "lda" and setting is None:  # the svd solver
                z = ((Xa - self.centre) / self.lda_sd) @ self.lda_vectors
                w = z - self.lda_means[ca]
                fail = ~_stays_above(self.lda_values, gamma, w * w, self.tol**2)
                forms = _linear_forms(z, self.lda_means, ca, self.lda_values, gamma, gamma, fail)
                record(j, log_prior - 0.5 * (N - 1.0) * forms, fail)
            elif model in ("regularized_lda", "lda"):  # the lsqr solver (LDA: no shrinkage)
                a = float(setting or 0.0)
                p = self.n_features
                if shared is None:
                    z = ((Xa - self.centre) / self.shrinkage_scale) @ self.within_vectors
                    w2 = (z - self.within_means[ca]) ** 2
                    shared = (z, w2, self.within_trace - gamma * w2.sum(axis=1))
                z, w2, trace = shared
                diag = (1.0 - a) * self.within_values[None, :] + (a / p) * trace[:, None]
                beta = (1.0 - a) * gamma
                fail = ~_stays_above(diag, beta, w2, LSTSQ_RCOND * diag.max(axis=1))
                forms = _linear_forms(z, self.within_means, ca, diag, beta, gamma, fail)
                record(j, log_prior - 0.5 * (N - 1.0) * forms, fail)
        qda = [j for j, m in enumerate(self.models) if m == "qda"]
        if qda:
            for j, (scores, fail) in zip(qda, self._qda_scores(Xa, ca, self.qda_grid), strict=True):
                record(j, log_prior + scores, fail)
        return LeaveOneOutRows(self.names, correct, nll, fails)

    def _qda_scores(self, Xa: FloatArray, ca: IntArray, grid: tuple[float, ...]) -> list[tuple[FloatArray, BoolArray]]:
        """-(Mahalanobis + log det) / 2 of every class for each reg_param, and the rejected refits.

        Row i of class c changes only class c: its scatter loses n_c/(n_c-1) u u' (u = x_i - m_c), its
        mean moves to m_c - u/(n_c-1), its divisor becomes n_c - 1. In the eigenbasis of S_c the
        regularized covariance is diag(D) - beta w w' with D = (1-r) sigma/(n_c-1) + r,
        beta = (1-r) n_c/(n_c-1)^2 and w the rotated u; log det follows from the matrix determinant
        lemma, log det = sum log D + log(1 - beta g), g = sum w^2 / D.
        """
        b, K = Xa.shape[0], self.n_classes
        out = [(np.empty((b, K)), np.zeros(b, dtype=np.bool_)) for _ in grid]
        for k in range(K):
            nk = float(self.counts[k])
            Y = (Xa - self.class_means[k]) @ self.class_vectors[k]
            Y2 = Y * Y
            mine = ca == k
            Y2own = Y2[mine]
            gamma = nk / (nk - 1.0)
            for (scores, fail), r in zip(out, grid, strict=True):
                D = (1.0 - r) * self.class_values[k] / nk + r
                scores[:, k] = -0.5 * (Y2 @ (1.0 / D) + np.sum(np.log(D)))
                if Y2own.shape[0]:
                    Dl = (1.0 - r) * self.class_values[k] / (nk - 1.0) + r
                    beta = np.full(Y2own.shape[0], (1.0 - r) * gamma / (nk - 1.0))
                    bad = ~_stays_above(Dl, beta, Y2own, self.tol)
                    g = Y2own @ (1.0 / Dl)
                    denom = np.where(bad, 1.0, 1.0 - beta * g)
                    logdet = np.sum(np.log(Dl)) + np.log(denom)
                    scores[mine, k] = -0.5 * (gamma * gamma * g / denom + logdet)
                    fail[mine] = bad
        return out

    def tally(self, blocks: Blocks) -> LeaveOneOutTally:
        """Score every row of ``blocks`` in one pass; memory stays at ROW_BLOCK rows.

        Parameters
        ----------
        blocks : iterable of (X_block, codes_block), or a callable returning one
            Rows of the data the moments describe, each at most once.

        Returns
        -------
        LeaveOneOutTally
        """
        total = self._empty_tally()
        source = blocks() if callable(blocks) else blocks
        for X, codes in source:
            X_arr, c_arr = np.asarray(X), np.asarray(codes)
            for a in range(0, X_arr.shape[0], ROW_BLOCK):
                Xb, cb = X_arr[a : a + ROW_BLOCK], c_arr[a : a + ROW_BLOCK]
                rows = self.score_block(Xb, cb)
                total = total + LeaveOneOutTally._of_rows(total, rows, cb.astype(np.intp))
        return total

    def _empty_tally(self) -> LeaveOneOutTally:
        M = len(self.names)
        return LeaveOneOutTally(
            names=self.names,
            models=self.models,
            settings=self.settings,
            skipped=self.skipped,
            fail_reasons=self.fail_reasons,
            n=0,
            class_rows=np.zeros(self.n_classes, dtype=np.int64),
            failed_rows=np.zeros(M, dtype=np.int64),
            n_correct=np.zeros(M, dtype=np.int64),
            mean=np.zeros((2, M)),
            m2=np.zeros((2, M)),
            pair_m2=np.zeros((2, M, M)),
        )


def _check_moments(
    counts: npt.ArrayLike,
    means: npt.ArrayLike,
    scatter: npt.ArrayLike,
    shrinkage: Shrinkage,
    qda_reg_grid: Iterable[float],
    scale: npt.ArrayLike | None,
    tol: float,
) -> tuple[FloatArray, FloatArray, FloatArray, FloatArray | None, tuple[float, ...], tuple[float, ...]]:
    c = np.asarray(counts)
    M = np.asarray(means, dtype=np.float64)
    S = np.asarray(scatter, dtype=np.float64)
    if c.ndim != 1 or c.size < 2:
        raise DataError(f"counts must be one count per class for at least 2 classes; got shape {c.shape}.")
    n = c.astype(np.float64)
    if not np.all(np.isfinite(n)) or np.any(n < 1) or np.any(n != np.round(n)):
        raise DataError(f"counts must be whole numbers of at least 1; got {c.tolist()}.")
    K = c.size
    if M.ndim != 2 or M.shape[0] != K:
        raise DataError(f"means must have shape (K, p) = ({K}, p); got {M.shape}.")
    p = M.shape[1]
    if S.shape != (K, p, p):
        raise DataError(f"scatter must have shape (K, p, p) = ({K}, {p}, {p}); got {S.shape}.")
    if not (np.all(np.isfinite(M)) and np.all(np.isfinite(S))):
        raise DataError("means and scatter must be finite.")
    values = np.asarray(() if shrinkage is None else shrinkage, dtype=np.float64)
    if values.ndim > 1:
        raise DataError(f"shrinkage must be a number or a flat sequence of numbers; got shape {values.shape}.")
    shrink_grid = tuple(float(a) for a in values.ravel())
    if any(not 0.0 <= a <= 1.0 for a in shrink_grid) or len(set(shrink_grid)) != len(shrink_grid):
        raise DataError(f"shrinkage must hold distinct values in [0, 1] (scikit-learn's range); got {shrinkage}.")
    grid = tuple(float(r) for r in qda_reg_grid)
    if any(not 0.0 <= r <= 1.0 for r in grid) or len(set(grid)) != len(grid):
        raise DataError(f"qda_reg_grid must hold distinct values in [0, 1] (scikit-learn's range); got {grid}.")
    if not (np.isfinite(tol) and tol >= 0.0):
        raise DataError(f"tol must be finite and non-negative; got {tol}.")
    sc = None
    if scale is not None:
        sc = np.asarray(scale, dtype=np.float64)
        if sc.shape != (p,) or not np.all(np.isfinite(sc)) or np.any(sc <= 0.0):
            raise DataError(f"scale must hold {p} finite positive values; got shape {sc.shape}.")
    S = (S + np.swapaxes(S, 1, 2)) / 2.0
    return n, M, S, sc, shrink_grid, grid


def _is_grid(shrinkage: Shrinkage) -> bool:
    """True for a sequence of shrinkage values (named per value), False for one number or None."""
    return shrinkage is not None and np.ndim(shrinkage) > 0


def _singleton_reason(singletons: list[int], n: FloatArray) -> str:
    return (
        f"class code {singletons[0]} has {int(n[singletons[0]])} row: leaving it out removes the class, "
        "whose probability is then undefined"
    )


def _lda_static_reason(
    n: FloatArray, sd: FloatArray, values: FloatArray, singletons: list[int], tol: float
) -> str | None:
    """Why LDA's refits would not all be full LDA (either solver), or None."""
    if singletons:
        return _singleton_reason(singletons, n)
    if np.any(sd <= 0.0):
        return f"feature {int(np.argmin(sd))} does not vary within classes, so the pooled covariance is singular"
    if values[-1] <= tol**2:
        return (
            f"the within-class correlation matrix has an eigenvalue {values[-1]:.3g} at or below tol^2 = {tol**2:g}; "
            "scikit-learn's svd solver would drop that direction (reduced-rank LDA)"
        )
    return None


def _between_rank_reason(n: FloatArray, values: FloatArray, class_rot: FloatArray, tol: float) -> str | None:
    """Why the svd solver's refits might reduce the rank of the between-class directions, or None."""
    # Between-class directions, whitened by W / N: the svd solver keeps those above tol times the largest.
    K, p = class_rot.shape
    weighted = np.sqrt(n)[:, None] * class_rot / np.sqrt(values)
    sv = np.linalg.svd(weighted, compute_uv=False)[: min(K - 1, p)]
    if sv[0] <= 0.0 or sv[-1] <= BETWEEN_RANK_MARGIN * tol * sv[0]:
        return (
            "the class means nearly lie in a lower-dimensional subspace (between-class singular value ratio "
            f"{sv[-1] / sv[0] if sv[0] > 0 else 0.0:.3g}); scikit-learn's svd solver would reduce the rank"
        )
    return None


def _qda_static_reason(n: FloatArray, class_values: FloatArray, r: float, tol: float) -> str | None:
    """Why QDA at reg_param r cannot be refit without some row, or None (rules of the svd solver)."""
    p = class_values.shape[1]
    # The left-out class keeps n_k - 1 rows. The svd solver needs at least p of them (else fewer than p
    # singular values), and more than p when unregularized (p centred rows have rank p - 1); it also
    # rejects a class of a single row.
    need = max(p + 2 if r == 0.0 else p + 1, 3)
    small = np.flatnonzero(n < need)
    if small.size:
        k = int(small[0])
        return (
            f"class code {k} has {int(n[k])} rows; with one left out scikit-learn's svd solver needs at least "
            f"{need - 1} rows per class for p = {p} features at reg_param = {r:g}"
        )
    regularized = (1.0 - r) * class_values / n[:, None] + r
    low = np.flatnonzero(regularized.min(axis=1) <= tol)
    if low.size:
        k = int(low[0])
        return (
            f"the regularized covariance of class code {k} has an eigenvalue {regularized[k].min():.3g} at or "
            f"below tol = {tol:g}, where scikit-learn's svd solver raises"
        )
    return None


def leave_one_out(
    counts: npt.ArrayLike,
    means: npt.ArrayLike,
    scatter: npt.ArrayLike,
    blocks: Blocks,
    *,
    shrinkage: Shrinkage = None,
    qda_reg_grid: Iterable[float] = DEFAULT_QDA_REG_GRID,
    scale: npt.ArrayLike | None = None,
    shrinkage_scale: npt.ArrayLike | None = None,
    tol: float = SKLEARN_TOL,
) -> LeaveOneOutResult:
    """Exact leave-one-out accuracy and log-loss of LDA, regularized LDA and QDA, in one pass.

    Parameters
    ----------
    counts : array-like of int, shape (K,)
        Rows per class (every class at least 1; K >= 2).
    means : array-like, shape (K, p)
        Class means.
    scatter : array-like, shape (K, p, p)
        Centred within-class sums of squares and cross-products, sum_i (x_i - m_k)(x_i - m_k)'.
    blocks : iterable of (X_block, codes_block), or a callable returning one
        Every row of the data exactly once: X_block (b, p) float64 and codes_block (b,) in 0..K-1.
    shrinkage : float in [0, 1], sequence of floats in [0, 1], or None
        Intensity of the regularized LDA candidate, named ``"regularized_lda"``; or a grid of distinct
        intensities, one candidate each, named ``"regularized_lda(shrinkage=a)"`` (``a`` formatted with
        ``:g``), even for a sequence of one. None (or an empty sequence) leaves the candidate out.
    qda_reg_grid : iterable of float in [0, 1]
        QDA ``reg_param`` values to score.
    scale : array-like, shape (p,), optional
        Positive per-feature scale: the candidates are fitted to X / scale (a StandardScaler's
        ``scale_`` in front of the estimator).
    shrinkage_scale : array-like, shape (p,), optional
        Positive per-feature scale for the regularized LDA candidates only, applied after ``scale``:
        they are fitted to X / scale / shrinkage_scale. LDA and QDA do not see it. Shrinking toward
        mu I on features divided by their pooled within-class standard deviations (in the units of
        ``scale``) shrinks the pooled covariance toward its own diagonal.
    tol : float
        scikit-learn's ``tol`` of both estimators.

    Returns
    -------
    LeaveOneOutResult

    Raises
    ------
    DataError
        If the inputs are malformed, or the blocks do not cover each class's rows exactly once
        (by count). Candidates that cannot be scored are skipped with a reason, never raised.

    Notes
    -----
    Row i of class c, u = x_i - m_c, gamma = n_c / (n_c - 1). The refit without row i has class mean
    m_c - u / (n_c - 1), class scatter S_c - gamma u u', pooled scatter W - gamma u u', and priors
    (n_k - [k = c]) / (N - 1), the class proportions of its training rows. Each candidate equals a
    scikit-learn 1.9 estimator refit on those N - 1 rows:

    - ``lda``: ``LinearDiscriminantAnalysis(solver="svd")``. Its whitening divides the within-class
      centred rows by sqrt(n), so the covariance is W / N (divisor N, not N - K); its scores are
      ln pi_k - (x - m_k)' Sigma^-1 (x - m_k) / 2 up to a term common to all classes. The solver
      truncates directions whose singular value of the within-class correlation is at or below tol, and
      between-class directions at or below tol times the largest; such data are skipped. The
      within-class test per row, lambda_min(D^-1/2 (W - gamma u u') D^-1/2) > tol^2 with D = diag(W)
      of all rows, is sufficient (the refit's own correlation matrix has eigenvalues at least as large),
      so a nearly singular W can be skipped although scikit-learn would keep full rank.
    - ``regularized_lda``, at each shrinkage value a: ``LinearDiscriminantAnalysis(solver="lsqr",
      shrinkage=a)``. It shrinks each class's covariance with divisor n_k toward mu_k I (mu_k = trace / p)
      and weights them by the priors; shrinkage being linear, Sigma = (1 - a) W / N + a trace(W) / (N p) I.
      The identity term changes with the row (trace(W) - gamma ||u||^2), so the downdate is a diagonal
      shift plus a rank one term, solved in the eigenbasis of W by Sherman-Morrison. That eigenbasis, and
      each row's rotation into it, serve every value of a grid.
    - ``qda(reg_param=r)``: ``QuadraticDiscriminantAnalysis(reg_param=r)`` (svd solver). scikit-learn
      1.9 takes the class covariance with divisor n_k (earlier releases used n_k - 1), regularized as
      (1 - r) S_k / n_k + r I; scores ln pi_k - (Mahalanobis + ln det Sigma_k) / 2. A setting is skipped
      when a refit would raise: a class with fewer than p + 1 rows (p + 2 unregularized, and at least 3)
      or a regularized eigenvalue at or below tol.

    Per row, ``correct`` is argmax_k score_k == c (first maximum, as numpy and scikit-learn), and the
    log-loss is ln sum_k exp(score_k) - score_c (natural log, no clipping; scikit-learn's LDA adds the
    smallest normal number to a probability that underflows to 0, which changes only such rows).

    ``scale`` and ``shrinkage_scale`` are taken as fixed, computed on all rows: the scaler's own change
    when row i is left out is ignored. Its centring does not matter, all three models being equivariant under translation.

    Standard errors treat the n per-row values as independent, which they are not (every refit shares
    N - 2 rows); no unbiased estimator of the variance of a cross-validation mean exists (Bengio &
    Grandvalet 2004), so they are a guide. Paired standard errors use the per-row differences.

    Cost: one rotation of each row per eigenbasis, O(N (K + 2) p^2), plus O(N K p) per shrinkage value
    and per reg_param, plus O(K p^3) for the factorizations; rows are processed in blocks of ROW_BLOCK,
    and no N x N object is formed.

    References
    ----------
    Lachenbruch, P. A. & Mickey, M. R. (1968). Estimation of error rates in discriminant analysis.
    Technometrics 10, 1-11.
    McLachlan, G. J. (1992). Discriminant Analysis and Statistical Pattern Recognition. Wiley, ch. 10.
    Sherman, J. & Morrison, W. J. (1950). Adjustment of an inverse matrix corresponding to a change in
    one element of a given matrix. Annals of Mathematical Statistics 21, 124-127.
    Golub, G. H. (1973). Some modified matrix eigenvalue problems. SIAM Review 15, 318-334.
    Friedman, J. H. (1989). Regularized discriminant analysis. JASA 84, 165-175.
    Chan, T. F., Golub, G. H. & LeVeque, R. J. (1983). Algorithms for computing the sample variance.
    The American Statistician 37, 242-247.
    Bengio, Y. & Grandvalet, Y. (2004). No unbiased estimator of the variance of K-fold
    cross-validation. Journal of Machine Learning Research 5, 1089-1105.
    """
    scorer = LeaveOneOutScorer.from_moments(
        counts,
        means,
        scatter,
        shrinkage=shrinkage,
        qda_reg_grid=qda_reg_grid,
        scale=scale,
        shrinkage_scale=shrinkage_scale,
        tol=tol,
    )
    tally = scorer.tally(blocks)
    expected = scorer.counts.astype(np.int64)
    if not np.array_equal(tally.class_rows, expected):
        k = int(np.flatnonzero(tally.class_rows != expected)[0])
        raise DataError(
            f"the blocks hold {tally.class_rows[k]} rows of class code {k} but the moments count {expected[k]}; "
            "pass every row exactly once (or use LeaveOneOutScorer.tally for a subset of rows)."
        )
    return tally.result()
