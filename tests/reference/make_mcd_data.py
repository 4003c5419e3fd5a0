"""Write the data sets of the robustbase MCD reference to CSV (run before make_mcd_reference.R).

Run from the repository root::

    python tests/reference/make_mcd_data.py
    Rscript tests/reference/make_mcd_reference.R

Data sets: Fisher's iris per species and the UCI wine data per cultivar (both shipped by
scikit-learn), one invented, seeded data set with heavy tails and a cluster of outliers, and one
larger invented data set with shifted rows in the size range where the default search is
DetMCD alone.
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


def invented_large() -> np.ndarray:
    """1,000 rows, p = 3: correlated Gaussian rows with 10 % of them shifted and scattered.

    Size and dimension where ``mcd(method="auto")`` runs DetMCD alone (p <= 4, n >= 800).
    """
    rng = np.random.default_rng(20120619)
    p = 3
    A = rng.standard_normal((p, p)) / np.sqrt(p) + np.eye(p)
    X = rng.standard_normal((1000, p)) @ A
    X[:100] += np.array([5.0, -4.0, 3.0]) + rng.standard_normal((100, p))
    return X


def datasets() -> dict[str, tuple[np.ndarray, list[str]]]:
    iris, wine = load_iris(), load_wine()
    out: dict[str, tuple[np.ndarray, list[str]]] = {}
    for k, name in enumerate(iris.target_names):
        out[f"iris_{name}"] = (iris.data[iris.target == k], list(iris.feature_names))
    for k in range(3):
        out[f"wine_class{k}"] = (wine.data[wine.target == k], list(wine.feature_names))
    out["invented_t3_cluster"] = (invented(), [f"x{j}" for j in range(5)])
    out["invented_p3_shifted"] = (invented_large(), [f"x{j}" for j in range(3)])
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
