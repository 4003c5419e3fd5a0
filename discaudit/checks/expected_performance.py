"""Check ``expected_performance``: predicted held-out accuracy and log-loss of the four candidates.

The Gaussian candidates (LDA, shrinkage LDA, QDA) are scored by exact leave-one-out from the
class moments and one pass over the rows (Lachenbruch & Mickey 1968;
:mod:`discaudit.stats.leave_one_out`), each exactly as the estimator the recommendation would hand
out: LDA as scikit-learn's svd solver (its lsqr solver when the class means nearly lie in a
lower-dimensional subspace, where the svd solver would reduce the rank); shrinkage LDA and QDA behind a StandardScaler, over a small
grid of intensities and ``reg_param`` values, the one with the lowest leave-one-out log-loss kept.
Logistic regression cannot be scored from the moments; it is scored by leave-one-out of an
L2-penalized fit on a seeded, class-proportional subsample, each row's leave-one-out fit one Newton
step from the fit on all of them (:mod:`discaudit.stats.logistic_leave_one_out`; stratified k-fold
cross-validation with ``Config.logistic_scoring="k_fold"``), and compared with the Gaussian candidates row by row on the
same rows, so every difference has a paired standard error.

The finding states, for every candidate, its predicted accuracy and log-loss with standard
errors, the settings it was scored at, and which candidates are within noise of the best
(``Config.performance_switch_se`` paired standard errors). It measures; the decision
(:mod:`discaudit.decision`) chooses.
"""

from __future__ import annotations

import functools
import operator
import re
from dataclasses import dataclass
from typing import TYPE_CHECKING, Any

import numpy as np

from discaudit.checks._fourth_sums import SCALES, ledoit_wolf_sums
from discaudit.dataset import AuditData, RowBlock, RowTask
from discaudit.findings import Finding, fmt, skipped
from discaudit.jsonable import label
from discaudit.stats._sampling import resolve_seed
from discaudit.stats.leave_one_out import LeaveOneOutResult, LeaveOneOutRows, LeaveOneOutScorer, LeaveOneOutTally
from discaudit.stats.logistic import K_FOLD, LogisticEstimate, cross_validated_logistic
from discaudit.stats.logistic_leave_one_out import leave_one_out_logistic
from discaudit.stats.row_keys import RowHashes, keep_share
from discaudit.stats.seeds import PERFORMANCE_ROWS
from discaudit.stats.shrinkage import intensities_from_sums

if TYPE_CHECKING:
    from discaudit.config import Config

KEY = "expected_performance"

#: The ``standardize`` setting of shrinkage LDA scored on features scaled to unit pooled
#: within-class variance (``Recommendation.estimator()`` puts ``WithinClassScaler`` in front).
WITHIN_CLASS = "within_class"

#: Candidates from the most to the least efficient under the Gaussian model: the order in which
#: a tie is broken (Efron 1975: under Gaussian classes with a shared covariance LDA needs fewer
#: rows than logistic regression for the same error; shrinkage and QDA add bias or parameters).
CANDIDATES = ("lda", "regularized_lda", "qda", "logistic_regression")
#: Shrinkage intensities scored for shrinkage LDA when a feature does not vary within the classes
#: (so it cannot be scaled to unit within-class variance): on features a StandardScaler scales, the
#: lowest leave-one-out log-loss wins. A coarse grid on [0, 1] in roughly doubling steps (design
#: choice). Otherwise shrinkage LDA is scored at one intensity, Ledoit-Wolf's (see ``_shrinkage_form``).
SHRINKAGE_GRID = (0.01, 0.03, 0.1, 0.2, 0.4, 0.7)
#: Decimals of the Ledoit-Wolf intensity handed out (and scored at exactly that value).
SHRINKAGE_DECIMALS = 4
#: QDA ``reg_param`` values scored (on standardized features), as in scikit-learn's documentation
#: examples' range; the lowest leave-one-out log-loss wins (design choice).
QDA_REG_GRID = (0.0, 0.01, 0.05, 0.1, 0.3, 0.6, 0.9)
#: A difference in predicted accuracy that matters: 1 percentage point, the margin within which the
#: validation study counts a model as acceptable (benchmarks/validation/truth.py; design choice).
MATERIAL_GAP = 0.01
#: Standard errors by which the best candidate must beat always predicting the largest class before
#: differences between candidates are taken as signal (about a one-sided 2.5% test; design choice).
NO_SIGNAL_SE = 2.0
#: Inverse penalties scored for logistic regression; the lowest held-out log-loss wins.
LOGISTIC_C_GRID = (0.01, 0.1, 1.0, 10.0, 100.0)
#: What each candidate assumes about the classes. LDA and shrinkage LDA are two estimates of one
#: model (Gaussian classes with a shared covariance): at few rows per feature plain LDA's plug-in
#: probabilities are overconfident and a little shrinkage lowers its log-loss without changing which
#: class it predicts, so a log-loss gap between the two is calibration, not evidence against the
#: model. Between candidates of different kinds a clear log-loss gap at equal accuracy is evidence
#: that one form fits the class probabilities better (design choice, checked on the tuning split of
#: benchmarks/validation).
KIND = {
    "lda": "shared covariance",
    "regularized_lda": "shared covariance",
    "qda": "a covariance per class",
    "logistic_regression": "no model of the features",
}

_METHOD = {
    "lda": "exact leave-one-out from the class moments (Lachenbruch & Mickey 1968), every row",
    "regularized_lda": "exact leave-one-out from the class moments, every row, at the Ledoit-Wolf intensity of the "
    "pooled within-class covariance of features scaled to unit pooled within-class variance",
    "qda": "exact leave-one-out from the class moments, every row; reg_param chosen by leave-one-out log-loss",
    "logistic_regression": "leave-one-out of L2-penalized logistic regression on a seeded, class-proportional "
    "subsample: one fit per C, each row's leave-one-out fit one Newton step from it (Pregibon 1981), the rows "
    "that step moves far refitted exactly; C chosen by leave-one-out log-loss",
    K_FOLD: "stratified cross-validation of L2-penalized logistic regression on a seeded, "
    "class-proportional subsample; C chosen by cross-validated log-loss",
}


@dataclass(frozen=True)
class _Scores:
    """Per-candidate figures and the per-row values of the rows every candidate was scored on."""

    figures: dict[str, dict[str, Any]]
    rows_correct: dict[str, np.ndarray]
    rows_loss: dict[str, np.ndarray]
    n_common: int


def _tally(scorer: LeaveOneOutScorer, share: float, seed: int, origin: RowHashes, block: RowBlock) -> LeaveOneOutTally:
    """Leave-one-out sums of the block's rows, or of its rows whose key falls in the sampled share (the keys
    from ``origin``'s hashes when the block holds rows of the data held, else from the block's values)."""
    keep = keep_share(block.values, share, seed, PERFORMANCE_ROWS, origin)
    return scorer.tally([(block.values[keep], block.codes[keep])])


def _origin(data: AuditData) -> RowHashes:
    """The origin of the row keys, each column's smallest value, with the content hashes of the rows held
    (:meth:`AuditData.row_hashes`, computed once), so keyed steps on those rows hash nothing again."""
    return data.row_hashes()


def _total_scale(data: AuditData) -> np.ndarray:
    """A StandardScaler's ``scale_`` over all rows: the total standard deviation (divisor N)."""
    m = data.moments
    total = np.diag(m.within_scatter + m.between_scatter) / m.n_total
    sd = np.sqrt(np.maximum(total, 0.0))
    return np.where(sd > 0.0, sd, 1.0)


@dataclass(frozen=True)
class _ShrinkageForm:
    """How shrinkage LDA is scored and handed out: the intensities, the extra scale of the features
    it shrinks (None: a StandardScaler's units) and the ``standardize`` setting that builds it."""

    grid: tuple[float, ...]
    extra_scale: np.ndarray | None
    standardize: bool | str


def _shrinkage_form(data: AuditData, scale: np.ndarray) -> _ShrinkageForm:
    """:func:`_form_of` once per data (``scale`` is the data's own total scale)."""
    return data.shared((KEY, "shrinkage_form"), lambda: _form_of(data, scale))


def _form_of(data: AuditData, scale: np.ndarray) -> _ShrinkageForm:
    """Ledoit-Wolf shrinkage of the pooled within-class covariance toward its own diagonal.

    Each feature is divided by its pooled within-class standard deviation (divisor N), so the
    Ledoit-Wolf target mu I is the diagonal of the pooled covariance: correlations are shrunk and the
    within-class variances kept, the form of scikit-learn's ``shrinkage="auto"`` (which does this per
    class) pooled over the classes. The intensity is Ledoit & Wolf's (2004) on those units, from the
    class-centred rows over every row (:func:`discaudit.stats.shrinkage.ledoit_wolf_intensity`, the
    figure ``shrinkage_intensity(X, y, standardize=True)`` gives; the sum of fourth powers is the one the
    collinearity check uses, :func:`discaudit.checks._fourth_sums.ledoit_wolf_sums`), rounded to
    ``SHRINKAGE_DECIMALS`` and scored at exactly that value. On the tuning split of
    benchmarks/validation (340 simulated cases) this form at this intensity was never more than
    0.98 points below scikit-learn's ``"auto"`` on the test rows, where shrinking toward mu I after a
    StandardScaler, at the intensity with the lowest leave-one-out log-loss, fell up to 4.7 points
    below it (it inflates the within-class variance of the features that carry the class
    difference, whose total variance includes the between-class part).

    A feature that does not vary within the classes cannot be so scaled: then the StandardScaler's
    units and the grid ``SHRINKAGE_GRID`` are used, the lowest leave-one-out log-loss winning.
    """
    m = data.moments
    sums = ledoit_wolf_sums(data)
    if sums is None:
        return _ShrinkageForm(SHRINKAGE_GRID, None, True)
    j = SCALES.index(True)  # the standardized scale: each feature's pooled within-class SD
    within_sd = sums.scales[j]
    intensity = intensities_from_sums(m, sums.scales[j : j + 1], sums.sums[j : j + 1])[0]
    a = round(float(np.clip(intensity, 0.0, 1.0)), SHRINKAGE_DECIMALS)
    return _ShrinkageForm((a,), within_sd / scale, WITHIN_CLASS)


def _gaussian(
    data: AuditData,
    scale: np.ndarray,
    config: Config,
    random_state: int | None,
    only: str | None = None,
    form: _ShrinkageForm | None = None,
) -> tuple[LeaveOneOutScorer, LeaveOneOutResult]:
    """Exact leave-one-out of the Gaussian candidates over every row, or over a seeded Bernoulli sample
    of about ``Config.performance_max_rows`` rows (chosen by row keys, so the same rows whatever their
    order or chunking); each scored row's refit still uses all the other rows. ``only`` restricts the
    grids to one candidate's (plain LDA is always scored; each figure is the same either way)."""
    if form is None and only in (None, "regularized_lda"):
        form = _shrinkage_form(data, scale)
    scorer = _scorer(data, scale, only, form)
    seed = resolve_seed(random_state)
    if data.all_rows is not None:
        tally = data.pass_result(_loo_task(scorer, data, config, seed, only))
    else:  # a one-shot stream: the per-class sample stands in for the rows
        tally = _tally(
            scorer,
            min(1.0, config.performance_max_rows / data.n),
            seed,
            _origin(data),
            RowBlock(data.values, data.codes, data.row_labels),
        )
    return scorer, tally.result()


def _scorer(data: AuditData, scale: np.ndarray, only: str | None, form: _ShrinkageForm | None) -> LeaveOneOutScorer:
    """The leave-one-out scorer of the Gaussian candidates (``only``: one candidate's grid; ``form``:
    how shrinkage LDA is scored, None when it is not)."""
    m = data.moments
    return LeaveOneOutScorer.from_moments(
        m.counts,
        m.means,
        m.scatter,
        shrinkage=None if form is None else form.grid,
        qda_reg_grid=QDA_REG_GRID if only in (None, "qda") else (),
        scale=scale,
        shrinkage_scale=None if form is None else form.extra_scale,
    )


def _loo_task(
    scorer: LeaveOneOutScorer, data: AuditData, config: Config, seed: int, only: str | None
) -> RowTask[LeaveOneOutTally]:
    """The leave-one-out sums over every row, or over the rows whose key falls in the sampled share."""
    share = min(1.0, config.performance_max_rows / data.moments.n_total)
    return RowTask(
        (KEY, only, share, seed),
        functools.partial(_tally, scorer, share, seed, _origin(data)),
        operator.add,
    )


def row_task(data: AuditData, config: Config, random_state: int | None = None) -> RowTask[LeaveOneOutTally] | None:
    """The leave-one-out sums :func:`run` needs from every row (None for a one-shot stream)."""
    if data.all_rows is None:
        return None
    scale = _total_scale(data)
    scorer = _scorer(data, scale, None, _shrinkage_form(data, scale))
    return _loo_task(scorer, data, config, resolve_seed(random_state), None)


def _setting_of(result: LeaveOneOutResult, model: str) -> str | None:
    """The scored setting that stands for a Gaussian candidate: plain LDA itself, else the grid
    point with the lowest leave-one-out log-loss; None when it was not scored."""
    if model == "lda":
        return "lda" if "lda" in result.names else None
    return _best_of(result, model)


def _best_of(result: LeaveOneOutResult, model: str) -> str | None:
    """The scored setting of ``model`` with the lowest leave-one-out log-loss (first of ties)."""
    names = [n for n, mdl in zip(result.names, result.models, strict=True) if mdl == model]
    if not names:
        return None
    return min(names, key=lambda n: float(result.log_loss[result.index(n)]))


def gaussian_accuracy(
    data: AuditData, model: str, config: Config, random_state: int | None = None
) -> dict[str, float] | None:
    """The exact leave-one-out accuracy of one Gaussian candidate, as :func:`run` reports it.

    ``model`` is ``"lda"``, ``"regularized_lda"`` or ``"qda"``, scored at the setting :func:`run` would
    choose on ``data`` (the grid point with the lowest leave-one-out log-loss), without the
    logistic regression's fits. ``{"accuracy", "accuracy_se"}``,
    or None when the model cannot be scored (or is not Gaussian).

    References
    ----------
    Lachenbruch, P. A. & Mickey, M. R. (1968). Estimation of error rates in discriminant analysis.
    Technometrics 10, 1-11.
    """
    if model not in CANDIDATES[:3]:
        return None
    _, loo = _gaussian(data, _total_scale(data), config, random_state, only=model)
    name = _setting_of(loo, model)
    if name is None:
        return None
    i = loo.index(name)
    return {"accuracy": float(loo.accuracy[i]), "accuracy_se": float(loo.accuracy_se[i])}


def run(data: AuditData, config: Config, random_state: int | None = None) -> Finding:
    """Predict the held-out accuracy and log-loss of LDA, shrinkage LDA, QDA and logistic regression.

    Gaussian candidates by exact leave-one-out on every row (one blocked pass, O(n p^2)); logistic
    regression by (approximate) leave-one-out on at most ``Config.logistic_max_rows`` rows. Passes when the
    most efficient candidate within noise of the best is also the best or clearly close to it;
    warns when a less efficient candidate leads by more than one but fewer than
    ``performance_switch_se`` paired standard errors (too close to call); skips when nothing can
    be scored, with the reason.
    """
    scale = _total_scale(data)
    form = _shrinkage_form(data, scale)
    scorer, loo = _gaussian(data, scale, config, random_state, form=form)
    chosen = {model: _setting_of(loo, model) for model in CANDIDATES[:3]}
    logit = _logistic(data, config, random_state, scale)
    rows = logit.rows
    per_row = scorer.score_block(data.values[rows], data.codes[rows])
    scores = _collect(loo, chosen, per_row, logit, rows.size, form.standardize)
    return _judge(scores, loo, logit, config, data)


def _logistic(data: AuditData, config: Config, random_state: int | None, scale: np.ndarray) -> LogisticEstimate:
    """Logistic regression's held-out figures on its subsample, as ``Config.logistic_scoring`` says."""
    X, codes, K, origin = data.values, data.codes, len(data.classes), _origin(data)
    cap = config.logistic_max_rows
    if config.logistic_scoring == "k_fold":
        return cross_validated_logistic(
            X,
            codes,
            K,
            LOGISTIC_C_GRID,
            folds=config.logistic_folds,
            max_rows=cap,
            random_state=random_state,
            scale=scale,
            key_origin=origin,
        )
    return leave_one_out_logistic(
        X, codes, K, LOGISTIC_C_GRID, max_rows=cap, random_state=random_state, scale=scale, key_origin=origin
    )


def _collect(
    loo: LeaveOneOutResult,
    chosen: dict[str, str | None],
    per_row: LeaveOneOutRows,
    logit: LogisticEstimate,
    n_sub: int,
    shrinkage_standardize: bool | str,
) -> _Scores:
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
            settings = {"solver": "lsqr", "shrinkage": setting, "standardize": shrinkage_standardize}
        elif model == "qda":
            settings |= {"reg_param": setting}
        else:
            settings |= {"solver": "svd" if setting is None else "lsqr"}
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
    if logit.skipped is None and logit.accuracy is not None:
        figures["logistic_regression"] = {
            "accuracy": float(logit.accuracy),
            "accuracy_se": float(logit.accuracy_se or 0.0),
            "log_loss": float(logit.log_loss or 0.0),
            "log_loss_se": float(logit.log_loss_se or 0.0),
            "settings": {"C": float(logit.C or 1.0), "standardize": True},
            "n_scored": int(logit.n_used),
            "method": _METHOD[K_FOLD if logit.method == K_FOLD else "logistic_regression"],
        }
        if logit.method == K_FOLD:
            figures["logistic_regression"]["folds"] = int(logit.folds)
        else:
            figures["logistic_regression"]["approximated_rows"] = int(logit.approximated_rows)
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


def _judge(
    scores: _Scores, loo: LeaveOneOutResult, logit: LogisticEstimate, config: Config, data: AuditData
) -> Finding:
    figures = scores.figures
    scored = [c for c in CANDIDATES if c in figures]
    not_scored = {c: _why_not(c, loo, logit, data) for c in CANDIDATES if c not in figures}
    if not scored:
        return skipped(KEY, "No candidate could be scored: " + "; ".join(f"{c}: {r}" for c, r in not_scored.items()))
    z = config.performance_switch_se
    paired = {a: {b: _difference(scores, loo, a, b) for b in scored if b != a} for a in scored}
    for pairs in paired.values():
        for d in pairs.values():
            d["within_noise"] = bool(abs(d["accuracy_difference"]) <= z * d["accuracy_se"])
    lowest = min(scored, key=lambda c: (figures[c]["log_loss"], CANDIDATES.index(c)))
    g = config.log_loss_guard_se
    counts = data.moments.counts
    majority = float(counts.max() / counts.sum())
    no_feature = _no_feature_log_loss(counts)
    excluded = _not_contenders(scored, figures, paired, z, g, no_feature, lowest)
    competitive = [c for c in scored if c not in excluded]
    best = max(competitive, key=lambda c: (figures[c]["accuracy"], -CANDIDATES.index(c)))
    versus_best = {c: paired[best][c] for c in scored if c != best}
    within = [
        c
        for c in competitive
        if c == best or versus_best[c]["accuracy_difference"] <= z * versus_best[c]["accuracy_se"]
    ]
    # No signal: the best candidate does not beat always predicting the largest class by two of its
    # standard errors; then every difference between candidates is noise and the most efficient
    # candidate that can be fitted is kept.
    beats_majority = bool(figures[best]["accuracy"] - majority > NO_SIGNAL_SE * figures[best]["accuracy_se"])
    if not beats_majority:
        within = scored
    efficient = within[0]
    details: dict[str, Any] = {
        "candidates": figures,
        "not_scored": not_scored,
        "best": best,
        "within_noise_of_best": within,
        "most_efficient_within_noise": efficient,
        "lowest_log_loss": lowest,
        "competitive_by_log_loss": competitive,
        "not_contenders": excluded,
        "no_feature_log_loss": no_feature,
        "majority_rule_accuracy": majority,
        "beats_majority_rule": beats_majority,
        "paired": paired,
        "switch_se": z,
        "log_loss_guard_se": g,
        "switch_rule": f"a candidate is not a contender when its log-loss exceeds another's by more than {g:g} paired "
        "standard errors (Config.log_loss_guard_se) and either its log-loss is worse than predicting the class "
        "shares for every row (its probabilities have collapsed) or the other is of a different kind and its "
        "accuracy lead over that one, in paired standard errors, is no larger than the other's log-loss lead (nor "
        f"than {z:g}); among the contenders, one "
        f"is within noise of the best when its accuracy is lower by at most {z:g} paired standard errors "
        "(Config.performance_switch_se); the most efficient candidate within noise is kept, in the order "
        + ", ".join(CANDIDATES),
        "rows_scored": {"leave_one_out": loo.n_used, "logistic_subsample": scores.n_common},
        "sample_note": None if data.sample is None or data.all_rows is not None else "scored on the per-class sample",
    }
    listing = ", ".join(f"{_SHORT[c]} {_pct(figures[c]['accuracy'])}" for c in scored)
    figure = f"best {_SHORT[best]} {_pct(figures[best]['accuracy'])}"
    summary = f"Predicted accuracy: {listing}."
    if not beats_majority:
        summary += (
            f" No candidate predicts better than always choosing the largest class ({_pct(majority)}) by two "
            f"standard errors, so their differences are noise and the most efficient, {_SHORT[efficient]}, is kept"
        )
    elif efficient == best:
        summary += f" {_cap(_SHORT[best])} predicts best"
    else:
        lead = versus_best[efficient]
        summary += (
            f" {_cap(_SHORT[best])} leads by {_pts(lead['accuracy_difference'])} points (paired SE "
            f"{_pts(lead['accuracy_se'])}), within noise of {_SHORT[efficient]}, the more efficient model"
        )
    # Too close to call: another candidate within noise of the pick (at least one paired SE) whose
    # predicted accuracy differs from it by a material amount, so the choice matters and the data
    # cannot settle it.
    contenders = [
        c
        for c in scored
        if c != efficient
        and abs(paired[c][efficient]["accuracy_difference"]) >= MATERIAL_GAP
        and abs(paired[c][efficient]["accuracy_difference"]) <= max(z, 1.0) * paired[c][efficient]["accuracy_se"]
    ]
    details["too_close_to_call"] = contenders
    if contenders:
        status = "warn"
        summary += (
            "; too close to call against "
            + ", ".join(
                f"{_SHORT[c]} ({_signed(paired[c][efficient]['accuracy_difference'])} points, paired SE "
                f"{_pts(paired[c][efficient]['accuracy_se'])})"
                for c in contenders
            )
            + "."
        )
    else:
        status = "pass"
        others = [c for c in within if c != efficient]
        summary += f"; within noise of it: {', '.join(_SHORT[c] for c in others)}." if others else "."
    return Finding(KEY, status, summary, details, figure)


def _no_feature_log_loss(counts: np.ndarray) -> float:
    """Log-loss of predicting the class shares for every row: the entropy of the shares (nats)."""
    share = np.asarray(counts, dtype=np.float64)
    share = share[share > 0] / share.sum()
    return float(-(share * np.log(share)).sum())


def _not_contenders(
    scored: list[str],
    figures: dict[str, dict[str, Any]],
    paired: dict[str, dict[str, dict[str, Any]]],
    z: float,
    g: float,
    no_feature: float,
    lowest: str,
) -> dict[str, dict[str, Any]]:
    """Candidates the log-loss rules out, each with the candidate it loses to and why.

    ``c`` is ruled out by ``o`` when c's log-loss exceeds o's by more than ``g`` paired standard
    errors and either (collapsed) c's log-loss is worse than the no-feature rule's, so its
    probabilities are worse than knowing nothing, as when p is close to N - K; or (fits worse) o is
    of another kind (``KIND``) and c's accuracy lead over o, in paired standard errors, is no
    larger than o's log-loss lead over c in its paired standard errors (nor than ``z``): the
    stronger of the two pieces of evidence decides. A candidate that classifies clearly better
    than its calibration is worse keeps its place, and LDA is never ruled out by its own shrunk
    estimate unless it has collapsed.
    The candidate with the lowest log-loss (``lowest``) is never ruled out, so at least one remains
    even when the paired comparisons, made on different rows for logistic regression, disagree.
    """
    out: dict[str, dict[str, Any]] = {}
    by_log_loss = sorted(scored, key=lambda c: (figures[c]["log_loss"], CANDIDATES.index(c)))
    for c in scored:
        if c == lowest:
            continue
        for o in by_log_loss:
            if o == c:
                continue
            d = paired[c][o]
            if not d["log_loss_difference"] > g * d["log_loss_se"]:
                continue
            collapsed = figures[c]["log_loss"] > no_feature
            if collapsed or (KIND[o] != KIND[c] and _ratio(d, "accuracy") <= max(z, _ratio(d, "log_loss"))):
                out[c] = {
                    "against": o,
                    "why": "collapsed" if collapsed else "fits worse",
                    "log_loss_difference": d["log_loss_difference"],
                    "log_loss_se": d["log_loss_se"],
                    "accuracy_difference": d["accuracy_difference"],
                    "accuracy_se": d["accuracy_se"],
                }
                break
    return out


def _ratio(d: dict[str, Any], metric: str) -> float:
    """A paired difference in units of its standard error (``inf`` for a positive difference with no spread)."""
    diff, se = float(d[f"{metric}_difference"]), float(d[f"{metric}_se"])
    if se > 0:
        return diff / se
    return float("inf") if diff > 0 else 0.0


def _cap(text: str) -> str:
    return text[:1].upper() + text[1:]


def _signed(x: float) -> str:
    return ("+" if x > 0 else "") + _pts(x)


def _pts(x: float) -> str:
    return fmt(100 * x, 2)


def _pct(x: float) -> str:
    return f"{100 * x:.1f}%"


def _why_not(model: str, loo: LeaveOneOutResult, logit: LogisticEstimate, data: AuditData) -> str:
    """Why a candidate was not scored: for a grid, the reason of its least demanding setting."""
    if model == "logistic_regression":
        reason = str(logit.skipped)
    else:
        reasons = [why for name, why in loo.skipped.items() if name.split("(")[0] == model]
        reason = reasons[-1].split(": ", 1)[-1] if reasons else "not scored"
        if model == "lda" and "eigenvalue" in reason:
            reason = f"the pooled within-class covariance is singular or nearly so ({reason})"
    reason = re.sub(r"class code (\d+)", lambda m: f"class {label(data.classes[int(m.group(1))])}", reason)
    return re.sub(r"feature (\d+)", lambda m: f"feature {data.features[int(m.group(1))]}", reason)
