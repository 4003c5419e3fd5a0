"""An unfitted scikit-learn estimator configured as a recommendation says.

scikit-learn is optional (``pip install discaudit[sklearn]``); the audit itself never fits anything.
"""

from __future__ import annotations

from typing import Any

_HINT = (
    "Recommendation.estimator() needs scikit-learn, which is not installed; install it with "
    "'pip install discaudit[sklearn]' (or 'pip install scikit-learn'). The audit itself does not need it."
)


def build_estimator(model: str, params: dict[str, Any]) -> Any:
    """Return an unfitted estimator (a Pipeline with a StandardScaler when standardizing is advised).

    Parameters
    ----------
    model : str
        ``"lda"``, ``"regularized_lda"``, ``"qda"`` or ``"logistic_regression"``.
    params : dict
        The recommendation's suggested settings.

    Raises
    ------
    ImportError
        If scikit-learn is not installed (the message says how to install it).
    """
    try:
        from sklearn.discriminant_analysis import LinearDiscriminantAnalysis, QuadraticDiscriminantAnalysis
        from sklearn.linear_model import LogisticRegression
        from sklearn.pipeline import make_pipeline
        from sklearn.preprocessing import StandardScaler
    except ImportError as exc:  # pragma: no cover - exercised by monkeypatching in tests
        raise ImportError(_HINT) from exc
    if model == "lda":
        step: Any = LinearDiscriminantAnalysis(solver=params.get("solver", "svd"))
    elif model == "regularized_lda":
        # shrinkage needs the lsqr or eigen solver; svd does not support it.
        step = LinearDiscriminantAnalysis(
            solver=params.get("solver", "lsqr"), shrinkage=params.get("shrinkage", "auto")
        )
    elif model == "qda":
        step = QuadraticDiscriminantAnalysis(reg_param=float(params.get("reg_param", 0.0)))
    elif model == "logistic_regression":
        step = LogisticRegression(C=float(params.get("C", 1.0)), max_iter=int(params.get("max_iter", 5000)))
    else:
        raise ValueError(f"Unknown model {model!r}.")
    if params.get("standardize", False):
        return make_pipeline(StandardScaler(), step)
    return step
