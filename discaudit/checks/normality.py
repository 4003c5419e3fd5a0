"""Check ``normality``: how far each class is from multivariate normal, and discrete features.

The status reflects the *shape* of each class, not a handful of contaminated rows: every statistic
is computed on all rows of the class and again without the rows the outlier check flags (the
shared robust fits of :mod:`discaudit.checks._robust`; this check never reads the outlier
finding). When the class departs with those rows but not without them, the departure is driven
by them (the outlier check's business) and the class passes; when it departs without them too,
they are the tail of its shape and the class is judged on all rows.
"""

from __future__ import annotations

from collections.abc import Callable, Iterator
from dataclasses import dataclass
from typing import TYPE_CHECKING, Any

import numpy as np
import pandas as pd

from discaudit._threads import map_in_threads
from discaudit.checks._robust import canonical_layout, robust_fits
from discaudit.dataset import AuditData
from discaudit.errors import DataError
from discaudit.findings import Finding, fmt, fmt_p, names, sentence
from discaudit.jsonable import label
from discaudit.stats._linalg import mahalanobis_sq
from discaudit.stats._sampling import subsample_rows
from discaudit.stats.normality_tests import mardia_and_henze_zirkler
from discaudit.stats.seeds import NORMALITY, class_seeds

if TYPE_CHECKING:
    from discaudit.config import Config

KEY = "normality"
#: Features named per class for the strongest skewness and excess kurtosis.
TOP_FEATURES = 3
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


def _top(values: np.ndarray, features: tuple[str, ...], absolute: bool) -> dict[str, float]:
    """The TOP_FEATURES features with the largest (absolute) values, largest first."""
    key = np.abs(values) if absolute else values
    finite = np.flatnonzero(np.isfinite(key))
    order = finite[np.argsort(-key[finite], kind="stable")][:TOP_FEATURES]
    return {features[j]: float(values[j]) for j in order}


def _class_shape(
    moments: _ColumnMoments, pair_rows: np.ndarray, n: int, pair_seed: int | None, features: tuple[str, ...]
) -> dict[str, Any]:
    """Mardia, Henze-Zirkler and the strongest per-feature moments of one class of ``n`` rows.

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
        "strongest_skewness": _top(skew, features, absolute=True),
        "strongest_excess_kurtosis": _top(kurt, features, absolute=False),
    }
    named = pd.DataFrame(pair_rows, columns=list(features), copy=False)  # errors then name the features
    m, hz = mardia_and_henze_zirkler(named, max_rows=pair_rows.shape[0])
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


#: The tests behind a rejection, as a sentence names them.
_TESTS = {
    "mardia_skew_p_value": "Mardia's skewness test",
    "mardia_kurt_p_value": "Mardia's kurtosis test",
    "henze_zirkler_p_value": "the Henze-Zirkler test",
}


def _departure_size(shape: dict[str, Any], config: Config) -> float:
    """How far beyond 'large' the departure is: the largest of |skewness| / skew_large, excess
    kurtosis / kurtosis_large and |ln(Mardia kurtosis ratio)| / ln(mardia_kurtosis_ratio_large);
    above 1 is a large departure (the size half of the grade)."""
    ratio = shape["mardia_kurtosis_ratio"]
    log_ratio = abs(np.log(ratio)) / np.log(config.mardia_kurtosis_ratio_large) if ratio > 0 else float("inf")
    return float(
        max(
            shape["max_abs_skewness"] / config.skew_large,
            shape["max_excess_kurtosis"] / config.kurtosis_large,
            log_ratio,
        )
    )


def _grade(shape: dict[str, Any], config: Config) -> tuple[str, str]:
    """Status of one class: significance first, then the size of the departure."""
    p_values = {k: shape[k] for k in _TESTS if shape[k] is not None}
    rejects = bool(p_values) and min(p_values.values()) < config.normality_alpha
    large = _departure_size(shape, config) > 1.0
    if rejects and large:
        return "fail", "large departure"
    if rejects:
        return "warn", "significant but moderate departure"
    return "pass", "no significant departure"


def _strongest_test(shape: dict[str, Any]) -> tuple[str, float]:
    """The test with the smallest p-value, and that p-value."""
    key = min((k for k in _TESTS if shape[k] is not None), key=lambda k: shape[k])
    return _TESTS[key], float(shape[key])


_RANK = {"pass": 0, "warn": 1, "fail": 2}


def run(data: AuditData, config: Config, random_state: int | None = None) -> Finding:
    """Per class: Mardia skewness and kurtosis, Henze-Zirkler, strongest features; discrete features.

    At large n every test rejects, so a class fails only when a test rejects at
    ``normality_alpha`` *and* the departure is large: a feature with |skewness| above
    ``skew_large`` or excess kurtosis above ``kurtosis_large`` (West, Finch & Curran 1995),
    or Mardia's kurtosis more than ``mardia_kurtosis_ratio_large`` times its normal
    expectation (or less than its inverse). Rejection with a moderate departure warns. A class
    is judged without the rows the outlier check flags (computed by the shared robust fits) when
    the rest of the class passes: the departure is then theirs, contamination rather than shape.
    When the class departs without them too, they are part of its shape and it is judged on all
    rows. Both sets of statistics are kept. Features with at most ``few_distinct_values``
    distinct values cannot be Gaussian and fail the check by themselves; they are named once and
    left out of the tests.
    """
    orders, ranks = canonical_layout(data)
    seeds = class_seeds(random_state, len(data.classes), NORMALITY, ranks)
    flags = robust_fits(data, config, random_state).flagged
    discrete = data.distinct_counts
    continuous = [j for j, f in enumerate(data.features) if f not in discrete]
    features = tuple(data.features[j] for j in continuous)

    def shape_on(rows: np.ndarray, seed: int) -> dict[str, Any]:
        """The statistics of the given rows (in canonical order) of one class."""
        p = len(continuous)
        if rows.size <= p + 1:
            return {"skipped": f"{rows.size} rows for {p} features: too few for the tests"}
        positions = _moment_sample(rows.size, seed)
        sample = rows if positions is None else rows[positions]
        moments = _column_moments(
            lambda: (
                _rows_of(data, sample[a : a + _BLOCK_ROWS], continuous) for a in range(0, sample.size, _BLOCK_ROWS)
            )
        )
        flat = _flat_columns(data, rows, continuous, moments.ptp == 0, sampled=positions is not None)
        if flat.size:
            return {"skipped": f"features constant within this class: {names([features[j] for j in flat])}"}
        pair_positions, pair_seed = subsample_rows(rows.size, config.pairwise_max_rows, seed, min_rows=p + 1)
        try:
            pair_rows = _rows_of(data, rows if pair_positions is None else rows[pair_positions], continuous)
            shape = _class_shape(moments, pair_rows, rows.size, pair_seed, features)
        except DataError as exc:
            return {"skipped": str(exc)}
        shape["status"], shape["grade"] = _grade(shape, config)
        shape["departure_size"] = _departure_size(shape, config)
        return shape

    def shape_of(k: int) -> dict[str, Any]:
        canon = data.class_rows(k)[orders[k]]
        flagged = flags[k][orders[k]]
        n_flagged = int(flagged.sum())
        every = shape_on(canon, seeds[k])
        plain = {**every, "rows_judged": "all rows", "n_flagged_by_outlier_check": n_flagged}
        if not flagged.any() or "status" not in every:
            return plain
        clean = shape_on(canon[~flagged], seeds[k])
        if "status" not in clean:
            return plain
        keep = ("status", "grade", "departure_size", "max_abs_skewness", "max_excess_kurtosis",
                "mardia_kurtosis_ratio", "mardia_skew_p_value", "mardia_kurt_p_value", "henze_zirkler_p_value")  # fmt: skip
        if every["status"] != "pass" and clean["status"] == "pass":
            # The rest of the class is consistent with a Gaussian: the flagged rows made the departure.
            rows = f"without the {n_flagged} row{'s' if n_flagged != 1 else ''} the outlier check flags"
            return {
                **clean,
                "n": int(canon.size),
                "rows_judged": rows,
                "n_flagged_by_outlier_check": n_flagged,
                "driven_by_flagged_rows": True,
                "with_flagged_rows": {key: every[key] for key in keep},
            }
        # Without them the class still departs (or never did): the flagged rows are part of its shape.
        return {**plain, "driven_by_flagged_rows": False, "without_flagged_rows": {key: clean[key] for key in keep}}

    # One class per thread: independent, each with its own seed.
    shapes = map_in_threads(shape_of, range(len(data.classes)) if continuous else range(0))
    per_class: dict[Any, Any] = {label(cls): shape for cls, shape in zip(data.classes, shapes, strict=False)}
    details: dict[str, Any] = {
        "per_class": per_class,
        "discrete_features": list(discrete),
        "distinct_values": discrete,
        "features_tested": list(features),
        "n_classes": len(data.classes),
        "few_distinct_values": config.few_distinct_values,
        "alpha": config.normality_alpha,
        "rule": (
            f"fail when a test rejects at alpha = {config.normality_alpha} and the departure is large "
            f"(|skewness| > {config.skew_large}, excess kurtosis > {config.kurtosis_large}, or Mardia kurtosis ratio "
            f"beyond {config.mardia_kurtosis_ratio_large}); warn when a test rejects with a moderate departure; "
            f"features with at most {config.few_distinct_values} distinct values fail by themselves and are left "
            "out of the tests; a class that departs only because of the rows the outlier check flags is judged without "
            "them"
        ),
        "departure_size": (
            f"the largest of |skewness| / {config.skew_large}, excess kurtosis / {config.kurtosis_large} and "
            f"|ln(Mardia kurtosis ratio)| / ln({config.mardia_kurtosis_ratio_large}); above 1 is a large departure; "
            "the worst class is the one with the worst status and, among those, the largest departure size"
        ),
        "covariance_divisor": "n (Mardia, Henze-Zirkler)",
        "pairwise_max_rows": config.pairwise_max_rows,
    }
    arrays = _qq_arrays(data, continuous, flags, orders, seeds, config.pairwise_max_rows)
    graded = [(cls, s) for cls, s in per_class.items() if "status" in s]
    failing = [c for c, s in graded if s["status"] == "fail"]
    warning = [c for c, s in graded if s["status"] == "warn"]
    rank = {label(data.classes[k]): ranks[k] for k in range(len(data.classes))}  # content, never names
    driven = sorted(
        (c for c, s in graded if s.get("driven_by_flagged_rows")),
        key=lambda c: (-per_class[c]["n_flagged_by_outlier_check"], rank[c]),
    )
    details["worst_class"] = None
    worst = None
    if graded:
        worst_cls, worst = max(graded, key=lambda t: (_RANK[t[1]["status"]], t[1]["departure_size"], -rank[t[0]]))
        details["worst_class"] = worst_cls
    K = len(data.classes)
    details["classes_departing"] = {"strongly": len(failing), "moderately": len(warning), "of": K}
    figure = f"{len(failing) + len(warning)}/{K} classes"
    parts = []
    on_continuous = " on the continuous features" if discrete else ""
    if discrete:
        binary = [f for f, n in discrete.items() if n == 2]
        others = [f for f in discrete if f not in binary]
        kinds = ([f"binary features {names(binary)}"] if binary else []) + (
            [f"discrete features {names(others)}"] if others else []
        )
        parts.append(
            f"{' and '.join(kinds)} take at most {config.few_distinct_values} distinct values, cannot be Gaussian "
            "and are left out of the tests"
        )
        figure = f"{len(discrete)} discrete feature(s)"
    if worst is not None and (failing or warning):
        cls = details["worst_class"]
        test, p_value = _strongest_test(worst)
        if failing:
            head = f"{len(failing)} of {K} classes {'departs' if len(failing) == 1 else 'depart'} strongly"
            if warning:
                head += f" and {len(warning)} moderately"
        else:
            head = (
                f"{len(warning)} of {K} classes {'departs' if len(warning) == 1 else 'depart'} moderately "
                "(significantly, but not by much)"
            )
        judged = f" ({worst['rows_judged']})" if worst["rows_judged"] != "all rows" else ""
        parts.append(
            f"{head} from normality{on_continuous}; worst, by departure size, class {cls}{judged}: |skewness| up "
            f"to {fmt(worst['max_abs_skewness'])} ({worst['max_abs_skewness_feature']}), excess kurtosis up to "
            f"{fmt(worst['max_excess_kurtosis'])} ({worst['max_excess_kurtosis_feature']}), Mardia kurtosis "
            f"{fmt(worst['mardia_kurtosis_ratio'])} times its Gaussian value, {test} {fmt_p(p_value)}"
        )
    elif graded:
        test, p_value = min((_strongest_test(s) for _, s in graded), key=lambda t: t[1])
        largest = max(s["mardia_kurtosis_ratio"] for _, s in graded)
        once = " once the rows the outlier check flags are set aside" if driven else ""
        parts.append(
            f"no class departs significantly from normality{on_continuous}{once} (smallest p-value: {test}, "
            f"{fmt_p(p_value)}; largest Mardia kurtosis ratio {fmt(largest)})"
        )
    for c in driven[:2]:
        s = per_class[c]
        n_rows = s["n_flagged_by_outlier_check"]
        parts.append(
            f"in class {c} the departure is driven by {n_rows} flagged row{'s' if n_rows != 1 else ''}: with them "
            f"{s['with_flagged_rows']['grade']}, without them {s['grade']}"
        )
    if len(driven) > 2:
        more = len(driven) - 2
        parts.append(f"likewise in {more} more class{'es' if more != 1 else ''}")
    if not graded and continuous:
        first = next((c, str(s["skipped"])) for c, s in per_class.items() if "skipped" in s)
        parts.append(f"no class could be tested (class {first[0]}: {first[1].split('. ')[0].rstrip('.')})")
    if discrete:
        return Finding(KEY, "fail", sentence(parts), details, figure, arrays)
    if not graded:
        return Finding(KEY, "skip", sentence(parts), details, "-", arrays)
    status = "fail" if failing else "warn" if warning else "pass"
    return Finding(KEY, status, sentence(parts), details, figure, arrays)


def _qq_arrays(
    data: AuditData,
    continuous: list[int],
    flags: list[np.ndarray],
    orders: list[np.ndarray],
    seeds: list[int],
    max_rows: int,
) -> dict[str, Any]:
    """For the Q-Q plot: classical squared distances from the class mean and covariance on the tested features.

    One entry per plotted row (``row_label``, ``class``, ``classical_squared_distance``,
    ``flagged``): every row of a class of at most ``max_rows`` rows, a seeded subsample of that
    many (drawn in the canonical order) of a larger one, which is plenty for a Q-Q plot and keeps
    the verdict's memory independent of n. A class too small or with a singular covariance has
    no entries.
    """
    idx = np.asarray(continuous, dtype=np.intp)
    m = data.moments
    plotted: list[np.ndarray] = []
    distances: list[np.ndarray] = []
    marks: list[np.ndarray] = []
    for k in range(len(data.classes)):
        rows = data.class_rows(k)
        if idx.size == 0 or rows.size <= idx.size:
            continue
        cov = m.class_covariances()[k][np.ix_(idx, idx)]
        if not np.all(np.isfinite(cov)):
            continue
        chosen = np.arange(rows.size)
        if rows.size > max_rows:
            canon = orders[k]
            chosen = np.sort(canon[np.random.default_rng(seeds[k]).choice(canon.size, max_rows, replace=False)])
        got = mahalanobis_sq(np.take(data.values, rows[chosen], axis=0)[:, idx], m.means[k][idx], cov)
        if got is not None:
            plotted.append(rows[chosen])
            distances.append(got)
            marks.append(flags[k][chosen])
    at = np.concatenate(plotted) if plotted else np.zeros(0, dtype=np.intp)
    return {
        "row_label": data.row_labels[at],
        "class": np.asarray(data.classes, dtype=object)[data.codes[at]],
        "classical_squared_distance": np.concatenate(distances) if distances else np.zeros(0),
        "flagged": np.concatenate(marks) if marks else np.zeros(0, dtype=bool),
        "df": int(idx.size),
    }
