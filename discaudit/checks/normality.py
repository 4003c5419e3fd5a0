"""Check ``normality``: how far each class is from multivariate normal, and discrete features."""

from __future__ import annotations

from collections.abc import Callable, Iterator
from dataclasses import dataclass
from typing import TYPE_CHECKING, Any

import numpy as np

from discaudit._threads import map_in_threads
from discaudit.dataset import AuditData
from discaudit.errors import DataError
from discaudit.findings import Finding, fmt, fmt_p, names
from discaudit.jsonable import label
from discaudit.stats._sampling import subsample_rows
from discaudit.stats.henze_zirkler import henze_zirkler
from discaudit.stats.mardia import mardia
from discaudit.stats.seeds import NORMALITY, class_seeds

if TYPE_CHECKING:
    from discaudit.config import Config

KEY = "normality"
_MOMENT_ROWS = 100_000
#: Rows gathered at a time for the per-feature moments.
_BLOCK_ROWS = 1 << 14


@dataclass(frozen=True)
class _ColumnMoments:
    """Per-column range, moment skewness and excess kurtosis of ``n`` rows."""

    n: int
    ptp: np.ndarray
    skewness: np.ndarray
    excess_kurtosis: np.ndarray


def _column_moments(blocks: Callable[[], Iterator[np.ndarray]]) -> _ColumnMoments:
    """Skewness g1 = m3 / m2^1.5 and excess kurtosis g2 = m4 / m2^2 - 3 per column.

    The biased (divisor n) moment estimators, as ``scipy.stats.skew`` and ``kurtosis`` with
    their defaults. Two passes over the blocks of rows ``blocks()`` yields (mean and range,
    then central moments of the rows divided by their range, so third and fourth powers of
    large values cannot overflow): the temporaries stay at one block.
    """
    n, total, low, high = 0, None, None, None
    for block in blocks():
        n += block.shape[0]
        total = block.sum(axis=0) if total is None else total + block.sum(axis=0)
        low = block.min(axis=0) if low is None else np.minimum(low, block.min(axis=0))
        high = block.max(axis=0) if high is None else np.maximum(high, block.max(axis=0))
    assert total is not None and low is not None and high is not None, "no rows"
    mean, ptp = total / n, high - low
    scale = np.where(ptp > 0, ptp, 1.0)
    sums = np.zeros((3, mean.size))  # sums of the 2nd, 3rd and 4th powers of the scaled, centred rows
    for block in blocks():
        centred = (block - mean) / scale
        square = centred * centred
        sums[0] += square.sum(axis=0)
        sums[1] += np.einsum("ij,ij->j", square, centred)
        sums[2] += np.einsum("ij,ij->j", square, square)
    m2, m3, m4 = sums / n
    with np.errstate(invalid="ignore", divide="ignore"):
        return _ColumnMoments(n, ptp, m3 / m2**1.5, m4 / m2**2 - 3.0)


def _moment_sample(n: int, seed: int) -> np.ndarray | None:
    """Sorted positions of the seeded per-feature moment subsample, or None (all rows)."""
    if n <= _MOMENT_ROWS:
        return None
    return np.sort(np.random.default_rng(seed).choice(n, _MOMENT_ROWS, replace=False))


def _rows_of(data: AuditData, rows: np.ndarray, columns: list[int]) -> np.ndarray:
    """The given columns of the given rows, as one copy."""
    X = np.take(data.values, rows, axis=0)
    return X if len(columns) == data.p else X[:, columns]


def _flat_columns(
    data: AuditData, rows: np.ndarray, columns: list[int], flat_in_sample: np.ndarray, sampled: bool
) -> np.ndarray:
    """Positions (in ``columns``) of the columns constant over all the class rows.

    A column that varies in the sample varies in the class; only the others are read in full.
    """
    candidates = np.flatnonzero(flat_in_sample)
    if candidates.size == 0 or not sampled:
        return candidates
    full = data.values[np.ix_(rows, np.asarray(columns, dtype=np.intp)[candidates])]
    constant: np.ndarray = candidates[np.ptp(full, axis=0) == 0]
    return constant


def _class_shape(
    moments: _ColumnMoments, pair_rows: np.ndarray, n: int, pair_seed: int | None, features: tuple[str, ...]
) -> dict[str, Any]:
    """Mardia, Henze-Zirkler and the worst per-feature moments of one class of ``n`` rows.

    ``moments`` come from all rows or a seeded subsample of ``_MOMENT_ROWS`` (they need no
    pairs, and the subsample gives them to three decimals); ``pair_rows`` are the rows for the
    pairwise statistics (a seeded subsample of ``pairwise_max_rows`` drawn with
    ``pair_seed``, or all rows). Callers leave out columns constant in the class.
    """
    skew, kurt = moments.skewness, moments.excess_kurtosis
    worst_skew = int(np.nanargmax(np.abs(skew)))
    worst_kurt = int(np.nanargmax(kurt))
    out: dict[str, Any] = {
        "n": int(n),
        "per_feature_moment_rows": moments.n,
        "max_abs_skewness": float(abs(skew[worst_skew])),
        "max_abs_skewness_feature": features[worst_skew],
        "max_excess_kurtosis": float(kurt[worst_kurt]),
        "max_excess_kurtosis_feature": features[worst_kurt],
    }
    m = mardia(pair_rows, max_rows=pair_rows.shape[0])
    hz = henze_zirkler(pair_rows, max_rows=pair_rows.shape[0])
    p = pair_rows.shape[1]
    out.update(
        {
            "mardia_skewness": m.skewness,
            "mardia_skew_statistic": m.skew_statistic,
            "mardia_skew_df": m.skew_df,
            "mardia_skew_p_value": m.skew_p_value,
            "mardia_kurtosis": m.kurtosis,
            "mardia_kurtosis_ratio": m.kurtosis / (p * (p + 2)),
            "mardia_kurt_statistic": m.kurt_statistic,
            "mardia_kurt_p_value": m.kurt_p_value,
            "henze_zirkler_statistic": hz.statistic,
            "henze_zirkler_p_value": hz.p_value,
            "n_used": m.n_used,
            "subsample_seed": pair_seed,
        }
    )
    return out


def _grade(shape: dict[str, Any], config: Config) -> tuple[str, str]:
    """Status of one class: significance first, then the size of the departure."""
    p_values = [shape["mardia_skew_p_value"], shape["mardia_kurt_p_value"], shape["henze_zirkler_p_value"]]
    rejects = min(p for p in p_values if p is not None) < config.normality_alpha
    ratio = shape["mardia_kurtosis_ratio"]
    large = (
        shape["max_abs_skewness"] > config.skew_large
        or shape["max_excess_kurtosis"] > config.kurtosis_large
        or ratio > config.mardia_kurtosis_ratio_large
        or ratio < 1.0 / config.mardia_kurtosis_ratio_large
    )
    if rejects and large:
        return "fail", "large departure"
    if rejects:
        return "warn", "significant but moderate departure"
    return "pass", "no significant departure"


def run(data: AuditData, config: Config, random_state: int | None = None) -> Finding:
    """Per class: Mardia skewness and kurtosis, Henze-Zirkler, worst features; discrete features.

    At large n every test rejects, so a class fails only when a test rejects at
    ``normality_alpha`` *and* the departure is large: a feature with |skewness| above
    ``skew_large`` or excess kurtosis above ``kurtosis_large`` (West, Finch & Curran 1995),
    or Mardia's kurtosis more than ``mardia_kurtosis_ratio_large`` times its normal
    expectation (or less than its inverse). Rejection with a moderate departure warns.
    Features with at most ``few_distinct_values`` distinct values cannot be Gaussian and
    fail the check by themselves.
    """
    seeds = class_seeds(random_state, len(data.classes), NORMALITY)
    discrete = data.distinct_counts
    per_class: dict[Any, Any] = {}
    statuses = []
    continuous = [j for j, f in enumerate(data.features) if f not in discrete]
    features = tuple(data.features[j] for j in continuous)

    def shape_of(k: int) -> dict[str, Any]:
        rows = data.class_rows(k)
        p = len(continuous)
        if rows.size <= p + 1:
            return {"skipped": f"{rows.size} rows for {p} features: too few for the tests"}
        positions = _moment_sample(rows.size, seeds[k])
        sample = rows if positions is None else rows[positions]
        moments = _column_moments(
            lambda: (
                _rows_of(data, sample[a : a + _BLOCK_ROWS], continuous) for a in range(0, sample.size, _BLOCK_ROWS)
            )
        )
        flat = _flat_columns(data, rows, continuous, moments.ptp == 0, sampled=positions is not None)
        if flat.size:
            return {"skipped": f"features constant within this class: {names([features[j] for j in flat])}"}
        pair_positions, pair_seed = subsample_rows(rows.size, config.pairwise_max_rows, seeds[k], min_rows=p + 1)
        try:
            pair_rows = _rows_of(data, rows if pair_positions is None else rows[pair_positions], continuous)
            shape = _class_shape(moments, pair_rows, rows.size, pair_seed, features)
        except DataError as exc:
            return {"skipped": str(exc)}
        shape["status"], shape["grade"] = _grade(shape, config)
        return shape

    # One class per thread: independent, each with its own seed.
    shapes = map_in_threads(shape_of, range(len(data.classes)) if continuous else range(0))
    for cls, shape in zip(data.classes, shapes, strict=False):
        per_class[label(cls)] = shape
        if "status" in shape:
            statuses.append((shape["status"], cls, shape))
    details: dict[str, Any] = {
        "per_class": per_class,
        "discrete_features": list(discrete),
        "distinct_values": discrete,
        "alpha": config.normality_alpha,
        "rule": (
            f"fail when a test rejects at alpha = {config.normality_alpha} and the departure is large "
            f"(|skewness| > {config.skew_large}, excess kurtosis > {config.kurtosis_large}, or Mardia kurtosis ratio "
            f"beyond {config.mardia_kurtosis_ratio_large}); warn when a test rejects with a moderate departure; "
            f"features with at most {config.few_distinct_values} distinct values fail by themselves"
        ),
        "covariance_divisor": "n (Mardia, Henze-Zirkler)",
        "pairwise_max_rows": config.pairwise_max_rows,
    }
    failing = [(cls, s) for st, cls, s in statuses if st == "fail"]
    warning = [(cls, s) for st, cls, s in statuses if st == "warn"]
    worst_kurt = max((s["mardia_kurtosis_ratio"] for _, _, s in statuses), default=float("nan"))
    figure = f"{len(failing) + len(warning)}/{len(data.classes)} classes"
    if discrete:
        binary = [f for f, n in discrete.items() if n == 2]
        kind = f"binary ({names(binary)})" if binary else f"discrete ({names(list(discrete))})"
        return Finding(
            KEY,
            "fail",
            f"Features {kind} take at most {config.few_distinct_values} values and cannot be Gaussian"
            + (f"; {len(failing)} classes also depart strongly from normality." if failing else "."),
            details,
            f"{len(discrete)} discrete feature(s)",
        )
    if failing:
        cls, s = failing[0]
        return Finding(
            KEY,
            "fail",
            f"{len(failing)} of {len(data.classes)} classes depart strongly from normality; class {cls}: Mardia kurtosis "
            f"{fmt(s['mardia_kurtosis_ratio'])} x normal, |skewness| up to {fmt(s['max_abs_skewness'])} "
            f"({s['max_abs_skewness_feature']}), Henze-Zirkler {fmt_p(s['henze_zirkler_p_value'])}.",
            details,
            figure,
        )
    if warning:
        cls, s = warning[0]
        return Finding(
            KEY,
            "warn",
            f"Normality is rejected in {len(warning)} classes but the departure is moderate (class {cls}: Mardia kurtosis "
            f"{fmt(s['mardia_kurtosis_ratio'])} x normal, |skewness| up to {fmt(s['max_abs_skewness'])}).",
            details,
            figure,
        )
    if not statuses:
        return Finding(KEY, "skip", "No class has enough rows for the normality tests.", details, "-")
    return Finding(
        KEY,
        "pass",
        f"No class departs significantly from normality (largest Mardia kurtosis ratio {fmt(worst_kurt)}).",
        details,
        figure,
    )
