"""The validation study: does the audit's recommendation predict as well as the best model?

Run ``make validate`` (or ``python benchmarks/validation/study.py``). For every simulated
scenario (``scenarios.py``) and seed, and for every open data set (``open_data.py``), it

1. runs ``discaudit.preflight`` on the training rows and times it;
2. takes the truth (``truth.py``: test accuracy and log-loss of LDA, regularized LDA, QDA
   and logistic regression, the acceptable set, the time of a 5-fold CV of the four) from
   ``truth_cache.json``, computing and caching what is missing;
3. re-draws the training set (``REDRAWS`` more seeds, same population and test set) to see
   whether the acceptable set depends on the draw;
4. fits ``recommendation.estimator()`` when the Recommendation has that method, and
   records errors and ConvergenceWarnings;

and writes ``RESULTS.md`` beside this file and a summary to stdout.

Seeds: even seeds are the tuning set, odd seeds are held out. Open data sets are a third
group. Options: ``--refresh`` recomputes every truth entry; ``--only NAME ...`` restricts
the run to some scenarios / open data sets (RESULTS.md is then not written unless
``--write``).
"""

from __future__ import annotations

import argparse
import hashlib
import json
import os
import platform
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
import truth  # noqa: E402

SEEDS = (0, 1, 2, 3)
REDRAWS = (1, 2, 3)
CACHE_PATH = HERE / "truth_cache.json"
RESULTS_PATH = HERE / "RESULTS.md"
SHORT = {"lda": "LDA", "regularized_lda": "rLDA", "qda": "QDA", "logistic_regression": "LR"}
GROUPS = ("tuning", "held-out", "open data")


# ----------------------------------------------------------------------------------------
# Truth cache
# ----------------------------------------------------------------------------------------


def digest(*arrays: Any) -> str:
    """Fingerprint of a data draw (first 200 rows in float32), to notice changed generators."""
    h = hashlib.sha256()
    for a in arrays:
        a = np.asarray(a)
        h.update(str(a.shape).encode())
        head = a[:200]
        h.update(
            np.asarray(head, np.float32).tobytes() if head.dtype.kind == "f" else np.asarray(head).astype(str).tobytes()
        )
    return h.hexdigest()[:16]


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
    """``truth_cache.json``: entries keyed by scenario/seed/draw, each with its data digest."""

    def __init__(self, path: Path, refresh: bool):
        import sklearn

        self.path = path
        self.version = sklearn.__version__
        self.data: dict[str, Any] = {"sklearn_version": self.version, "numpy_version": np.__version__, "entries": {}}
        if path.exists() and not refresh:
            self.data = json.loads(path.read_text())
        self.computed = 0
        self.seconds = 0.0

    @property
    def stale_version(self) -> bool:
        return self.data.get("sklearn_version") != self.version

    def get(self, key: str, fingerprint: str, compute) -> dict[str, Any]:
        entry = self.data["entries"].get(key)
        if entry is not None and entry.get("digest") == fingerprint:
            return entry
        start = time.perf_counter()
        entry = _jsonable({**compute(), "digest": fingerprint, "sklearn_version": self.version})
        self.seconds += time.perf_counter() - start
        self.computed += 1
        self.data["entries"][key] = entry
        if self.computed == 1:
            self.data["sklearn_version"] = self.version
            self.data["numpy_version"] = np.__version__
        self.save()
        return entry

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
    other = sorted(
        {
            f"{w.category.__name__}: {str(w.message)[:100]}"
            for w in caught
            if not issubclass(w.category, ConvergenceWarning)
        }
    )
    return {
        "status": "convergence warning" if conv else "ok",
        "message": conv[0] if conv else "",
        "other_warnings": other,
        "accuracy": acc,
        "seconds": time.perf_counter() - start,
    }


# ----------------------------------------------------------------------------------------
# One record per scenario+seed or open data set
# ----------------------------------------------------------------------------------------


@dataclass
class Record:
    group: str
    name: str
    seed: int | None
    shape: str
    truth: dict[str, Any]
    audit: AuditRun
    draws: list[list[str]]
    estimator: dict[str, Any]
    territory: str = ""

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
    def cv_pick(self) -> str | None:
        cv = self.truth.get("cv")
        return cv["pick"] if cv else None

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
    n = f"{counts[0]}" if counts.min() == counts.max() else "/".join(str(c) for c in counts)
    return f"n_k={n}, p={np.asarray(X).shape[1]}, K={len(counts)}"


def simulated_records(cache: TruthCache, names: list[str], log) -> list[Record]:
    records = []
    for name in names:
        scen = scenarios.SCENARIOS[name]
        for seed in SEEDS:
            X, y, Xt, yt = scen.make(seed)
            t0 = time.perf_counter()
            entry = cache.get(
                f"sim/{name}/seed{seed}/draw0",
                digest(X, y, Xt, yt),
                lambda: {**truth.evaluate(X, y, Xt, yt), "cv": truth.four_model_cv(X, y)},
            )
            draws = [entry["acceptable"]]
            for j in REDRAWS:
                Xr, yr, Xt2, yt2 = scen.make(seed, train_seed=j)
                e = cache.get(
                    f"sim/{name}/seed{seed}/draw{j}", digest(Xr, yr, Xt2, yt2), lambda: truth.evaluate(Xr, yr, Xt2, yt2)
                )
                draws.append(e["acceptable"])
            run = run_audit(X, y)
            est = check_estimator(run, X, y, Xt, yt)
            group = "tuning" if seed % 2 == 0 else "held-out"
            rec = Record(group, name, seed, _shape(X, y), entry, run, draws, est, scen.territory)
            records.append(rec)
            log(
                f"{name:24s} seed {seed}  audit {SHORT.get(run.model, run.model):5s} acceptable {_set(entry['acceptable']):18s} "
                f"regret {rec.regret(run.model):5.2f} pp  ({time.perf_counter() - t0:5.1f} s)"
            )
    return records


def open_records(cache: TruthCache, names: list[str], log) -> list[Record]:
    records = []
    for name in names:
        source, load = open_data.OPEN_DATA[name]
        X, y = load()
        t0 = time.perf_counter()
        Xa, ya = X.to_numpy(float), y.to_numpy()
        entry = cache.get(
            f"open/{name}", digest(Xa, ya), lambda: {**truth.evaluate_cv(Xa, ya), "cv": truth.four_model_cv(Xa, ya)}
        )
        run = run_audit(X, y)
        est = check_estimator(run, X, y)
        rec = Record("open data", name, None, _shape(Xa, ya), entry, run, entry["per_repeat_acceptable"], est, source)
        records.append(rec)
        log(
            f"{name:24s} open     audit {SHORT.get(run.model, run.model):5s} acceptable {_set(entry['acceptable']):18s} "
            f"regret {rec.regret(run.model):5.2f} pp  ({time.perf_counter() - t0:5.1f} s)"
        )
    return records


def quick_records(cache: TruthCache) -> list[dict[str, Any]]:
    out = []
    for name, X, y, Xt, yt, expected in quick.unambiguous_cases():
        entry = cache.get(f"quick/{name}", digest(X, y, Xt, yt), lambda: truth.evaluate(X, y, Xt, yt))
        acc = {m: entry["models"][m]["accuracy"] for m in truth.MODELS}
        others = np.mean([a for m, a in acc.items() if m != expected])
        run = run_audit(X, y)
        out.append(
            {
                "name": name,
                "expected": expected,
                "accuracy": acc,
                "acceptable": entry["acceptable"],
                "gap_to_others_mean": acc[expected] - others,
                "in_acceptable": expected in entry["acceptable"],
                "audit": run.model,
                "shape": _shape(X, y),
            }
        )
    return out


# ----------------------------------------------------------------------------------------
# Summaries and the report
# ----------------------------------------------------------------------------------------

STRATEGIES = ("audit", "lda", "regularized_lda", "qda", "logistic_regression", "cv_pick", "estimator")
STRATEGY_LABEL = {
    "audit": "audit's recommendation",
    "lda": "always LDA",
    "regularized_lda": "always regularized LDA",
    "qda": "always QDA",
    "logistic_regression": "always logistic regression",
    "cv_pick": "pick by 5-fold CV of the four (reference)",
    "estimator": "audit's `estimator()` as configured (its own settings, not CV-tuned)",
}


def _choice(rec: Record, strategy: str) -> str:
    if strategy == "audit":
        return rec.audit.model
    if strategy == "cv_pick":
        return rec.cv_pick or "lda"
    return strategy


def summarize(records: list[Record]) -> dict[str, dict[str, dict[str, float]]]:
    """Acceptable share and regret of each strategy, per group.

    The ``estimator`` row scores ``recommendation.estimator()`` as configured by the audit
    (simulated scenarios only): regret against the best tuned candidate, and "acceptable"
    when within the margin that applies to the model type it implements.
    """
    out: dict[str, dict[str, dict[str, float]]] = {}
    for group in GROUPS + ("all simulated",):
        rs = [r for r in records if r.group == group or (group == "all simulated" and r.group != "open data")]
        if not rs:
            continue
        out[group] = {}
        for s in STRATEGIES:
            if s == "estimator":
                scored = [r for r in rs if r.estimator.get("accuracy") is not None]
                if not scored:
                    continue
                reg = [100.0 * (r.best_accuracy - r.estimator["accuracy"]) for r in scored]
                ok = [
                    r.best_accuracy - r.estimator["accuracy"]
                    <= r.truth["margin"].get(r.audit.model, truth.MIN_MARGIN) + 1e-12
                    for r in scored
                ]
            else:
                ok = [r.acceptable(_choice(r, s)) for r in rs]
                reg = [r.regret(_choice(r, s)) for r in rs]
            out[group][s] = {
                "n": len(ok),
                "acceptable": float(np.mean(ok)),
                "n_ok": int(np.sum(ok)),
                "mean_regret": float(np.mean(reg)),
                "max_regret": float(np.max(reg)),
            }
    return out


def _set(models: list[str]) -> str:
    return ",".join(SHORT[m] for m in truth.MODELS if m in models) or "-"


def _draw_text(rec: Record) -> str:
    counts, d = rec.draw_counts(), len(rec.draws)
    unstable = [f"{SHORT[m]} {c}/{d}" for m, c in counts.items() if 0 < c < d]
    return ("sensitive: " + ", ".join(unstable)) if unstable else f"stable ({d} draws)"


def _fmt_s(x: float | None) -> str:
    if x is None:
        return "-"
    return f"{x:.3f}" if x < 10 else f"{x:.1f}"


def _findings_line(run: AuditRun) -> str:
    if run.error:
        return f"audit raised {run.error}"
    notes = [
        f"{k} {st}" + (f" ({fig})" if fig else "") for k, (st, fig, _) in run.findings.items() if st in ("warn", "fail")
    ]
    rules = ", ".join(run.rules) or "none"
    return f"rules fired: {rules}; warn/fail findings: " + ("; ".join(notes) if notes else "none")


def target_lines(summary) -> list[str]:
    lines = []
    held = summary.get("held-out")
    if not held:
        return lines
    a = held["audit"]
    share = a["acceptable"]
    gap = 0.90 - share
    lines.append(
        f"- Held-out acceptable share: {100 * share:.1f}% ({a['n_ok']}/{a['n']}); target 90%: "
        + (
            "**met**."
            if gap <= 1e-12
            else f"**missed by {100 * gap:.1f} percentage points** "
            f"({int(np.ceil(0.9 * a['n'] - a['n_ok']))} more acceptable choices needed)."
        )
    )
    fixed = {s: held[s]["mean_regret"] for s in ("lda", "regularized_lda", "qda", "logistic_regression")}
    best_fixed = min(fixed, key=fixed.get)
    beat = a["mean_regret"] < fixed[best_fixed]
    lines.append(
        f"- Held-out mean regret: audit {a['mean_regret']:.2f} pp; best fixed choice {STRATEGY_LABEL[best_fixed]} "
        f"{fixed[best_fixed]:.2f} pp: "
        + (
            "**met** (below every fixed choice)."
            if beat
            else f"**missed** by {a['mean_regret'] - fixed[best_fixed]:.2f} pp."
        )
    )
    return lines


def _summary_table(summary) -> list[str]:
    lines = ["| group | strategy | acceptable | mean regret (pp) | max regret (pp) |", "|---|---|---|---|---|"]
    for group, block in summary.items():
        for s in STRATEGIES:
            if s not in block:
                continue
            b = block[s]
            lines.append(
                f"| {group} (n={b['n']}) | {STRATEGY_LABEL[s]} | {100 * b['acceptable']:.1f}% ({b['n_ok']}/{b['n']}) | "
                f"{b['mean_regret']:.2f} | {b['max_regret']:.2f} |"
            )
    return lines


def write_report(records, quick_rows, summary, cache: TruthCache, elapsed: float, path: Path) -> str:
    import sklearn

    import discaudit

    sims = [r for r in records if r.group != "open data"]
    opens = [r for r in records if r.group == "open data"]
    est_available = any(r.estimator.get("status") != "n/a" for r in records)
    L: list[str] = []
    L.append("# Validation study results\n")
    L.append(
        f"Written by `benchmarks/validation/study.py` (`make validate`) on {time.strftime('%Y-%m-%d %H:%M')} "
        f"with discaudit {discaudit.__version__}, scikit-learn {sklearn.__version__}, numpy {np.__version__}, "
        f"Python {platform.python_version()}. Truth cache: scikit-learn {cache.data.get('sklearn_version')}"
        + (" (**differs from the installed version: run with `--refresh`**)" if cache.stale_version else "")
        + f"; {cache.computed} entries computed in this run ({cache.seconds:.0f} s). Study wall time {elapsed:.0f} s.\n"
    )
    L.append(
        f"{len(scenarios.SCENARIOS)} simulated scenarios x {len(SEEDS)} seeds (even seeds = tuning, odd = held out), "
        f"{len(opens)} open data sets. Regret = best test accuracy minus the chosen model's, in percentage points. "
        "Acceptable = within max(1 pp, 2 SE of the paired accuracy difference) of the best (see README.md). "
        "The `estimator()` row scores the audit's configured estimator on the test set against the best CV-tuned "
        "candidate, with the margin of the model type it implements (approximate: no paired SE for it).\n"
    )
    L.append("## Summary\n")
    L += _summary_table(summary)
    L.append("")
    L.append("### Targets (issue 5)\n")
    L += target_lines(summary)
    L.append("")
    wrong = [r for r in records if not r.acceptable(r.audit.model)]
    L.append(f"## Where the audit's choice is not acceptable ({len(wrong)} of {len(records)})\n")
    for r in wrong:
        where = f"{r.name} seed {r.seed}" if r.seed is not None else f"{r.name} (open)"
        L.append(
            f"- **{where}** [{r.group}]: chose {SHORT.get(r.audit.model, r.audit.model)}, acceptable "
            f"{_set(r.truth['acceptable'])}, regret {r.regret(r.audit.model):.2f} pp. {_findings_line(r.audit)}"
        )
    L.append("")
    L += _why_section(wrong)
    L += _settings_section(sims)
    L.append("## Simulated scenarios, per seed\n")
    L.append(
        "Accuracies are on the independent test set. Draws: the acceptable set over the primary training draw and "
        f"{len(REDRAWS)} re-draws (same population and test set); a model acceptable in some draws but not all makes "
        "the scenario draw-sensitive. Times: the audit's wall time vs. a 5-fold CV of the four candidates "
        "(each with its inner tuning), both single-threaded.\n"
    )
    L.append(
        "| scenario | seed | shape | audit | acceptable | acc LDA / rLDA / QDA / LR | regret pp | audit s | 4-model CV s | CV pick | draws |"
        + (" estimator() |" if est_available else "")
    )
    L.append("|---|---|---|---|---|---|---|---|---|---|---|" + ("---|" if est_available else ""))
    for r in sims:
        acc = " / ".join(
            f"{100 * r.accuracy[m]:.1f}" + ("*" if r.truth["models"][m]["failed"] else "") for m in truth.MODELS
        )
        mark = "" if r.acceptable(r.audit.model) else " **x**"
        L.append(
            f"| {r.name} | {r.seed} | {r.shape} | {SHORT.get(r.audit.model, r.audit.model)}{mark} | {_set(r.truth['acceptable'])} | "
            f"{acc} | {r.regret(r.audit.model):.2f} | {_fmt_s(r.audit.seconds)} | {_fmt_s(r.cv_seconds)} | "
            f"{SHORT.get(r.cv_pick, '-')} | {_draw_text(r)} |"
            + (f" {_est_text(r.estimator)} |" if est_available else "")
        )
    L.append(
        "\n`*` = the model could not be fit (scikit-learn's QDA refuses a class with no more rows than features); "
        "it is scored as the trivial rule (largest training class) and is never acceptable.\n"
    )
    L.append("## Open data sets (repeated stratified cross-validation)\n")
    L.append(
        "| data set | source | shape | audit | acceptable | acc LDA / rLDA / QDA / LR | regret pp | audit s | 4-model CV s | CV pick | repeats |"
        + (" estimator() |" if est_available else "")
    )
    L.append("|---|---|---|---|---|---|---|---|---|---|---|" + ("---|" if est_available else ""))
    for r in opens:
        acc = " / ".join(
            f"{100 * r.accuracy[m]:.1f}" + ("*" if r.truth["models"][m]["failed"] else "") for m in truth.MODELS
        )
        mark = "" if r.acceptable(r.audit.model) else " **x**"
        L.append(
            f"| {r.name} | {r.territory} | {r.shape} | {SHORT.get(r.audit.model, r.audit.model)}{mark} | {_set(r.truth['acceptable'])} | "
            f"{acc} | {r.regret(r.audit.model):.2f} | {_fmt_s(r.audit.seconds)} | {_fmt_s(r.cv_seconds)} | "
            f"{SHORT.get(r.cv_pick, '-')} | {_draw_text(r)} |"
            + (f" {_est_text(r.estimator)} |" if est_available else "")
        )
    scheme = opens[0].truth.get("scheme", "") if opens else ""
    L.append(
        f"\nScheme: {scheme}, per-row correctness averaged over repeats; 'repeats' compares the acceptable set of each "
        "repeat alone. The audit sees the whole data set; the 4-model CV time is one 5-fold CV on the whole data set.\n"
    )
    sens = sorted({r.name for r in records if r.draw_sensitive})
    L.append(f"## Draw-sensitive scenarios ({len(sens)})\n")
    L.append(", ".join(sens) if sens else "none")
    L.append("")
    L.append("## `recommendation.estimator()` check\n")
    if not est_available:
        L.append("Skipped: this version's `Recommendation` has no `estimator()` method yet.\n")
    else:
        bad = [r for r in records if r.estimator.get("status") not in ("ok", "n/a")]
        L.append(
            f"Fitted on the training rows of every scenario+seed and on every open data set: {len(records) - len(bad)} ok, "
            f"{len(bad)} with an error or a ConvergenceWarning.\n"
        )
        for r in bad:
            L.append(f"- {r.name} seed {r.seed}: {r.estimator['status']}: {r.estimator.get('message', '')}")
        L.append("")
    L.append("## Quick scenarios (`quick.py`, for the end-to-end test)\n")
    L.append(
        "| case | shape | expected | acc LDA / rLDA / QDA / LR | acceptable | expected minus mean of others (pp) | audit today |"
    )
    L.append("|---|---|---|---|---|---|---|")
    for q in quick_rows:
        acc = " / ".join(f"{100 * q['accuracy'][m]:.1f}" for m in truth.MODELS)
        L.append(
            f"| {q['name']} | {q['shape']} | {SHORT[q['expected']]} | {acc} | {_set(q['acceptable'])} | "
            f"{100 * q['gap_to_others_mean']:.1f} | {SHORT.get(q['audit'], q['audit'])} |"
        )
    L.append("")
    L.append("## Scenario catalogue\n")
    L.append("| scenario | territory | training rows per class | test rows |")
    L.append("|---|---|---|---|")
    for s in scenarios.SCENARIOS.values():
        L.append(f"| {s.name} | {s.territory} | {'/'.join(map(str, s.n_per_class))} | {s.n_test} |")
    L.append("")
    escaped = sorted({w for r in records for w in r.audit.escaped_warnings})
    if escaped:
        L.append("## Warnings that escaped `preflight`\n")
        L += [f"- {w}" for w in escaped]
        L.append("")
    conv = sorted(
        {
            f"{r.name}: {m}: {w}"
            for r in records
            for m, v in r.truth["models"].items()
            for w in v.get("convergence_warnings", [])
        }
    )
    L.append("## Truth fits: convergence\n")
    L.append("No ConvergenceWarning in any truth fit." if not conv else "\n".join(f"- {c}" for c in conv))
    L.append("")
    text = "\n".join(L)
    path.write_text(text)
    return text


def _why_section(wrong: list[Record]) -> list[str]:
    """Misses grouped by the model chosen and the rule that chose it (the first that fired)."""
    groups: dict[tuple[str, str], list[Record]] = {}
    for r in wrong:
        groups.setdefault((r.audit.model, r.audit.rules[0] if r.audit.rules else "no rule fired"), []).append(r)
    if not groups:
        return []
    L = [
        "### Why: misses by the rule that chose the model\n",
        "| chosen | deciding rule | misses (tuning / held-out / open) | total regret pp | truth preferred | scenarios |",
        "|---|---|---|---|---|---|",
    ]
    for (model, rule), rs in sorted(groups.items(), key=lambda kv: -sum(r.regret(r.audit.model) for r in kv[1])):
        counts = " / ".join(str(sum(r.group == g for r in rs)) for g in GROUPS)
        preferred = {}
        for r in rs:
            preferred[r.truth["best"]] = preferred.get(r.truth["best"], 0) + 1
        pref = ", ".join(f"{SHORT[m]} {c}" for m, c in sorted(preferred.items(), key=lambda kv: -kv[1]))
        names = ", ".join(sorted({r.name for r in rs}))
        L.append(
            f"| {SHORT.get(model, model)} | {rule} | {counts} | {sum(r.regret(r.audit.model) for r in rs):.1f} | "
            f"best: {pref} | {names} |"
        )
    L.append("")
    return L


def _settings_section(sims: list[Record]) -> list[str]:
    """How the audit's suggested settings compare with the CV-tuned candidate of the same type."""
    rows: dict[str, list[tuple[float, Record]]] = {}
    for r in sims:
        acc = r.estimator.get("accuracy")
        if acc is None or r.audit.model not in r.accuracy or r.truth["models"][r.audit.model]["failed"]:
            continue
        rows.setdefault(r.audit.model, []).append((100.0 * (r.accuracy[r.audit.model] - acc), r))
    if not rows:
        return []
    L = [
        "### Suggested settings vs. CV-tuned settings\n",
        "Test accuracy of the CV-tuned candidate minus that of `recommendation.estimator()` (same model type, the "
        "audit's own settings), simulated scenarios; positive = the suggested settings lose accuracy.\n",
        "| model | n | mean pp | worst pp (scenario seed) |",
        "|---|---|---|---|",
    ]
    for model in truth.MODELS:
        if model not in rows:
            continue
        diffs = rows[model]
        worst = max(diffs, key=lambda t: t[0])
        L.append(
            f"| {SHORT[model]} | {len(diffs)} | {np.mean([d for d, _ in diffs]):.2f} | "
            f"{worst[0]:.2f} ({worst[1].name} {worst[1].seed}) |"
        )
    L.append("")
    return L


def _est_text(e: dict[str, Any]) -> str:
    if e.get("status") == "n/a":
        return "n/a"
    if e.get("status") != "ok":
        return e["status"]
    return "ok" + (f", acc {100 * e['accuracy']:.1f}" if e.get("accuracy") is not None else "")


# ----------------------------------------------------------------------------------------


def main(argv: list[str] | None = None) -> int:
    parser = argparse.ArgumentParser(description=__doc__.split("\n\n")[0])
    parser.add_argument("--refresh", action="store_true", help="recompute every truth entry")
    parser.add_argument("--only", nargs="+", metavar="NAME", help="restrict to these scenarios / open data sets")
    parser.add_argument("--write", action="store_true", help="write RESULTS.md even with --only")
    parser.add_argument("--quiet", action="store_true", help="no per-scenario progress lines")
    parser.add_argument("--results", type=Path, default=RESULTS_PATH, help="report file (default: RESULTS.md here)")
    parser.add_argument(
        "--cache", type=Path, default=CACHE_PATH, help="truth cache file (default: truth_cache.json here)"
    )
    args = parser.parse_args(argv)

    from threadpoolctl import threadpool_limits

    threadpool_limits(1)  # light on a shared machine; timings are single-threaded
    start = time.perf_counter()
    cache = TruthCache(args.cache, refresh=args.refresh)

    def log(msg: str) -> None:
        if not args.quiet:
            print(msg, flush=True)

    sim_names = [n for n in scenarios.SCENARIOS if not args.only or n in args.only]
    open_names = [n for n in open_data.OPEN_DATA if not args.only or n in args.only]
    records = simulated_records(cache, sim_names, log) + open_records(cache, open_names, log)
    quick_rows = quick_records(cache)
    summary = summarize(records)
    elapsed = time.perf_counter() - start
    if not args.only or args.write:
        write_report(records, quick_rows, summary, cache, elapsed, args.results)
    print()
    print("\n".join(_summary_table(summary)))
    print()
    print("\n".join(target_lines(summary)))
    wrong = [r for r in records if not r.acceptable(r.audit.model)]
    print(f"\nNot acceptable: {len(wrong)} of {len(records)}")
    for r in wrong:
        where = f"seed {r.seed}" if r.seed is not None else "(open)"
        print(
            f"  {r.name} {where} [{r.group}]: {SHORT.get(r.audit.model, r.audit.model)} vs {_set(r.truth['acceptable'])} "
            f"({r.regret(r.audit.model):.2f} pp)"
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
