"""Benchmark: a big Parquet file audited through DuckDB, through pyarrow's reader, and through the
pandas-batch chunked path (``preflight_chunks(file_chunks(...))``), plus a local Spark run.

Writes seeded Gaussian data (3 classes, 10 features; 20 x 10^6 rows by default, about 1.7 GB) to a
Parquet file in a temporary folder, audits it in one child process per reader and reports each
child's wall time and peak resident memory (``ru_maxrss`` from ``wait4``). The target (issue 19):
20M x 10 at least 3x faster than the chunked path's 53 s, with peak memory under 1 GB.

Spark runs on a smaller file (``--spark-rows``, default 1,000,000) in ``local[*]``; its memory is
the Python driver's (the JVM is a separate process sized by ``spark.driver.memory``).

    python benchmarks/bench_engines.py [--rows 20000000] [--spark-rows 1000000] [--skip spark,chunks] [--reuse FILE]

``--reuse FILE`` audits an existing file written by an earlier run (kept with ``--keep FILE``) instead of
writing a new one.
"""

from __future__ import annotations

import argparse
import json
import os
import shutil
import subprocess
import sys
import tempfile
import time
from pathlib import Path

import numpy as np
import pyarrow as pa
import pyarrow.parquet as pq

ROOT = Path(__file__).resolve().parents[1]

CHILD = {
    "chunks (pandas batches)": "from discaudit.stream import file_chunks, preflight_chunks\n"
    "v = preflight_chunks(file_chunks(PATH), 'label')",
    "duckdb": "from discaudit.stream import preflight_file\nv = preflight_file(PATH, 'label', reader='duckdb')",
    "arrow": "from discaudit.stream import preflight_file\nv = preflight_file(PATH, 'label', reader='arrow')",
    "spark local": "import os, sys\nos.environ['PYSPARK_PYTHON'] = sys.executable\n"
    "from pyspark.sql import SparkSession\n"
    "spark = SparkSession.builder.master('local[*]').config('spark.ui.enabled', 'false')"
    ".config('spark.driver.memory', '2g').getOrCreate()\n"
    "spark.sparkContext.setLogLevel('ERROR')\n"
    "import discaudit\nv = discaudit.preflight(spark.read.parquet(PATH), target='label')\nspark.stop()",
}


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


def run(name: str, path: Path) -> dict[str, object]:
    code = CHILD[name].replace("PATH", repr(str(path)))
    code += "\nprint('RESULT', __import__('json').dumps({'status': v.status, 'model': v.recommendation.model}))"
    env = {**os.environ, "PYTHONPATH": os.pathsep.join([str(ROOT), os.environ.get("PYTHONPATH", "")])}
    start = time.perf_counter()
    child = subprocess.Popen([sys.executable, "-c", code], stdout=subprocess.PIPE, stderr=subprocess.DEVNULL, env=env)
    assert child.stdout is not None
    out = child.stdout.read().decode()
    _, status, usage = os.wait4(child.pid, 0)
    seconds = time.perf_counter() - start
    verdict = next((json.loads(line[7:]) for line in out.splitlines() if line.startswith("RESULT ")), None)
    return {
        "reader": name,
        "exit": os.waitstatus_to_exitcode(status),
        "seconds": round(seconds, 1),
        "peak_mb": round(usage.ru_maxrss / 1024),
        "verdict": verdict,
    }


def main() -> None:
    parser = argparse.ArgumentParser(description=__doc__.splitlines()[0])
    parser.add_argument("--rows", type=int, default=20_000_000)
    parser.add_argument("--spark-rows", type=int, default=1_000_000)
    parser.add_argument("--skip", default="", help="comma-separated readers to leave out: chunks, duckdb, arrow, spark")
    parser.add_argument("--keep", type=Path, help="also copy the written file here, for a later --reuse")
    parser.add_argument("--reuse", type=Path, help="audit this file (written by --keep) instead of writing one")
    args = parser.parse_args()
    skip = {s.strip() for s in args.skip.split(",") if s.strip()}
    load = os.getloadavg()
    print(f"machine: {os.cpu_count()} cores, load average {load[0]:.2f} {load[1]:.2f} {load[2]:.2f}")
    print("| reader | rows | seconds | peak RSS (MB) | verdict |\n| --- | --- | --- | --- | --- |")
    with tempfile.TemporaryDirectory() as folder:
        path = args.reuse or Path(folder) / "rows.parquet"
        if args.reuse is None:
            write(path, args.rows)
            if args.keep is not None:
                shutil.copyfile(path, args.keep)
        rows = pq.ParquetFile(path).metadata.num_rows
        for name in CHILD:
            if name.split()[0] in skip or name == "spark local":
                continue
            r = run(name, path)
            print(
                f"| {name} | {rows:,} | {r['seconds']} | {r['peak_mb']} | {r['verdict'] or 'exit ' + str(r['exit'])} |"
            )
        if "spark" not in skip:
            small = Path(folder) / "spark.parquet"
            write(small, args.spark_rows)
            r = run("spark local", small)
            print(
                f"| spark local | {args.spark_rows:,} | {r['seconds']} | {r['peak_mb']} (driver) | {r['verdict'] or 'exit ' + str(r['exit'])} |"
            )


if __name__ == "__main__":
    main()
