"""A batch against its accepted baseline: what changed, and whether it matters.

The baseline is the JSON report of a run a team accepted (``discaudit check DATA --target COL
--write-baseline accepted.json``). Besides the findings and the recommendation, the report
carries the exact per-class moments (``meta.class_moments``: rows, mean and unbiased covariance
of every class, written by :func:`class_moments_record`), so a later batch can be compared with
it without the accepted rows.

What counts as drift (each item is a :class:`~discaudit.verdict.Drift`; ``counts`` says whether
it fails the comparison):

* the audited features differ;
* the recommendation changed, unless the two models were within noise of each other in both
  reports (a near tie that flipped: noted, not counted);
* a check that matters for the gated model (``Config.model``; without one, the model the
  baseline recommended) got worse (pass -> warn -> fail; :data:`discaudit.decision.gate.MATTERS`)
  and now reaches the gate's level (``Config.fail_on``, or the check's own lower level, e.g.
  ``separation`` at warn for unpenalized logistic regression); a check that got worse below that
  level, or that does not bear on the model, is noted, not counted;
* a class appeared or vanished;
* the class shares moved: the largest move exceeds ``Config.baseline_prior_tolerance`` and the
  chi-square test of equal shares is significant;
* a class mean moved: Hotelling's T^2 is significant and the Mahalanobis distance of the shift is
  at least ``Config.baseline_mean_shift`` pooled standard deviations;
* a class covariance changed: Box's M is significant and the typical variance ratio is at least
  ``Config.baseline_spread_ratio``.

Every test is made at ``Config.baseline_alpha`` divided by the number of tests (Bonferroni), so a
fresh batch from the accepted population fails any of them with probability at most
``baseline_alpha``; the effect sizes keep a huge batch from failing on shifts too small to matter.
"""

from __future__ import annotations

import dataclasses
import json
from collections.abc import Mapping, Sequence
from pathlib import Path
from typing import TYPE_CHECKING, Any

import numpy as np

from discaudit.decision.gate import MATTERS, MODEL_WORDS
from discaudit.errors import DataError
from discaudit.findings import STATUS_RANK, fmt, fmt_p
from discaudit.jsonable import label, plain
from discaudit.stats.two_sample import covariance_two_sample, hotelling_two_sample, shares_two_sample
from discaudit.verdict import BaselineComparison, Drift, Verdict

if TYPE_CHECKING:
    from discaudit.config import Config
    from discaudit.stats.moments import ClassMoments

__all__ = ["MOMENTS_MAX_FEATURES", "class_moments_record", "compare", "compare_moments", "load_baseline"]

#: Reports store full class covariances up to this many features (p (p + 1) / 2 numbers per
#: class); above it only means and variances, and the comparison of covariances is skipped.
#: Design choice: 200 features and 10 classes write about 4 MB of JSON.
MOMENTS_MAX_FEATURES = 200
#: The report format this module reads (``schema_version``; see :mod:`discaudit.report.json`).
READS_SCHEMA_VERSION = 1


def class_moments_record(moments: ClassMoments, features: Sequence[str]) -> dict[str, Any]:
    """The per-class moments as the JSON report stores them (``meta.class_moments``)."""
    full = len(features) <= MOMENTS_MAX_FEATURES
    covariances = moments.class_covariances()
    classes = []
    for k, c in enumerate(moments.classes):
        entry: dict[str, Any] = {
            "class": label(c),
            "count": int(moments.counts[k]),
            "mean": moments.means[k].tolist(),
        }
        if full:
            entry["covariance"] = covariances[k].tolist()
        else:
            entry["variance"] = np.diag(covariances[k]).tolist()
        classes.append(entry)
    return {
        "features": list(features),
        "covariance": "unbiased, divisor n_k - 1",
        "full_covariances": full,
        "classes": classes,
    }


def _key(value: Any) -> str:
    return json.dumps(plain(value))


def _shown(value: Any) -> str:
    return str(plain(value))


def load_baseline(path: str | Path) -> dict[str, Any]:
    """An accepted JSON report, checked for what a comparison needs.

    Raises
    ------
    DataError
        Not JSON, not a discaudit report, written by a newer format, or without class moments;
        the message names the file and the key.
    FileNotFoundError
        When the file does not exist.
    """
    path = Path(path)
    text = path.read_text(encoding="utf-8")
    try:
        document = json.loads(text)
    except json.JSONDecodeError as exc:
        raise DataError(f"{path}: not a JSON report (line {exc.lineno}, column {exc.colno}: {exc.msg}).") from None
    if not isinstance(document, dict) or "schema_version" not in document:
        raise DataError(f"{path}: not a discaudit JSON report (no schema_version); write one with --write-baseline.")
    version = document["schema_version"]
    if not isinstance(version, int) or version > READS_SCHEMA_VERSION:
        raise DataError(
            f"{path}: schema_version {version!r} is newer than this discaudit reads ({READS_SCHEMA_VERSION}); "
            "upgrade discaudit or write the baseline again with this version."
        )
    for where in ("findings", "recommendation", "meta"):
        if not isinstance(document.get(where), dict):
            raise DataError(
                f"{path}: key {where!r} missing or not an object; write the baseline with --write-baseline."
            )
    moments = document["meta"].get("class_moments")
    if not isinstance(moments, dict) or not isinstance(moments.get("classes"), list):
        raise DataError(
            f"{path}: no class moments (meta.class_moments); it was written before baselines existed: write it again "
            "with this version (--write-baseline, or Verdict.to_json())."
        )
    return document


def compare(verdict: Verdict, accepted: Mapping[str, Any], config: Config, source: str = "baseline") -> Verdict:
    """The verdict with its comparison with an accepted report attached, and its gate updated.

    Parameters
    ----------
    verdict : Verdict
        The new batch's verdict (its ``meta.class_moments`` are compared).
    accepted : mapping
        The accepted JSON report (:func:`load_baseline`).
    config : Config
        ``model`` and the ``baseline_*`` thresholds.
    source : str
        Where the accepted report came from, for the report.
    """
    accepted_model = str(accepted["recommendation"].get("model", ""))
    judged = config.model or accepted_model
    changes: list[Drift] = []
    changes += _features(accepted, verdict)
    changes += _recommendation(accepted, verdict)
    changes += _checks(accepted, verdict, judged, config)
    drift = compare_moments(accepted["meta"]["class_moments"], verdict.meta["class_moments"], config)
    changes += drift.changes
    changes.sort(key=lambda c: not c.counts)
    drifted = any(c.counts for c in changes)
    counted = [c for c in changes if c.counts]
    if drifted:
        outcome = f"The batch has drifted from the accepted baseline ({source}): " + "; ".join(
            c.summary.rstrip(".") for c in counted
        )
        outcome += "."
    else:
        outcome = (
            f"The batch matches the accepted baseline ({source}) within sampling noise: the same recommendation, no "
            f"check that matters for {MODEL_WORDS.get(judged, judged)} got worse, the same classes, and no class "
            "share, mean or covariance moved beyond noise."
        )
    rule = (
        "compared with the baseline: fails when the features differ, the recommendation changes (a near tie that "
        f"flipped excepted), a check that matters for {MODEL_WORDS.get(judged, judged)} gets worse to a status that "
        f"fails its gate (fail_on {config.fail_on}), a class appears or "
        f"vanishes, or, significant at {fmt(config.baseline_alpha)} family-wise (Bonferroni over {drift.n_tests} "
        f"tests), a class share moves more than {fmt(config.baseline_prior_tolerance)}, a class mean moves at least "
        f"{fmt(config.baseline_mean_shift)} pooled SD (Hotelling's T^2) or a class covariance changes by a typical "
        f"variance ratio of at least {fmt(config.baseline_spread_ratio)} (Box's M)"
    )
    meta = accepted["meta"]
    info = {
        "discaudit_version": accepted.get("discaudit_version"),
        "n_rows": meta.get("n_rows"),
        "classes": meta.get("classes"),
        "recommendation": accepted_model,
        "fingerprint": (meta.get("fingerprint") or {}).get("sha256"),
        "same_data": bool(
            (meta.get("fingerprint") or {}).get("sha256")
            and (meta.get("fingerprint") or {}).get("sha256") == (verdict.meta.get("fingerprint") or {}).get("sha256")
        ),
        "judged_for": judged,
    }
    comparison = BaselineComparison(
        source=source,
        accepted=info,
        drifted=drifted,
        changes=changes,
        classes=drift.classes,
        rule=rule,
        outcome=outcome,
        headline=(
            f"the batch has drifted from the baseline {source}"
            if drifted
            else f"the batch matches the baseline {source} within noise"
        ),
        thresholds={
            "alpha": config.baseline_alpha,
            "tests": drift.n_tests,
            "alpha_per_test": drift.alpha_per_test,
            "mean_shift": config.baseline_mean_shift,
            "spread_ratio": config.baseline_spread_ratio,
            "prior_tolerance": config.baseline_prior_tolerance,
        },
    )
    gate = verdict.gate.with_drift(drifted) if verdict.gate is not None else None
    return dataclasses.replace(verdict, baseline=comparison, gate=gate)


def _features(accepted: Mapping[str, Any], verdict: Verdict) -> list[Drift]:
    before = list(accepted["meta"].get("features") or accepted["meta"]["class_moments"].get("features") or [])
    now = list(verdict.meta.get("features") or [])
    gone = [f for f in before if f not in now]
    new = [f for f in now if f not in before]
    if not gone and not new:
        return []
    parts = ([f"gone: {', '.join(gone[:8])}"] if gone else []) + ([f"new: {', '.join(new[:8])}"] if new else [])
    return [
        Drift(
            "features",
            "features",
            True,
            f"{len(gone)} gone, {len(new)} new",
            f"The audited features differ from the baseline's ({'; '.join(parts)}).",
        )
    ]


def _recommendation(accepted: Mapping[str, Any], verdict: Verdict) -> list[Drift]:
    before = accepted["recommendation"].get("model")
    now = verdict.recommendation.model
    if before == now:
        return []
    tie = now in (accepted["recommendation"].get("close_to") or []) and before in verdict.recommendation.close_to
    words = f"{MODEL_WORDS.get(str(before), before)} -> {MODEL_WORDS.get(now, now)}"
    if tie:
        return [
            Drift(
                "recommendation",
                "recommendation",
                False,
                words,
                f"The recommendation changed ({words}), but the two were within noise of each other in both reports.",
            )
        ]
    return [Drift("recommendation", "recommendation", True, words, f"The recommendation changed ({words}).")]


def _checks(accepted: Mapping[str, Any], verdict: Verdict, model: str, config: Config) -> list[Drift]:
    out = []
    bearings = MATTERS.get(model, {})
    for key, finding in verdict.findings.items():
        old = (accepted["findings"].get(key) or {}).get("status")
        if old not in STATUS_RANK or "skip" in (old, finding.status):
            continue
        if STATUS_RANK[finding.status] <= STATUS_RANK[old]:
            continue
        bearing = bearings.get(key)
        bears = bearing is not None and bearing.fails_at is not None and config.severity_of(key) == "gate"
        # A worse status counts when it reaches the level the gate cares about (Config.fail_on, or the
        # check's own lower level): a pass -> warn flip of a test at alpha = 0.001 across several classes
        # comes up by chance in fresh batches, so at fail_on = "fail" it is noted, not counted.
        own = bearing.fails_at if bearing is not None and bearing.fails_at is not None else "fail"
        level = min(config.fail_on, own, key=STATUS_RANK.__getitem__)
        reaches = STATUS_RANK[finding.status] >= STATUS_RANK[level]
        matters = bears and reaches
        words = f"{old} -> {finding.status}"
        if not bears:
            why = f"; it does not bear on {MODEL_WORDS.get(model, model)}"
        elif not reaches:
            why = f"; below the gate's level ({level}): noted"
        else:
            why = ""
        out.append(
            Drift(
                "check",
                key,
                matters,
                words,
                f"Check {key} got worse ({words}{', ' + finding.figure if finding.figure else ''}){why}.",
            )
        )
    return out


@dataclasses.dataclass(frozen=True)
class MomentDrift:
    """What the moments comparison found: the differences, the per-class table, the tests made."""

    changes: list[Drift]
    classes: list[dict[str, Any]]
    n_tests: int
    alpha_per_test: float


def _arrays(entry: Mapping[str, Any], order: list[int]) -> tuple[int, np.ndarray, np.ndarray | None]:
    mean = np.asarray(entry["mean"], dtype=np.float64)[order]
    cov = entry.get("covariance")
    S = None if cov is None else np.asarray(cov, dtype=np.float64)[np.ix_(order, order)]
    return int(entry["count"]), mean, S


def compare_moments(accepted: Mapping[str, Any], current: Mapping[str, Any], config: Config) -> MomentDrift:
    """Classes, shares, means and covariances of two ``class_moments`` records (see :func:`class_moments_record`).

    Features are matched by name (the common ones, in the current order); classes by label.
    """
    now_features = list(current["features"])
    old_features = list(accepted["features"])
    common = [f for f in now_features if f in old_features]
    old_order = [old_features.index(f) for f in common]
    now_order = [now_features.index(f) for f in common]
    old = {_key(e["class"]): e for e in accepted["classes"]}
    now = {_key(e["class"]): e for e in current["classes"]}
    labels = {**{k: e["class"] for k, e in old.items()}, **{k: e["class"] for k, e in now.items()}}
    keys = list(dict.fromkeys([*old, *now]))
    changes: list[Drift] = []
    for k in keys:
        if k not in now:
            changes.append(
                Drift(
                    "class", _shown(labels[k]), True, "vanished", f"Class {_shown(labels[k])} vanished from the batch."
                )
            )
        elif k not in old:
            changes.append(
                Drift(
                    "class",
                    _shown(labels[k]),
                    True,
                    "appeared",
                    f"Class {_shown(labels[k])} appeared ({int(now[k]['count'])} rows); the baseline has no such class.",
                )
            )
    both = [k for k in keys if k in old and k in now]
    testable = [k for k in both if common and int(old[k]["count"]) >= 2 and int(now[k]["count"]) >= 2]
    n_tests = 1 + 2 * len(testable)
    alpha = config.baseline_alpha / n_tests
    shares = shares_two_sample(
        [int(old[k]["count"]) if k in old else 0 for k in keys], [int(now[k]["count"]) if k in now else 0 for k in keys]
    )
    share_moved = shares.largest_change > config.baseline_prior_tolerance and shares.p_value < alpha
    if share_moved or shares.p_value < alpha or shares.largest_change > config.baseline_prior_tolerance:
        worst = keys[int(np.argmax(np.abs(np.asarray(shares.shares_b) - np.asarray(shares.shares_a))))]
        i = keys.index(worst)
        changes.append(
            Drift(
                "prior",
                _shown(labels[worst]),
                bool(share_moved),
                f"{fmt(shares.shares_a[i])} -> {fmt(shares.shares_b[i])}",
                f"Class {_shown(labels[worst])}'s share moved from {fmt(shares.shares_a[i])} to "
                f"{fmt(shares.shares_b[i])} (chi-square {fmt_p(shares.p_value)}; tolerance "
                f"{fmt(config.baseline_prior_tolerance)})"
                + ("." if share_moved else ", within the tolerance or within noise: not counted."),
            )
        )
    table = []
    for k in keys:
        i = keys.index(k)
        row: dict[str, Any] = {
            "class": labels[k],
            "n_accepted": int(old[k]["count"]) if k in old else 0,
            "n_current": int(now[k]["count"]) if k in now else 0,
            "share_accepted": shares.shares_a[i],
            "share_current": shares.shares_b[i],
            "mean": None,
            "covariance": None,
            "drifted": k not in both,
            "note": None if k in both else ("vanished" if k not in now else "appeared"),
        }
        if k in testable:
            n_a, m_a, S_a = _arrays(old[k], old_order)
            n_b, m_b, S_b = _arrays(now[k], now_order)
            row["mean"], mean_drift = _mean_test(labels[k], n_a, m_a, S_a, n_b, m_b, S_b, alpha, config)
            row["covariance"], cov_drift = _covariance_test(labels[k], n_a, S_a, n_b, S_b, alpha, config)
            changes += [d for d in (mean_drift, cov_drift) if d is not None]
            row["drifted"] = any(d is not None and d.counts for d in (mean_drift, cov_drift))
        elif k in both:
            row["note"] = "fewer than two rows in a batch, or no common feature: not compared"
        table.append(row)
    return MomentDrift(changes, table, n_tests, alpha)


def _mean_test(
    cls: Any,
    n_a: int,
    m_a: np.ndarray,
    S_a: np.ndarray | None,
    n_b: int,
    m_b: np.ndarray,
    S_b: np.ndarray | None,
    alpha: float,
    config: Config,
) -> tuple[dict[str, Any] | None, Drift | None]:
    if S_a is None or S_b is None:
        return {"note": "the baseline stores no covariances (too many features): means not compared"}, None
    try:
        t = hotelling_two_sample(n_a, m_a, S_a, n_b, m_b, S_b)
    except DataError as exc:
        return {"note": f"not compared: {exc}"}, None
    moved = t.p_value < alpha and t.mahalanobis >= config.baseline_mean_shift
    record = {
        "t2": t.statistic,
        "f": t.f,
        "df1": t.df1,
        "df2": t.df2,
        "p_value": t.p_value,
        "mahalanobis": t.mahalanobis,
        "drifted": bool(moved),
    }
    if t.p_value >= alpha:  # within noise: the per-class table shows it
        return record, None
    figure = f"D = {fmt(t.mahalanobis, 2)} SD, {fmt_p(t.p_value)}"
    verdict = "" if moved else f", significant but below {fmt(config.baseline_mean_shift)} SD: too small to matter"
    return record, Drift(
        "mean",
        _shown(cls),
        bool(moved),
        figure,
        f"Class {_shown(cls)}'s mean moved {fmt(t.mahalanobis, 2)} pooled SD (Hotelling's T^2 = {fmt(t.statistic)}, "
        f"{fmt_p(t.p_value)}){verdict}.",
    )


def _covariance_test(
    cls: Any, n_a: int, S_a: np.ndarray | None, n_b: int, S_b: np.ndarray | None, alpha: float, config: Config
) -> tuple[dict[str, Any] | None, Drift | None]:
    if S_a is None or S_b is None:
        return {"note": "the baseline stores no covariances (too many features): not compared"}, None
    try:
        c = covariance_two_sample(n_a, S_a, n_b, S_b)
    except DataError as exc:
        return {"note": f"not compared: {exc}"}, None
    moved = c.p_value < alpha and c.spread_ratio >= config.baseline_spread_ratio
    record = {
        "box_m": c.statistic,
        "chi2": c.chi2,
        "df": c.df,
        "p_value": c.p_value,
        "log_det_ratio": c.log_det_ratio,
        "spread_ratio": c.spread_ratio,
        "variance_ratio_min": c.variance_ratios[0],
        "variance_ratio_max": c.variance_ratios[-1],
        "drifted": bool(moved),
    }
    if c.p_value >= alpha:  # within noise: the per-class table shows it
        return record, None
    figure = f"spread x{fmt(c.spread_ratio, 2)}, {fmt_p(c.p_value)}"
    verdict = "" if moved else f", significant but below x{fmt(config.baseline_spread_ratio)}: too small to matter"
    return record, Drift(
        "covariance",
        _shown(cls),
        bool(moved),
        figure,
        f"Class {_shown(cls)}'s covariance changed: variances x{fmt(c.spread_ratio, 2)} along a typical direction "
        f"(from x{fmt(c.variance_ratios[0], 2)} to x{fmt(c.variance_ratios[-1], 2)}), log-det ratio "
        f"{fmt(c.log_det_ratio, 2)} (Box's M = {fmt(c.statistic)}, {fmt_p(c.p_value)}){verdict}.",
    )
