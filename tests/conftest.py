"""Shared fixtures: open data sets shipped by scikit-learn and the invented demo data."""

from __future__ import annotations

import sys
from pathlib import Path

import numpy as np
import pandas as pd
import pytest

ROOT = Path(__file__).resolve().parents[1]
sys.path.insert(0, str(ROOT / "examples"))


@pytest.fixture(scope="session")
def iris() -> tuple[pd.DataFrame, pd.Series]:
    """Fisher's iris data as shipped by scikit-learn (open data)."""
    from sklearn.datasets import load_iris

    d = load_iris(as_frame=True)
    return d.data, d.target.map(dict(enumerate(d.target_names)))


@pytest.fixture(scope="session")
def wine() -> tuple[pd.DataFrame, pd.Series]:
    """The UCI wine recognition data as shipped by scikit-learn (open data)."""
    from sklearn.datasets import load_wine

    d = load_wine(as_frame=True)
    return d.data, d.target


@pytest.fixture(scope="session")
def flakes() -> tuple[pd.DataFrame, dict]:
    """The invented demo data (seeded), with the record of what was planted."""
    from make_flake_data import make_flakes

    return make_flakes()


@pytest.fixture()
def gaussian_classes() -> tuple[pd.DataFrame, np.ndarray]:
    """Invented, seeded: three Gaussian classes with a shared covariance (property tests only)."""
    rng = np.random.default_rng(7)
    n = 120
    cov = np.array([[1.0, 0.3, 0.0, 0.1], [0.3, 1.0, 0.2, 0.0], [0.0, 0.2, 1.0, 0.4], [0.1, 0.0, 0.4, 1.0]])
    means = np.array([[0, 0, 0, 0], [1.5, 0.5, 0, 0], [0, 1.5, 1.0, 0.5]], dtype=float)
    X = np.vstack([rng.multivariate_normal(m, cov, n) for m in means])
    y = np.repeat(np.array(["a", "b", "c"]), n)
    return pd.DataFrame(X, columns=["f1", "f2", "f3", "f4"]), y
