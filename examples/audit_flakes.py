"""Audit the demo flake table and print the verdict table (what `make demo` runs)."""

from __future__ import annotations

import sys

import pandas as pd

import discaudit


def main(path: str = "examples/data/flakes.csv") -> None:
    frame = pd.read_csv(path, index_col="flake_id")
    verdict = discaudit.preflight(frame, target="family", random_state=0)
    print(verdict)


if __name__ == "__main__":
    main(*sys.argv[1:])
