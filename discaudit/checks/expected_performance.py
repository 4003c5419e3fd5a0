"""Check ``expected_performance``: predicted held-out accuracy and log-loss of the four candidates.

The Gaussian candidates (LDA, shrinkage LDA, QDA) are scored by exact leave-one-out from the
class moments and one pass over the rows (Lachenbruch & Mickey 1968;
:mod:`discaudit.stats.leave_one_out`), each exactly as the estimator the recommendation would hand
out: LDA as scikit-learn's svd solver; shrinkage LDA and QDA behind a StandardScaler, over a small
grid of intensities and ``reg_param`` values, the one with the lowest leave-one-out log-loss kept.
Logistic regression cannot be scored from the moments; it is scored by stratified
cross-validation of an L2-penalized fit on a seeded, class-proportional subsample
(:mod:`discaudit.stats.logistic`), and compared with the Gaussian candidates row by row on the
same rows, so every difference has a paired standard error.

The finding states, for every candidate, its predicted accuracy and log-loss with standard
errors, the settings it was scored at, and which candidates are within noise of the best
(``Config.performance_switch_se`` paired standard errors). It measures; the decision
(:mod:`discaudit.decision`) chooses.
"""

from __future__ import annotations

import functools
import operator
from dataclasses import dataclass
from typing import TYPE_CHECKING, Any

import numpy as np

from discaudit.dataset import AuditData, RowBlock
from discaudit.findings import Finding, fmt, skipped
from discaudit.stats.leave_one_out import LeaveOneOutResult, LeaveOneOutScorer, LeaveOneOutTally
from discaudit.stats.logistic import cross_validated_logistic
from discaudit.stats.seeds import LOGISTIC_CV, stream_rng

if TYPE_CHECKING:
    from discaudit.config import Config

KEY = "expected_performance"

#: Candidates from the most to the least efficient under the Gaussian model: the order in which
#: a tie is broken (Efron 1975: under Gaussian classes with a shared covariance LDA needs fewer
#: rows than logistic regression for the same error; shrinkage and QDA add bias or parameters).
CANDIDATES = ("lda", "regularized_lda", "qda", "logistic_regression")
#: Shrinkage intensities scored for shrinkage LDA (on standardized features); the lowest
#: leave-one-out log-loss wins. A coarse grid on [0, 1] in roughly doubling steps (design choice).
SHRINKAGE_GRID = (0.01, 0.03, 0.1, 0.2, 0.4, 0.7)
#: QDA ``reg_param`` values scored (on standardized features), as in scikit-learn's documentation
#: examples' range; the lowest leave-one-out log-loss wins (design choice).
QDA_REG_GRID = (0.0, 0.01, 0.05, 0.1, 0.3, 0.6, 0.9)
#: Inverse penalties scored for logistic regression; the lowest cross-validated log-loss wins.
LOGISTIC_C_GRID = (0.01, 0.1, 1.0, 10.0, 100.0)

_METHOD = {
    "lda": "exact leave-one-out from the class moments (Lachenbruch & Mickey 1968), every row",
    "regularized_lda": "exact leave-one-out from the class moments, every row; intensity chosen by leave-one-out "
    "log-loss",
    "qda": "exact leave-one-out from the class moments, every row; reg_param chosen by leave-one-out log-loss",
    "logistic_regression": "stratified cross-validation of L2-penalized logistic regression on a seeded, "
    "class-proportional subsample; C chosen by cross-validated log-loss",
}


@dataclass(frozen=True)
class _Scores:
    """Per-candidate figures and the per-row values of the rows every candidate was scored on."""

    figures: dict[str, dict[str, Any]]
    rows_correct: dict[str, np.ndarray]
    rows_loss: dict[str, np.ndarray]
    n_common: int


def _tally(scorer: LeaveOneOutScorer, block: RowBlock) -> LeaveOneOutTally:
    return scorer.tally([(block.values, block.codes)])


def _total_scale(data: AuditData) -> np.ndarray:
    """A StandardScaler's ``scale_`` over all rows: the total standard deviation (divisor N)."""
    m = data.moments
    total = np.diag(m.within_scatter + m.between_scatter) / m.n_total
    sd = np.sqrt(np.maximum(total, 0.0))
    return np.where(sd > 0.0, sd, 1.0)


def _gaussian(data: AuditData, scale: np.ndarray) -> tuple[LeaveOneOutScorer, LeaveOneOutResult]:
    m = data.moments
    scorer = LeaveOneOutScorer.from_moments(
        m.counts, m.means, m.scatter, shrinkage=SHRINKAGE_GRID, qda_reg_grid=QDA_REG_GRID, scale=scale
    )
    if data.all_rows is not None:
        tally = data.all_rows.map_reduce(functools.partial(_tally, scorer), operator.add)
    else:  # a one-shot stream: the per-class sample stands in for the rows
        tally = scorer.tally([(data.values, data.codes)])
    return scorer, tally.result()


def _best_of(result: LeaveOneOutResult, model: str) -> str | None:
    """The scored setting of ``model`` with the lowest leave-one-out log-loss (first of ties)."""
    names = [n for n, mdl in zip(result.names, result.models, strict=True) if mdl == model]
    if not names:
        return None
    return min(names, key=lambda n: float(result.log_loss[result.index(n)]))


def _subsample(data: AuditData, max_rows: int, seed_rng: np.random.Generator) -> np.ndarray:
    """Sorted positions of a class-proportional seeded subsample of the held rows (all if few)."""
    if data.n <= max_rows:
        return np.arange(data.n)
    counts = data.moments.counts.astype(float)
    want = np.maximum(np.floor(max_rows * counts / counts.sum()).astype(int), 2)
    picks = []
    for k in range(len(data.classes)):
        rows = data.class_rows(k)
        take = min(int(want[k]), rows.size)
        picks.append(seed_rng.choice(rows, take, replace=False))
    return np.sort(np.concatenate(picks))


def run(data: AuditData, config: Config, random_state: int | None = None) -> Finding:
    """Predict the held-out accuracy and log-loss of LDA, shrinkage LDA, QDA and logistic regression.

    Gaussian candidates by exact leave-one-out on every row (one blocked pass, O(n p^2)); logistic
    regression by cross-validation on at most ``Config.logistic_max_rows`` rows. Passes when the
    most efficient candidate within noise of the best is also the best or clearly close to it;
    warns when a less efficient candidate leads by more than one but fewer than
    ``performance_switch_se`` paired standard errors (too close to call); skips when nothing can
    be scored, with the reason.
    """
    scale = _total_scale(data)
    scorer, loo = _gaussian(data, scale)
    chosen = {"lda": "lda" if "lda" in loo.names else None}
    chosen["regularized_lda"] = _best_of(loo, "regularized_lda")
    chosen["qda"] = _best_of(loo, "qda")
    rows = _subsample(data, config.logistic_max_rows, stream_rng(random_state, LOGISTIC))
    logit = cross_validated_logistic(
        data.values[rows],
        data.codes[rows],
        len(data.classes),
        LOGISTIC_C_GRID,
        folds=config.logistic_folds,
        random_state=int(stream_rng(random_state, LOGISTIC, 1).integers(2**31)),
        scale=scale,
    )
    per_row = scorer.score_block(data.values[rows], data.codes[rows])
    scores = _collect(loo, chosen, per_row, logit, rows.size, data.n)
    return _judge(scores, loo, logit, config, data)


def _collect(loo, chosen, per_row, logit, n_sub, n_all) -> _Scores:  # type: ignore[no-untyped-def]
    figures: dict[str, dict[str, Any]] = {}
    correct: dict[str, np.ndarray] = {}
    loss: dict[str, np.ndarray] = {}
    column = {name: j for j, name in enumerate(per_row.names)}
    for model in ("lda", "regularized_lda", "qda"):
        name = chosen[model]
        if name is None:
            continue
        i = loo.index(name)
        setting = loo.settings[i]
        settings: dict[str, Any] = {"standardize": model != "lda"}
        if model == "regularized_lda":
            settings |= {"solver": "lsqr", "shrinkage": setting}
        elif model == "qda":
            settings |= {"reg_param": setting}
        else:
            settings |= {"solver": "svd"}
        figures[model] = {
            "accuracy": float(loo.accuracy[i]),
            "accuracy_se": float(loo.accuracy_se[i]),
            "log_loss": float(loo.log_loss[i]),
            "log_loss_se": float(loo.log_loss_se[i]),
            "settings": settings,
            "n_scored": int(loo.n_used),
            "method": _METHOD[model],
        }
        j = column[name]
        ok = ~per_row.refit_fails[:, j]
        correct[model] = np.where(ok, per_row.correct[:, j], False).astype(float)
        loss[model] = per_row.neg_log_prob[:, j]
    if logit.skip_reason is None:
        figures["logistic_regression"] = {
            "accuracy": float(logit.accuracy),
            "accuracy_se": float(logit.accuracy_se),
            "log_loss": float(logit.log_loss),
            "log_loss_se": float(logit.log_loss_se),
            "settings": {"C": float(logit.C), "standardize": True},
            "n_scored": int(logit.n_used),
            "folds": int(logit.folds),
            "method": _METHOD["logistic_regression"],
        }
        correct["logistic_regression"] = logit.correct.astype(float)
        loss["logistic_regression"] = logit.neg_log_prob
    return _Scores(figures, correct, loss, n_sub)


def _difference(scores: _Scores, loo: LeaveOneOutResult, a: str, b: str) -> dict[str, float]:
    """a minus b in accuracy and log-loss, with the paired standard errors and the rows they rest on.

    Two Gaussian candidates are compared over every row (leave-one-out); a comparison with logistic
    regression uses the rows of its subsample, where both have a prediction for every row.
    """
    fa, fb = scores.figures[a], scores.figures[b]
    if "logistic_regression" not in (a, b):
        ia, ib = loo.index(_loo_name(loo, fa, a)), loo.index(_loo_name(loo, fb, b))
        return {
            "accuracy_difference": fa["accuracy"] - fb["accuracy"],
            "accuracy_se": float(loo.accuracy_paired_se[ia, ib]),
            "log_loss_difference": fa["log_loss"] - fb["log_loss"],
            "log_loss_se": float(loo.log_loss_paired_se[ia, ib]),
            "rows": loo.n_used,
        }
    m = scores.n_common
    out: dict[str, float] = {"rows": m}
    for metric, table in (("accuracy", scores.rows_correct), ("log_loss", scores.rows_loss)):
        d = table[a] - table[b]
        out[f"{metric}_difference"] = float(d.mean())
        out[f"{metric}_se"] = float(d.std(ddof=1) / np.sqrt(m)) if m > 1 else float("nan")
    return out


def _loo_name(loo: LeaveOneOutResult, figures: dict[str, Any], model: str) -> str:
    settings = figures["settings"]
    for name, mdl, setting in zip(loo.names, loo.models, loo.settings, strict=True):
        if mdl != model:
            continue
        if model == "lda" or setting == settings.get("shrinkage", settings.get("reg_param")):
            return name
    raise KeyError(model)


_SHORT = {"lda": "LDA", "regularized_lda": "shrinkage LDA", "qda": "QDA", "logistic_regression": "logistic regression"}


def _judge(scores: _Scores, loo: LeaveOneOutResult, logit: Any, config: Config, data: AuditData) -> Finding:
    figures = scores.figures
    scored = [c for c in CANDIDATES if c in figures]
    not_scored = {c: _why_not(c, loo, logit) for c in CANDIDATES if c not in figures}
    if not scored:
        return skipped(KEY, "No candidate could be scored: " + "; ".join(f"{c}: {r}" for c, r in not_scored.items()))
    z = config.performance_switch_se
    best = max(scored, key=lambda c: (figures[c]["accuracy"], -CANDIDATES.index(c)))
    paired = {a: {b: _difference(scores, loo, a, b) for b in scored if b != a} for a in scored}
    for pairs in paired.values():
        for d in pairs.values():
            d["within_noise"] = bool(abs(d["accuracy_difference"]) <= z * d["accuracy_se"])
    versus_best = {c: paired[best][c] for c in scored if c != best}
    within = [
        c for c in scored if c == best or versus_best[c]["accuracy_difference"] <= z * versus_best[c]["accuracy_se"]
    ]
    efficient = within[0]
    details: dict[str, Any] = {
        "candidates": figures,
        "not_scored": not_scored,
        "best": best,
        "within_noise_of_best": within,
        "most_efficient_within_noise": efficient,
        "paired": paired,
        "switch_se": z,
        "switch_rule": f"a candidate is within noise of the best when its accuracy is lower by at most {z:g} paired "
        "standard errors (Config.performance_switch_se); candidates are ordered from the most to the least "
        "efficient: " + ", ".join(CANDIDATES),
        "rows_scored": {"leave_one_out": loo.n_used, "logistic_subsample": scores.n_common},
        "sample_note": None if data.sample is None or data.all_rows is not None else "scored on the per-class sample",
    }
    listing = ", ".join(f"{_SHORT[c]} {_pct(figures[c]['accuracy'])}" for c in scored)
    figure = f"best {_SHORT[best]} {_pct(figures[best]['accuracy'])}"
    summary = f"Predicted accuracy: {listing}."
    if efficient == best:
        status = "pass"
        others = [c for c in within if c != best]
        summary += f" {_SHORT[best]} predicts best" + (
            f"; within noise of it: {', '.join(_SHORT[c] for c in others)}." if others else ", clearly."
        )
    else:
        lead = versus_best[efficient]
        gap, se = -lead["accuracy_difference"], lead["accuracy_se"]
        status = "warn" if gap > se else "pass"
        summary += (
            f" {_SHORT[best]} leads {_SHORT[efficient]} by {fmt(100 * gap, 2)} points (paired SE {fmt(100 * se, 2)}): "
            + ("too close to call." if status == "warn" else "within noise.")
        )
    return Finding(KEY, status, summary, details, figure)


def _pct(x: float) -> str:
    return f"{100 * x:.1f}%"


def _why_not(model: str, loo: LeaveOneOutResult, logit: Any) -> str:
    if model == "logistic_regression":
        return str(logit.skip_reason)
    reasons = [f"{name}: {why}" for name, why in loo.skipped.items() if name.split("(")[0] == model]
    return "; ".join(reasons) or "not scored"
