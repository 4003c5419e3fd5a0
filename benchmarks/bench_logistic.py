"""Benchmark: the logistic estimate at (1e5, 30, K = 3) on one core, by leave-one-out and by ten folds.

Run from the repository root::

    python benchmarks/bench_logistic.py             # the benchmark data and three harder variants
    python benchmarks/bench_logistic.py --repeat 5

Data: ``bench_preflight.make_data`` (three seeded Gaussian classes, 0.40 / 0.35 / 0.25, shifts of
norm 1.5, some collinearity), then variants with the same rows: the features in uneven units
(column j multiplied by exp(2 g_j), g_j standard normal), and classes shifted 3x further apart
(nearly separable, where the fits at large C take the most iterations). BLAS runs on one thread
(threadpoolctl). One untimed call on 300 rows warms the imports; the fastest of ``--repeat`` runs
counts. Both scorings are timed on the same data: approximate leave-one-out
(``leave_one_out_logistic``, the audit's default, ``Config.logistic_scoring``) and stratified ten-fold
cross-validation (``cross_validated_logistic``). Nothing is written to disk. Target: well under 1.5 s
with the default subsample cap.
"""

from __future__ import annotations

import argparse
import itertools
import sys
import time
from pathlib import Path
from typing import Any

import numpy as np
from threadpoolctl import threadpool_limits

HERE = Path(__file__).resolve().parent
sys.path.insert(0, str(HERE))
sys.path.insert(0, str(HERE.parent))

from bench_preflight import make_data  # noqa: E402  (benchmarks/ is not a package)

from discaudit.stats.logistic import LogisticEstimate, cross_validated_logistic  # noqa: E402
from discaudit.stats.logistic_leave_one_out import leave_one_out_logistic  # noqa: E402

TARGET_SECONDS = 1.5


SCORINGS = {"leave-one-out": leave_one_out_logistic, "10-fold CV": cross_validated_logistic}


def _time(
    estimate: Any, X: np.ndarray, y: np.ndarray, scale: np.ndarray | None, repeat: int
) -> tuple[float, LogisticEstimate]:
    best = float("inf")
    for _ in range(max(repeat, 1)):
        t = time.perf_counter()
        est = estimate(X, y, 3, random_state=0, scale=scale)
        best = min(best, time.perf_counter() - t)
    return best, est


def main() -> None:
    parser = argparse.ArgumentParser(description=__doc__, formatter_class=argparse.RawDescriptionHelpFormatter)
    parser.add_argument("--repeat", type=int, default=3)
    args = parser.parse_args()
    n, p = 100_000, 30
    X, y = make_data(n, p)
    units = np.exp(2.0 * np.random.default_rng(1).standard_normal(p))
    means = np.array([X[y == k].mean(axis=0) for k in range(3)])
    far = X + 2.0 * means[y]  # class means 3x as far from the origin, same within-class spread
    cases = [
        ("benchmark data, raw", X, None),
        ("benchmark data, scale = column sd", X, X.std(axis=0)),
        ("uneven units, raw", X * units, None),
        ("nearly separable, raw", far, None),
    ]
    with threadpool_limits(1):
        for estimate in SCORINGS.values():
            estimate(X[:300], y[:300], 3, random_state=0)
        print(f"(n, p, K) = ({n}, {p}, 3), one BLAS thread, fastest of {args.repeat}")
        for (name, data, scale), (scoring, estimate) in itertools.product(cases, SCORINGS.items()):
            seconds, est = _time(estimate, data, y, scale, args.repeat)
            print(
                f"  {name:36s} {scoring:14s} {seconds:6.3f} s  (C = {est.C:g}, accuracy {est.accuracy:.3f}, "
                f"log-loss {est.log_loss:.3f}, rows {est.n_used}, converged {est.all_converged}) "
                f"{'ok' if seconds < TARGET_SECONDS else 'OVER TARGET'}"
            )


if __name__ == "__main__":
    main()
