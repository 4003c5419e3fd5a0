"""What a user would run instead of (or besides) the pre-flight audit, for the benchmark.

Each peer is a list of *parts*; each part is a function ``part(X, y) -> dict`` that does the
work and returns a few plain facts about it (never the timing: the caller times the call).
``bench_preflight.py`` runs every part in its own child process with a time budget, so a
part that does not finish is reported as such and the others are still measured.

Peers
-----
hand
    A hand-scripted pre-flight with general libraries: statsmodels'
    ``variance_inflation_factor`` for every column (design with a constant), pingouin's
    ``box_m`` and ``multivariate_normality`` (Henze-Zirkler) per class, scikit-learn's
    ``MinCovDet`` per class, statsmodels' ``MANOVA`` (Wilks' Lambda for the class effect).
cv
    Five-fold cross-validation (``cross_val_score``, ``n_jobs=1``) of the four candidate
    models: LDA (svd), LDA (lsqr, shrinkage="auto"), QDA (reg_param=0.01) and standardized
    logistic regression.
lda
    One ``LinearDiscriminantAnalysis().fit``.
floor
    One numpy pass computing per-class counts, means and scatter matrices: the least any
    moment-based audit must do.

pingouin's Henze-Zirkler builds several n x n matrices (about 5 n^2 float64 at its peak). When
that exceeds ``HZ_MEMORY_CAP`` for a class, the part runs it on a seeded random subsample of
``discaudit.Config().pairwise_max_rows`` rows of that class -- the same size the audit uses
for its pairwise statistics -- and says so in its result, as a user would have to.
"""

from __future__ import annotations

import warnings
from collections.abc import Callable
from typing import Any

import numpy as np

HZ_MEMORY_CAP = 2 * 1024**3  # bytes; above this pingouin's Henze-Zirkler runs on a subsample
HZ_SEED = 0

Part = Callable[[np.ndarray, np.ndarray], dict[str, Any]]


# ---------------------------------------------------------------------------------------
# hand-scripted pre-flight


def hand_vif(X: np.ndarray, y: np.ndarray) -> dict[str, Any]:
    """statsmodels' VIF of every feature, regressing it on the others with a constant."""
    import statsmodels.api as sm
    from statsmodels.stats.outliers_influence import variance_inflation_factor

    exog = sm.add_constant(X, has_constant="add")
    vifs = [variance_inflation_factor(exog, j) for j in range(1, exog.shape[1])]
    return {"max_vif": float(np.max(vifs))}


def hand_box_m(X: np.ndarray, y: np.ndarray) -> dict[str, Any]:
    """pingouin's Box's M (chi-square approximation) on a DataFrame with a group column."""
    import pandas as pd
    import pingouin as pg

    columns = [f"x{j}" for j in range(X.shape[1])]
    frame = pd.DataFrame(X, columns=columns)
    frame["group"] = y
    table = pg.box_m(frame, dvs=columns, group="group")
    return {"chi2": float(table["Chi2"].iloc[0]), "p_value": float(table["pval"].iloc[0])}


def _hz_rows(n_k: int, p: int) -> int:
    """Rows pingouin's Henze-Zirkler can use on one class under HZ_MEMORY_CAP."""
    from discaudit import Config

    if 5 * 8 * n_k * n_k <= HZ_MEMORY_CAP:
        return n_k
    return min(n_k, int(Config().pairwise_max_rows))


def hand_henze_zirkler(X: np.ndarray, y: np.ndarray) -> dict[str, Any]:
    """pingouin's Henze-Zirkler test per class (seeded subsample when n x n would not fit)."""
    import pingouin as pg

    rng = np.random.default_rng(HZ_SEED)
    used, p_values = [], []
    for k in np.unique(y):
        rows = np.flatnonzero(y == k)
        m = _hz_rows(rows.size, X.shape[1])
        if m < rows.size:
            rows = np.sort(rng.choice(rows, size=m, replace=False))
        result = pg.multivariate_normality(X[rows])
        used.append(int(rows.size))
        p_values.append(float(result.pval))
    return {"rows_used_per_class": used, "p_values": p_values}


def hand_mcd(X: np.ndarray, y: np.ndarray) -> dict[str, Any]:
    """scikit-learn's MinCovDet per class, robust distances and chi-square(p) 0.975 flags."""
    from scipy.stats import chi2
    from sklearn.covariance import MinCovDet

    cutoff = chi2.ppf(0.975, X.shape[1])
    flagged = 0
    for k in np.unique(y):
        est = MinCovDet(random_state=0).fit(X[y == k])
        flagged += int(np.sum(est.dist_ > cutoff))
    return {"flagged": flagged}


def hand_manova(X: np.ndarray, y: np.ndarray) -> dict[str, Any]:
    """statsmodels' MANOVA of the features on the class, Wilks' Lambda for the class effect."""
    from statsmodels.multivariate.manova import MANOVA

    classes = np.unique(y)
    exog = np.column_stack([np.ones(y.size)] + [(y == k).astype(float) for k in classes[1:]])
    contrast = np.eye(len(classes))[1:]
    result = MANOVA(X, exog).mv_test(hypotheses=[("class", contrast)])
    stat = result.results["class"]["stat"]
    return {"wilks_lambda": float(stat.loc["Wilks' lambda", "Value"])}


# ---------------------------------------------------------------------------------------
# five-fold cross-validation of the four candidates


def _cv(estimator: Any, X: np.ndarray, y: np.ndarray) -> dict[str, Any]:
    from sklearn.exceptions import ConvergenceWarning
    from sklearn.model_selection import cross_val_score

    with warnings.catch_warnings(record=True) as caught:
        warnings.simplefilter("always", ConvergenceWarning)
        scores = cross_val_score(estimator, X, y, cv=5, n_jobs=1)
    not_converged = sum(issubclass(w.category, ConvergenceWarning) for w in caught)
    return {"accuracy": float(np.mean(scores)), "convergence_warnings": int(not_converged)}


def cv_lda(X: np.ndarray, y: np.ndarray) -> dict[str, Any]:
    from sklearn.discriminant_analysis import LinearDiscriminantAnalysis

    return _cv(LinearDiscriminantAnalysis(solver="svd"), X, y)


def cv_regularized_lda(X: np.ndarray, y: np.ndarray) -> dict[str, Any]:
    from sklearn.discriminant_analysis import LinearDiscriminantAnalysis

    return _cv(LinearDiscriminantAnalysis(solver="lsqr", shrinkage="auto"), X, y)


def cv_qda(X: np.ndarray, y: np.ndarray) -> dict[str, Any]:
    from sklearn.discriminant_analysis import QuadraticDiscriminantAnalysis

    return _cv(QuadraticDiscriminantAnalysis(reg_param=0.01), X, y)


def cv_logistic(X: np.ndarray, y: np.ndarray) -> dict[str, Any]:
    from sklearn.linear_model import LogisticRegression
    from sklearn.pipeline import make_pipeline
    from sklearn.preprocessing import StandardScaler

    return _cv(make_pipeline(StandardScaler(), LogisticRegression(max_iter=2000)), X, y)


# ---------------------------------------------------------------------------------------
# one LDA fit, and the floor


def lda_fit(X: np.ndarray, y: np.ndarray) -> dict[str, Any]:
    """One scikit-learn LinearDiscriminantAnalysis().fit with its defaults (svd solver)."""
    from sklearn.discriminant_analysis import LinearDiscriminantAnalysis

    model = LinearDiscriminantAnalysis().fit(X, y)
    return {"n_components": int(model.scalings_.shape[1])}


def floor(X: np.ndarray, y: np.ndarray) -> dict[str, Any]:
    """Per-class counts, means and centred scatter matrices in one numpy pass per class."""
    counts, means, scatters = [], [], []
    for k in np.unique(y):
        block = X[y == k]
        mean = block.mean(axis=0)
        block -= mean
        counts.append(block.shape[0])
        means.append(mean)
        scatters.append(block.T @ block)
    return {"classes": len(counts)}


# ---------------------------------------------------------------------------------------
# registry: peer -> [(part name, label, function)]

PEERS: dict[str, list[tuple[str, str, Part]]] = {
    "hand": [
        ("vif", "statsmodels VIF per column", hand_vif),
        ("box_m", "pingouin Box's M", hand_box_m),
        ("henze_zirkler", "pingouin Henze-Zirkler per class", hand_henze_zirkler),
        ("mcd", "scikit-learn MinCovDet per class", hand_mcd),
        ("manova", "statsmodels MANOVA (Wilks)", hand_manova),
    ],
    "cv": [
        ("lda", "LDA (svd)", cv_lda),
        ("regularized_lda", "LDA (lsqr, shrinkage auto)", cv_regularized_lda),
        ("qda", "QDA (reg_param 0.01)", cv_qda),
        ("logistic", "standardized logistic regression", cv_logistic),
    ],
    "lda": [("fit", "LinearDiscriminantAnalysis().fit", lda_fit)],
    "floor": [("moments", "numpy per-class means and scatter", floor)],
}

PEER_LABELS = {
    "hand": "hand-scripted pre-flight (general libraries)",
    "cv": "5-fold CV of the four candidates",
    "lda": "one LDA fit",
    "floor": "floor: per-class moments in numpy",
}


def find_part(name: str) -> Part:
    """The part function for ``"peer.part"``."""
    peer, part = name.split(".", 1)
    for key, _, function in PEERS[peer]:
        if key == part:
            return function
    raise KeyError(name)
