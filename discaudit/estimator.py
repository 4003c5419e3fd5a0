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
        The recommendation's settings: keyword arguments of the estimator, plus ``standardize``
        (True: a StandardScaler in front; ``"within_class"``: a :class:`WithinClassScaler`, which
        divides each feature by its pooled within-class standard deviation; False: nothing).

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
    classes = {
        "lda": LinearDiscriminantAnalysis,
        "regularized_lda": LinearDiscriminantAnalysis,
        "qda": QuadraticDiscriminantAnalysis,
        "logistic_regression": LogisticRegression,
    }
    if model not in classes:
        raise ValueError(f"Unknown model {model!r}.")
    step = classes[model](**{k: v for k, v in params.items() if k != "standardize"})
    standardize = params.get("standardize", False)
    if standardize == "within_class":
        from discaudit.within_class_scaler import WithinClassScaler

        return make_pipeline(WithinClassScaler(), step)
    if standardize:
        return make_pipeline(StandardScaler(), step)
    return step
