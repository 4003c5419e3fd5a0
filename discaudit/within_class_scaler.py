"""A scikit-learn transformer that divides each feature by its pooled within-class standard deviation.

Imported only by :func:`discaudit.estimator.build_estimator` (scikit-learn is optional). In front of
``LinearDiscriminantAnalysis(solver="lsqr", shrinkage=a)`` it makes the shrinkage target, mu times
the identity, the diagonal of the pooled within-class covariance: the correlations are shrunk and the
within-class variances kept, as scikit-learn's ``shrinkage="auto"`` does class by class.
"""

from __future__ import annotations

from typing import Any

import numpy as np
from sklearn.base import BaseEstimator, TransformerMixin
from sklearn.utils.validation import check_array, check_is_fitted


class WithinClassScaler(TransformerMixin, BaseEstimator):  # type: ignore[misc]
    """Divide each feature by its pooled within-class standard deviation (divisor N).

    ``fit(X, y)`` centres each row at its class mean and takes, per feature, the root mean square of
    those deviations over all N rows (the divisor N of scikit-learn's LDA covariance); a feature
    that does not vary within the classes keeps scale 1. ``transform`` divides by it and does not
    centre (LDA is unaffected by a shift). Attributes after fit: ``scale_`` (shape (p,)),
    ``n_features_in_``.
    """

    def fit(self, X: Any, y: Any) -> WithinClassScaler:
        X = check_array(X, dtype=np.float64)
        self.n_features_in_ = X.shape[1]
        y = np.asarray(y)
        if y.shape[0] != X.shape[0]:
            raise ValueError(f"X has {X.shape[0]} rows but y has {y.shape[0]} labels.")
        _, codes = np.unique(y, return_inverse=True)
        counts = np.bincount(codes).astype(np.float64)
        means = np.zeros((counts.size, X.shape[1]))
        np.add.at(means, codes, X)
        means /= counts[:, None]
        within = np.sqrt(np.mean((X - means[codes]) ** 2, axis=0))
        self.scale_ = np.where(within > 0.0, within, 1.0)
        return self

    def transform(self, X: Any) -> Any:
        check_is_fitted(self, "scale_")
        X = check_array(X, dtype=np.float64)
        if X.shape[1] != self.n_features_in_:
            raise ValueError(
                f"X has {X.shape[1]} features, but WithinClassScaler was fitted with {self.n_features_in_}."
            )
        return X / self.scale_
