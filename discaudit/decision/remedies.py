"""Remedies: what to change in the data, which finding the change answers, and what it is predicted to do.

Three steps, each reading finished findings only:

* :func:`propose` reads the findings of the audit and proposes changes, in the data's own column,
  class and row names: remove the features a near dependency needs least (the collinearity check's
  removal plan, computed from the moments), standardize (scale disparity), remove gross outliers
  (only when the outliers check judged the flagged rows influential), merge classes whose means the
  data cannot tell apart (pairwise Hotelling tests of the discriminant signal check), and a
  Yeo-Johnson transform of strongly skewed features (the one change that needs a pass over the rows;
  not proposed beside the removal of gross outliers, whose few rows alone can make a class look skewed).
* The core audits each proposal "what if" (:mod:`discaudit.remedy_effects`) and hands back the
  findings of the changed data.
* :func:`rank` compares those findings with the audit's and orders the remedies: first those that
  clear the finding they address, then by how many statuses improve, then by how little they change.

:func:`compare` lists what changed between two verdicts (statuses, recommendation, key figures).
"""

from __future__ import annotations

from collections.abc import Mapping, Sequence
from dataclasses import dataclass, field
from typing import TYPE_CHECKING, Any

import numpy as np

from discaudit.decision.figures import (
    CANDIDATE_FIGURES,
    CONDITION_NUMBER,
    DELTA_BIC,
    DISCRETE_FEATURES,
    MAX_VIF,
    N_FEATURES,
    N_TOTAL,
    NORMALITY_PER_CLASS,
    OUTLIER_LOGDET_EXCESS,
    OUTLIER_MAX_SHIFT,
    OUTLIER_N_FLAGGED,
    OUTLIER_PER_CLASS,
    PAIRWISE,
    REMOVAL_PLAN,
    SD_RATIO,
    WILKS_LAMBDA,
    Findings,
    status,
)
from discaudit.findings import STATUS_RANK, Finding, fmt, names
from discaudit.jsonable import label, plain

if TYPE_CHECKING:
    from discaudit.config import Config

__all__ = ["ROW_CHECKS", "Comparison", "Effect", "Proposal", "Remedy", "compare", "propose", "rank"]

#: Checks that read the rows (not only the moments): a remedy that changes rows re-runs these.
ROW_CHECKS = ("outliers", "normality", "separation", "expected_performance")

#: Order among proposals of equal standing (design choice: rows first, since outliers distort every
#: estimate the other checks use).
_KIND_ORDER = ("drop_rows", "drop_features", "standardize", "transform", "merge_classes")
#: Proposals per kind at most (merging: one per indistinct pair).
_MAX_MERGES = 3
_MAX_TRANSFORMED = 5


@dataclass(frozen=True)
class Proposal:
    """A change proposed from the findings, before its effect is known.

    Attributes
    ----------
    action : str
        ``"drop_rows"``, ``"drop_features"``, ``"standardize"``, ``"transform"`` or ``"merge_classes"``.
    change : dict
        Keyword arguments of ``Verdict.what_if``, in the data's own names.
    addresses : str
        The check whose finding the change answers.
    description : str
        What to do, in one sentence.
    reason : str
        Why, citing the finding's figures.
    cost : float
        Share of the features or rows removed (0 for a change that removes nothing).
    row_checks : tuple of str
        Checks that read rows and that the change may alter (re-run when the change is evaluated).
    """

    action: str
    change: dict[str, Any]
    addresses: str
    description: str
    reason: str
    cost: float = 0.0
    row_checks: tuple[str, ...] = ()

    @property
    def needs_row_pass(self) -> bool:
        """Whether applying the change needs a pass over the rows (removing rows, a transform)."""
        return self.action in ("drop_rows", "transform")


@dataclass(frozen=True)
class Effect:
    """What a remedy is predicted to change: the findings of the changed data against the audit's.

    Attributes
    ----------
    statuses : dict
        Check -> (status before, status after), for every check evaluated on the changed data.
    figures : dict
        Check -> (key figure before, key figure after), for the same checks.
    evaluated, not_evaluated : tuple of str
        Checks re-run on the changed data, and those left as they were (see ``Verdict.what_if``).
    accuracy : dict or None
        ``{"model", "before", "after", "difference", "se_after", "method"}``: predicted held-out
        accuracy of the recommended model before and after: the ``expected_performance`` check on the
        changed data, or (by default, for LDA, shrinkage LDA and QDA) that model's exact leave-one-out
        alone; None when it was not recomputed (a logistic-regression recommendation by default).
    recommendation : tuple of str or None
        (model before, model after); None when the predicted performance was not recomputed.
    rows : str
        Which rows the row-reading checks saw.
    """

    statuses: dict[str, tuple[str, str]]
    figures: dict[str, tuple[str, str]]
    evaluated: tuple[str, ...]
    not_evaluated: tuple[str, ...]
    accuracy: dict[str, Any] | None = None
    recommendation: tuple[str, str] | None = None
    rows: str = "every row"

    @property
    def changed(self) -> dict[str, tuple[str, str]]:
        """The statuses that change."""
        return {k: v for k, v in self.statuses.items() if v[0] != v[1]}

    @property
    def clears(self) -> tuple[str, ...]:
        """Checks whose status improves."""
        return tuple(k for k, (a, b) in self.statuses.items() if _better(a, b))

    @property
    def worsens(self) -> tuple[str, ...]:
        """Checks whose status gets worse."""
        return tuple(k for k, (a, b) in self.statuses.items() if _better(b, a))

    def to_dict(self) -> dict[str, Any]:
        out: dict[str, Any] = plain(
            {
                "statuses": {k: {"before": a, "after": b} for k, (a, b) in self.statuses.items()},
                "changed": {k: {"before": a, "after": b} for k, (a, b) in self.changed.items()},
                "figures": {k: {"before": a, "after": b} for k, (a, b) in self.figures.items()},
                "clears": list(self.clears),
                "worsens": list(self.worsens),
                "evaluated": list(self.evaluated),
                "not_evaluated": list(self.not_evaluated),
                "accuracy": self.accuracy,
                "recommendation": None
                if self.recommendation is None
                else {"before": self.recommendation[0], "after": self.recommendation[1]},
                "rows": self.rows,
            }
        )
        return out


@dataclass(frozen=True)
class Remedy:
    """A ranked remedy: a proposal with its predicted effect.

    Attributes
    ----------
    rank : int
        1 for the most helpful.
    action, change, addresses, description, reason
        As in :class:`Proposal`; ``change`` is what ``Verdict.what_if(**remedy.change)`` takes.
    spec : str
        The same change for ``discaudit check --what-if``.
    effect : Effect
    needs_row_pass : bool
        Whether the change needs a pass over the rows (every other remedy updates the moments only).
    """

    rank: int
    action: str
    change: dict[str, Any]
    spec: str
    addresses: str
    description: str
    reason: str
    effect: Effect
    needs_row_pass: bool

    @property
    def clears_addressed(self) -> bool:
        """Whether the status of the finding it addresses improves."""
        return self.addresses in self.effect.clears

    @property
    def addressed_evaluated(self) -> bool:
        """Whether the finding it addresses was re-evaluated on the changed data (see ``effect.rows``)."""
        return self.addresses in self.effect.evaluated

    @property
    def helps(self) -> bool:
        """Whether it is predicted to help: it clears what it addresses; or that was not re-evaluated (left to
        ``Verdict.what_if``) and it worsens nothing; or it improves some status and worsens none."""
        if self.clears_addressed:
            return True
        if not self.addressed_evaluated:
            return not self.effect.worsens
        return bool(self.effect.clears) and not self.effect.worsens

    def to_dict(self) -> dict[str, Any]:
        out: dict[str, Any] = plain(
            {
                "rank": self.rank,
                "action": self.action,
                "change": self.change,
                "spec": self.spec,
                "addresses": self.addresses,
                "description": self.description,
                "reason": self.reason,
                "needs_row_pass": self.needs_row_pass,
                "helps": self.helps,
                "addressed_evaluated": self.addressed_evaluated,
                "effect": self.effect.to_dict(),
            }
        )
        return out


def _better(before: str, after: str) -> bool:
    """Whether ``after`` is a better status than ``before`` (a skip compares with nothing)."""
    if "skip" in (before, after):
        return False
    return STATUS_RANK[after] < STATUS_RANK[before]


# --- Proposals ---------------------------------------------------------------------------------


def propose(findings: Findings, config: Config) -> list[Proposal]:
    """Changes that answer the findings that warn or fail, most pressing first."""
    out: list[Proposal] = []
    for make in (_drop_outliers, _drop_collinear, _standardize, _transform_skewed):
        proposal = make(findings, config)
        if proposal is None:
            continue
        # A few gross outliers make a class look skewed; the skew that is the class's own shape shows once they
        # are gone (audit the data without them again), so a transform is proposed only when none is removed.
        if proposal.action == "transform" and any(p.action == "drop_rows" for p in out):
            continue
        out.append(proposal)
    out += _merge_indistinct(findings)
    severity = {p.addresses: STATUS_RANK.get(status(findings, p.addresses), 0) for p in out}
    return sorted(out, key=lambda p: (-severity[p.addresses], _KIND_ORDER.index(p.action)))


def _n_features(findings: Findings) -> int:
    n = N_FEATURES.read(findings)
    return int(n) if n else 1


def _drop_collinear(findings: Findings, config: Config) -> Proposal | None:
    state = status(findings, "collinearity")
    plan = REMOVAL_PLAN.read(findings)
    if state not in ("warn", "fail") or not plan or not plan.get("removed"):
        return None
    vif_limit, cond_limit = (
        (config.vif_fail, config.condition_index_fail)
        if state == "fail"
        else (config.vif_warn, config.condition_index_warn)
    )
    removed = list(plan["removed"])
    vifs = [float("inf") if v is None else float(v) for v in plan["max_vif_after"]]
    conds = [float("inf") if v is None else float(v) for v in plan["condition_number_after"]]
    steps = next(
        (i + 1 for i, (v, c) in enumerate(zip(vifs, conds)) if v <= vif_limit and c <= cond_limit), len(removed)
    )
    drop = removed[:steps]
    candidates = list(plan.get("candidates") or [])
    after = f"max VIF {fmt(MAX_VIF.read(findings))} -> {fmt(vifs[steps - 1])}, condition number " + (
        f"{fmt(CONDITION_NUMBER.read(findings))} -> {fmt(conds[steps - 1])}"
    )
    of_group = f" ({len(drop)} of the {len(candidates)} features in the near dependencies)" if candidates else ""
    return Proposal(
        action="drop_features",
        change={"drop_features": drop},
        addresses="collinearity",
        description=f"Drop {names(drop, 6)}{of_group}, one at a time, each the feature whose removal lowers the "
        f"largest VIF most ({after}).",
        reason=f"Collinearity {state}s ({findings['collinearity'].figure}); removing these breaks the near "
        "dependency in the pooled within-class covariance that LDA inverts.",
        cost=len(drop) / _n_features(findings),
    )


def _standardize(findings: Findings, config: Config) -> Proposal | None:
    ratio = SD_RATIO.read(findings)
    if status(findings, "scale_disparity") != "warn" or ratio is None or not ratio > config.scale_ratio_warn:
        return None
    return Proposal(
        action="standardize",
        change={"standardize": True},
        addresses="scale_disparity",
        description="Standardize every feature (subtract its mean, divide by its standard deviation, as "
        "StandardScaler does) before fitting.",
        reason=f"Feature scales differ {fmt(ratio)}-fold (pooled within-class SD), which ill-conditions the "
        "covariance LDA inverts; its predictions do not change with the scale.",
    )


def _flagged_rows(finding: Finding) -> dict[str, list[tuple[Any, float]]]:
    """Class -> (row, squared distance / cut-off) of every flagged row.

    From the finding's per-row arrays when it carries them (every flagged row), else from the rows its
    details list (the farthest of each class).
    """
    a = finding.arrays or {}
    d = a.get("distance", a.get("squared_distance"))
    if d is not None and all(k in a for k in ("flagged", "row_label", "code", "classes", "class_cutoff")):
        flagged = np.flatnonzero(np.asarray(a["flagged"], dtype=bool))
        code = np.asarray(a["code"])[flagged]
        out: dict[str, list[tuple[Any, float]]] = {}
        ratio = np.asarray(d, dtype=float)[flagged] / np.asarray(a["class_cutoff"], dtype=float)[code]
        for i, k, r in zip(flagged, code, ratio, strict=True):
            out.setdefault(str(label(a["classes"][k])), []).append((label(a["row_label"][i]), float(r)))
        return out
    out = {}
    for cls, info in (finding.details.get("per_class") or {}).items():
        cutoff = info.get("cutoff")
        for r in info.get("flagged_rows") or [] if cutoff else []:
            dist = r.get("distance", r.get("squared_distance"))
            if dist is not None:
                out.setdefault(str(cls), []).append((r["row"], float(dist / cutoff)))
    return out


def _gross_rows(findings: Findings, ratio: float, share: float) -> list[tuple[Any, str, float]]:
    """(row, class, distance / cut-off) of flagged rows at least ``ratio`` times beyond their class's cut-off.

    Only classes where such rows are at most ``share`` of the class: contamination is a few rows, while
    a larger share far out is the shape of the class (a heavy tail or skew), which removing rows does not
    answer.
    """
    per_class = OUTLIER_PER_CLASS.read(findings) or {}
    out = []
    for cls, rows in _flagged_rows(findings["outliers"]).items():
        gross = [(row, cls, r) for row, r in rows if r >= ratio]
        if len(gross) <= share * float((per_class.get(cls) or {}).get("n") or 0):
            out += gross
    return sorted(out, key=lambda t: -t[2])


def _drop_outliers(findings: Findings, config: Config) -> Proposal | None:
    """Remove gross outliers, only when the outliers check judged the flagged rows influential (a class
    mean shift or a pooled log-det excess beyond its warn threshold), and only in classes where they are
    at most ``outlier_fraction_warn`` of the rows."""
    state = status(findings, "outliers")
    shift = OUTLIER_MAX_SHIFT.read(findings) or 0.0
    excess = OUTLIER_LOGDET_EXCESS.read(findings)
    influential = shift > config.outlier_mean_shift_warn or (excess is not None and excess > config.outlier_logdet_warn)
    if state not in ("warn", "fail") or not influential:
        return None
    gross = _gross_rows(findings, config.remedy_gross_outlier_ratio, config.outlier_fraction_warn)
    if not gross:
        return None
    rows = [r for r, _, _ in gross]
    n_total = N_TOTAL.read(findings) or len(rows)
    shown = names([f"{r} ({c})" for r, c, _ in gross], 6)
    return Proposal(
        action="drop_rows",
        change={"drop_rows": rows},
        addresses="outliers",
        description=f"Remove {len(rows)} gross outlier{'s' if len(rows) > 1 else ''}: {shown} (squared robust "
        f"distance at least {fmt(config.remedy_gross_outlier_ratio)} times its class's cut-off); inspect them first.",
        reason=f"The flagged rows move class means by up to {fmt(shift)} pooled SD beyond sampling noise"
        + (f" and inflate the pooled covariance (log-det excess {fmt(excess)} per feature)" if excess else "")
        + f" ({findings['outliers'].figure}).",
        cost=len(rows) / max(int(n_total), 1),
        row_checks=("outliers",),
    )


def _transform_skewed(findings: Findings, config: Config) -> Proposal | None:
    if status(findings, "normality") != "fail":
        return None
    discrete = set(DISCRETE_FEATURES.read(findings) or [])
    skewed: dict[str, float] = {}
    for info in (NORMALITY_PER_CLASS.read(findings) or {}).values():
        feature, skew = info.get("max_abs_skewness_feature"), info.get("max_abs_skewness")
        if feature is None or skew is None or feature in discrete or not skew > config.skew_large:
            continue
        skewed[feature] = max(skewed.get(feature, 0.0), float(skew))
    if not skewed:
        return None
    chosen = sorted(skewed, key=lambda f: -skewed[f])[:_MAX_TRANSFORMED]
    listing = ", ".join(f"{f} (|skewness| {fmt(skewed[f])})" for f in chosen)
    return Proposal(
        action="transform",
        change={"transform": chosen},
        addresses="normality",
        description=f"Apply a Yeo-Johnson power transform (Yeo & Johnson 2000) to {names(chosen)}, exponents by "
        "maximum likelihood within classes; the one remedy that needs a pass over the rows.",
        reason=f"Strongly skewed within a class: {listing} (rule: |skewness| > {fmt(config.skew_large)}).",
        row_checks=("normality",),
    )


def _merge_indistinct(findings: Findings) -> list[Proposal]:
    pairwise = PAIRWISE.read(findings) or {}
    listed = {tuple(map(str, p["classes"])): p for p in pairwise.get("pairs") or []}
    out = []
    for a, b in (pairwise.get("indistinct_pairs") or [])[:_MAX_MERGES]:
        info = listed.get((str(a), str(b)), {})
        detail = (
            f"Hotelling's T^2 between their means: adjusted p = {fmt(info['p_adjusted'])}, Mahalanobis distance "
            f"{fmt(info['mahalanobis'])}"
            if info
            else "their means do not differ significantly"
        )
        out.append(
            Proposal(
                action="merge_classes",
                change={"merge_classes": [[a, b]]},
                addresses="discriminant_signal",
                description=f"Merge classes {a} and {b}, which the data cannot tell apart by their means.",
                reason=f"{detail} (Holm-adjusted over all pairs, alpha {fmt(float(pairwise.get('alpha') or 0.0))}).",
            )
        )
    return out


# --- Ranking -----------------------------------------------------------------------------------


def accuracy_effect(
    model: str, before: Mapping[str, Any], after: Mapping[str, Any], method: str, rows: str | None = None
) -> dict[str, Any]:
    """``Effect.accuracy`` from the figures (``accuracy``, ``accuracy_se``) of ``model`` before and after a
    change; ``rows`` (which rows both were scored on) is recorded when given."""
    out = {
        "model": model,
        "before": before["accuracy"],
        "after": after["accuracy"],
        "difference": after["accuracy"] - before["accuracy"],
        "se_after": after.get("accuracy_se"),
        "method": method,
    }
    if rows is not None:
        out["rows"] = rows
    return out


def effect_of(
    before: Findings,
    after: Findings,
    evaluated: Sequence[str],
    recommended: str,
    recommendation_after: str | None = None,
    rows: str = "every row",
    accuracy: dict[str, Any] | None = None,
) -> Effect:
    """The effect of a change: statuses and key figures of the evaluated checks, before and after.

    ``recommendation_after`` (the model the decision picks on the changed findings) is given only when
    the ``expected_performance`` check was among those evaluated; ``accuracy`` is the recommended
    model's predicted accuracy found otherwise (its leave-one-out alone), used when that check was not.
    """
    statuses = {k: (status(before, k), status(after, k)) for k in evaluated}
    figures = {k: (before[k].figure if k in before else "-", after[k].figure if k in after else "-") for k in evaluated}
    not_evaluated = tuple(k for k in before if k not in evaluated)
    if "expected_performance" in evaluated:
        a, b = CANDIDATE_FIGURES.read(before) or {}, CANDIDATE_FIGURES.read(after) or {}
        if recommended in a and recommended in b:
            accuracy = accuracy_effect(
                recommended,
                a[recommended],
                b[recommended],
                "the expected_performance check recomputed on the changed data",
            )
    rec = (recommended, recommendation_after) if recommendation_after is not None else None
    return Effect(statuses, figures, tuple(evaluated), not_evaluated, accuracy, rec, rows)


def rank(proposals: Sequence[Proposal], effects: Sequence[Effect], specs: Sequence[str]) -> tuple[Remedy, ...]:
    """Order evaluated proposals: those that clear what they address first, then by statuses improved, then cost.

    A remedy predicted to lower the recommended model's accuracy by more than two standard errors
    goes after every remedy that does not.
    """

    def gain(e: Effect) -> int:
        return sum(STATUS_RANK[a] - STATUS_RANK[b] for a, b in e.statuses.values() if "skip" not in (a, b))

    def costly(e: Effect) -> bool:
        acc = e.accuracy
        return bool(acc and acc.get("se_after") is not None and acc["difference"] < -2.0 * max(acc["se_after"], 1e-12))

    order = sorted(
        range(len(proposals)),
        key=lambda i: (
            costly(effects[i]),
            proposals[i].addresses not in effects[i].clears,
            -gain(effects[i]),
            proposals[i].cost,
            i,
        ),
    )
    return tuple(
        Remedy(
            rank=r,
            action=proposals[i].action,
            change=proposals[i].change,
            spec=specs[i],
            addresses=proposals[i].addresses,
            description=proposals[i].description,
            reason=proposals[i].reason,
            effect=effects[i],
            needs_row_pass=proposals[i].needs_row_pass,
        )
        for r, i in enumerate(order, 1)
    )


# --- Comparison of two verdicts ----------------------------------------------------------------

#: Key figures a comparison lists (name -> declared figure).
KEY_FIGURES = {
    "rows": N_TOTAL,
    "features": N_FEATURES,
    "max VIF": MAX_VIF,
    "condition number": CONDITION_NUMBER,
    "SD ratio": SD_RATIO,
    "rows flagged as outliers": OUTLIER_N_FLAGGED,
    "largest outlier mean shift": OUTLIER_MAX_SHIFT,
    "delta BIC (shared - separate covariances)": DELTA_BIC,
    "Wilks' Lambda": WILKS_LAMBDA,
}


@dataclass(frozen=True)
class Comparison:
    """What changed from one verdict to another.

    Attributes
    ----------
    status : tuple of str
        Worst check status (before, after): ``Verdict.status``.
    gate : tuple of str
        The gate's outcome sentence (before, after): which candidates the data are fit for, or
        why the gate fails (``Verdict.gate.outcome``; empty without a gate).
    statuses : dict
        Check -> (before, after) for every check of either verdict.
    changed : dict
        The checks whose status changed.
    recommendation : tuple of str
        Recommended model (before, after).
    figures : dict
        Key figure name -> (before, after), numbers or None, for those that differ.
    accuracy : dict
        Candidate model -> (predicted accuracy before, after), where either verdict scored it.
    features_removed, features_added : list of str
    classes_before, classes_after : list
    changes : list of dict
        The what-if changes recorded in the second verdict (empty when it is not a what-if).
    """

    status: tuple[str, str]
    gate: tuple[str, str]
    statuses: dict[str, tuple[str, str]]
    changed: dict[str, tuple[str, str]]
    recommendation: tuple[str, str]
    figures: dict[str, tuple[Any, Any]]
    accuracy: dict[str, tuple[Any, Any]]
    features_removed: list[str] = field(default_factory=list)
    features_added: list[str] = field(default_factory=list)
    classes_before: list[Any] = field(default_factory=list)
    classes_after: list[Any] = field(default_factory=list)
    changes: list[dict[str, Any]] = field(default_factory=list)

    def to_dict(self) -> dict[str, Any]:
        out: dict[str, Any] = plain(
            {
                "status": {"before": self.status[0], "after": self.status[1]},
                "gate": {"before": self.gate[0], "after": self.gate[1]},
                "statuses": {k: {"before": a, "after": b} for k, (a, b) in self.statuses.items()},
                "changed": {k: {"before": a, "after": b} for k, (a, b) in self.changed.items()},
                "recommendation": {"before": self.recommendation[0], "after": self.recommendation[1]},
                "figures": {k: {"before": a, "after": b} for k, (a, b) in self.figures.items()},
                "accuracy": {k: {"before": a, "after": b} for k, (a, b) in self.accuracy.items()},
                "features_removed": self.features_removed,
                "features_added": self.features_added,
                "classes_before": self.classes_before,
                "classes_after": self.classes_after,
                "changes": self.changes,
            }
        )
        return out

    def lines(self) -> list[str]:
        """The comparison as short sentences, most important first."""
        g0, g1 = self.status
        out = [
            f"Worst check status: {g0.upper()} -> {g1.upper()}"
            if g0 != g1
            else f"Worst check status unchanged: {g0.upper()}"
        ]
        o0, o1 = self.gate
        if o0 != o1:
            out += [f"Gate before: {o0}", f"Gate after: {o1}"]
        elif o0:
            out.append(f"Gate unchanged: {o0}")
        a, b = self.recommendation
        out.append(f"Recommendation: {a} -> {b}" if a != b else f"Recommendation unchanged: {a}")
        for k, (x, y) in self.changed.items():
            out.append(f"{k}: {x.upper()} -> {y.upper()}")
        if not self.changed:
            out.append("No check changes status.")
        for k, (x, y) in self.figures.items():
            out.append(f"{k}: {_show(x)} -> {_show(y)}")
        for k, (x, y) in self.accuracy.items():
            out.append(f"predicted accuracy of {k}: {_pct(x)} -> {_pct(y)}")
        if self.features_removed:
            out.append("features removed: " + names(self.features_removed, 8))
        if self.classes_before != self.classes_after:
            out.append(
                f"classes: {names([str(c) for c in self.classes_before], 8)} -> {names([str(c) for c in self.classes_after], 8)}"
            )
        return out

    def __str__(self) -> str:
        return "\n".join(self.lines())


def _show(x: Any) -> str:
    return "-" if x is None else fmt(x) if isinstance(x, float) else str(x)


def _pct(x: Any) -> str:
    return "-" if x is None else f"{100 * float(x):.1f}%"


def _outcome(verdict: Any) -> str:
    gate = getattr(verdict, "gate", None)
    return "" if gate is None else str(gate.outcome)


def compare(before: Any, after: Any) -> Comparison:
    """What changed from verdict ``before`` to verdict ``after`` (either may be a what-if of the other)."""
    fa, fb = before.findings, after.findings
    keys = list(dict.fromkeys([*fa, *fb]))
    statuses = {k: (status(fa, k), status(fb, k)) for k in keys}
    figures = {}
    for name, figure in KEY_FIGURES.items():
        x, y = figure.read(fa), figure.read(fb)
        if x != y:
            figures[name] = (x, y)
    ca, cb = CANDIDATE_FIGURES.read(fa) or {}, CANDIDATE_FIGURES.read(fb) or {}
    accuracy = {m: (ca.get(m, {}).get("accuracy"), cb.get(m, {}).get("accuracy")) for m in dict.fromkeys([*ca, *cb])}
    feats_a, feats_b = list(before.meta.get("features", [])), list(after.meta.get("features", []))
    return Comparison(
        status=(before.status, after.status),
        gate=(_outcome(before), _outcome(after)),
        statuses=statuses,
        changed={k: v for k, v in statuses.items() if v[0] != v[1]},
        recommendation=(before.recommendation.model, after.recommendation.model),
        figures=figures,
        accuracy={m: v for m, v in accuracy.items() if v[0] != v[1]},
        features_removed=[f for f in feats_a if f not in feats_b],
        features_added=[f for f in feats_b if f not in feats_a],
        classes_before=list(before.meta.get("classes", [])),
        classes_after=list(after.meta.get("classes", [])),
        changes=list(after.meta.get("what_if", [])),
    )
