"""Check ``outliers``: rows far from their own class by robust distance, and whether they matter.

The per-class fits come from :func:`discaudit.checks._robust.robust_fits` (shared with the
normality check, computed once): ties screened first, FAST-MCD on the continuous part (classical
for small classes), and a row is flagged only when it lies beyond the Gaussian cut-off *and* far
out among the class's own distances, so the tail of a skewed class is not read as contamination.
When the rows held are a sample, every row of the input is scored through the data's row pass,
block by block, and the blocks' tallies add up exactly. :func:`judge` measures the influence of the
flagged rows on what LDA estimates (class means, pooled covariance) and sets the status; ties,
exact fits and heavy tails are reported as statements and never make the check fail.
"""

from __future__ import annotations

import dataclasses
import functools
import operator
from collections.abc import Callable, Sequence
from dataclasses import dataclass
from typing import TYPE_CHECKING, Any

import numpy as np
import pandas as pd
from scipy import stats as sps

from discaudit.checks._robust import (
    ClassFit,
    RobustFits,
    canonical_layout,
    classical_reference,
    fits_key,
    robust_fits,
    robust_min_rows,
)
from discaudit.dataset import AuditData, RowBlock, RowPass, RowTask
from discaudit.findings import Finding, fmt, fmt_p, names
from discaudit.jsonable import label
from discaudit.stats._linalg import logdet_spd, mahalanobis_sq
from discaudit.stats.blocks import ROW_BLOCK, block_starts
from discaudit.stats.moments import ClassMoments

if TYPE_CHECKING:
    from discaudit.config import Config

KEY = "outliers"
#: Flagged rows listed in the details per class, farthest first (all of them are in the arrays).
MAX_LISTED_ROWS = 100
#: Rows named in the summary.
SUMMARY_ROWS = 3
#: Classes named in a summary statement about ties.
SUMMARY_CLASSES = 2


@dataclass(frozen=True)
class ClassOutcome:
    """What scoring the rows of one class found (counts over every scored row)."""

    n: int
    n_beyond_cutoff: int
    n_flagged: int
    listed: list[dict[str, Any]]
    kept_mean: np.ndarray | None
    kept_scatter: np.ndarray | None
    masked: int


def row_ref(row: Any, cls: Any) -> str:
    """How a sentence names a row: ``row 152, class benign``."""
    return f"row {row}, class {cls}"


def _listed(d: np.ndarray, d_classical: np.ndarray, flagged: np.ndarray, labels: Any) -> list[dict[str, Any]]:
    """The farthest flagged rows (ties by row label), as detail records."""
    idx = np.flatnonzero(flagged)
    keys = sorted(idx.tolist(), key=lambda i: (-float(d[i]), str(labels[i])))[:MAX_LISTED_ROWS]
    return [
        {
            "row": label(labels[i]),
            "squared_distance": float(d[i]),
            "classical_squared_distance": float(d_classical[i]),
        }
        for i in keys
    ]


def _scatter_about(X: np.ndarray, rows: np.ndarray, centre: np.ndarray) -> tuple[np.ndarray, np.ndarray]:
    """Column sums and centred cross-products of ``X[rows]`` about ``centre``, a block at a time."""
    p = X.shape[1]
    total, cross = np.zeros(p), np.zeros((p, p))
    for a in block_starts(rows.size):
        part = np.take(X, rows[a : a + ROW_BLOCK], axis=0)
        total += part.sum(axis=0)
        part -= centre
        cross += part.T @ part
    return total, cross


def _kept_moments(
    total: np.ndarray, cross: np.ndarray, n_kept: int, centre: np.ndarray
) -> tuple[np.ndarray | None, np.ndarray | None]:
    """Mean and scatter (about their own mean) of the kept rows from sums about ``centre``."""
    if n_kept < 2:
        return None, None
    mean = total / n_kept
    delta = mean - centre
    return mean, cross - n_kept * np.outer(delta, delta)


def _kept_from_out(
    moments: ClassMoments,
    k: int,
    n_out: int,
    total_out: np.ndarray,
    cross_out: np.ndarray,
    direct: Callable[[], tuple[np.ndarray, np.ndarray]],
) -> tuple[np.ndarray | None, np.ndarray | None]:
    """Mean and scatter of class k without some rows, from the class's exact moments and the sums
    of the rows left out (``total_out`` about the origin, ``cross_out`` about the class mean m).

    Sum_kept (x - m)(x - m)' = S - sum_out (x - m)(x - m)', so only the rows left out are read.
    When they carry nearly all of the scatter the difference would lose its digits to
    cancellation; ``direct()`` then sums the kept rows themselves (column sums and cross-products
    about m).
    """
    centre, n = moments.means[k], int(moments.counts[k])
    total_kept = centre * n - total_out
    cross = moments.scatter[k] - cross_out
    if not np.trace(cross) > 1e-8 * np.trace(moments.scatter[k]):
        total_kept, cross = direct()
    return _kept_moments(total_kept, cross, n - n_out, centre)


def _without(data: AuditData, k: int, out: np.ndarray) -> tuple[np.ndarray | None, np.ndarray | None]:
    """Mean and scatter of class k without the held rows ``out`` (:func:`_kept_from_out`)."""
    centre = data.moments.means[k]
    total_out, cross_out = _scatter_about(data.values, out, centre)

    def direct() -> tuple[np.ndarray, np.ndarray]:
        kept = np.setdiff1d(data.class_rows(k), out, assume_unique=True)
        return _scatter_about(data.values, kept, centre)

    return _kept_from_out(data.moments, k, out.size, total_out, cross_out, direct)


def _per_class_lines(classes: Any, fits: Sequence[ClassFit]) -> dict[str, Any]:
    """The per-class entries of the outlier arrays: class labels, cut-offs, far-out fences and df.

    Indexed by the class code each row carries (``code``), so the per-row arrays hold only what
    differs from row to row. A class without a fit keeps an infinite cut-off and fence and df 0.
    """
    K = len(classes)
    cutoff, fence, df = np.full(K, np.inf), np.full(K, np.inf), np.zeros(K, dtype=np.int64)
    for fit in fits:
        cutoff[fit.code] = fit.cutoff
        fence[fit.code] = fit.fence.fence if fit.fence is not None else np.inf
        df[fit.code] = fit.df
    return {"classes": np.asarray(classes, dtype=object), "class_cutoff": cutoff, "class_fence": fence, "class_df": df}


def _score_held(data: AuditData, rf: RobustFits) -> tuple[list[ClassOutcome], dict[str, Any]]:
    """Outcomes and per-row arrays for the rows held in ``data``."""
    n = data.n
    arrays: dict[str, Any] = {
        "row_label": data.row_labels,
        "code": data.codes,
        "squared_distance": np.zeros(n),
        "classical_squared_distance": np.full(n, np.nan),
        "beyond_cutoff": np.zeros(n, dtype=bool),
        "flagged": np.zeros(n, dtype=bool),
        **_per_class_lines(data.classes, rf.fits),
    }
    outcomes = []
    for fit, d, d_classical, beyond, flagged in zip(
        rf.fits, rf.distances, rf.classical, rf.beyond_cutoff, rf.flagged, strict=True
    ):
        rows = data.class_rows(fit.code)
        arrays["squared_distance"][rows] = d
        arrays["classical_squared_distance"][rows] = d_classical
        arrays["beyond_cutoff"][rows] = beyond
        arrays["flagged"][rows] = flagged
        kept_mean = kept_scatter = None
        if flagged.any():
            kept_mean, kept_scatter = _without(data, fit.code, rows[flagged])
        masked = int((flagged & (d_classical <= fit.threshold)).sum())
        outcomes.append(
            ClassOutcome(
                int(rows.size),
                int(beyond.sum()),
                int(flagged.sum()),
                _listed(d, d_classical, flagged, data.row_labels[rows]),
                kept_mean,
                kept_scatter,
                masked,
            )
        )
    arrays["fits"] = rf.fits
    return outcomes, arrays


@dataclass(frozen=True)
class OutlierTally:
    """Scoring counts of some rows, per class; tallies of disjoint blocks add up exactly.

    Of the flagged rows only their sums are kept (``out_sum`` about the origin, ``out_cross`` about
    the class mean): the kept rows' moments are the class's exact moments minus these
    (:func:`_kept_from_out`), so no block sums the many kept rows.
    """

    n: np.ndarray
    n_beyond: np.ndarray
    n_flagged: np.ndarray
    masked: np.ndarray
    out_sum: np.ndarray
    out_cross: np.ndarray
    listed: list[list[dict[str, Any]]]
    flagged: pd.DataFrame

    def __add__(self, other: OutlierTally) -> OutlierTally:
        listed = [
            sorted(a + b, key=lambda r: (-r["squared_distance"], str(r["row"])))[:MAX_LISTED_ROWS]
            for a, b in zip(self.listed, other.listed, strict=True)
        ]
        return OutlierTally(
            self.n + other.n,
            self.n_beyond + other.n_beyond,
            self.n_flagged + other.n_flagged,
            self.masked + other.masked,
            self.out_sum + other.out_sum,
            self.out_cross + other.out_cross,
            listed,
            pd.concat([self.flagged, other.flagged], ignore_index=True),
        )


_FLAGGED_COLUMNS = ["row_label", "code", "squared_distance", "classical_squared_distance"]


@dataclass(frozen=True)
class _Scoring:
    """What scoring a block needs besides the block: the fits, the class means, and each fit's
    classical mean and covariance (computed once, not per block)."""

    moments: ClassMoments
    fits: tuple[ClassFit, ...]
    classical: tuple[tuple[np.ndarray, np.ndarray] | None, ...]

    @classmethod
    def of(cls, moments: ClassMoments, fits: tuple[ClassFit, ...]) -> _Scoring:
        return cls(moments, fits, tuple(classical_reference(moments, fit.code, fit.columns) for fit in fits))

    def flags(self, k: int, X: np.ndarray) -> tuple[np.ndarray, np.ndarray]:
        """Robust squared distances of the rows ``X`` of fit ``k``'s class and whether each is flagged."""
        fit = self.fits[k]
        on = X if fit.columns.size == X.shape[1] else X[:, fit.columns]
        d = mahalanobis_sq(on, fit.location, fit.covariance) if fit.usable else None
        if d is None:
            d = np.zeros(X.shape[0])
        return d, d > fit.threshold


def _tally_block(scoring: _Scoring, block: RowBlock) -> OutlierTally:
    """Score every row of one block against the fits.

    Classical distances are computed for the flagged rows only: they are all the tally reports
    of them (the masked count and the listed rows).
    """
    moments, fits = scoring.moments, scoring.fits
    K, p = len(fits), block.values.shape[1]
    n, n_beyond, n_flagged, masked = (np.zeros(K, dtype=np.int64) for _ in range(4))
    out_sum = np.zeros((K, p))
    out_cross = np.zeros((K, p, p))
    listed: list[list[dict[str, Any]]] = [[] for _ in fits]
    parts = [pd.DataFrame(columns=_FLAGGED_COLUMNS)]
    for k, fit in enumerate(fits):
        rows = np.flatnonzero(block.codes == fit.code)
        if rows.size == 0:
            continue
        X = block.values[rows]
        n[k] = rows.size
        d, flags = scoring.flags(k, X)
        n_beyond[k] = int((d > fit.cutoff).sum()) if fit.usable else 0
        n_flagged[k] = int(flags.sum())
        d_classical = np.full(rows.size, np.nan)
        if n_flagged[k] == 0:
            continue
        out = np.flatnonzero(flags)
        classical = scoring.classical[k]
        got = mahalanobis_sq(X[out][:, fit.columns], *classical) if classical is not None else None
        if got is not None:
            d_classical[out] = got
        masked[k] = int((d_classical[out] <= fit.threshold).sum())
        out_sum[k], out_cross[k] = _scatter_about(X, out, moments.means[fit.code])
        listed[k] = _listed(d, d_classical, flags, block.row_labels[rows])
        parts.append(
            pd.DataFrame(
                {
                    "row_label": block.row_labels[rows][flags],
                    "code": fit.code,
                    "squared_distance": d[flags],
                    "classical_squared_distance": d_classical[flags],
                }
            )
        )
    flagged = pd.concat(parts, ignore_index=True) if len(parts) > 1 else parts[0]
    return OutlierTally(n, n_beyond, n_flagged, masked, out_sum, out_cross, listed, flagged)


def _kept_block(scoring: _Scoring, k: int, block: RowBlock) -> tuple[np.ndarray, np.ndarray]:
    """Column sums and cross-products about the class mean of the kept (unflagged) rows of fit
    ``k``'s class in one block."""
    code = scoring.fits[k].code
    X = block.values[block.codes == code]
    _, flags = scoring.flags(k, X)
    return _scatter_about(X, np.flatnonzero(~flags), scoring.moments.means[code])


def _add_pairs(a: tuple[np.ndarray, np.ndarray], b: tuple[np.ndarray, np.ndarray]) -> tuple[np.ndarray, np.ndarray]:
    return a[0] + b[0], a[1] + b[1]


def _score_tally(
    data: AuditData, rows_pass: RowPass, scoring: _Scoring, tally: OutlierTally
) -> tuple[list[ClassOutcome], dict[str, Any]]:
    """Outcomes and flagged-row arrays from the tally of every row.

    Raises
    ------
    RuntimeError
        When the row pass scored a different number of rows of a class than the moments count
        (the input changed between its reads): the kept rows' moments would then be wrong.
    """
    outcomes = []
    m = data.moments
    for k, fit in enumerate(scoring.fits):
        if int(tally.n[k]) != int(m.counts[fit.code]):
            raise RuntimeError(
                f"the row pass read {int(tally.n[k])} rows of class {label(m.classes[fit.code])} where the first "
                f"read counted {int(m.counts[fit.code])}: the input changed between its two reads"
            )
        mean, scatter = (None, None)
        if tally.n_flagged[k]:
            mean, scatter = _kept_from_out(
                m,
                fit.code,
                int(tally.n_flagged[k]),
                tally.out_sum[k],
                tally.out_cross[k],
                functools.partial(rows_pass.map_reduce, functools.partial(_kept_block, scoring, k), _add_pairs),
            )
        outcomes.append(
            ClassOutcome(
                int(tally.n[k]),
                int(tally.n_beyond[k]),
                int(tally.n_flagged[k]),
                tally.listed[k],
                mean,
                scatter,
                int(tally.masked[k]),
            )
        )
    rows = tally.flagged
    n = len(rows)
    arrays = {
        "row_label": pd.Index(rows["row_label"]),
        "code": rows["code"].to_numpy(dtype=np.intp),
        "squared_distance": rows["squared_distance"].to_numpy(dtype=float),
        "classical_squared_distance": rows["classical_squared_distance"].to_numpy(dtype=float),
        "beyond_cutoff": np.ones(n, dtype=bool),
        "flagged": np.ones(n, dtype=bool),
        **_per_class_lines(m.classes, scoring.fits),
        "fits": scoring.fits,
    }
    return outcomes, arrays


# -- the judgement ------------------------------------------------------------------------------


def _ties_details(data: AuditData, fit: ClassFit) -> dict[str, Any]:
    """The features left out of one class's fit, each with why."""
    t = fit.ties
    out: dict[str, Any] = {}
    for j, feature in enumerate(data.features):
        if t.kept[j]:
            continue
        if t.exact_fit[j]:
            reason = "modal value held by at least the h rows a robust fit rests on (exact fit)"
        elif t.few_values[j]:
            reason = "few distinct values"
        else:
            reason = "strongly skewed"
        out[feature] = {
            "reason": reason,
            "distinct_values": int(t.distinct[j]),
            "modal_value": float(t.modal_value[j]),
            "rows_at_modal_value": int(t.modal_count[j]),
            "octile_skewness": float(fit.skewness[j]),
        }
    return out


def _class_details(
    data: AuditData, config: Config, fit: ClassFit, out: ClassOutcome, pooled: np.ndarray, pooled_ok: bool
) -> dict[str, Any]:
    m = data.moments
    k = fit.code
    p = data.p
    shift = noise = 0.0
    if out.n_flagged and out.kept_mean is not None and pooled_ok:
        d = mahalanobis_sq((out.kept_mean - m.means[k])[None, :], np.zeros(p), pooled)
        shift = float(np.sqrt(d[0])) if d is not None else 0.0
        f = out.n_flagged / out.n
        noise = float(np.sqrt(p * f / ((1.0 - f) * out.n))) if f < 1 else 0.0
    tail_share = float(sps.norm.sf(config.outlier_far_out_mads))
    details: dict[str, Any] = {
        "n": out.n,
        "method": fit.method,
        "features_used": [data.features[j] for j in fit.columns],
        "left_out_of_fit": _ties_details(data, fit),
        "exact_fit": fit.exact_fit,
        "cutoff": fit.cutoff if fit.usable else None,
        "cutoff_rule": fit.cutoff_rule,
        "far_out_fence": fit.fence.fence if fit.fence is not None else None,
        "n_beyond_cutoff": out.n_beyond_cutoff,
        "fraction_beyond_cutoff": out.n_beyond_cutoff / out.n if out.n else 0.0,
        "beyond_cutoff_p_value": float(sps.binom.sf(out.n_beyond_cutoff - 1, out.n, 1.0 - config.outlier_quantile))
        if out.n and fit.usable
        else 1.0,
        "n_flagged": out.n_flagged,
        "fraction_flagged": out.n_flagged / out.n if out.n else 0.0,
        "excess_flagged_p_value": float(sps.binom.sf(out.n_flagged - 1, out.n, tail_share)) if out.n else 1.0,
        "flagged_rows": out.listed,
        "n_listed": len(out.listed),
        "mean_shift": shift,
        "mean_shift_noise": noise,
        "mean_shift_beyond_noise": float(np.sqrt(max(shift**2 - noise**2, 0.0))),
        "masked_by_classical": out.masked,
    }
    if fit.exact_fit:
        off = np.asarray(fit.info.get("off_hyperplane", []), dtype=np.intp)
        order = np.argsort([str(data.row_labels[i]) for i in off], kind="stable")
        details["hyperplane"] = {
            **fit.info.get("hyperplane", {}),
            "n_off_hyperplane": int(off.size),
            "rows_off_hyperplane": [label(data.row_labels[i]) for i in off[order][:MAX_LISTED_ROWS]],
        }
    internals = {k: v for k, v in fit.info.items() if k not in ("hyperplane", "off_hyperplane")}
    if fit.fence is not None:
        internals["fence_centre_cube_root"] = fit.fence.centre
        internals["fence_spread_cube_root"] = fit.fence.spread
    details["fit_internals"] = internals
    return details


_REASONS = {
    "exact_fit": "for an exact fit",
    "few distinct values": "with few distinct values",
    "strongly skewed": "strongly skewed",
}


def left_out_counts(per_class: dict[Any, Any]) -> dict[str, int]:
    """How many (feature, class) pairs are left out of a class's fit, by reason."""
    counts = dict.fromkeys(_REASONS, 0)
    for v in per_class.values():
        for t in v["left_out_of_fit"].values():
            counts["exact_fit" if t["reason"].endswith("(exact fit)") else t["reason"]] += 1
    return counts


def _tie_statements(per_class: dict[Any, Any], rank: dict[Any, int], counts: dict[str, int]) -> list[str]:
    """Sentences about features left out of a class's fit (the largest exact-fit share as the example) and exact fits."""
    parts = []
    exact = sorted(
        ((t["rows_at_modal_value"] / v["n"], rank[cls], cls, f, t, v["n"]) for cls, v in per_class.items()
         for f, t in v["left_out_of_fit"].items() if t["reason"].endswith("(exact fit)")),
        key=lambda r: (-r[0], r[1], r[3]),
    )  # fmt: skip
    if exact:
        _, _, cls, feature, t, n = exact[0]
        parts.append(
            f"{t['rows_at_modal_value']} of {n} rows of class {cls} share {feature} {fmt(t['modal_value'], 6)}: a "
            "robust fit on it would be exact on that hyperplane, so distances off it would not be outlyingness, and "
            "it is left out of that class's fit"
        )
    total = sum(counts.values())
    if total > len(exact[:1]):
        kinds = ", ".join(f"{n} {_REASONS[k]}" for k, n in counts.items() if n)
        skewed = sorted(
            ((abs(t["octile_skewness"]), rank[cls], cls, f, t) for cls, v in per_class.items()
             for f, t in v["left_out_of_fit"].items() if t["reason"] == "strongly skewed"),
            key=lambda r: (-r[0], r[1], r[3]),
        )  # fmt: skip
        example = ""
        if skewed:
            _, _, cls, feature, t = skewed[0]
            example = (
                f"; the most skewed, {feature} in class {cls} (octile skewness {fmt(t['octile_skewness'])}), would "
                "have its long tail read as outliers on its raw scale (a log or similar transform may suit it)"
            )
        parts.append(f"{total} feature-class pairs are left out of the robust fits ({kinds}){example}")
    for cls, v in per_class.items():
        if v["exact_fit"]:
            plane = v.get("hyperplane", {})
            off = plane.get("rows_off_hyperplane", [])
            listed = f" ({names([f'row {r}' for r in off], 3)})" if off else ""
            parts.append(
                f"in class {cls}, {plane.get('n_on_hyperplane', '?')} of {plane.get('fit_rows', v['n'])} fitted rows "
                "lie on one hyperplane (a linear relation among its features, see the details): the robust fit is "
                "exact on it, so distances from it do not measure outlyingness and nothing in the class is flagged; "
                f"{plane.get('n_off_hyperplane', 0)} off it{listed}"
            )
    return parts


def _tail_statement(per_class: dict[Any, Any], config: Config, rank: dict[Any, int]) -> str | None:
    """Classes whose rows lie beyond the Gaussian cut-off in bulk without being far out: a heavy tail."""
    heavy = [
        (v["fraction_beyond_cutoff"], cls, v)
        for cls, v in per_class.items()
        if v["fraction_beyond_cutoff"] > config.outlier_fraction_warn and v["beyond_cutoff_p_value"] < 0.001
    ]
    if not heavy:
        return None
    heavy.sort(key=lambda t: (-t[0], rank[t[1]]))
    share, cls, v = heavy[0]
    n_more = len(heavy) - 1
    more = f" (likewise in {n_more} more class{'es' if n_more > 1 else ''})" if n_more else ""
    return (
        f"{v['n_beyond_cutoff']} of {v['n']} rows of class {cls} ({fmt(100 * share, 3)}%) lie beyond the Gaussian "
        f"cut-off{more}, far more than a Gaussian tail gives ({fmt_p(v['beyond_cutoff_p_value'])}), but only those "
        "also far out among the class's own distances are flagged: the rest is the shape of the class (see the "
        "normality check), not contamination"
    )


def _farthest(per_class: dict[Any, Any], total: int) -> str:
    rows = sorted(
        ((r["squared_distance"], str(r["row"]), c, r["row"]) for c, v in per_class.items() for r in v["flagged_rows"]),
        key=lambda t: (-t[0], t[1]),
    )
    if not rows:
        return ""
    shown = [row_ref(row, c) for _, _, c, row in rows[:SUMMARY_ROWS]]
    rest = total - len(shown)
    return "farthest: " + "; ".join(shown) + (f"; and {rest} more" if rest > 0 else "")


def judge(
    data: AuditData, config: Config, fits: list[ClassFit], outcomes: list[ClassOutcome], arrays: dict[str, Any]
) -> Finding:
    """Influence of the flagged rows on LDA's estimates, the statements, and the status."""
    m = data.moments
    p = data.p
    pooled = m.pooled_covariance
    ld_classical = logdet_spd(pooled)
    pooled_ok = bool(np.isfinite(ld_classical))
    per_class: dict[Any, Any] = {}
    kept_scatter = np.zeros((p, p))
    n_kept = 0
    for fit, out in zip(fits, outcomes, strict=True):
        per_class[label(data.classes[fit.code])] = _class_details(data, config, fit, out, pooled, pooled_ok)
        if out.kept_scatter is not None:
            kept_scatter += out.kept_scatter
            n_kept += out.n - out.n_flagged
        else:
            kept_scatter += m.scatter[fit.code]
            n_kept += out.n
    total = sum(o.n_flagged for o in outcomes)
    n_rows = int(m.n_total)
    ld_kept = logdet_spd(kept_scatter / max(n_kept - m.n_classes, 1)) if total else ld_classical
    excess = (ld_classical - ld_kept) / p if pooled_ok and np.isfinite(ld_kept) else float("nan")
    inflation = float(np.expm1(excess)) if np.isfinite(excess) else float("nan")
    shifts = [v["mean_shift_beyond_noise"] for v in per_class.values()]
    max_shift = max(shifts, default=0.0)
    details: dict[str, Any] = {
        "n_rows": n_rows,
        "n_flagged": total,
        "n_beyond_cutoff": sum(o.n_beyond_cutoff for o in outcomes),
        "max_mean_shift": max_shift,
        "pooled_logdet_excess_per_feature": excess,
        "pooled_variance_inflation": inflation,
        "per_class": per_class,
        "robust_fit_rule": f"reweighted FAST-MCD for classes with at least {robust_min_rows(p, config)} rows "
        f"({config.robust_min_rows_per_feature:g} per feature used, at least 2(p+1)), classical distances "
        f"otherwise; features with fewer than {config.robust_min_distinct} distinct values in a class, or whose most "
        "common value is held by at least the h rows of the fit, are left out of that class's fit",
        "flag_rule": "a row is flagged when its squared distance exceeds the class's cut-off and its far-out fence "
        f"(median + {fmt(config.outlier_far_out_mads)} normalized MADs of the cube roots of the class's squared "
        "distances, cubed)",
        "squared_distance": "squared Mahalanobis distance from the class's own robust (or classical) centre and "
        "covariance, on the features the class's fit used",
        "influence": "mean_shift: distance between the class mean with and without its flagged rows, in "
        "pooled-Mahalanobis units over every feature; mean_shift_noise: the shift expected from dropping that share "
        "of rows at random, sqrt(p f / ((1-f) n)); statuses use the shift beyond that noise. "
        "pooled_logdet_excess_per_feature: (log det of the pooled covariance of all rows - log det of the pooled "
        "covariance without the flagged rows) / p, positive when the flagged rows widen it; "
        "pooled_variance_inflation: exp of that minus 1, the widening of the pooled variance per direction "
        "(geometric mean over directions). excess_flagged_p_value: binomial test of more flagged rows than a "
        "Gaussian class puts beyond the fence",
        "thresholds": {
            "quantile": config.outlier_quantile,
            "cutoff": config.outlier_cutoff,
            "far_out_mads": config.outlier_far_out_mads,
            "min_distinct": config.robust_min_distinct,
            "fraction_warn": config.outlier_fraction_warn,
            "mean_shift_warn": config.outlier_mean_shift_warn,
            "mean_shift_fail": config.outlier_mean_shift_fail,
            "logdet_warn": config.outlier_logdet_warn,
            "logdet_fail": config.outlier_logdet_fail,
        },
    }
    figure = f"{total} flagged ({fmt(100 * total / n_rows, 2)}%)"
    if not np.isfinite(excess) or excess <= 0:
        widening = "do not widen the pooled covariance"
    else:
        widening = f"widen the pooled variance by {fmt(100 * inflation, 3)}% per direction"
    influence = (
        f"class means move up to {fmt(max_shift)} pooled SD beyond sampling noise and the flagged rows {widening}"
    )
    _, ranks = canonical_layout(data)  # ties between classes are broken by content, never by name
    rank = {label(data.classes[k]): ranks[k] for k in range(len(data.classes))}
    counts = left_out_counts(per_class)
    details["left_out_of_fit_counts"] = counts
    details["n_left_out_of_fit"] = sum(counts.values())
    details["n_heavy_tailed_classes"] = sum(
        v["fraction_beyond_cutoff"] > config.outlier_fraction_warn and v["beyond_cutoff_p_value"] < 0.001
        for v in per_class.values()
    )
    statements = _tie_statements(per_class, rank, counts)
    tail = _tail_statement(per_class, config, rank)
    if tail:
        statements.append(tail)
    extra = "".join(f"; {s}" for s in statements)
    far = _farthest(per_class, total)
    big_excess = bool(np.isfinite(excess) and excess > config.outlier_logdet_fail)
    if total and (max_shift > config.outlier_mean_shift_fail or big_excess):
        return Finding(
            KEY,
            "fail",
            f"{total} of {n_rows} rows {'lies' if total == 1 else 'lie'} far out from their class ({far}) and {'distorts' if total == 1 else 'distort'} LDA's estimates: {influence}"
            f"{extra}.",
            details,
            figure,
            arrays,
        )
    wide = [
        (v["fraction_flagged"], c)
        for c, v in per_class.items()
        if v["fraction_flagged"] > config.outlier_fraction_warn and v["excess_flagged_p_value"] < 0.001
    ]
    some_excess = bool(np.isfinite(excess) and excess > config.outlier_logdet_warn)
    if total and (max_shift > config.outlier_mean_shift_warn or some_excess or wide):
        share = ""
        if wide:
            fraction, cls = max(wide, key=lambda t: (t[0], -rank[t[1]]))
            share = f"{fmt(100 * fraction, 3)}% of class {cls} is flagged; "
        return Finding(
            KEY,
            "warn",
            f"{total} of {n_rows} rows {'lies' if total == 1 else 'lie'} far out from their class ({far}); {share}{influence}{extra}.",
            details,
            figure,
            arrays,
        )
    if total:
        head = f"{total} of {n_rows} rows {'lies' if total == 1 else 'lie'} far out from their class ({far}), with little influence: {influence}"
    else:
        head = f"No row lies far out from its class (0 of {n_rows} flagged)"
    return Finding(KEY, "pass", head + extra + ".", details, figure, arrays)


def row_task(data: AuditData, config: Config, random_state: int | None = None) -> RowTask[OutlierTally] | None:
    """The scoring of every row against the fits, when the rows held are a sample of an input that can
    be read again (else None: the rows held are scored, or there is nothing to score)."""
    if data.sample is None or data.all_rows is None:
        return None
    rf = robust_fits(data, config, random_state)
    if not any(f.columns.size for f in rf.fits):
        return None
    scoring = _Scoring.of(data.moments, tuple(rf.fits))
    return RowTask((KEY, fits_key(config, random_state)), functools.partial(_tally_block, scoring), operator.add)


def run(data: AuditData, config: Config, random_state: int | None = None) -> Finding:
    """Flag rows far from their own class by robust distance, and measure their influence on LDA.

    Each class with at least ``robust_min_rows_per_feature`` rows per feature it uses gets a
    reweighted FAST-MCD fit (Rousseeuw & Van Driessen 1999) on its continuous features; smaller
    classes fall back to classical distances from the class mean and covariance (noted). A row is
    flagged beyond both its class's cut-off (``outlier_cutoff``, Rousseeuw & van Zomeren 1990) and
    its far-out fence (``outlier_far_out_mads``). Influence on what LDA uses: the shift of each
    class mean when its flagged rows are removed, in pooled-Mahalanobis units, and the per-feature
    log-determinant excess of the pooled covariance of all rows over the one without the flagged
    rows. Fails when the flagged rows move a mean by more than ``outlier_mean_shift_fail`` or
    widen the pooled covariance beyond ``outlier_logdet_fail``; warns above the warn thresholds or
    when more than ``outlier_fraction_warn`` of a class is flagged. Ties, exact fits and heavy
    tails are stated, never failed.

    When the data hold a per-class sample of a larger input, the fits use the sample and every
    row of the input is scored through ``data.all_rows`` (the flagged rows are then exact row
    labels of the input); without a row pass the rows of the sample are scored, and the
    finding says so.
    """
    rf = robust_fits(data, config, random_state)
    if not any(f.columns.size for f in rf.fits):
        left = sorted({data.features[j] for f in rf.fits for j in np.flatnonzero(~f.ties.kept)})
        return Finding(
            KEY,
            "skip",
            "Every feature takes few distinct values within each class (or one value for most rows), so distances "
            "from a class centre say nothing about outlying rows.",
            {"left_out_of_fit": left, "min_distinct": config.robust_min_distinct},
            "-",
        )
    extra: dict[str, Any] = {}
    task = row_task(data, config, random_state)
    if task is not None and data.all_rows is not None:
        scoring = _Scoring.of(data.moments, tuple(rf.fits))
        outcomes, arrays = _score_tally(data, data.all_rows, scoring, data.pass_result(task))
        extra["scored_rows"] = (
            "every row of the input (second pass), against robust fits and far-out fences from the sample"
        )
    else:
        outcomes, arrays = _score_held(data, rf)
        if data.sample is not None:
            extra["scored_rows"] = (
                "flagged rows come from the per-class sample only: pass a function returning the chunks to score every row"
            )
    finding = judge(data, config, rf.fits, outcomes, arrays)
    return dataclasses.replace(finding, details={**finding.details, **extra}) if extra else finding
