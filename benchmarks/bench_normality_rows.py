"""Power of the normality check's pairwise statistics against the rows they run on.

The normality check runs Mardia's tests and Henze-Zirkler on a seeded subsample of at most
``Config.pairwise_max_rows`` rows per class (default 2,500); their cost grows as rows squared.
This simulation asks whether fewer rows would give the same statuses. Run from the repository
root::

    python benchmarks/bench_normality_rows.py            # p 5, 10, 20, 30; rows 250 .. 2,500; 100 reps
    python benchmarks/bench_normality_rows.py --quick    # p 5, 10; rows 250, 500; 20 reps

Per replicate, m rows are drawn (seeded) from one distribution, and the check's class rule is
applied as ``checks/normality.py`` applies it to the pairwise statistics, at ``normality_alpha``
= 0.001: "rejects" when the smallest of the Mardia skewness, Mardia kurtosis and Henze-Zirkler
p-values is below alpha, and the Mardia kurtosis ratio b2,p / (p (p + 2)) is compared with
``mardia_kurtosis_ratio_large`` = 1.5. The per-feature size legs (|skewness| > 2, excess
kurtosis > 7) use up to 100,000 rows, not this subsample, and none of these alternatives
reaches them, so the status follows from the two numbers above:

- normal (the null): should pass; the share rejected is the size of the combined rule;
- multivariate t with 5 df (ratio (5 - 2) / (5 - 4) = 3, a large departure): should fail, i.e.
  reject with a ratio above 1.5;
- independent chi-square coordinates with 8 df (skewness 1, excess kurtosis 1.5 per coordinate;
  ratio 1 + 1.5 / (p + 2) below 1.5, a moderate departure): should warn, i.e. reject with a
  ratio below 1.5; and with 32 df (skewness 0.5, excess kurtosis 0.375: a mild departure);
- multivariate t with 8 df (ratio exactly 1.5, the anchor of the size rule; shown for
  orientation, its fail/warn split is a coin toss by design).

Every test is affine invariant, so the scatter matrix of each distribution does not matter.
Reported: the share of replicates with the expected status (and, for t8, the share failing),
and the time of the two statistics at m rows. One BLAS thread.
"""

from __future__ import annotations

import argparse
import sys
import time
from pathlib import Path
from typing import Any

import numpy as np

sys.path.insert(0, str(Path(__file__).resolve().parent.parent))

from discaudit import Config
from discaudit.stats.henze_zirkler import henze_zirkler
from discaudit.stats.mardia import mardia

SEED = 20_241_117


def draw(kind: str, m: int, p: int, rng: np.random.Generator) -> np.ndarray:
    """m rows of one distribution in p dimensions."""
    if kind == "normal":
        return rng.standard_normal((m, p))
    if kind in ("t5", "t8"):
        df = int(kind[1:])
        return rng.standard_normal((m, p)) / np.sqrt(rng.chisquare(df, size=(m, 1)) / df)
    if kind.startswith("chi2_"):
        return rng.chisquare(int(kind[5:]), size=(m, p))
    raise ValueError(kind)


EXPECTED = {"normal": "pass", "t5": "fail", "chi2_8": "warn", "chi2_32": "warn", "t8": "fail"}


def status(X: np.ndarray, config: Config) -> tuple[str, float]:
    """The class status from the pairwise statistics alone, and their time."""
    start = time.perf_counter()
    m = mardia(X, max_rows=X.shape[0])
    hz = henze_zirkler(X, max_rows=X.shape[0])
    seconds = time.perf_counter() - start
    p = X.shape[1]
    rejects = min(m.skew_p_value, m.kurt_p_value, hz.p_value) < config.normality_alpha
    ratio = m.kurtosis / (p * (p + 2))
    large = ratio > config.mardia_kurtosis_ratio_large or ratio < 1 / config.mardia_kurtosis_ratio_large
    return ("fail" if large else "warn") if rejects else "pass", seconds


def cell(kind: str, m: int, p: int, reps: int, config: Config) -> dict[str, Any]:
    hits, seconds = 0, []
    for r in range(reps):
        rng = np.random.default_rng([SEED, p, m, r, list(EXPECTED).index(kind)])
        got, t = status(draw(kind, m, p, rng), config)
        hits += got == EXPECTED[kind]
        seconds.append(t)
    return {"share": hits / reps, "seconds": float(np.median(seconds))}


def main(argv: list[str] | None = None) -> int:
    parser = argparse.ArgumentParser(description=__doc__.split("\n\n")[0])
    parser.add_argument("--quick", action="store_true", help="p 5 and 10, rows 250 and 500, 20 replicates")
    parser.add_argument("--reps", type=int, default=100, help="replicates per cell (default 100)")
    parser.add_argument("--rows", default="250,500,1000,1500,2500", help="subsample sizes m")
    parser.add_argument("--p", default="5,10,20,30", help="dimensions")
    args = parser.parse_args(argv)
    from threadpoolctl import threadpool_limits

    rows = [250, 500] if args.quick else [int(v) for v in args.rows.split(",")]
    dims = [5, 10] if args.quick else [int(v) for v in args.p.split(",")]
    reps = 20 if args.quick else args.reps
    config = Config()
    print(f"alpha {config.normality_alpha}, ratio threshold {config.mardia_kurtosis_ratio_large}, {reps} replicates")
    print("| p | m | normal: pass | t5: fail | chi2(8): warn | chi2(32): warn | t8: fail | time of Mardia + HZ (ms) |")
    print("|---|---|---|---|---|---|---|---|")
    with threadpool_limits(1):
        for p in dims:
            for m in rows:
                if m <= p + 1:
                    continue
                cells = {kind: cell(kind, m, p, reps, config) for kind in EXPECTED}
                print(
                    f"| {p} | {m:,} | "
                    + " | ".join(f"{cells[k]['share']:.2f}" for k in EXPECTED)
                    + f" | {1e3 * cells['normal']['seconds']:.1f} |",
                    flush=True,
                )
    return 0


if __name__ == "__main__":
    sys.exit(main())
