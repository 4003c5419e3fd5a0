"""Audit the demo flake table, print the verdict table, then ask what the top remedies would do together
(what `make demo` runs)."""

from __future__ import annotations

import sys

import pandas as pd

import discaudit


def main(path: str = "examples/data/flakes.csv") -> None:
    frame = pd.read_csv(path, index_col="flake_id")
    verdict = discaudit.preflight(frame, target="family", random_state=0)
    print(verdict)
    change: dict[str, object] = {}
    for remedy in verdict.remedies[:3]:
        if remedy.helps:
            change.update(remedy.change)  # one remedy of each kind: their changes combine
    if change:
        print("\nWhat if the top remedies are applied together?")
        print(verdict.compare(verdict.what_if(**change)))


if __name__ == "__main__":
    main(*sys.argv[1:])
