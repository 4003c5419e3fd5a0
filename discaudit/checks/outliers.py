"""Check ``outliers``: robust Mahalanobis distances per class (FAST-MCD), and whether flagged rows matter.

The check runs in three steps: :func:`fit_classes` (a robust fit per class, on all rows or on
the source's per-class sample), :func:`score_rows` (distances and flags for any rows; when the
rows held are a sample, every row of the input is scored through the data's row pass, block by
block, and the blocks' tallies add up exactly) and :func:`judge` (influence on LDA's estimates
and the status).
"""

from __future__ import annotations

import dataclasses
import functools
import operator
from dataclasses import dataclass, field
from typing import TYPE_CHECKING, Any

import numpy as np
import pandas as pd
from scipy import stats as sps

from discaudit._threads import map_in_threads
from discaudit.dataset import AuditData, RowBlock
from discaudit.findings import Finding, fmt, names
from discaudit.jsonable import label
from discaudit.stats._linalg import logdet_spd, mahalanobis_sq
from discaudit.stats.blocks import ROW_BLOCK, block_starts
from discaudit.stats.mcd import MCDResult, mcd
from discaudit.stats.moments import ClassMoments
from discaudit.stats.seeds import OUTLIERS, class_seeds

if TYPE_CHECKING:
    from discaudit.config import Config

KEY = "outliers"
MAX_LISTED_ROWS = 100


@dataclass(frozen=True)
class ClassFit:
    """The centre, scatter and cut-off that define 'far' for one class."""

    code: int
    method: str
    location: np.ndarray
    covariance: np.ndarray
    cutoff: float
    cutoff_rule: str
    robust: bool
    info: dict[str, Any] = field(default_factory=dict)


@dataclass(frozen=True)
class ClassOutcome:
    """What scoring the rows of one class found."""

    n: int
    n_flagged: int
    listed: list[dict[str, Any]]
    kept_mean: np.ndarray | None
    masked: int


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
                f"Beta({p}/2, {m - p - 1}/2) {q} quantile scaled by (n-1)^2/n for in-sample classical distances"
            )
        scale = p * (m - 1) * (m + 1) / (m * (m - p))
        return float(scale * sps.f.ppf(q, p, m - p)), f"F({p}, {m - p}) {q} quantile scaled for {m} fitted rows"
    return float(sps.chi2.ppf(q, p)), f"chi-square({p}) {q} quantile"


def continuous_part(data: AuditData) -> AuditData:
    """The data without its discrete features (binary or few-valued columns).

    A column with a handful of values puts most rows of a class on a few hyperplanes, so an
    MCD fit becomes an exact fit that flags everything off them; distances are computed on
    the continuous features only (the discrete ones are named in the details).
    """
    keep = np.array([f not in data.distinct_counts for f in data.features])
    if keep.all() or not keep.any():
        return data
    idx = np.flatnonzero(keep)
    return dataclasses.replace(
        data,
        values=np.ascontiguousarray(data.values[:, idx]),
        features=tuple(data.features[j] for j in idx),
        moments=data.moments.subset(idx),
    )


def robust_min_rows(p: int, config: Config) -> int:
    """Rows a class needs for a robust fit: max(2(p+1), robust_min_rows_per_feature * p)."""
    return int(max(2 * (p + 1), np.ceil(config.robust_min_rows_per_feature * p)))


def _fit_sample(rows: np.ndarray, limit: int, seed: int) -> np.ndarray:
    """The rows a robust fit uses: all, or a seeded random subset of ``limit`` rows (in order)."""
    if rows.size <= limit:
        return rows
    return np.sort(np.random.default_rng(seed).choice(rows, limit, replace=False))


def fit_classes(data: AuditData, config: Config, random_state: int | None) -> tuple[list[ClassFit], list[np.ndarray]]:
    """A reweighted FAST-MCD fit per class with at least ``min_rows`` rows, classical otherwise.

    The rule (``robust_min_rows_per_feature`` x p rows, at least 2(p+1)) follows the advice
    that MCD needs n well above 5p to estimate the scatter without heavy finite-sample
    shrinkage (Rousseeuw & Van Driessen 1999; cited from memory); the default of 10 rows
    per feature comes from seeded Gaussian simulations (see Config).

    A class with more than ``robust_fit_max_rows`` rows is fitted on a seeded random subset
    of that many rows (the cost of FAST-MCD's C-steps grows with the rows; the estimate's
    sampling error at 10,000 rows is far below what moves a cut-off), and every row of the
    class is then scored against that fit.

    Returns the fits and, per class, the squared distances of the class's rows in ``data``.
    """
    seeds = class_seeds(random_state, len(data.classes), OUTLIERS)
    min_rows = robust_min_rows(data.p, config)

    def fit_one(k: int) -> tuple[ClassFit, np.ndarray]:
        rows = data.class_rows(k)
        if rows.size >= min_rows:
            return _robust_fit(data, config, k, rows, max(config.robust_fit_max_rows, min_rows), seeds[k])
        return _classical_fit(data, config, k, rows, min_rows)

    # One class per thread: the fits are independent and each has its own seed.
    results = map_in_threads(fit_one, range(len(data.classes)))
    return [fit for fit, _ in results], [d for _, d in results]


def _robust_fit(
    data: AuditData, config: Config, k: int, rows: np.ndarray, limit: int, seed: int
) -> tuple[ClassFit, np.ndarray]:
    """Reweighted FAST-MCD of class k (on a seeded subset of ``limit`` rows if larger); all rows scored."""

    def fit_on(subset: np.ndarray) -> MCDResult:
        return mcd(
            data.values[subset],
            random_state=seed,
            cutoff_quantile=config.outlier_quantile,
            finite_sample_correction=True,
        )

    fit_rows = _fit_sample(rows, limit, seed)
    fit = fit_on(fit_rows)
    d = fit.distances
    if fit_rows.size < rows.size:
        scored = None if fit.exact_fit else mahalanobis_sq(data.values, fit.location, fit.covariance, rows)
        if scored is None:  # an exact fit on the sample: judge every row by a fit on all of them
            fit_rows = rows
            fit = fit_on(rows)
            scored = fit.distances
        d = scored
    cut, rule = _cutoff(config, fit_rows.size, fit.p_used, fit.h, fit.n_reweighted)
    info: dict[str, Any] = {
        "h": fit.h,
        "n_reweighted": fit.n_reweighted,
        "fit_rows": int(fit_rows.size),
        "corrections": list(fit.corrections),
        "seed": seed,
        "exact_fit": fit.exact_fit,
    }
    if fit.exact_fit and fit.hyperplane_normal is not None:
        info["hyperplane"] = {
            "normal": dict(zip(data.features, fit.hyperplane_normal.tolist(), strict=True)),
            "offset": fit.hyperplane_offset,
            "n_on_hyperplane": fit.n_on_hyperplane,
        }
    return ClassFit(k, "reweighted FAST-MCD", fit.location, fit.covariance, cut, rule, True, info), d


def _classical_fit(
    data: AuditData, config: Config, k: int, rows: np.ndarray, min_rows: int
) -> tuple[ClassFit, np.ndarray]:
    """Classical distances for a class too small for a robust fit (pooled covariance if singular)."""
    m = data.moments
    X = data.values[rows]
    cov = m.class_covariances()[k]
    classical = mahalanobis_sq(X, m.means[k], cov)
    note = f"classical distances (fewer than {min_rows} rows for a robust fit)"
    if classical is None:
        cov = m.pooled_covariance
        classical = mahalanobis_sq(X, m.means[k], cov)
        note += ", pooled covariance (class covariance singular)"
    cut, rule = _cutoff(config, rows.size, data.p, None, rows.size)
    fit = ClassFit(k, note, m.means[k], cov, cut, rule, False)
    return fit, classical if classical is not None else np.zeros(rows.size)


def score_rows(
    X: np.ndarray,
    d_robust: np.ndarray,
    fit: ClassFit,
    moments: ClassMoments,
    row_labels: Any,
    rows: np.ndarray | None = None,
) -> tuple[ClassOutcome, np.ndarray, np.ndarray]:
    """Flags, listed rows and the mean of the kept rows for the rows of one class.

    The class rows are ``X[rows]`` (all of X if ``rows`` is None), read in blocks, never
    copied whole. Returns the outcome, the flags and the classical distances (from the
    class's own classical mean and covariance, for the masking comparison).
    """
    k = fit.code
    n = X.shape[0] if rows is None else rows.size
    d_classical = mahalanobis_sq(X, moments.means[k], moments.class_covariances()[k], rows)
    if d_classical is None:
        d_classical = mahalanobis_sq(X, moments.means[k], moments.pooled_covariance, rows)
    if d_classical is None:
        d_classical = np.full(n, np.nan)
    flagged = d_robust > fit.cutoff
    order = np.flatnonzero(flagged)[np.argsort(-d_robust[flagged], kind="stable")][:MAX_LISTED_ROWS]
    listed = [
        {"row": label(row_labels[i]), "distance": float(d_robust[i]), "classical_distance": float(d_classical[i])}
        for i in order
    ]
    n_kept = n - int(flagged.sum())
    # Mean of the kept rows from column sums, without copying the kept rows.
    where = np.flatnonzero(flagged) if rows is None else rows[flagged]
    kept_mean = (_column_sums(X, rows) - X[where].sum(axis=0)) / n_kept if n_kept > 1 else None
    masked = int((flagged & (d_classical <= fit.cutoff)).sum())
    return ClassOutcome(n, int(flagged.sum()), listed, kept_mean, masked), flagged, d_classical


def _column_sums(X: np.ndarray, rows: np.ndarray | None) -> np.ndarray:
    """Column sums of ``X[rows]`` (all rows if None), gathering one block of rows at a time."""
    if rows is None:
        return np.asarray(X.sum(axis=0))
    total = np.zeros(X.shape[1])
    for a in block_starts(rows.size):
        total += np.take(X, rows[a : a + ROW_BLOCK], axis=0).sum(axis=0)
    return total


def judge(
    data: AuditData, config: Config, fits: list[ClassFit], outcomes: list[ClassOutcome], arrays: dict[str, Any]
) -> Finding:
    """Influence of the flagged rows on LDA's estimates, and the status."""
    m = data.moments
    p = data.p
    pooled = m.pooled_covariance
    pooled_ok = np.isfinite(logdet_spd(pooled))
    robust_scatter = np.zeros((p, p))
    per_class: dict[Any, Any] = {}
    shifts = []
    for fit, out in zip(fits, outcomes, strict=True):
        k = fit.code
        robust_scatter += (m.counts[k] - 1) * fit.covariance if fit.robust else m.scatter[k]
        shift = noise = 0.0
        if out.n_flagged and out.kept_mean is not None and pooled_ok:
            d = mahalanobis_sq((out.kept_mean - m.means[k])[None, :], np.zeros(p), pooled)
            shift = float(np.sqrt(d[0])) if d is not None else 0.0
            f = out.n_flagged / out.n
            noise = float(np.sqrt(p * f / ((1.0 - f) * out.n))) if f < 1 else 0.0
        excess_shift = float(np.sqrt(max(shift**2 - noise**2, 0.0)))
        shifts.append(excess_shift)
        per_class[label(data.classes[k])] = {
            "n": out.n,
            "method": fit.method,
            **fit.info,
            "cutoff": fit.cutoff,
            "cutoff_rule": fit.cutoff_rule,
            "n_flagged": out.n_flagged,
            "fraction_flagged": out.n_flagged / out.n if out.n else 0.0,
            "flagged_rows": out.listed,
            "n_listed": len(out.listed),
            "mean_shift": shift,
            "mean_shift_noise": noise,
            "mean_shift_beyond_noise": excess_shift,
            "masked_by_classical": out.masked,
            "excess_flagged_p_value": float(sps.binom.sf(out.n_flagged - 1, out.n, 1.0 - config.outlier_quantile))
            if out.n
            else 1.0,
        }
    ld_classical = logdet_spd(pooled)
    ld_robust = logdet_spd(robust_scatter / (m.n_total - m.n_classes))
    excess = (ld_classical - ld_robust) / p if np.isfinite(ld_classical) and np.isfinite(ld_robust) else float("nan")
    total = sum(o.n_flagged for o in outcomes)
    max_shift = max(shifts, default=0.0)
    details: dict[str, Any] = {
        "per_class": per_class,
        "n_flagged": total,
        "max_mean_shift": max_shift,
        "pooled_logdet_excess_per_feature": excess,
        "robust_fit_rule": f"reweighted FAST-MCD for classes with at least {robust_min_rows(p, config)} rows "
        f"({config.robust_min_rows_per_feature:g} per feature, at least 2(p+1)), classical distances otherwise",
        "distance": "squared Mahalanobis distance from the class's own (robust) centre and covariance",
        "influence": "mean_shift: class mean with vs without its flagged rows, in pooled-Mahalanobis units; "
        "mean_shift_noise: the shift expected from dropping that share of rows at random, sqrt(p f / ((1-f) n)); "
        "statuses use the shift beyond that noise; "
        "pooled_logdet_excess_per_feature: (log det classical pooled - log det robust pooled) / p; "
        "excess_flagged_p_value: binomial test of more flagged rows than the nominal 1 - quantile share",
        "thresholds": {
            "quantile": config.outlier_quantile,
            "cutoff": config.outlier_cutoff,
            "fraction_warn": config.outlier_fraction_warn,
            "mean_shift_warn": config.outlier_mean_shift_warn,
            "mean_shift_fail": config.outlier_mean_shift_fail,
            "logdet_warn": config.outlier_logdet_warn,
            "logdet_fail": config.outlier_logdet_fail,
        },
    }
    fractions = {c: v["fraction_flagged"] for c, v in per_class.items()}
    worst_class = max(fractions, key=fractions.__getitem__)
    n_rows = int(m.n_total)
    figure = f"{total} flagged ({fmt(100 * total / n_rows, 2)}%)"
    influence = (
        f"class means move up to {fmt(max_shift)} pooled SD beyond sampling noise, pooled log-det excess "
        f"{fmt(excess)} per feature"
    )
    flagged_text = _examples(per_class)
    big_excess = bool(np.isfinite(excess) and excess > config.outlier_logdet_fail)
    if max_shift > config.outlier_mean_shift_fail or big_excess:
        return Finding(
            KEY,
            "fail",
            f"{total} rows lie far from their class ({flagged_text}) and distort LDA's estimates: {influence}.",
            details,
            figure,
            arrays,
        )
    wide = any(
        v["fraction_flagged"] > config.outlier_fraction_warn and v["excess_flagged_p_value"] < 0.001
        for v in per_class.values()
    )
    some_excess = bool(np.isfinite(excess) and excess > config.outlier_logdet_warn)
    if max_shift > config.outlier_mean_shift_warn or some_excess or wide:
        share = f"{fmt(100 * fractions[worst_class], 2)}% of class {worst_class} flagged; " if wide else ""
        return Finding(
            KEY, "warn", f"{total} rows flagged ({flagged_text}); {share}{influence}.", details, figure, arrays
        )
    return Finding(
        KEY,
        "pass",
        f"{total} rows beyond the cut-off, about what a Gaussian tail gives, with little influence ({influence}).",
        details,
        figure,
        arrays,
    )


def run(data: AuditData, config: Config, random_state: int | None = None) -> Finding:
    """Flag rows far from their own class by robust distance, and measure their influence on LDA.

    Each class with at least ``robust_min_rows_per_feature`` rows per feature gets a reweighted FAST-MCD fit (Rousseeuw & Van
    Driessen 1999) and squared robust distances; smaller classes fall back to classical
    distances from the class mean and covariance (noted). Influence on what LDA uses: the
    shift of each class mean when its flagged rows are removed, in pooled-Mahalanobis
    units, and the per-feature log-determinant excess of the classical pooled covariance
    over the robust one. Fails when the outliers move a mean by more than
    ``outlier_mean_shift_fail`` or inflate the pooled covariance beyond
    ``outlier_logdet_fail``; warns above the warn thresholds or when more than
    ``outlier_fraction_warn`` of a class is flagged.

    When the data hold a per-class sample of a larger input, the fits use the sample and every
    row of the input is scored through ``data.all_rows`` (the flagged rows are then exact row
    labels of the input); without a row pass the rows of the sample are scored, and the
    finding says so.
    """
    discrete = [f for f in data.features if f in data.distinct_counts]
    continuous = continuous_part(data)
    if discrete and len(discrete) == len(data.features):
        return Finding(
            KEY,
            "skip",
            "Every feature is discrete, so distances from a class centre say nothing about outlying rows.",
            {"discrete_features_left_out": discrete},
            "-",
        )
    fits, distances = fit_classes(continuous, config, random_state)
    if data.sample is not None and data.all_rows is not None:
        positions = np.array([data.features.index(f) for f in continuous.features], dtype=np.intp)
        scorer = functools.partial(_tally_block, positions, continuous.moments, tuple(fits))
        finding = _judge_tally(continuous, config, fits, data.all_rows.map_reduce(scorer, operator.add))
        extra: dict[str, Any] = {
            "scored_rows": "every row of the input (second pass), against robust fits on the sample"
        }
        extra |= {"discrete_features_left_out": discrete} if discrete else {}
    else:
        finding = _judge_held_rows(continuous, config, fits, distances)
        extra = {"discrete_features_left_out": discrete} if discrete else {}
        if data.sample is not None:
            extra["scored_rows"] = (
                "flagged rows come from the per-class sample only: pass a function returning the chunks to score every row"
            )
    return dataclasses.replace(finding, details={**finding.details, **extra}) if extra else finding


def _judge_held_rows(data: AuditData, config: Config, fits: list[ClassFit], distances: list[np.ndarray]) -> Finding:
    """Score the rows held in ``data`` (all rows, or the sample) and judge them."""
    n = data.n
    arrays: dict[str, Any] = {
        "row_label": data.row_labels,
        "class": np.asarray(data.classes, dtype=object)[data.codes],
        "distance": np.zeros(n),
        "classical_distance": np.zeros(n),
        "cutoff": np.zeros(n),
        "flagged": np.zeros(n, dtype=bool),
    }
    outcomes = []
    for fit, d in zip(fits, distances, strict=True):
        rows = data.class_rows(fit.code)
        outcome, flagged, d_classical = score_rows(data.values, d, fit, data.moments, data.row_labels[rows], rows)
        outcomes.append(outcome)
        arrays["distance"][rows] = d
        arrays["classical_distance"][rows] = d_classical
        arrays["cutoff"][rows] = fit.cutoff
        arrays["flagged"][rows] = flagged
    arrays["fits"] = fits
    return judge(data, config, fits, outcomes, arrays)


@dataclass(frozen=True)
class OutlierTally:
    """Scoring counts of some rows, per class; tallies of disjoint blocks add up exactly."""

    n: np.ndarray
    n_flagged: np.ndarray
    masked: np.ndarray
    kept_sum: np.ndarray
    kept_n: np.ndarray
    listed: list[list[dict[str, Any]]]
    flagged: pd.DataFrame

    def __add__(self, other: OutlierTally) -> OutlierTally:
        listed = [
            sorted(a + b, key=lambda r: -r["distance"])[:MAX_LISTED_ROWS]
            for a, b in zip(self.listed, other.listed, strict=True)
        ]
        return OutlierTally(
            self.n + other.n,
            self.n_flagged + other.n_flagged,
            self.masked + other.masked,
            self.kept_sum + other.kept_sum,
            self.kept_n + other.kept_n,
            listed,
            pd.concat([self.flagged, other.flagged], ignore_index=True),
        )


_FLAGGED_COLUMNS = ["row_label", "class", "distance", "classical_distance", "cutoff"]


def _tally_block(
    positions: np.ndarray, moments: ClassMoments, fits: tuple[ClassFit, ...], block: RowBlock
) -> OutlierTally:
    """Score every row of one block against the robust fits (``positions``: the continuous features)."""
    K, p = len(fits), positions.size
    n, n_flagged, masked, kept_n = (np.zeros(K, dtype=np.int64) for _ in range(4))
    kept_sum = np.zeros((K, p))
    listed: list[list[dict[str, Any]]] = [[] for _ in fits]
    parts = [pd.DataFrame(columns=_FLAGGED_COLUMNS)]
    values = block.values[:, positions]
    for k, fit in enumerate(fits):
        rows = np.flatnonzero(block.codes == fit.code)
        X = values[rows]
        d = mahalanobis_sq(X, fit.location, fit.covariance) if rows.size else None
        if d is None:
            continue
        out, flags, d_classical = score_rows(X, d, fit, moments, block.row_labels[rows])
        n[k], n_flagged[k], masked[k] = out.n, out.n_flagged, out.masked
        kept_sum[k], kept_n[k] = X[~flags].sum(axis=0), int((~flags).sum())
        listed[k] = out.listed
        if flags.any():
            parts.append(
                pd.DataFrame(
                    {
                        "row_label": block.row_labels[rows][flags],
                        "class": moments.classes[fit.code],
                        "distance": d[flags],
                        "classical_distance": d_classical[flags],
                        "cutoff": fit.cutoff,
                    }
                )
            )
    flagged = pd.concat(parts, ignore_index=True) if len(parts) > 1 else parts[0]
    return OutlierTally(n, n_flagged, masked, kept_sum, kept_n, listed, flagged)


def _judge_tally(data: AuditData, config: Config, fits: list[ClassFit], tally: OutlierTally) -> Finding:
    """Judge the tallies of every row of the input."""
    outcomes = [
        ClassOutcome(
            int(tally.n[k]),
            int(tally.n_flagged[k]),
            tally.listed[k],
            tally.kept_sum[k] / tally.kept_n[k] if tally.kept_n[k] > 1 else None,
            int(tally.masked[k]),
        )
        for k in range(len(fits))
    ]
    rows = tally.flagged
    arrays = {
        "row_label": pd.Index(rows["row_label"]),
        "class": rows["class"].to_numpy(dtype=object),
        "distance": rows["distance"].to_numpy(dtype=float),
        "classical_distance": rows["classical_distance"].to_numpy(dtype=float),
        "cutoff": rows["cutoff"].to_numpy(dtype=float),
        "flagged": np.ones(len(rows), dtype=bool),
        "fits": fits,
    }
    return judge(data, config, fits, outcomes, arrays)


def _examples(per_class: dict[Any, Any]) -> str:
    rows = sorted(
        ((r["distance"], str(r["row"]), c) for c, v in per_class.items() for r in v.get("flagged_rows", [])),
        reverse=True,
    )
    return "farthest " + names([f"{row} ({c})" for _, row, c in rows], 3) if rows else "none"
