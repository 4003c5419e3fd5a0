"""The validation study: does the audit's recommendation predict as well as the best model on
kinds of data it was not tuned on?

Run ``make validate`` (or ``python benchmarks/validation/study.py``): the **tuning** split.
For every case of the chosen split (a family of ``scenarios.py`` at one of ``split.SEEDS``, or
an open data set of ``open_data.py``) it

1. takes the truth (``truth.py``: test accuracy of LDA, regularized LDA, QDA and logistic
   regression, the acceptable set, and a 5-fold CV of the four on the training rows, the
   "pick by CV" baseline) from ``truth_cache.json``, computing and caching what is missing;
2. re-draws the training rows once (``REDRAWS``; same population and test set) to see
   whether the acceptable set depends on the draw;
3. runs ``discaudit.preflight`` on the training rows, and fits ``recommendation.estimator()``;

and writes the report with the recommendation beside the fixed choices and the CV pick.

Splits (``split.py``): whole families and open data sets are ``tuning`` or ``held_out``.
``--split tuning`` (the default) never touches the held-out ones and writes ``RESULTS.md``.
``--split held_out`` writes ``RESULTS_HELD_OUT.md`` and adds one to the look counter at the
top of ``RESULTS.md``; ``--split all`` writes both and counts as a look. A held-out run
restricted by ``--only`` writes no report but is counted as a partial look.

Options: ``--only NAME ...`` restricts to some families / open data sets; ``--refresh``
recomputes the truth; ``--truth-only`` fills the truth cache and prints nothing about the
results (only progress and times).

Rule tuning code calls :func:`tuning_cases` for the per-case truth of the tuning split.
"""

from __future__ import annotations

import argparse
import hashlib
import json
import os
import platform
import re
import subprocess
import sys
import time
import warnings
from dataclasses import dataclass, field
from pathlib import Path
from typing import Any

import numpy as np

HERE = Path(__file__).resolve().parent
sys.path.insert(0, str(HERE))

import open_data  # noqa: E402
import quick  # noqa: E402
import scenarios  # noqa: E402
import split  # noqa: E402
import truth  # noqa: E402

REDRAWS = (1,)
CACHE_PATH = HERE / "truth_cache.json"
RESULTS_PATH = HERE / "RESULTS.md"
HELD_OUT_PATH = HERE / "RESULTS_HELD_OUT.md"
SHORT = {"lda": "LDA", "regularized_lda": "rLDA", "qda": "QDA", "logistic_regression": "LR"}
BIG_REGRET_PP = 5.0


# ----------------------------------------------------------------------------------------
# Truth cache
# ----------------------------------------------------------------------------------------


def digest(*arrays: Any) -> str:
    """Fingerprint of a data draw: shape and every value (float64 bytes, or text for labels)."""
    h = hashlib.sha256()
    for a in arrays:
        a = np.asarray(a)
        h.update(str(a.shape).encode())
        if a.dtype.kind in "fiub":
            h.update(np.ascontiguousarray(a, np.float64).tobytes())
        else:
            h.update("\x1f".join(map(str, a.ravel().tolist())).encode())
    return h.hexdigest()[:20]


def _jsonable(obj: Any) -> Any:
    if isinstance(obj, dict):
        return {str(k): _jsonable(v) for k, v in obj.items()}
    if isinstance(obj, (list, tuple)):
        return [_jsonable(v) for v in obj]
    if isinstance(obj, (np.floating, float)):
        return float(obj) if np.isfinite(obj) else None
    if isinstance(obj, np.integer):
        return int(obj)
    if isinstance(obj, np.ndarray):
        return _jsonable(obj.tolist())
    return obj


class TruthCache:
    """``truth_cache.json``: entries keyed ``sim/<family>/seed<s>/draw<j>``, ``open/<name>`` or
    ``quick/<name>``; each holds the digest of its data and the truth settings' fingerprint
    (``truth.settings_fingerprint``, which includes the scikit-learn version). An entry whose
    data or settings differ is recomputed."""

    def __init__(self, path: Path, refresh: bool):
        import sklearn

        self.path = path
        self.settings = truth.settings_fingerprint()
        self.data: dict[str, Any] = {"sklearn_version": sklearn.__version__, "entries": {}}
        if path.exists() and not refresh:
            self.data = json.loads(path.read_text())
        self.data["sklearn_version"] = sklearn.__version__
        self.data["numpy_version"] = np.__version__
        self.data["settings"] = self.settings
        self.computed = 0
        self.seconds = 0.0

    def get(self, key: str, fingerprint: str, compute) -> dict[str, Any]:
        entry = self.data["entries"].get(key)
        if entry is not None and entry.get("digest") == fingerprint and entry.get("settings") == self.settings:
            return entry
        start = time.perf_counter()
        with warnings.catch_warnings():
            warnings.simplefilter("ignore")  # the truth records its own warnings
            result = compute()
        seconds = time.perf_counter() - start
        entry = _jsonable({**result, "digest": fingerprint, "settings": self.settings, "seconds": round(seconds, 3)})
        self.seconds += seconds
        self.computed += 1
        self.data["entries"][key] = entry
        self.save()
        return entry

    def prune(self, keep: set[str]) -> int:
        """Drop entries no case uses any more (only after a run over every case)."""
        stale = [k for k in self.data["entries"] if k not in keep]
        for k in stale:
            del self.data["entries"][k]
        if stale:
            self.save()
        return len(stale)

    def save(self) -> None:
        """Write atomically, one entry per line (compact, and diffs stay readable)."""
        head = {k: v for k, v in self.data.items() if k != "entries"}
        lines = ["{"] + [f"{json.dumps(k)}: {json.dumps(v)}," for k, v in sorted(head.items())] + ['"entries": {']
        entries = sorted(self.data["entries"].items())
        lines += [
            f"{json.dumps(k)}: {json.dumps(v, sort_keys=True, allow_nan=False)}" + ("," if i < len(entries) - 1 else "")
            for i, (k, v) in enumerate(entries)
        ]
        lines += ["}", "}"]
        tmp = self.path.with_suffix(".json.tmp")
        tmp.write_text("\n".join(lines) + "\n")
        os.replace(tmp, self.path)


# ----------------------------------------------------------------------------------------
# Cases and their truth
# ----------------------------------------------------------------------------------------


@dataclass
class Case:
    """One family at one seed, or one open data set."""

    kind: str  # "simulated" or "open data"
    name: str  # family or data set
    seed: int | None
    split: str
    category: str
    source: str = ""
    seen_before: bool = False  # open data sets scored by the earlier study

    @property
    def label(self) -> str:
        return f"{self.name} seed {self.seed}" if self.seed is not None else self.name

    @property
    def key(self) -> str:
        return f"sim/{self.name}/seed{self.seed}/draw0" if self.kind == "simulated" else f"open/{self.name}"

    def data(self):
        """Training rows (what the audit sees) and, for simulated cases, the test rows:
        ``(X, y, X_test, y_test)``; the test rows are None for open data sets."""
        if self.kind == "simulated":
            return scenarios.FAMILIES[self.name].make(self.seed)
        X, y = open_data.OPEN_DATA[self.name][1]()
        return X, y, None, None


def all_cases(split_name: str = "tuning", only: list[str] | None = None) -> list[Case]:
    """The cases of a split (``tuning``, ``held_out`` or ``all``), in catalogue order."""
    sides = split.SPLITS if split_name == "all" else (split_name,)
    cases = []
    for fam in scenarios.FAMILIES.values():
        side = split.split_of(fam.name)
        if side in sides and (not only or fam.name in only):
            cases += [Case("simulated", fam.name, s, side, fam.category) for s in split.SEEDS]
    for name, (source, _) in open_data.OPEN_DATA.items():
        side = split.split_of(name)
        if side in sides and (not only or name in only):
            cases.append(Case("open data", name, None, side, "open data", source, name in split.OPEN_SEEN_BEFORE))
    return cases


def case_truth(cache: TruthCache, case: Case) -> tuple[dict[str, Any], list[list[str]], tuple]:
    """The truth entry of a case, the acceptable sets of its draws, and its data."""
    if case.kind == "simulated":
        fam = scenarios.FAMILIES[case.name]
        X, y, Xt, yt = fam.make(case.seed)
        entry = cache.get(
            case.key,
            digest(X, y, Xt, yt),
            lambda: {**truth.evaluate(X, y, Xt, yt), "cv": truth.four_model_cv(X, y)},
        )
        draws = [entry["acceptable"]]
        for j in REDRAWS:
            Xr, yr, Xt2, yt2 = fam.make(case.seed, train_seed=j)
            e = cache.get(
                f"sim/{case.name}/seed{case.seed}/draw{j}",
                digest(Xr, yr, Xt2, yt2),
                lambda: truth.evaluate(Xr, yr, Xt2, yt2),
            )
            draws.append(e["acceptable"])
        return entry, draws, (X, y, Xt, yt)
    X, y = open_data.OPEN_DATA[case.name][1]()
    Xa, ya = X.to_numpy(float), y.to_numpy()
    entry = cache.get(
        case.key, digest(Xa, ya), lambda: {**truth.evaluate_cv(Xa, ya), "cv": truth.four_model_cv(Xa, ya)}
    )
    return entry, entry["per_repeat_acceptable"], (X, y, None, None)


def cache_keys(case: Case) -> list[str]:
    if case.kind == "simulated":
        return [case.key] + [f"sim/{case.name}/seed{case.seed}/draw{j}" for j in REDRAWS]
    return [case.key]


# ----------------------------------------------------------------------------------------
# The audit and the recommended estimator
# ----------------------------------------------------------------------------------------


@dataclass
class AuditRun:
    model: str
    seconds: float
    rules: list[str] = field(default_factory=list)
    reasons: list[str] = field(default_factory=list)
    findings: dict[str, tuple[str, str, str]] = field(default_factory=dict)  # key -> (status, figure, summary)
    params: dict[str, Any] = field(default_factory=dict)
    escaped_warnings: list[str] = field(default_factory=list)
    error: str | None = None
    recommendation: Any = None
    verdict: Any = None


def run_audit(X, y) -> AuditRun:
    import discaudit

    start = time.perf_counter()
    with warnings.catch_warnings(record=True) as caught:
        warnings.simplefilter("always")
        try:
            v = discaudit.preflight(X, y, random_state=0)
        except Exception as exc:
            return AuditRun("error", time.perf_counter() - start, error=f"{type(exc).__name__}: {exc}")
    seconds = time.perf_counter() - start
    rec = v.recommendation
    return AuditRun(
        model=rec.model,
        seconds=seconds,
        rules=list(getattr(rec, "rules_fired", [])),
        reasons=list(rec.reasons),
        findings={k: (f.status, getattr(f, "figure", ""), f.summary) for k, f in v.findings.items()},
        params=dict(rec.params),
        escaped_warnings=sorted({f"{w.category.__name__}: {str(w.message)[:120]}" for w in caught}),
        recommendation=rec,
        verdict=v,
    )


def check_estimator(run: AuditRun, X, y, X_test=None, y_test=None) -> dict[str, Any]:
    """Fit ``recommendation.estimator()``; report errors, ConvergenceWarnings, test accuracy."""
    rec = run.recommendation
    if rec is None or not hasattr(rec, "estimator"):
        return {"status": "n/a"}
    from sklearn.exceptions import ConvergenceWarning

    start = time.perf_counter()
    with warnings.catch_warnings(record=True) as caught:
        warnings.simplefilter("always")
        try:
            est = rec.estimator()
            with np.errstate(all="ignore"):
                est.fit(X, y)
                acc = float(np.mean(est.predict(X_test) == y_test)) if X_test is not None else None
        except Exception as exc:
            return {"status": "error", "message": f"{type(exc).__name__}: {str(exc)[:160]}"}
    conv = [str(w.message)[:120] for w in caught if issubclass(w.category, ConvergenceWarning)]
    return {
        "status": "convergence warning" if conv else "ok",
        "message": conv[0] if conv else "",
        "accuracy": acc,
        "seconds": time.perf_counter() - start,
    }


# ----------------------------------------------------------------------------------------
# One record per case
# ----------------------------------------------------------------------------------------


@dataclass
class Record:
    case: Case
    shape: str
    truth: dict[str, Any]
    draws: list[list[str]]
    audit: AuditRun | None = None
    estimator: dict[str, Any] = field(default_factory=dict)

    @property
    def accuracy(self) -> dict[str, float]:
        return {m: self.truth["models"][m]["accuracy"] for m in truth.MODELS}

    @property
    def best_accuracy(self) -> float:
        return self.accuracy[self.truth["best"]]

    def regret(self, model: str) -> float:
        """Best accuracy minus the accuracy of ``model``, in percentage points; an audit that
        raised counts as the trivial rule (predict the largest training class)."""
        chosen = self.accuracy.get(model, self.truth["trivial_accuracy"])
        return 100.0 * (self.best_accuracy - chosen)

    def acceptable(self, model: str) -> bool:
        return model in self.truth["acceptable"]

    @property
    def informative(self) -> bool:
        """Not every candidate is acceptable: the choice matters."""
        return set(self.truth["acceptable"]) != set(truth.MODELS)

    @property
    def cv_pick(self) -> str:
        cv = self.truth.get("cv") or {}
        return truth.cv_pick(cv["accuracy"]) if cv.get("accuracy") else "lda"

    @property
    def cv_seconds(self) -> float | None:
        cv = self.truth.get("cv")
        return cv["seconds"] if cv else None

    def draw_counts(self) -> dict[str, int]:
        return {m: sum(m in s for s in self.draws) for m in truth.MODELS}

    @property
    def draw_sensitive(self) -> bool:
        return any(0 < c < len(self.draws) for c in self.draw_counts().values())


def _shape(X, y) -> str:
    counts = np.unique(np.asarray(y), return_counts=True)[1]
    if len(counts) > 5:
        n = f"{counts.min()}-{counts.max()}" if counts.min() != counts.max() else f"{counts[0]}"
    else:
        n = f"{counts[0]}" if counts.min() == counts.max() else "/".join(str(c) for c in counts)
    return f"n_k={n}, p={np.asarray(X).shape[1]}, K={len(counts)}"


def build_records(cache: TruthCache, cases: list[Case], log, audit: bool = True) -> list[Record]:
    records = []
    for i, case in enumerate(cases):
        t0 = time.perf_counter()
        entry, draws, (X, y, Xt, yt) = case_truth(cache, case)
        rec = Record(case, _shape(np.asarray(X), np.asarray(y)), entry, draws)
        if audit:
            rec.audit = run_audit(X, y)
            rec.estimator = check_estimator(rec.audit, X, y, Xt, yt)
            log(
                f"[{i + 1}/{len(cases)}] {case.label:32s} audit {SHORT.get(rec.audit.model, rec.audit.model):5s} "
                f"acceptable {_set(entry['acceptable']):18s} regret {rec.regret(rec.audit.model):5.2f} pp "
                f"({time.perf_counter() - t0:5.1f} s)"
            )
        else:
            log(f"[{i + 1}/{len(cases)}] {case.label:32s} truth ready ({time.perf_counter() - t0:5.1f} s)")
        records.append(rec)
    return records


def quick_records(cache: TruthCache) -> list[dict[str, Any]]:
    out = []
    for name, X, y, Xt, yt, expected in quick.unambiguous_cases():
        entry = cache.get(f"quick/{name}", digest(X, y, Xt, yt), lambda: truth.evaluate(X, y, Xt, yt))
        acc = {m: entry["models"][m]["accuracy"] for m in truth.MODELS}
        expected_set = (expected,) if isinstance(expected, str) else tuple(expected)
        primary = expected_set[0]
        others = np.mean([a for m, a in acc.items() if m not in expected_set])
        run = run_audit(X, y)
        out.append(
            {
                "name": name,
                "expected": expected,
                "accuracy": acc,
                "acceptable": entry["acceptable"],
                "gap_to_others_mean": acc[primary] - others,
                "in_acceptable": all(m in entry["acceptable"] for m in expected_set),
                "audit": run.model,
                "shape": _shape(X, y),
            }
        )
    return out


# ----------------------------------------------------------------------------------------
# For rule tuning: the tuning split, case by case
# ----------------------------------------------------------------------------------------


@dataclass
class TuningCase:
    """What a decision rule can be tuned against, for one case of the tuning split."""

    name: str  # family or open data set
    seed: int | None
    kind: str  # "simulated" or "open data"
    category: str
    shape: str
    accuracy: dict[str, float]  # test accuracy (simulated) or repeated-CV accuracy (open data)
    acceptable: list[str]
    best: str
    margin: dict[str, float]
    cv_pick: str  # the four-model 5-fold CV choice on the training rows
    cv_accuracy: dict[str, float]
    draws: list[list[str]]  # acceptable sets of the primary draw and the re-draws / CV repeats
    recommendation: str | None  # discaudit's current choice (None when audit=False)
    verdict: Any = None  # the full discaudit verdict (findings, recommendation)
    case: Case | None = None

    def data(self):
        """``(X_train, y_train, X_test, y_test)``; the test rows are None for open data sets."""
        assert self.case is not None
        return self.case.data()

    def regret(self, model: str) -> float:
        return 100.0 * (self.accuracy[self.best] - self.accuracy[model])


def tuning_cases(
    only: list[str] | None = None, *, audit: bool = True, cache_path: Path = CACHE_PATH
) -> list[TuningCase]:
    """Per-case truth of the **tuning** split (never the held-out one), with the CV pick and
    discaudit's current recommendation (``audit=False`` skips the audit). Missing truth is
    computed and cached.

    >>> cases = tuning_cases(audit=False)                          # doctest: +SKIP
    >>> sum(c.cv_pick in c.acceptable for c in cases) / len(cases) # doctest: +SKIP
    """
    from threadpoolctl import threadpool_limits

    cache = TruthCache(cache_path, refresh=False)
    out = []
    with threadpool_limits(1):
        for r in build_records(cache, all_cases("tuning", only), lambda msg: None, audit=audit):
            c = r.case
            out.append(
                TuningCase(
                    name=c.name,
                    seed=c.seed,
                    kind=c.kind,
                    category=c.category,
                    shape=r.shape,
                    accuracy=r.accuracy,
                    acceptable=list(r.truth["acceptable"]),
                    best=r.truth["best"],
                    margin=dict(r.truth["margin"]),
                    cv_pick=r.cv_pick,
                    cv_accuracy=dict((r.truth.get("cv") or {}).get("accuracy", {})),
                    draws=r.draws,
                    recommendation=r.audit.model if r.audit else None,
                    verdict=r.audit.verdict if r.audit else None,
                    case=c,
                )
            )
    return out


# ----------------------------------------------------------------------------------------
# Summaries
# ----------------------------------------------------------------------------------------

STRATEGIES = ("audit", "lda", "regularized_lda", "qda", "logistic_regression", "cv_pick")
STRATEGY_LABEL = {
    "audit": "**audit's recommendation**",
    "lda": "always LDA",
    "regularized_lda": "always regularized LDA",
    "qda": "always QDA",
    "logistic_regression": "always logistic regression",
    "cv_pick": "pick by 5-fold CV of the four",
}


def choice(rec: Record, strategy: str) -> str:
    if strategy == "audit":
        return rec.audit.model if rec.audit else "error"
    if strategy == "cv_pick":
        return rec.cv_pick
    return strategy


def metrics(records: list[Record], strategy: str) -> dict[str, Any]:
    """The six figures of a strategy over some records."""
    ok = [r.acceptable(choice(r, strategy)) for r in records]
    informative = [r for r in records if r.informative]
    ok_inf = [r.acceptable(choice(r, strategy)) for r in informative]
    reg = [r.regret(choice(r, strategy)) for r in records]
    return {
        "n": len(records),
        "n_ok": int(sum(ok)),
        "acceptable": float(np.mean(ok)) if ok else float("nan"),
        "n_informative": len(informative),
        "n_ok_informative": int(sum(ok_inf)),
        "acceptable_informative": float(np.mean(ok_inf)) if ok_inf else float("nan"),
        "all_four_share": 1.0 - len(informative) / len(records) if records else float("nan"),
        "mean_regret": float(np.mean(reg)) if reg else float("nan"),
        "max_regret": float(np.max(reg)) if reg else float("nan"),
        "n_big": int(sum(x > BIG_REGRET_PP for x in reg)),
    }


def groups(records: list[Record], split_name: str) -> list[tuple[str, list[Record]]]:
    sims = [r for r in records if r.case.split == split_name and r.case.kind == "simulated"]
    opens = [r for r in records if r.case.split == split_name and r.case.kind == "open data"]
    out = []
    if sims:
        n_fam = len({r.case.name for r in sims})
        out.append((f"{split_name}: simulated ({n_fam} families, {len(sims)} cases)", sims))
    if opens:
        out.append((f"{split_name}: open data ({len(opens)})", opens))
        fresh = [r for r in opens if not r.case.seen_before]
        if split_name == "held_out" and fresh and len(fresh) < len(opens):
            out.append((f"{split_name}: open data never scored before ({len(fresh)})", fresh))
    return out


def _pct(x: float) -> str:
    return "-" if not np.isfinite(x) else f"{100 * x:.1f}%"


def summary_table(records: list[Record], split_name: str) -> list[str]:
    L = [
        "| group | strategy | acceptable (all cases) | acceptable (informative cases) | all four acceptable | "
        "mean regret pp | max regret pp | regret > 5 pp |",
        "|---|---|---|---|---|---|---|---|",
    ]
    for label, rs in groups(records, split_name):
        for s in STRATEGIES:
            if s == "audit" and any(r.audit is None for r in rs):
                continue
            m = metrics(rs, s)
            L.append(
                f"| {label} | {STRATEGY_LABEL[s]} | {_pct(m['acceptable'])} ({m['n_ok']}/{m['n']}) | "
                f"{_pct(m['acceptable_informative'])} ({m['n_ok_informative']}/{m['n_informative']}) | "
                f"{_pct(m['all_four_share'])} | {m['mean_regret']:.2f} | {m['max_regret']:.2f} | {m['n_big']} |"
            )
        fitted = [r for r in rs if r.estimator.get("accuracy") is not None]
        if fitted:
            # The estimator the recommendation builds (its own shrinkage, reg_param or C), fitted on the
            # training rows and scored on the test rows: what a user of the recommendation gets.
            reg = [100.0 * (r.best_accuracy - r.estimator["accuracy"]) for r in fitted]
            near = sum(x <= 100.0 * truth.MIN_MARGIN for x in reg)
            L.append(
                f"| {label} | audit's `estimator()` (its own settings) | {near}/{len(fitted)} within 1 pp of the best "
                f"| - | - | {np.mean(reg):.2f} | {np.max(reg):.2f} | {sum(x > BIG_REGRET_PP for x in reg)} |"
            )
    return L


def category_table(records: list[Record]) -> list[str]:
    sims = [r for r in records if r.case.kind == "simulated"]
    cats = [c for c in scenarios.CATEGORIES if any(r.case.category == c for r in sims)]
    L = [
        "| category | families | cases (informative) | audit | always LR | CV pick |",
        "|---|---|---|---|---|---|",
    ]
    for c in cats:
        rs = [r for r in sims if r.case.category == c]
        cells = []
        for s in ("audit", "logistic_regression", "cv_pick"):
            m = metrics(rs, s)
            cells.append(f"{_pct(m['acceptable'])}, {m['mean_regret']:.2f} pp")
        n_inf = sum(r.informative for r in rs)
        L.append(f"| {c} | {len({r.case.name for r in rs})} | {len(rs)} ({n_inf}) | " + " | ".join(cells) + " |")
    L.append("\nCells: share acceptable, mean regret.\n")
    return L


def family_table(records: list[Record]) -> list[str]:
    sims = [r for r in records if r.case.kind == "simulated"]
    L = [
        "| family | category | audit acceptable | audit mean regret pp | audit chose | acceptable sets |",
        "|---|---|---|---|---|---|",
    ]
    for name in dict.fromkeys(r.case.name for r in sims):
        rs = [r for r in sims if r.case.name == name]
        ok = sum(r.acceptable(choice(r, "audit")) for r in rs)
        chose = ", ".join(SHORT.get(choice(r, "audit"), choice(r, "audit")) for r in rs)
        sets = "; ".join(_set(r.truth["acceptable"]) for r in rs)
        L.append(
            f"| {name} | {rs[0].case.category} | {ok}/{len(rs)} | "
            f"{np.mean([r.regret(choice(r, 'audit')) for r in rs]):.2f} | {chose} | {sets} |"
        )
    L.append("")
    return L


def target_lines(records: list[Record]) -> list[str]:
    """The targets of issue 15 on the held-out simulated cases, met or not, with the baselines' figures."""
    held = [r for r in records if r.case.split == "held_out" and r.case.kind == "simulated"]
    if not held or any(r.audit is None for r in held):
        return []
    a, cv = metrics(held, "audit"), metrics(held, "cv_pick")
    gap = 0.90 - a["acceptable_informative"]
    lines = [
        f"- Acceptable on informative held-out cases (simulated): {_pct(a['acceptable_informative'])} "
        f"({a['n_ok_informative']}/{a['n_informative']}); target 90%: "
        + ("**met**." if gap <= 1e-12 else f"**missed by {100 * gap:.1f} percentage points**.")
        + f" (Pick by CV {_pct(cv['acceptable_informative'])}.)"
    ]
    lines.append(
        f"- Mean regret: audit {a['mean_regret']:.2f} pp; pick by 5-fold CV of the four {cv['mean_regret']:.2f} pp; "
        "target below the CV pick's: " + ("**met**." if a["mean_regret"] < cv["mean_regret"] else "**missed**.")
    )
    lines.append(
        f"- Largest regret: audit {a['max_regret']:.2f} pp ({a['n_big']} cases above {BIG_REGRET_PP:g} pp); target never "
        f"more than {BIG_REGRET_PP:g} pp: " + ("**met**." if a["max_regret"] <= BIG_REGRET_PP else "**missed**.")
    )
    fixed = {s: metrics(held, s)["mean_regret"] for s in ("lda", "regularized_lda", "qda", "logistic_regression")}
    best_fixed = min(fixed, key=fixed.get)
    lines.append(
        f"- Best fixed choice: {STRATEGY_LABEL[best_fixed]}, mean regret {fixed[best_fixed]:.2f} pp "
        + ("(the audit is below it)." if a["mean_regret"] < fixed[best_fixed] else "(the audit is not below it).")
    )
    return lines


def _set(models: list[str]) -> str:
    return ",".join(SHORT[m] for m in truth.MODELS if m in models) or "-"


def _draw_text(rec: Record) -> str:
    counts, d = rec.draw_counts(), len(rec.draws)
    unstable = [f"{SHORT[m]} {c}/{d}" for m, c in counts.items() if 0 < c < d]
    return ("sensitive: " + ", ".join(unstable)) if unstable else f"stable ({d})"


def _fmt_s(x: float | None) -> str:
    if x is None:
        return "-"
    return f"{x:.3f}" if x < 10 else f"{x:.1f}"


def _findings_line(run: AuditRun | None) -> str:
    if run is None:
        return ""
    if run.error:
        return f"audit raised {run.error}"
    notes = [
        f"{k} {st}" + (f" ({fig})" if fig else "") for k, (st, fig, _) in run.findings.items() if st in ("warn", "fail")
    ]
    rules = ", ".join(run.rules) or "none"
    return f"rules fired: {rules}; warn/fail findings: " + ("; ".join(notes) if notes else "none")


def _est_text(e: dict[str, Any]) -> str:
    if not e or e.get("status") == "n/a":
        return "n/a"
    if e.get("status") != "ok":
        return e["status"]
    return "ok" + (f", acc {100 * e['accuracy']:.1f}" if e.get("accuracy") is not None else "")


# ----------------------------------------------------------------------------------------
# The look counter
# ----------------------------------------------------------------------------------------

LOOKS_RE = re.compile(r"Times the held-out families were looked at: \*\*(\d+)\*\*")
PARTIAL_RE = re.compile(r"Partial looks \(held-out runs restricted by `--only`\): \*\*(\d+)\*\*")
LOG_HEAD = "Looks so far:"


def read_looks(path: Path = RESULTS_PATH) -> tuple[int, int, list[str]]:
    text = path.read_text() if path.exists() else ""
    full = LOOKS_RE.search(text)
    part = PARTIAL_RE.search(text)
    log = []
    if LOG_HEAD in text:
        tail = text.split(LOG_HEAD, 1)[1]
        for line in tail.splitlines()[1:]:
            if line.startswith("- "):
                log.append(line)
            elif line.strip() or log:
                break
    return (int(full.group(1)) if full else 0, int(part.group(1)) if part else 0, log)


def looks_section(full: int, partial: int, log: list[str]) -> list[str]:
    L = [
        "## Held-out looks\n",
        f"Times the held-out families were looked at: **{full}**\n",
        f"Partial looks (held-out runs restricted by `--only`): **{partial}**\n",
        "`study.py` adds one to the first counter each time it writes a full held-out report "
        "(`--split held_out` or `--split all`, written to `RESULTS_HELD_OUT.md`), and one to the second for a "
        "held-out run restricted by `--only`. The split itself is fixed in `split.py`.\n",
    ]
    if log:
        L += [LOG_HEAD, "", *log, ""]
    for name, retired_on, report_file, retired_looks in split.RETIRED_BATCHES:
        L += [
            f"Earlier held-out batch, the {name} (retired into tuning on {retired_on}, see `split.py`; its last "
            f"report is `{report_file}`):",
            "",
            *(f"- {line}" for line in retired_looks),
            "",
        ]
    return L


def _commit() -> str:
    try:
        out = subprocess.run(
            ["git", "-C", str(HERE), "rev-parse", "--short", "HEAD"], capture_output=True, text=True, timeout=10
        )
        return out.stdout.strip() or "unknown"
    except (OSError, subprocess.SubprocessError):
        return "unknown"


def record_look(kind: str, path: Path = RESULTS_PATH) -> int:
    """Add one to the held-out look counter in RESULTS.md (``kind`` 'full' or 'partial')."""
    import discaudit

    full, partial, log = read_looks(path)
    if kind == "full":
        full += 1
    else:
        partial += 1
    log.append(
        f"- {time.strftime('%Y-%m-%d %H:%M')}: {kind} held-out look (discaudit {discaudit.__version__}, commit {_commit()})"
    )
    section = looks_section(full, partial, log)
    text = path.read_text() if path.exists() else "# Validation study results\n\n"
    start = text.find("## Held-out looks")
    if start < 0:
        text = text.rstrip("\n") + "\n\n" + "\n".join(section) + "\n"
    else:
        end = text.find("\n## ", start + 5)
        text = text[:start] + "\n".join(section) + "\n" + (text[end + 1 :] if end >= 0 else "")
    path.write_text(text)
    return full


# ----------------------------------------------------------------------------------------
# The report
# ----------------------------------------------------------------------------------------


def report(records, split_name: str, quick_rows, cache: TruthCache, elapsed: float, looks: list[str]) -> str:
    import sklearn

    import discaudit

    rs = [r for r in records if r.case.split == split_name]
    sims = [r for r in rs if r.case.kind == "simulated"]
    opens = [r for r in rs if r.case.kind == "open data"]
    L: list[str] = []
    title = "tuning split" if split_name == "tuning" else "held-out split"
    L.append(f"# Validation study results: {title}\n")
    L.append(
        f"Written by `benchmarks/validation/study.py --split {split_name}` on {time.strftime('%Y-%m-%d %H:%M')} "
        f"with discaudit {discaudit.__version__} (commit {_commit()}), scikit-learn {sklearn.__version__}, "
        f"numpy {np.__version__}, Python {platform.python_version()}. Truth settings {cache.settings}; "
        f"{cache.computed} truth entries computed in this run ({cache.seconds:.0f} s). Study wall time {elapsed:.0f} s.\n"
    )
    L += looks
    L.append(
        f"{len({r.case.name for r in sims})} families x {len(split.SEEDS)} seeds (every seed a different population "
        f"of the family's kind) and {len(opens)} open data sets of the **{split_name}** split (`split.py`). "
        "Acceptable = within max(1 pp, 2 SE of the paired accuracy difference) of the best candidate; informative "
        "cases = not all four candidates acceptable; regret = best accuracy minus the chosen model's, in percentage "
        "points. Pick by CV = the best mean accuracy of a 5-fold stratified CV of the four on the training rows, ties "
        "to the simpler model (LDA, regularized LDA, logistic regression, QDA).\n"
    )
    L.append("## Summary\n")
    L += summary_table(records, split_name)
    L.append("")
    if split_name == "held_out":
        L.append("### Targets (issue 15)\n")
        L += target_lines(rs)
        L.append("")
    L.append("## By category (simulated)\n")
    L += category_table(rs)
    L.append("## By family\n")
    L += family_table(rs)
    wrong = [r for r in rs if r.audit and not r.acceptable(r.audit.model)]
    L.append(f"## Where the audit's choice is not acceptable ({len(wrong)} of {len(rs)})\n")
    for r in sorted(wrong, key=lambda r: -r.regret(r.audit.model)):
        L.append(
            f"- **{r.case.label}** [{r.case.category}]: chose {SHORT.get(r.audit.model, r.audit.model)}, acceptable "
            f"{_set(r.truth['acceptable'])}, regret {r.regret(r.audit.model):.2f} pp. {_findings_line(r.audit)}"
        )
    L.append("")
    L.append("## Simulated cases\n")
    L.append(
        "Accuracies on the independent test set. Draws: the acceptable set of the primary training draw and "
        f"{len(REDRAWS)} re-draw(s) of the training rows (same population and test set). Times: the audit's wall "
        "time vs. a 5-fold CV of the four candidates (each with its inner tuning), both single-threaded.\n"
    )
    L.append(
        "| family | seed | shape | audit | acceptable | acc LDA / rLDA / QDA / LR | regret pp | CV pick | "
        "audit s | 4-model CV s | draws | estimator() |"
    )
    L.append("|---|---|---|---|---|---|---|---|---|---|---|---|")
    for r in sims:
        acc = " / ".join(
            f"{100 * r.accuracy[m]:.1f}" + ("*" if r.truth["models"][m]["failed"] else "") for m in truth.MODELS
        )
        model = r.audit.model if r.audit else "-"
        mark = "" if r.acceptable(model) else " **x**"
        L.append(
            f"| {r.case.name} | {r.case.seed} | {r.shape} | {SHORT.get(model, model)}{mark} | "
            f"{_set(r.truth['acceptable'])} | {acc} | {r.regret(model):.2f} | {SHORT[r.cv_pick]} | "
            f"{_fmt_s(r.audit.seconds if r.audit else None)} | {_fmt_s(r.cv_seconds)} | {_draw_text(r)} | "
            f"{_est_text(r.estimator)} |"
        )
    L.append(
        "\n`*` = the model could not be fit (scikit-learn's QDA refuses a class with no more rows than features); "
        "it is scored as the trivial rule (largest training class) and is never acceptable.\n"
    )
    if opens:
        L.append("## Open data sets (repeated stratified cross-validation)\n")
        L.append(
            "| data set | source | shape | audit | acceptable | acc LDA / rLDA / QDA / LR | regret pp | CV pick | "
            "audit s | 4-model CV s | repeats | scored before |"
        )
        L.append("|---|---|---|---|---|---|---|---|---|---|---|---|")
        for r in opens:
            acc = " / ".join(
                f"{100 * r.accuracy[m]:.1f}" + ("*" if r.truth["models"][m]["failed"] else "") for m in truth.MODELS
            )
            model = r.audit.model if r.audit else "-"
            mark = "" if r.acceptable(model) else " **x**"
            L.append(
                f"| {r.case.name} | {r.case.source} | {r.shape} | {SHORT.get(model, model)}{mark} | "
                f"{_set(r.truth['acceptable'])} | {acc} | {r.regret(model):.2f} | {SHORT[r.cv_pick]} | "
                f"{_fmt_s(r.audit.seconds if r.audit else None)} | {_fmt_s(r.cv_seconds)} | {_draw_text(r)} | "
                f"{'yes' if r.case.seen_before else 'no'} |"
            )
        scheme = opens[0].truth.get("scheme", "")
        L.append(
            f"\nScheme: {scheme}, per-row correctness averaged over repeats; 'repeats' compares the acceptable set "
            "of each repeat alone. The audit sees the whole data set; the CV pick is one 5-fold CV on the whole data "
            "set. 'Scored before': the earlier design of the study had already reported this data set.\n"
        )
    sens = sorted({r.case.name for r in rs if r.draw_sensitive})
    L.append(f"## Draw-sensitive families and data sets ({len(sens)})\n")
    L.append(", ".join(sens) if sens else "none")
    L.append("")
    bad = [r for r in rs if r.estimator and r.estimator.get("status") not in ("ok", "n/a")]
    L.append("## `recommendation.estimator()` check\n")
    L.append(
        f"Fitted on the training rows of every case: {len(rs) - len(bad)} ok, {len(bad)} with an error or a "
        "ConvergenceWarning.\n"
    )
    L += [f"- {r.case.label}: {r.estimator['status']}: {r.estimator.get('message', '')}" for r in bad]
    L.append("")
    if quick_rows:
        L.append("## Quick scenarios (`quick.py`, for the end-to-end test)\n")
        L.append(
            "| case | shape | expected | acc LDA / rLDA / QDA / LR | acceptable | lead over the others' mean pp | audit |"
        )
        L.append("|---|---|---|---|---|---|---|")
        for q in quick_rows:
            acc = " / ".join(f"{100 * q['accuracy'][m]:.1f}" for m in truth.MODELS)
            L.append(
                f"| {q['name']} | {q['shape']} | {_set([q['expected']] if isinstance(q['expected'], str) else list(q['expected']))} | {acc} | {_set(q['acceptable'])} | "
                f"{100 * q['gap_to_others_mean']:.1f} | {SHORT.get(q['audit'], q['audit'])} |"
            )
        L.append("")
    L.append("## Families of this split\n")
    L.append("| family | category | kept from the earlier design | territory (parameter ranges per seed) |")
    L.append("|---|---|---|---|")
    for f in scenarios.FAMILIES.values():
        if split.split_of(f.name) == split_name:
            L.append(f"| {f.name} | {f.category} | {'yes' if f.kept else 'no'} | {f.territory} |")
    L.append("")
    escaped = sorted({w for r in rs if r.audit for w in r.audit.escaped_warnings})
    if escaped:
        L.append("## Warnings that escaped `preflight`\n")
        L += [f"- {w}" for w in escaped]
        L.append("")
    conv = sorted(
        {
            f"{r.case.label}: {m}: {w}"
            for r in rs
            for m, v in r.truth["models"].items()
            for w in v.get("convergence_warnings", [])
        }
    )
    L.append("## Truth fits: convergence\n")
    L.append("No ConvergenceWarning in any truth fit." if not conv else "\n".join(f"- {c}" for c in conv))
    L.append("")
    return "\n".join(L)


# ----------------------------------------------------------------------------------------


def main(argv: list[str] | None = None) -> int:
    parser = argparse.ArgumentParser(description=__doc__.split("\n\n")[0])
    parser.add_argument("--split", choices=("tuning", "held_out", "all"), default="tuning")
    parser.add_argument("--only", nargs="+", metavar="NAME", help="restrict to these families / open data sets")
    parser.add_argument("--refresh", action="store_true", help="recompute every truth entry")
    parser.add_argument(
        "--truth-only", action="store_true", help="fill the truth cache; print no result (safe for held_out)"
    )
    parser.add_argument("--quiet", action="store_true", help="no per-case progress lines")
    parser.add_argument("--cache", type=Path, default=CACHE_PATH, help="truth cache (default: truth_cache.json here)")
    args = parser.parse_args(argv)

    split.check(list(scenarios.FAMILIES.values()), list(open_data.OPEN_DATA))
    known = set(scenarios.FAMILIES) | set(open_data.OPEN_DATA)
    if args.only:
        unknown = sorted(set(args.only) - known)
        if unknown:
            parser.error(f"unknown names: {', '.join(unknown)}")
        outside = sorted(n for n in args.only if args.split != "all" and split.split_of(n) != args.split)
        if outside:
            parser.error(f"not in the {args.split} split: {', '.join(outside)} (the split is fixed in split.py)")

    from threadpoolctl import threadpool_limits

    threadpool_limits(1)  # light on a shared machine; timings are single-threaded
    start = time.perf_counter()
    cache = TruthCache(args.cache, refresh=args.refresh)

    def log(msg: str) -> None:
        if not args.quiet:
            print(msg, flush=True)

    cases = all_cases(args.split, args.only)
    if args.truth_only:
        build_records(cache, cases, log, audit=False)
        if not args.only:
            quick_records(cache)
        if args.split == "all" and not args.only:
            keep = {k for c in cases for k in cache_keys(c)} | {f"quick/{q[0]}" for q in quick.unambiguous_cases()}
            dropped = cache.prune(keep)
            print(f"dropped {dropped} stale cache entries")
        print(
            f"{cache.computed} truth entries computed in {cache.seconds:.0f} s; wall time {time.perf_counter() - start:.0f} s"
        )
        return 0

    records = build_records(cache, cases, log, audit=True)
    quick_rows = quick_records(cache) if args.split in ("tuning", "all") and not args.only else []
    elapsed = time.perf_counter() - start
    sides = split.SPLITS if args.split == "all" else (args.split,)
    if "held_out" in sides:
        record_look("partial" if args.only else "full")
    full, partial, looks_log = read_looks()
    looks = looks_section(full, partial, looks_log)
    if not args.only:
        if "tuning" in sides:
            body = report(records, "tuning", quick_rows, cache, elapsed, looks)
            RESULTS_PATH.write_text(body)
        if "held_out" in sides:
            HELD_OUT_PATH.write_text(report(records, "held_out", [], cache, elapsed, looks))
            print(f"Held-out report written to {HELD_OUT_PATH.name}; held-out look counter now {full}.")
    elif "held_out" in sides:
        print(f"Partial held-out look recorded in {RESULTS_PATH.name} (now {partial}).")
    for side in sides:
        print()
        print("\n".join(summary_table(records, side)))
    print("\n".join(target_lines(records)))
    wrong = [r for r in records if r.audit and not r.acceptable(r.audit.model)]
    print(f"\nNot acceptable: {len(wrong)} of {len(records)}")
    for r in wrong:
        print(
            f"  {r.case.label} [{r.case.split}]: {SHORT.get(r.audit.model, r.audit.model)} vs "
            f"{_set(r.truth['acceptable'])} ({r.regret(r.audit.model):.2f} pp)"
        )
    for q in quick_rows:
        print(
            f"quick {q['name']}: expected {q['expected']} acceptable={q['in_acceptable']} "
            f"lead over others' mean {100 * q['gap_to_others_mean']:.1f} pp; audit {q['audit']}"
        )
    print(f"\n{cache.computed} truth entries computed ({cache.seconds:.0f} s); wall time {elapsed:.0f} s")
    return 0


if __name__ == "__main__":
    raise SystemExit(main())
