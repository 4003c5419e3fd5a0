"""Benchmark: what a what-if and the remedy ranking cost (issue 20 targets).

Run from the repository root (``make bench`` runs it after the main benchmark)::

    python benchmarks/bench_what_if.py                   # demo data, (1e4, 10), (1e5, 30), (1e6, 50)
    python benchmarks/bench_what_if.py --sizes 1e5x30    # a subset

Data: the main benchmark's seeded Gaussian classes (``bench_preflight.make_data``) with three
planted problems so that remedies are proposed: column 0 multiplied by 1e4 (a scale gap), column 1
replaced by column 2 plus 1e-3 of noise (a near dependency), and 0.5% of the rows of class 0 moved by
10 in every feature (contamination); and the invented demo data (``examples/make_flake_data.py``).

Measured, each the fastest of ``--repeat`` runs in this process after a warm-up:

- the audit (``preflight``) and the share of its time spent ranking the remedies
  (``verdict.timings["remedies"]`` over the rest; target: at most 20%);
- the moment part of a what-if: the what-if source's ``apply`` with the rows held capped at
  ``Config.remedy_rows_per_class`` per class (as the ranking does) plus the checks that read the
  moments only and that the ranking re-runs (all but the covariance check), for dropping a feature, merging two classes and standardizing (target at (1e6, 50):
  under 0.1 s), and for dropping rows (which needs a block pass to collect them);
- a full ``verdict.what_if`` (every check, every row), with the time of its
  ``expected_performance`` check (leave-one-out pass and cross-validated logistic regression).

Printed as a Markdown table; nothing is written.
"""

from __future__ import annotations

import argparse
import sys
import time
from pathlib import Path
from typing import Any

import numpy as np
import pandas as pd

HERE = Path(__file__).resolve().parent
ROOT = HERE.parent
sys.path.insert(0, str(HERE))
sys.path.insert(0, str(ROOT))
sys.path.insert(0, str(ROOT / "examples"))

from bench_preflight import SIZES, make_data  # noqa: E402

import discaudit  # noqa: E402
from discaudit import audit as core  # noqa: E402
from discaudit import checks  # noqa: E402
from discaudit._threads import one_blas_thread  # noqa: E402
from discaudit.remedy_effects import COSTLY_MOMENT_CHECKS, MOMENT_CHECKS  # noqa: E402
from discaudit.sources.what_if import Change, apply  # noqa: E402

CONTAMINATED_SHARE = 0.005


def planted(n: int, p: int) -> tuple[pd.DataFrame, np.ndarray]:
    X, y = make_data(n, p)
    rng = np.random.default_rng([7, n, p])
    X[:, 0] *= 1e4
    X[:, 1] = X[:, 2] + 1e-3 * rng.standard_normal(n)
    rows = np.flatnonzero(y == 0)
    hit = rng.choice(rows, int(CONTAMINATED_SHARE * rows.size), replace=False)
    X[hit] += 10.0 * np.r_[1e4, np.ones(p - 1)]
    return pd.DataFrame(X, columns=[f"f{j}" for j in range(p)]), y


def demo() -> tuple[pd.DataFrame, np.ndarray]:
    from make_flake_data import make_flakes

    frame, _ = make_flakes()
    return frame.drop(columns=["family"]), frame["family"].to_numpy()


def best(fn: Any, repeat: int) -> tuple[float, Any]:
    times, out = [], None
    for _ in range(repeat):
        start = time.perf_counter()
        out = fn()
        times.append(time.perf_counter() - start)
    return min(times), out


def moment_part(verdict: discaudit.Verdict, change: Change, config: discaudit.Config) -> None:
    data = verdict.data
    assert data is not None
    changed = apply(data, change, rows_per_class=config.remedy_rows_per_class)
    registry = dict(checks.registry())
    with one_blas_thread():
        for key in (k for k in MOMENT_CHECKS if k not in COSTLY_MOMENT_CHECKS):  # what the ranking re-runs
            core._run_check(key, registry[key], changed, config, 0)


def run(name: str, X: pd.DataFrame, y: np.ndarray, repeat: int) -> dict[str, Any]:
    config = discaudit.Config()
    discaudit.preflight(X.iloc[:300], y[:300])  # warm-up
    t_audit, verdict = best(lambda: discaudit.preflight(X, y, config=config), repeat)
    ranking = verdict.timings["remedies"]
    classes = list(verdict.meta["classes"])
    feature = verdict.meta["features"][-1]
    rows = list(X.index[:10])
    out: dict[str, Any] = {
        "data": name,
        "n, p": f"{len(X)}, {X.shape[1]}",
        "audit s": t_audit,
        "ranking s": ranking,
        "ranking share": ranking / (t_audit - ranking),
        "remedies": ", ".join(f"{r.rank}:{r.action}{'' if r.helps else '(no help)'}" for r in verdict.remedies),
    }
    for label, change in (
        ("drop 1 feature", Change.of(drop_features=[feature])),
        ("merge 2 classes", Change.of(merge_classes=classes[:2])),
        ("standardize", Change.of(standardize=True)),
        ("drop 10 rows", Change.of(drop_rows=rows)),
    ):
        out[f"moment part: {label} s"] = best(lambda c=change: moment_part(verdict, c, config), repeat)[0]
    t_full, w = best(lambda: verdict.what_if(drop_features=[feature]), 1)
    out["full what-if (drop 1 feature) s"] = t_full
    out["of which expected_performance s"] = w.timings["expected_performance"]
    return out


def main() -> None:
    parser = argparse.ArgumentParser(description=__doc__.splitlines()[0])
    parser.add_argument("--sizes", default="demo,1e4x10,1e5x30,1e6x50", help="comma-separated: demo and/or sizes")
    parser.add_argument("--repeat", type=int, default=3, help="runs per timing (fastest kept); 1 at (1e6, 50)")
    args = parser.parse_args()
    results = []
    for size in args.sizes.split(","):
        if size == "demo":
            results.append(run("demo (flakes)", *demo(), args.repeat))
        else:
            n, p = SIZES[size]
            results.append(run("planted", *planted(n, p), 1 if n >= 1_000_000 else args.repeat))
        print(results[-1], flush=True)
    keys = list(results[0])
    print("\n| " + " | ".join(keys) + " |\n|" + "---|" * len(keys))
    for r in results:
        cells = [f"{v:.3f}" if isinstance(v, float) else str(v) for v in (r[k] for k in keys)]
        print("| " + " | ".join(cells) + " |")


if __name__ == "__main__":
    main()
