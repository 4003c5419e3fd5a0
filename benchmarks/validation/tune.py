"""Tune the recommendation's switching rule on the **tuning** split only.

For each tuning case the audit is run once; the ``expected_performance`` details (predicted
accuracy of every candidate and the paired standard errors) are kept, and the choice "most
efficient candidate within ``z`` paired SE of the best" is replayed for several ``z`` (the
``Config.performance_switch_se`` candidates). Prints, per ``z``: acceptable share over all and
over the informative cases (not all four acceptable), mean and max regret, cases above 5 pp,
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

ORDER = ("lda", "regularized_lda", "qda", "logistic_regression")
Z_GRID = (0.0, 0.25, 0.5, 0.75, 1.0, 1.5, 2.0, 3.0)


def replay(details: dict, z: float) -> str:
    """The most efficient candidate whose accuracy is within z paired SE of the best."""
    cand = details["candidates"]
    best = details["best"]
    for m in ORDER:
        if m not in cand:
            continue
        if m == best:
            return m
        d = details["paired"][best][m]
        if d["accuracy_difference"] <= z * d["accuracy_se"]:
            return m
    return best


def replay_guarded(details: dict, z: float, z_ll: float) -> str:
    """As :func:`replay`, among candidates whose log-loss is not worse than the best log-loss by more
    than ``z_ll`` paired SE (a guard against accuracy that is high by chance while the predictive
    probabilities have collapsed)."""
    cand = details["candidates"]
    best_ll = min(cand, key=lambda m: cand[m]["log_loss"])
    keep = {
        m
        for m in cand
        if m == best_ll
        or details["paired"][m][best_ll]["log_loss_difference"] <= z_ll * details["paired"][m][best_ll]["log_loss_se"]
    }
    best = max(keep, key=lambda m: (cand[m]["accuracy"], -ORDER.index(m)))
    for m in ORDER:
        if m not in keep:
            continue
        if m == best:
            return m
        d = details["paired"][best][m]
        if d["accuracy_difference"] <= z * d["accuracy_se"]:
            return m
    return best


def main(argv: list[str] | None = None) -> int:
    ap = argparse.ArgumentParser()
    ap.add_argument("--only", nargs="*")
    ap.add_argument("--z", type=float, default=0.5, help="list the misses of this rule")
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
        rows.append((c, f.details, v.recommendation.model))
    print(f"{len(rows)} tuning cases scored")
    header = f"{'rule':<12} {'acc all':>8} {'acc inf':>8} {'mean pp':>8} {'max pp':>7} {'>5pp':>5}"
    print(header)

    def line(name: str, picks: list[str]) -> None:
        ok = [p in c.acceptable for (c, _, _), p in zip(rows, picks)]
        inf = [o for (c, _, _), o in zip(rows, ok) if len(c.acceptable) < 4]
        reg = [c.regret(p) for (c, _, _), p in zip(rows, picks)]
        print(
            f"{name:<12} {100 * np.mean(ok):8.1f} {100 * np.mean(inf):8.1f} {np.mean(reg):8.2f} "
            f"{np.max(reg):7.2f} {sum(r > 5 for r in reg):5d}"
        )

    for z in Z_GRID:
        line(f"z = {z:g}", [replay(d, z) for _, d, _ in rows])
    for z_ll in (1.0, 2.0, 3.0, 5.0):
        for z in (0.0, 0.5, 1.0):
            line(f"g{z_ll:g} z{z:g}", [replay_guarded(d, z, z_ll) for _, d, _ in rows])
    line("log-loss", [min(d["candidates"], key=lambda m: d["candidates"][m]["log_loss"]) for _, d, _ in rows])
    line("audit", [m for _, _, m in rows])
    line("cv pick", [c.cv_pick for c, _, _ in rows])
    misses = [(c, replay(d, args.z)) for c, d, _ in rows if replay(d, args.z) not in c.acceptable]
    for c, p in sorted(misses, key=lambda t: -t[0].regret(t[1])):
        print(f"  miss at z: {c.name} seed {c.seed}: chose {p}, acceptable {c.acceptable}, regret {c.regret(p):.1f}")
    return 0


if __name__ == "__main__":
    raise SystemExit(main())
