"""Write the data sets of the robustbase MCD reference to CSV (run before make_mcd_reference.R).

Run from the repository root::

    python tests/reference/make_mcd_data.py
    Rscript tests/reference/make_mcd_reference.R

Data sets: Fisher's iris per species and the UCI wine data per cultivar (both shipped by
scikit-learn), and one invented, seeded data set with heavy tails and a cluster of outliers.
Each CSV has a header row with the column names and full float64 precision (repr).
"""

from __future__ import annotations

import csv
from pathlib import Path

import numpy as np
from sklearn.datasets import load_iris, load_wine

HERE = Path(__file__).resolve().parent / "mcd_data"


def invented() -> np.ndarray:
    """300 rows, p = 5: multivariate t(3) rows with 15 % of them moved into a tight cluster."""
    rng = np.random.default_rng(20120618)
    p = 5
    A = rng.standard_normal((p, p)) / np.sqrt(p) + np.eye(p)
    X = rng.standard_t(3, size=(300, p)) @ A
    X[:45] = 6.0 + 0.3 * rng.standard_normal((45, p))
    return X


def datasets() -> dict[str, tuple[np.ndarray, list[str]]]:
    iris, wine = load_iris(), load_wine()
    out: dict[str, tuple[np.ndarray, list[str]]] = {}
    for k, name in enumerate(iris.target_names):
        out[f"iris_{name}"] = (iris.data[iris.target == k], list(iris.feature_names))
    for k in range(3):
        out[f"wine_class{k}"] = (wine.data[wine.target == k], list(wine.feature_names))
    out["invented_t3_cluster"] = (invented(), [f"x{j}" for j in range(5)])
    return out


def main() -> None:
    HERE.mkdir(exist_ok=True)
    for name, (X, columns) in datasets().items():
        with open(HERE / f"{name}.csv", "w", newline="") as fh:
            writer = csv.writer(fh)
            writer.writerow(columns)
            writer.writerows([repr(float(v)) for v in row] for row in X)
        print(f"{name}: {X.shape[0]} rows, {X.shape[1]} columns")


if __name__ == "__main__":
    main()
