"""How often the certificates of the separation check fire (overlap, separation), and the time they save.

Run from the repository root::

    python benchmarks/bench_separation.py                  # n 500 .. 10,000, p 5 / 10 / 30
    python benchmarks/bench_separation.py --quick          # n 500 and 2,000, p 10, two seeds

Data: the classes of ``bench_preflight.make_data`` (three seeded Gaussian classes, class shifts of
norm 1.5, mildly unequal covariances, one collinear feature in ten), and the same with the shifts
scaled by ``--spread`` factors (3 and 6 by default: farther apart, up to separated one-versus-rest
comparisons). For each case ``detect_separation`` runs with the certificates and without them
(``certify_overlap=False, certify_separation=False``), with the audit's ``separation_max_rows``
(500) and seed 0, on one BLAS thread; the fastest of ``--repeat`` runs counts. Reported per (n, p,
spread): comparisons, how many ended "none", how many the overlap certificate decided (it can
decide only "none"), how many detection programs the separation certificate stood in for, whether
the two results agree (kinds, boundary rows, features; hyperplanes to 1e-9), and both times.
"""

from __future__ import annotations

import argparse
import sys
import time
from pathlib import Path
from typing import Any

import numpy as np

HERE = Path(__file__).resolve().parent
sys.path.insert(0, str(HERE.parent))
sys.path.insert(0, str(HERE))

import bench_preflight  # noqa: E402  (benchmarks/ is not a package)

import discaudit.stats.separation as separation  # noqa: E402

MAX_ROWS = 500  # Config().separation_max_rows


def spread_data(n: int, p: int, spread: float, seed: int) -> tuple[np.ndarray, np.ndarray]:
    """bench_preflight.make_data with the class shifts multiplied by ``spread`` (class means moved apart)."""
    X, y = bench_preflight.make_data(n, p, seed)
    if spread != 1.0:
        means = np.array([X[y == k].mean(axis=0) for k in range(3)])
        X = X + (spread - 1.0) * means[y]
    return X, y


def best_time(work: Any, repeat: int) -> tuple[Any, float]:
    result, best = None, float("inf")
    for _ in range(repeat):
        start = time.perf_counter()
        result = work()
        best = min(best, time.perf_counter() - start)
    return result, best


def measure(n: int, p: int, spread: float, seed: int, repeat: int) -> dict[str, Any]:
    X, y = spread_data(n, p, spread, seed)
    fired: list[str] = []
    original = separation._certificate

    def counting(A: np.ndarray, row_norm: Any, **kinds: bool) -> Any:
        found = original(A, row_norm, **kinds)
        if found is not None:
            fired.append(found[0])
        return found

    def run() -> Any:
        fired.clear()  # one run's calls
        return separation.detect_separation(X, y, max_rows=MAX_ROWS, random_state=0)

    separation._certificate = counting  # type: ignore[assignment]
    try:
        with_cert, t_with = best_time(run, repeat)
    finally:
        separation._certificate = original  # type: ignore[assignment]
    comparisons = len(with_cert.comparisons)
    without, t_without = best_time(
        lambda: separation.detect_separation(
            X, y, max_rows=MAX_ROWS, random_state=0, certify_overlap=False, certify_separation=False
        ),
        repeat,
    )
    return {
        "comparisons": comparisons,
        "none": sum(c.kind == "none" for c in without.comparisons),
        "hits": fired.count("overlap"),
        "separated": fired.count("separated"),
        "identical": _agree(with_cert, without),
        "with": t_with,
        "without": t_without,
    }


def _agree(a: Any, b: Any) -> bool:
    """Same kinds, boundary rows and features; hyperplanes within 1e-9 (the working sets may differ)."""
    for c, d in zip(a.comparisons, b.comparisons, strict=True):
        if (c.kind, c.boundary_rows, c.separating_features) != (d.kind, d.boundary_rows, d.separating_features):
            return False
        if c.direction is not None and not np.allclose(
            list(c.direction.values()), list(d.direction.values()), rtol=0.0, atol=1e-9
        ):
            return False
    return True


def main(argv: list[str] | None = None) -> int:
    parser = argparse.ArgumentParser(description=__doc__.split("\n\n")[0])
    parser.add_argument("--quick", action="store_true", help="n 500 and 2,000, p 10, two seeds")
    parser.add_argument("--seeds", type=int, default=5, help="data seeds per case (default 5)")
    parser.add_argument("--repeat", type=int, default=3, help="runs per timing, fastest counts (default 3)")
    parser.add_argument("--spread", default="1,3,6", help="factors on the class shifts (default 1,3,6)")
    args = parser.parse_args(argv)
    from threadpoolctl import threadpool_limits

    sizes = [(500, 10), (2000, 10)] if args.quick else [(n, p) for p in (5, 10, 30) for n in (500, 2000, 10_000)]
    seeds = range(2 if args.quick else args.seeds)
    spreads = [float(s) for s in args.spread.split(",")]
    print(
        "| (n, p) | spread | comparisons | ended none | decided by the overlap certificate | "
        "programs replaced by the separation certificate | agree | time with (ms) | time without (ms) | saved |"
    )
    print("|---|---|---|---|---|---|---|---|---|---|")
    with threadpool_limits(1):
        separation.detect_separation(*spread_data(300, 5, 1.0, 0), max_rows=MAX_ROWS, random_state=0)  # warm-up
        for n, p in sizes:
            for spread in spreads:
                rows = [measure(n, p, spread, bench_preflight.DATA_SEED + s, args.repeat) for s in seeds]
                total = {
                    k: sum(r[k] for r in rows) for k in ("comparisons", "none", "hits", "separated", "with", "without")
                }
                same = all(r["identical"] for r in rows)
                saved = 1 - total["with"] / total["without"]
                print(
                    f"| ({n:,}, {p}) | {spread:g} | {total['comparisons']} | {total['none']} | {total['hits']} | "
                    f"{total['separated']} | "
                    f"{'yes' if same else 'NO'} | {1e3 * total['with'] / len(rows):.1f} | "
                    f"{1e3 * total['without'] / len(rows):.1f} | {100 * saved:.0f} % |",
                    flush=True,
                )
    return 0


if __name__ == "__main__":
    sys.exit(main())
