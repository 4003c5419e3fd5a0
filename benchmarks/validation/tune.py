"""Tune the recommendation's switching rule on the **tuning** split only.

For each tuning case the audit is run once; the ``expected_performance`` details (predicted
accuracy and log-loss of every candidate and the paired standard errors) are kept, and the
decision is replayed for a grid of ``z`` (``Config.performance_switch_se``) and ``g``
(``Config.log_loss_guard_se``), with the log-loss guard as the check applies it
(``checks.expected_performance._not_contenders``: a candidate is ruled out by a clearly lower
log-loss only when its probabilities have collapsed, or when the other candidate is of another
kind and its accuracy lead over it is weaker evidence than its log-loss deficit) and, for
comparison, the earlier guard (ruled out whenever its log-loss exceeds the lowest by ``g``
paired SE). Prints, per rule: acceptable share over all
and over the informative cases (not all four acceptable), mean and max regret, cases above 5 pp,
and the same for the four-model CV pick. Never reads the held-out split.

    .venv/bin/python benchmarks/validation/tune.py            # all tuning cases
    .venv/bin/python benchmarks/validation/tune.py --only iris tidy_trio
"""

from __future__ import annotations

import argparse
import sys
import warnings
from pathlib import Path

import numpy as np

sys.path.insert(0, str(Path(__file__).resolve().parent))

import study

from discaudit.checks.expected_performance import _no_feature_log_loss, _not_contenders

ORDER = ("lda", "regularized_lda", "qda", "logistic_regression")
Z_GRID = (0.0, 0.5, 0.75, 1.0, 1.5, 2.0)
G_GRID = (0.5, 1.0, 1.5, 2.0, 3.0)


def replay(details: dict, counts: np.ndarray, z: float, g: float, guard: str = "kind") -> str:
    """The most efficient contender whose accuracy is within ``z`` paired SE of the best contender.

    ``guard="kind"`` rules candidates out as the check does; ``guard="lowest"`` is the earlier rule
    (ruled out when the log-loss exceeds the lowest by more than ``g`` paired SE)."""
    cand, paired = details["candidates"], details["paired"]
    scored = [m for m in ORDER if m in cand]
    lowest = min(scored, key=lambda m: (cand[m]["log_loss"], ORDER.index(m)))
    if guard == "kind":
        out = _not_contenders(scored, cand, paired, z, g, _no_feature_log_loss(counts), lowest)
    else:
        out = {
            m: {}
            for m in scored
            if m != lowest and paired[m][lowest]["log_loss_difference"] > g * paired[m][lowest]["log_loss_se"]
        }
    keep = [m for m in scored if m not in out]
    best = max(keep, key=lambda m: (cand[m]["accuracy"], -ORDER.index(m)))
    within = [
        m for m in keep if m == best or paired[best][m]["accuracy_difference"] <= z * paired[best][m]["accuracy_se"]
    ]
    if not details.get("beats_majority_rule", True):
        within = scored
    return within[0]


def main(argv: list[str] | None = None) -> int:
    ap = argparse.ArgumentParser()
    ap.add_argument("--only", nargs="*")
    ap.add_argument("--z", type=float, default=1.0, help="list the misses of this rule")
    ap.add_argument("--g", type=float, default=1.0, help="list the misses of this rule")
    args = ap.parse_args(argv)
    import discaudit

    cases = study.tuning_cases(args.only, audit=False)
    rows = []
    for c in cases:
        X, y, _, _ = c.data()
        with warnings.catch_warnings():
            warnings.simplefilter("ignore")
            v = discaudit.preflight(X, y, random_state=0)
        f = v.findings.get("expected_performance")
        if f is None or f.status == "skip":
            print(f"{c.name} seed {c.seed}: expected_performance skipped: {f.summary if f else 'absent'}")
            continue
        counts = np.unique(np.asarray(y), return_counts=True)[1]
        rows.append((c, f.details, counts, v.recommendation.model))
    print(f"{len(rows)} tuning cases scored")
    print(f"{'rule':<22} {'acc all':>8} {'acc inf':>8} {'mean pp':>8} {'max pp':>7} {'>5pp':>5}")

    def line(name: str, picks: list[str], keep=lambda c: True) -> None:
        sel = [(c, p) for (c, _, _, _), p in zip(rows, picks) if keep(c)]
        ok = [p in c.acceptable for c, p in sel]
        inf = [o for (c, _), o in zip(sel, ok) if len(c.acceptable) < 4]
        reg = [c.regret(p) for c, p in sel]
        print(
            f"{name:<22} {100 * np.mean(ok):8.1f} {100 * np.mean(inf) if inf else float('nan'):8.1f} "
            f"{np.mean(reg):8.2f} {np.max(reg):7.2f} {sum(r > 5 for r in reg):5d}"
        )

    for kind in ("simulated", "open data"):
        print(f"-- {kind}")

        def only(c, kind=kind):
            return c.kind == kind

        for g in G_GRID:
            for z in Z_GRID:
                line(f"kind guard z={z:g} g={g:g}", [replay(d, n, z, g) for _, d, n, _ in rows], only)
        for z in (0.5, 1.0):
            line(f"lowest guard z={z:g} g=1", [replay(d, n, z, 1.0, "lowest") for _, d, n, _ in rows], only)
        line("audit", [m for _, _, _, m in rows], only)
        line("cv pick", [c.cv_pick for c, _, _, _ in rows], only)
    picks = [replay(d, n, args.z, args.g) for _, d, n, _ in rows]
    misses = [(c, p) for (c, _, _, _), p in zip(rows, picks) if p not in c.acceptable]
    for c, p in sorted(misses, key=lambda t: -t[0].regret(t[1])):
        print(f"  miss: {c.name} seed {c.seed}: chose {p}, acceptable {c.acceptable}, regret {c.regret(p):.1f}")
    return 0


if __name__ == "__main__":
    raise SystemExit(main())
