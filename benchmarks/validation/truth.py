"""What actually predicts best: the four candidates fit with scikit-learn and scored.

The candidates (every one a Pipeline that first drops columns constant in its training
rows, then standardizes):

``lda``
    ``LinearDiscriminantAnalysis()`` (svd solver). Standardizing does not change its
    predictions; it is there so all four see the same columns.
``regularized_lda``
    ``LinearDiscriminantAnalysis(solver="lsqr", shrinkage="auto")`` (Ledoit-Wolf).
``qda``
    ``QuadraticDiscriminantAnalysis(reg_param=r)`` with ``r`` chosen from ``REG_GRID`` by
    stratified inner cross-validation on the training rows (log-loss). Standardized first:
    ``reg_param`` blends each class covariance with the identity, which is not scale
    invariant. scikit-learn refuses a class with no more rows than features; QDA then
    "fails" and is scored as the trivial rule (the largest training class, its priors).
``logistic_regression``
    ``LogisticRegressionCV`` (L2, lbfgs) with ``C`` from ``C_GRID`` by stratified inner
    cross-validation (log-loss), ``max_iter`` large enough that no ConvergenceWarning is
    raised (any warning is recorded and reported).

The acceptable set holds every model that did not fail and whose accuracy is within
``max(1 percentage point, 2 standard errors of the paired accuracy difference)`` of the best
model's. The standard error is that of the mean of the per-row differences of correctness
(best minus model) on the test rows: ``sd(d) / sqrt(n_test)``. For open data sets scored by
repeated cross-validation, the per-row correctness is first averaged over the repeats (each
row is predicted once per repeat); this treats the rows as independent and ignores the
variability of the training folds, as the simulated test sets do.
"""

from __future__ import annotations

import time
import warnings
from typing import Any

import numpy as np
from sklearn.base import BaseEstimator, ClassifierMixin, clone
from sklearn.discriminant_analysis import LinearDiscriminantAnalysis, QuadraticDiscriminantAnalysis
from sklearn.feature_selection import VarianceThreshold
from sklearn.linear_model import LogisticRegressionCV
from sklearn.metrics import log_loss
from sklearn.model_selection import StratifiedKFold
from sklearn.pipeline import make_pipeline
from sklearn.preprocessing import StandardScaler

MODELS = ("lda", "regularized_lda", "qda", "logistic_regression")
# Order of simplicity, for ties in the pick by cross-validation: LDA has the fewest free
# settings, then LDA with one shrinkage intensity, then logistic regression (as many
# coefficients as LDA, plus its penalty), then QDA (a covariance per class).
SIMPLEST_FIRST = ("lda", "regularized_lda", "logistic_regression", "qda")
REG_GRID = (0.0, 0.01, 0.05, 0.1, 0.3, 0.6, 0.9)
C_GRID = (1e-3, 1e-2, 1e-1, 1.0, 10.0, 100.0)
QDA_FALLBACK_REG = 0.6  # used when no grid value survives every inner fold
MAX_ITER = 20_000
MIN_MARGIN = 0.01
CV_FOLDS = 5
OPEN_REPEATS = 3


def settings_fingerprint() -> str:
    """A short digest of everything that defines the truth (grids, margins, folds, versions):
    a cached entry computed under other settings is recomputed."""
    import hashlib

    import sklearn

    text = repr(
        (
            MODELS,
            REG_GRID,
            C_GRID,
            QDA_FALLBACK_REG,
            MAX_ITER,
            MIN_MARGIN,
            CV_FOLDS,
            OPEN_REPEATS,
            SIMPLEST_FIRST,
            sklearn.__version__,
        )
    )
    return hashlib.sha256(text.encode()).hexdigest()[:12]


def inner_splits(y: np.ndarray, wanted: int = 5) -> int:
    """Folds for an inner CV that every class can fill (at least 2)."""
    smallest = int(np.bincount(np.unique(y, return_inverse=True)[1]).min())
    return int(max(2, min(wanted, int(0.8 * smallest))))


class TunedQDA(ClassifierMixin, BaseEstimator):
    """QDA whose ``reg_param`` is chosen by stratified inner CV (log-loss) over a grid."""

    def __init__(self, grid=REG_GRID, n_splits=5, random_state=0):
        self.grid = grid
        self.n_splits = n_splits
        self.random_state = random_state

    def fit(self, X, y):
        X, y = np.asarray(X, float), np.asarray(y)
        folds = StratifiedKFold(inner_splits(y, self.n_splits), shuffle=True, random_state=self.random_state)
        losses = np.zeros(len(self.grid))
        for train, test in folds.split(X, y):
            labels = np.unique(y[train])
            for i, reg in enumerate(self.grid):
                if not np.isfinite(losses[i]):
                    continue
                try:
                    with warnings.catch_warnings():
                        warnings.simplefilter("ignore")
                        with np.errstate(all="ignore"):
                            proba = (
                                QuadraticDiscriminantAnalysis(reg_param=reg)
                                .fit(X[train], y[train])
                                .predict_proba(X[test])
                            )
                    if not np.all(np.isfinite(proba)):
                        raise FloatingPointError("non-finite probabilities")
                    losses[i] += log_loss(y[test], proba, labels=labels)
                except (ValueError, FloatingPointError, np.linalg.LinAlgError):
                    losses[i] = np.inf
        self.cv_losses_ = losses
        self.reg_param_ = float(self.grid[int(np.argmin(losses))]) if np.isfinite(losses).any() else QDA_FALLBACK_REG
        self.model_ = QuadraticDiscriminantAnalysis(reg_param=self.reg_param_).fit(X, y)
        self.classes_ = self.model_.classes_
        return self

    def predict(self, X):
        with np.errstate(all="ignore"):
            return self.model_.predict(np.asarray(X, float))

    def predict_proba(self, X):
        with np.errstate(all="ignore"):
            return self.model_.predict_proba(np.asarray(X, float))


def candidates(y: np.ndarray, random_state: int = 0) -> dict[str, Any]:
    """The four unfitted candidate pipelines (inner folds sized to the smallest class of ``y``)."""
    k = inner_splits(np.asarray(y))
    lr = LogisticRegressionCV(
        Cs=list(C_GRID),
        cv=StratifiedKFold(k, shuffle=True, random_state=random_state),
        scoring="neg_log_loss",
        l1_ratios=(0.0,),
        use_legacy_attributes=False,
        max_iter=MAX_ITER,
    )
    front = (VarianceThreshold(), StandardScaler())
    return {
        "lda": make_pipeline(*map(clone, front), LinearDiscriminantAnalysis()),
        "regularized_lda": make_pipeline(
            *map(clone, front), LinearDiscriminantAnalysis(solver="lsqr", shrinkage="auto")
        ),
        "qda": make_pipeline(*map(clone, front), TunedQDA(n_splits=k, random_state=random_state)),
        "logistic_regression": make_pipeline(*map(clone, front), lr),
    }


def _chosen(name: str, pipe) -> dict[str, float]:
    last = pipe[-1]
    if name == "qda":
        return {"reg_param": last.reg_param_}
    if name == "logistic_regression":
        return {"C": float(np.ravel(last.C_)[0])}
    return {}


def _warning_texts(caught) -> list[str]:
    return sorted({f"{w.category.__name__}: {str(w.message)[:160]}" for w in caught})


def fit_and_predict(name: str, estimator, X_train, y_train, X_test) -> dict[str, Any]:
    """Fit one candidate; return test predictions, probabilities, settings and warnings.

    A fit that raises (QDA with a class no larger than p) falls back to the trivial rule:
    predict the largest training class with the training priors as probabilities.
    """
    classes, counts = np.unique(y_train, return_counts=True)
    start = time.perf_counter()
    with warnings.catch_warnings(record=True) as caught:
        warnings.simplefilter("always")
        try:
            with np.errstate(all="ignore"):
                estimator.fit(X_train, y_train)
                pred = estimator.predict(X_test)
                proba = estimator.predict_proba(X_test)
            if not np.all(np.isfinite(proba)):
                raise FloatingPointError("non-finite predicted probabilities")
            failed, chosen = None, _chosen(name, estimator)
        except (ValueError, FloatingPointError, np.linalg.LinAlgError) as exc:
            failed, chosen = f"{type(exc).__name__}: {str(exc)[:200]}", {}
            pred = np.full(len(X_test), classes[np.argmax(counts)])
            proba = np.tile(counts / counts.sum(), (len(X_test), 1))
    seconds = time.perf_counter() - start
    texts = _warning_texts(caught)
    return {
        "pred": pred,
        "proba": proba,
        "classes": classes,
        "failed": failed,
        "chosen": chosen,
        "seconds": seconds,
        "convergence_warnings": [t for t in texts if t.startswith("ConvergenceWarning")],
        "warnings": texts,
    }


def acceptable_set(correct: dict[str, np.ndarray], failed: dict[str, bool]) -> dict[str, Any]:
    """Best model, acceptable set and the margin applied to each model.

    ``correct[m]`` is the per-row correctness (0/1, or averaged over CV repeats).
    """
    acc = {m: float(np.mean(c)) for m, c in correct.items()}
    pool = [m for m in MODELS if m in acc and not failed.get(m)]
    best = max(pool, key=lambda m: acc[m])
    n = len(correct[best])
    out: dict[str, Any] = {"best": best, "acceptable": [], "se_diff": {}, "margin": {}}
    for m in MODELS:
        if m not in acc:
            continue
        d = correct[best] - correct[m]
        se = float(np.std(d, ddof=1) / np.sqrt(n)) if n > 1 else 0.0
        margin = max(MIN_MARGIN, 2.0 * se)
        out["se_diff"][m] = se
        out["margin"][m] = margin
        if not failed.get(m) and acc[best] - acc[m] <= margin + 1e-12:
            out["acceptable"].append(m)
    return out


def evaluate(X_train, y_train, X_test, y_test, random_state: int = 0) -> dict[str, Any]:
    """Truth on one training/test split: accuracy, log-loss and the acceptable set."""
    models: dict[str, dict[str, Any]] = {}
    correct: dict[str, np.ndarray] = {}
    for name, est in candidates(y_train, random_state).items():
        r = fit_and_predict(name, est, X_train, y_train, X_test)
        correct[name] = (r["pred"] == y_test).astype(float)
        models[name] = {
            "accuracy": float(correct[name].mean()),
            "log_loss": float(log_loss(y_test, r["proba"], labels=r["classes"])),
            "failed": r["failed"],
            "chosen": r["chosen"],
            "fit_seconds": round(r["seconds"], 4),
            "convergence_warnings": r["convergence_warnings"],
            "warnings": r["warnings"],
        }
    verdict = acceptable_set(correct, {m: bool(v["failed"]) for m, v in models.items()})
    labels, counts = np.unique(y_train, return_counts=True)
    trivial = float(np.mean(y_test == labels[np.argmax(counts)]))
    return {"models": models, **verdict, "trivial_accuracy": trivial}


def evaluate_cv(X, y, n_repeats: int = OPEN_REPEATS, n_splits: int = CV_FOLDS, random_state: int = 0) -> dict[str, Any]:
    """Truth on an open data set by repeated stratified K-fold CV.

    Returns accuracies averaged over repeats, the pooled acceptable set, and the acceptable
    set of each repeat alone (for draw sensitivity).
    """
    X, y = np.asarray(X, float), np.asarray(y)
    n = len(y)
    hits = {m: np.zeros((n_repeats, n)) for m in MODELS}
    losses = {m: [] for m in MODELS}
    fails = {m: [] for m in MODELS}
    chosen = {m: [] for m in MODELS}
    conv = {m: set() for m in MODELS}
    other = {m: set() for m in MODELS}
    for r in range(n_repeats):
        folds = StratifiedKFold(n_splits, shuffle=True, random_state=random_state + r)
        for train, test in folds.split(X, y):
            for name, est in candidates(y[train], random_state).items():
                res = fit_and_predict(name, est, X[train], y[train], X[test])
                hits[name][r, test] = res["pred"] == y[test]
                losses[name].append(log_loss(y[test], res["proba"], labels=res["classes"]) * len(test) / n)
                fails[name].append(res["failed"])
                chosen[name].append(res["chosen"])
                conv[name].update(res["convergence_warnings"])
                other[name].update(res["warnings"])
    models = {}
    for m in MODELS:
        models[m] = {
            "accuracy": float(hits[m].mean()),
            "log_loss": float(np.sum(losses[m]) / n_repeats),
            "failed": next((f for f in fails[m] if f), None),
            "failed_folds": int(sum(bool(f) for f in fails[m])),
            "chosen": _summarize_chosen(chosen[m]),
            "convergence_warnings": sorted(conv[m]),
            "warnings": sorted(other[m]),
        }
    failed = {m: models[m]["failed_folds"] > 0 for m in MODELS}
    pooled = acceptable_set({m: hits[m].mean(axis=0) for m in MODELS}, failed)
    per_repeat = [acceptable_set({m: hits[m][r] for m in MODELS}, failed)["acceptable"] for r in range(n_repeats)]
    trivial = float(np.max(np.unique(y, return_counts=True)[1]) / n)
    return {
        "models": models,
        **pooled,
        "per_repeat_acceptable": per_repeat,
        "trivial_accuracy": trivial,
        "scheme": f"{n_repeats}x{n_splits} stratified CV",
    }


def _summarize_chosen(items: list[dict[str, float]]) -> dict[str, Any]:
    keys = sorted({k for d in items for k in d})
    return {k: sorted({d[k] for d in items if k in d}) for k in keys}


def cv_pick(accuracy: dict[str, float]) -> str:
    """The candidate with the best CV accuracy; ties (within 1e-12) go to the simpler model
    (``SIMPLEST_FIRST``). A candidate that failed in a fold (NaN) is never picked."""
    usable = {m: a for m, a in accuracy.items() if a is not None and np.isfinite(a)}
    if not usable:
        return SIMPLEST_FIRST[0]
    top = max(usable.values())
    return next(m for m in SIMPLEST_FIRST if m in usable and usable[m] >= top - 1e-12)


def four_model_cv(X, y, n_splits: int = CV_FOLDS, random_state: int = 0) -> dict[str, Any]:
    """A plain 5-fold stratified CV of the four candidates on the training rows, as a user
    would run it to choose: its wall time, each candidate's mean CV accuracy and the pick
    (``cv_pick``: best CV accuracy, ties to the simpler model).

    Each candidate keeps its own inner tuning, so this is nested CV.
    """
    X, y = np.asarray(X, float), np.asarray(y)
    folds = list(StratifiedKFold(n_splits, shuffle=True, random_state=random_state).split(X, y))
    start = time.perf_counter()
    acc: dict[str, float] = {}
    for name in MODELS:
        scores = []
        for train, test in folds:
            est = candidates(y[train], random_state)[name]
            res = fit_and_predict(name, est, X[train], y[train], X[test])
            scores.append(np.nan if res["failed"] else float(np.mean(res["pred"] == y[test])))
        acc[name] = (
            float(np.nanmean(scores)) if np.isfinite(scores).any() and not np.isnan(scores).any() else float("nan")
        )
    seconds = time.perf_counter() - start
    return {"seconds": round(seconds, 4), "accuracy": acc, "pick": cv_pick(acc)}
