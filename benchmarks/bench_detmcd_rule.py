"""Benchmark: where DetMCD alone reaches the MCD objective of DetMCD next to random starts.

Run from the repository root::

    python benchmarks/bench_detmcd_rule.py            # the coarse grid (a few minutes)
    python benchmarks/bench_detmcd_rule.py --quick    # p <= 8, two seeds
    # the finer grid the rule quotes:
    python benchmarks/bench_detmcd_rule.py --sizes 600,800,1000,1500,2500,5000,10000 --features 2,3,4,5 --seeds 6
    python benchmarks/bench_detmcd_rule.py --sizes 200,300,450,600,1000,1500 --features 2,3,4,5,6 --seeds 8

For every seeded case (``bench_mcd.compare_case``: clean Gaussian; 5 % and 20 % of the rows
shifted; 5 %, 10 % and 20 % of the rows in a tight cluster along the direction of least
variance; multivariate t(3) for heavy tails) at n rows and p features, three searches of
``discaudit.stats.mcd.mcd`` (the audit's call, ``finite_sample_correction=True``) are run:

- ``method="deterministic"``: the six DetMCD starts alone;
- ``method="combined"`` with seed s: DetMCD's starts next to 50 random (p+1)-subsets;
- the same with seed s + 1000, the yardstick of how reproducible the combined objective is.

Printed per (n, p) cell, over the kinds and seeds: how often DetMCD alone ends above the combined
search's raw objective (log det of the raw h-subset covariance, divisor h) by more than 1e-6 and
by more than 0.01 (a determinant 1 % larger), the largest such excess, the largest excess of the
combined search with the other seed (its own spread), the most rows whose flag (``outliers``)
differs between DetMCD alone and the combined search, and the time of each search. A second
table gives the same counts by contamination kind. The rule of ``mcd(method="auto")``
(``_DETMCD_ALONE_*`` in discaudit/stats/mcd.py) quotes these tables.
"""

from __future__ import annotations

import argparse
import os
import sys
import time
import warnings
from collections import defaultdict
from pathlib import Path
from typing import Any

import numpy as np

sys.path.insert(0, str(Path(__file__).resolve().parent))

from bench_mcd import compare_case  # benchmarks/ is not a package: found through sys.path

KINDS = ("clean", "shift5", "shift20", "cluster5", "cluster10", "cluster20", "t3")
SIZES = (40, 80, 150, 300, 600, 1_200, 2_500)
FEATURES = (2, 4, 8, 13, 20, 30)
#: Fewest rows per feature of a case (the audit fits a class robustly from 10 per feature on).
MIN_ROWS_PER_FEATURE = 5
#: "Above" means above by more than this in log det; "clearly above" by more than the second.
ABOVE = 1e-6
CLEARLY_ABOVE = 0.01


def one_case(kind: str, n: int, p: int, seed: int) -> dict[str, Any]:
    from discaudit.stats.mcd import mcd

    X = compare_case(kind, n, p, seed)
    out: dict[str, Any] = {}
    fits = {}
    for name, kwargs in (
        ("det", {"method": "deterministic", "random_state": seed}),
        ("comb", {"method": "combined", "random_state": seed}),
        ("comb2", {"method": "combined", "random_state": seed + 1000}),
    ):
        with warnings.catch_warnings():
            warnings.simplefilter("ignore")
            t = time.perf_counter()
            fits[name] = mcd(X, finite_sample_correction=True, **kwargs)
            out[f"t_{name}"] = time.perf_counter() - t
    ref = fits["comb"].raw_log_determinant
    out["det_excess"] = fits["det"].raw_log_determinant - ref
    out["seed_excess"] = fits["comb2"].raw_log_determinant - ref
    out["flags"] = int((fits["det"].outliers != fits["comb"].outliers).sum())
    out["seed_flags"] = int((fits["comb2"].outliers != fits["comb"].outliers).sum())
    return out


def summarize(rows: list[dict[str, Any]]) -> dict[str, Any]:
    det = np.array([r["det_excess"] for r in rows])
    seed = np.array([r["seed_excess"] for r in rows])
    return {
        "cases": len(rows),
        "above": int((det > ABOVE).sum()),
        "clearly": int((det > CLEARLY_ABOVE).sum()),
        "max_det": float(det.max()),
        "max_seed": float(seed.max()),
        "seed_clearly": int((seed > CLEARLY_ABOVE).sum()),
        "flags": max(r["flags"] for r in rows),
        "seed_flags": max(r["seed_flags"] for r in rows),
        "t_det": 1e3 * float(np.median([r["t_det"] for r in rows])),
        "t_comb": 1e3 * float(np.median([r["t_comb"] for r in rows])),
    }


HEADER = (
    f"{'cell':>16s} {'cases':>5s} {'above':>5s} {'>0.01':>5s} {'max det-comb':>12s} {'max seed':>9s} "
    f"{'seed>0.01':>9s} {'flags':>5s} {'seed flags':>10s} {'ms det':>7s} {'ms comb':>7s}"
)


def line(label: str, s: dict[str, Any]) -> str:
    return (
        f"{label:>16s} {s['cases']:5d} {s['above']:5d} {s['clearly']:5d} {s['max_det']:12.4f} "
        f"{s['max_seed']:9.4f} {s['seed_clearly']:9d} {s['flags']:5d} {s['seed_flags']:10d} "
        f"{s['t_det']:7.1f} {s['t_comb']:7.1f}"
    )


def main() -> None:
    parser = argparse.ArgumentParser(description=__doc__.split("\n")[0])
    parser.add_argument("--quick", action="store_true", help="p <= 8 and two seeds")
    parser.add_argument("--seeds", type=int, default=4)
    parser.add_argument("--sizes", default=",".join(map(str, SIZES)), help="rows per case, comma-separated")
    parser.add_argument("--features", default=",".join(map(str, FEATURES)), help="features per case")
    args = parser.parse_args()
    sizes = tuple(int(float(v)) for v in args.sizes.split(","))
    seeds = 2 if args.quick else args.seeds
    features = tuple(int(v) for v in args.features.split(","))
    features = tuple(p for p in features if p <= 8) if args.quick else features
    load = os.getloadavg()[0] if hasattr(os, "getloadavg") else float("nan")
    print(f"cpus: {os.cpu_count()}  load average (1 min): {load:.2f}", flush=True)
    by_cell: dict[tuple[int, int], list[dict[str, Any]]] = defaultdict(list)
    by_kind: dict[tuple[str, str], list[dict[str, Any]]] = defaultdict(list)
    for p in features:
        for n in sizes:
            if n < MIN_ROWS_PER_FEATURE * p:
                continue
            for kind in KINDS:
                for seed in range(seeds):
                    r = one_case(kind, n, p, seed)
                    by_cell[(n, p)].append(r)
                    by_kind[(kind, "n/p >= 10" if n >= 10 * p else "n/p < 10")].append(r)
            print(line(f"n={n} p={p}", summarize(by_cell[(n, p)])), flush=True)
    print("\nDetMCD alone against DetMCD + 50 random starts (same seed), raw log det, per (n, p):")
    print(HEADER)
    for (n, p), rows in sorted(by_cell.items()):
        print(line(f"n={n} p={p}", summarize(rows)))
    print("\nper contamination kind:")
    print(HEADER)
    for (kind, band), rows in sorted(by_kind.items()):
        print(line(f"{kind} {band}", summarize(rows)))


if __name__ == "__main__":
    main()
