"""The per-class robust fits that the outlier and the normality checks both use, computed once.

Neither check reads the other's finding: both call :func:`robust_fits`, which fits every class
once per audit (memoized on the data with the settings and seed it depends on, see
:meth:`discaudit.dataset.AuditData.shared`). For each class it

1. orders the class's rows canonically (:mod:`discaudit.stats.canonical`) and takes the class's
   seed from its place in a canonical order of the classes, so that neither a shuffle of the rows
   nor a renaming of the classes changes any figure;
2. screens the features (:mod:`discaudit.stats.ties`, :mod:`discaudit.stats.quantile_skewness`):
   those with fewer than ``robust_min_distinct`` distinct values in the class, whose modal value
   is held by at least h rows (an exact fit on that hyperplane), or whose octile skewness exceeds
   ``robust_max_skewness`` in absolute value (a long tail a Gaussian-calibrated fit reads as
   outliers) are left out; distances use the rest;
3. fits the continuous part: reweighted FAST-MCD when the class has enough rows, classical mean
   and covariance otherwise; an exact fit the screen could not foresee (a hyperplane in several
   features) is reported and flags nothing;
4. flags the rows beyond both the Gaussian cut-off and the class's far-out fence
   (:mod:`discaudit.stats.far_out`): gross outliers, not the tail of a skewed or heavy-tailed class.
"""

from __future__ import annotations

from dataclasses import dataclass, field
from typing import TYPE_CHECKING, Any

import numpy as np
import numpy.typing as npt
from scipy import stats as sps

from discaudit._threads import map_in_threads
from discaudit.dataset import AuditData
from discaudit.stats._linalg import cholesky_or_none, logdet_spd, mahalanobis_sq, sq_distances_two_metrics
from discaudit.stats.blocks import ROW_BLOCK
from discaudit.stats.canonical import canonical_order, canonical_ranks, content_digest, row_keys
from discaudit.stats.far_out import FarOutFence, far_out_fence
from discaudit.stats.mcd import MCDResult, mcd
from discaudit.stats.quantile_skewness import quantile_skewness
from discaudit.stats.seeds import OUTLIERS, class_seeds
from discaudit.stats.ties import TieScreen, screen_ties

if TYPE_CHECKING:
    from discaudit.config import Config
    from discaudit.stats.moments import ClassMoments

IntArray = npt.NDArray[np.intp]


@dataclass(frozen=True)
class ClassFit:
    """What defines 'far' for one class: the columns used, centre, scatter, cut-off and fence.

    ``columns`` are positions in ``data.features``; ``location`` and ``covariance`` live on them.
    ``usable`` is False when the class has no distances to judge (no continuous feature, or an
    exact fit): then nothing in it is flagged.
    """

    code: int
    method: str
    robust: bool
    columns: IntArray
    location: npt.NDArray[np.float64]
    covariance: npt.NDArray[np.float64]
    cutoff: float
    cutoff_rule: str
    fence: FarOutFence | None
    ties: TieScreen
    skewness: npt.NDArray[np.float64]
    skewed: npt.NDArray[np.bool_]
    exact_fit: bool = False
    usable: bool = True
    info: dict[str, Any] = field(default_factory=dict)

    @property
    def df(self) -> int:
        """Dimension of the distances (features used; fewer in an exact fit)."""
        return int(self.info.get("p_used", self.columns.size))

    @property
    def threshold(self) -> float:
        """A row is flagged beyond this: the larger of the cut-off and the far-out fence."""
        if not self.usable:
            return float("inf")
        return max(self.cutoff, self.fence.fence if self.fence is not None else self.cutoff)


@dataclass(frozen=True)
class RobustFits:
    """Every class's fit and, for the rows held in ``data`` (in ``data.class_rows(k)`` order), their scores.

    Attributes
    ----------
    fits : list of ClassFit
    distances : list of ndarray
        Squared robust (or classical, for small classes) distances on the fit's columns.
    classical : list of ndarray
        Squared classical distances on the fit's columns, from the class's mean and covariance
        (the pooled covariance where the class's is singular); NaN where neither is positive
        definite or the fit has no columns.
    beyond_cutoff, flagged : list of ndarray of bool
        Beyond the Gaussian cut-off; beyond both the cut-off and the far-out fence (gross outliers).
    orders : list of ndarray
        Positions within ``data.class_rows(k)`` in canonical order.
    ranks : list of int
        Each class's place in the canonical class order (its seed index).
    """

    fits: list[ClassFit]
    distances: list[npt.NDArray[np.float64]]
    classical: list[npt.NDArray[np.float64]]
    beyond_cutoff: list[npt.NDArray[np.bool_]]
    flagged: list[npt.NDArray[np.bool_]]
    orders: list[IntArray]
    ranks: list[int]


def robust_min_rows(p: int, config: Config) -> int:
    """Rows a class needs for a robust fit: max(2(p+1), robust_min_rows_per_feature * p)."""
    return int(max(2 * (p + 1), np.ceil(config.robust_min_rows_per_feature * p)))


def canonical_layout(data: AuditData) -> tuple[list[IntArray], list[int]]:
    """Per class, the canonical order of its held rows, and the classes' canonical ranks (memoized)."""

    def compute() -> tuple[list[IntArray], list[int]]:
        hashes = data.row_hashes().hashes  # about each column's minimum: exact shifts of a column change no key
        keys = [row_keys(hashes[data.class_rows(k)]) for k in range(len(data.classes))]
        counts = [int(k.size) for k in keys]
        return [canonical_order(k) for k in keys], canonical_ranks(counts, [content_digest(k) for k in keys])

    return data.shared("canonical_layout", compute)


def robust_fits(data: AuditData, config: Config, random_state: int | None) -> RobustFits:
    """The fits and held-row scores of every class, computed once per audit (see the module notes)."""
    return data.shared(fits_key(config, random_state), lambda: _compute(data, config, random_state))


def fits_key(config: Config, random_state: int | None) -> tuple[Any, ...]:
    """Everything the robust fits depend on besides the data: the settings they read and the seed."""
    return (
        "robust_fits",
        random_state,
        config.outlier_quantile,
        config.outlier_cutoff,
        config.robust_min_rows_per_feature,
        config.robust_fit_max_rows,
        config.robust_min_distinct,
        config.robust_max_skewness,
        config.outlier_far_out_mads,
    )


def _compute(data: AuditData, config: Config, random_state: int | None) -> RobustFits:
    orders, ranks = canonical_layout(data)
    seeds = class_seeds(random_state, len(data.classes), OUTLIERS, ranks)

    def one(k: int) -> tuple[ClassFit, npt.NDArray[np.float64], npt.NDArray[np.float64]]:
        return _fit_class(data, config, k, orders[k], seeds[k])

    # An exact fit the screen could not foresee still makes the MCD warn; the audit records that
    # warning in the finding's details (warning filters are process state: never changed here).
    results = map_in_threads(one, range(len(data.classes)))
    fits = [f for f, _, _ in results]
    distances = [d for _, d, _ in results]
    classical = [c for _, _, c in results]
    beyond = [
        (d > f.cutoff) if f.usable else np.zeros(d.size, dtype=bool) for f, d in zip(fits, distances, strict=True)
    ]
    flagged = [d > f.threshold for f, d in zip(fits, distances, strict=True)]
    return RobustFits(fits, distances, classical, beyond, flagged, orders, ranks)


def _cutoff(config: Config, n: int, p: int, h: int | None, m: int | None) -> tuple[float, str]:
    """The squared-distance cut-off for a class and the rule that produced it.

    ``small_sample_f`` treats each row like a new observation judged against a mean and
    covariance estimated from the m rows of the (reweighted) fit, whose squared distance
    satisfies d m (m - p) / (p (m - 1)(m + 1)) ~ F(p, m - p) under normality; it tends to
    the chi-square(p) quantile as m grows and stops small classes from flagging a large
    share of clean rows. A classical fit's rows are inside their own estimate, so their
    squared distances follow (n-1)^2/n Beta(p/2, (n-p-1)/2) (Gnanadesikan & Kettenring 1972).
    """
    q = config.outlier_quantile
    if config.outlier_cutoff == "hardin_rocke" and h is not None:
        from discaudit.stats.hardin_rocke import hardin_rocke_cutoff

        hr = hardin_rocke_cutoff(n, p, h=h, alpha=1.0 - q)
        return float(hr.cutoff), f"Hardin & Rocke (2005) F-based cut-off at {q}"
    if config.outlier_cutoff == "small_sample_f" and m is not None and m > p + 1:
        if h is None:  # classical fit: every row is inside its own estimate (beta law)
            scale = (m - 1) ** 2 / m
            return float(scale * sps.beta.ppf(q, p / 2, (m - p - 1) / 2)), (
                f"{q} quantile of (n-1)^2/n Beta({p}/2, {m - p - 1}/2), the law of a row's distance from "
                "a mean and covariance it helped estimate"
            )
        scale = p * (m - 1) * (m + 1) / (m * (m - p))
        return float(scale * sps.f.ppf(q, p, m - p)), f"{q} quantile of F({p}, {m - p}) scaled for {m} fitted rows"
    return float(sps.chi2.ppf(q, p)), f"{q} quantile of chi-square({p})"


def _distances(values: npt.NDArray[np.float64], rows: IntArray, columns: IntArray, loc: Any, cov: Any) -> Any:
    """Squared distances of ``values[rows][:, columns]`` from (loc, cov), a block of rows at a time."""
    if columns.size == values.shape[1]:
        return mahalanobis_sq(values, loc, cov, rows)
    out = np.empty(rows.size)
    for a in range(0, rows.size, ROW_BLOCK):
        block = np.take(values, rows[a : a + ROW_BLOCK], axis=0)[:, columns]
        d = mahalanobis_sq(block, loc, cov)
        if d is None:
            return None
        out[a : a + block.shape[0]] = d
    return out


def classical_reference(moments: ClassMoments, code: int, columns: IntArray) -> tuple[Any, Any] | None:
    """The class's classical mean and covariance on ``columns`` (the pooled covariance if the class's is
    singular), the reference the robust distances are compared with; None without columns."""
    if columns.size == 0:
        return None
    idx = np.ix_(columns, columns)
    mean = moments.means[code][columns]
    cov = moments.class_covariances()[code][idx]
    if not np.all(np.isfinite(cov)) or not np.isfinite(logdet_spd(cov)):
        cov = moments.pooled_covariance[idx]
    return mean, cov


def _classical_distances(data: AuditData, k: int, rows: IntArray, columns: IntArray) -> npt.NDArray[np.float64]:
    """Squared distances of class ``k``'s rows from :func:`classical_reference` (NaN where it is not
    positive definite)."""
    reference = classical_reference(data.moments, k, columns)
    got = None if reference is None else _distances(data.values, rows, columns, *reference)
    return got if got is not None else np.full(rows.size, np.nan)


def _fit_class(
    data: AuditData, config: Config, k: int, order: IntArray, seed: int
) -> tuple[ClassFit, npt.NDArray[np.float64], npt.NDArray[np.float64]]:
    """Screen the rows a fit would use, then fit the class's continuous part (robust or classical)."""
    rows = data.class_rows(k)
    canon = rows[order]  # the class's rows in canonical order
    limit = max(config.robust_fit_max_rows, robust_min_rows(data.p, config))
    if canon.size > limit:  # a seeded subset, drawn in the canonical order
        fit_rows = canon[np.sort(np.random.default_rng(seed).choice(canon.size, limit, replace=False))]
    else:
        fit_rows = canon
    X = data.values[fit_rows]
    skew = quantile_skewness(X)
    skewed = np.abs(np.nan_to_num(skew, nan=0.0)) > config.robust_max_skewness
    ties = screen_ties(X, config.robust_min_distinct, exclude=skewed)
    columns = np.flatnonzero(ties.kept).astype(np.intp)
    screen = (ties, skew, skewed)
    if columns.size == 0:
        fit = ClassFit(
            k, "none (no continuous feature in this class)", False, columns, np.zeros(0), np.zeros((0, 0)),
            float("inf"), "none", None, *screen, usable=False,
        )  # fmt: skip
        return fit, np.zeros(rows.size), np.full(rows.size, np.nan)
    min_rows = robust_min_rows(columns.size, config)
    if rows.size >= min_rows:
        return _robust(data, config, k, rows, X[:, columns], fit_rows, columns, screen, seed)
    return _classical(data, config, k, rows, columns, screen, min_rows)


def _robust(
    data: AuditData,
    config: Config,
    k: int,
    rows: IntArray,
    X: npt.NDArray[np.float64],
    fit_rows: IntArray,
    columns: IntArray,
    screen: tuple[TieScreen, Any, Any],
    seed: int,
) -> tuple[ClassFit, npt.NDArray[np.float64], npt.NDArray[np.float64]]:
    """Reweighted FAST-MCD of the fit rows ``X`` (the class's continuous columns); every class row scored
    against it and against the classical reference, in one pass.

    Overflow in the deterministic starts' scale (squares of standardized values near 1e150 times
    the class's spread) only gives such a row zero weight there, so it is silenced (numpy's
    ``errstate`` is local to the thread; warning filters are not touched).
    """
    with np.errstate(over="ignore"):
        res: MCDResult = mcd(
            X, random_state=seed, cutoff_quantile=config.outlier_quantile, finite_sample_correction=True
        )
    info: dict[str, Any] = {
        "h": res.h,
        "n_reweighted": res.n_reweighted,
        "fit_rows": int(X.shape[0]),
        "corrections": list(res.corrections),
        "seed": seed,
        "p_used": res.p_used,
    }
    method = "reweighted FAST-MCD"
    if res.exact_fit:
        info["hyperplane"] = {
            "normal": dict(zip((data.features[j] for j in columns), res.hyperplane_normal.tolist(), strict=True))
            if res.hyperplane_normal is not None
            else {},
            "offset": res.hyperplane_offset,
            "n_on_hyperplane": res.n_on_hyperplane,
            "fit_rows": int(X.shape[0]),
        }
        info["off_hyperplane"] = fit_rows[~res.support]  # data positions of the fitted rows off the hyperplane
        fit = ClassFit(
            k, method, True, columns, res.location, res.covariance, float(res.cutoff), "none (exact fit)", None,
            *screen, exact_fit=True, usable=False, info=info,
        )  # fmt: skip
        return fit, np.zeros(rows.size), _classical_distances(data, k, rows, columns)
    d, d_classical = _both_distances(data, k, rows, columns, res.location, res.covariance)
    cut, rule = _cutoff(config, X.shape[0], res.p_used, res.h, res.n_reweighted)
    fence = far_out_fence(d, config.outlier_far_out_mads)
    fit = ClassFit(k, method, True, columns, res.location, res.covariance, cut, rule, fence, *screen, info=info)
    return fit, d, d_classical


def _both_distances(
    data: AuditData, k: int, rows: IntArray, columns: IntArray, location: Any, covariance: Any
) -> tuple[npt.NDArray[np.float64], npt.NDArray[np.float64]]:
    """Robust and classical squared distances of class ``k``'s rows, read and whitened once
    (:func:`discaudit.stats._linalg.sq_distances_two_metrics`); apart where a covariance is not
    positive definite (robust distances 0, classical NaN when theirs cannot be had)."""
    reference = classical_reference(data.moments, k, columns)
    robust_L = cholesky_or_none(covariance)
    classical_L = None if reference is None else cholesky_or_none(reference[1])
    if robust_L is None or reference is None or classical_L is None:
        d = _distances(data.values, rows, columns, location, covariance)
        return (np.zeros(rows.size) if d is None else d), _classical_distances(data, k, rows, columns)
    on = None if columns.size == data.p else columns
    return sq_distances_two_metrics(data.values, rows, on, (location, robust_L), (reference[0], classical_L))


def _classical(
    data: AuditData,
    config: Config,
    k: int,
    rows: IntArray,
    columns: IntArray,
    screen: tuple[TieScreen, Any, Any],
    min_rows: int,
) -> tuple[ClassFit, npt.NDArray[np.float64], npt.NDArray[np.float64]]:
    """Classical distances for a class too small for a robust fit (pooled covariance if singular)."""
    m = data.moments
    loc = m.means[k][columns]
    cov = m.class_covariances()[k][np.ix_(columns, columns)]
    method = f"classical (fewer than {min_rows} rows for a robust fit)"
    d = _distances(data.values, rows, columns, loc, cov) if np.all(np.isfinite(cov)) else None
    if d is None:
        cov = m.pooled_covariance[np.ix_(columns, columns)]
        method += "; pooled covariance, the class covariance being singular"
        d = _distances(data.values, rows, columns, loc, cov)
    info = {"p_used": int(columns.size)}
    if d is None:
        fit = ClassFit(
            k, method, False, columns, loc, cov, float("inf"), "none", None, *screen, usable=False, info=info
        )
        return fit, np.zeros(rows.size), _classical_distances(data, k, rows, columns)
    cut, rule = _cutoff(config, rows.size, int(columns.size), None, rows.size)
    fence = far_out_fence(d, config.outlier_far_out_mads)
    fit = ClassFit(k, method, False, columns, loc, cov, cut, rule, fence, *screen, info=info)
    reference = classical_reference(m, k, columns)
    same = reference is not None and np.array_equal(reference[1], cov)  # the fit is the classical reference
    return fit, d, d if same else _classical_distances(data, k, rows, columns)
