"""Benchmark: stream a 20-million-row Parquet file through `discaudit check --stream`.

Writes seeded Gaussian data (3 classes, 10 features, 20 x 10^6 rows, about 1.7 GB) to a Parquet
file in a temporary folder, audits it in a child process and reports the wall time and the child's
peak resident memory (the issue's target: under 2 GB).

    python benchmarks/bench_stream.py [--rows 20000000] [--keep FILE]
"""

from __future__ import annotations

import argparse
import resource
import subprocess
import sys
import tempfile
import time
from pathlib import Path

import numpy as np
import pyarrow as pa
import pyarrow.parquet as pq


def write(path: Path, rows: int, p: int = 10, seed: int = 0) -> None:
    rng = np.random.default_rng(seed)
    writer = None
    for start in range(0, rows, 500_000):
        n = min(500_000, rows - start)
        y = rng.integers(0, 3, n)
        X = rng.normal(size=(n, p)) + y[:, None] * 0.5
        table = pa.table({**{f"f{j}": X[:, j] for j in range(p)}, "label": y.astype(str)})
        writer = writer or pq.ParquetWriter(path, table.schema)
        writer.write_table(table)
    assert writer is not None
    writer.close()


def main() -> None:
    parser = argparse.ArgumentParser(description=__doc__.splitlines()[0])
    parser.add_argument("--rows", type=int, default=20_000_000)
    args = parser.parse_args()
    with tempfile.TemporaryDirectory() as folder:
        path = Path(folder) / "rows.parquet"
        write(path, args.rows)
        size = path.stat().st_size
        start = time.perf_counter()
        cmd = [
            sys.executable,
            "-m",
            "discaudit",
            "check",
            str(path),
            "--target",
            "label",
            "--stream",
            "--format",
            "json",
            "--output",
            str(Path(folder) / "report.json"),
        ]
        status = subprocess.run(cmd, check=False).returncode
        seconds = time.perf_counter() - start
        peak_mb = resource.getrusage(resource.RUSAGE_CHILDREN).ru_maxrss / 1024
    print(
        f"{args.rows:,} rows ({size / 1e9:.2f} GB Parquet): exit {status}, {seconds:.1f} s, peak RSS {peak_mb:.0f} MB"
    )


if __name__ == "__main__":
    main()
