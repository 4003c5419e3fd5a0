"""Data tests beside unit tests: ``assert_fit_for`` fails a test when the data are not fit for a model.

.. code-block:: python

    from discaudit.testing import assert_fit_for

    def test_training_data_suit_the_shipped_model():
        frame = pd.read_parquet("data/train.parquet")
        assert_fit_for(frame, "regularized_lda", target="label")

The assertion runs :func:`discaudit.preflight` and the gate for ``model``
(:mod:`discaudit.decision.gate`): only the findings that bear on that model fail it, at
``Config.fail_on``. On failure the message holds the gate's outcome, its rule and the verdict
table, so the test report says why.
"""

from __future__ import annotations

import dataclasses
from typing import Any

from discaudit.audit import preflight
from discaudit.config import Config
from discaudit.verdict import Verdict

__all__ = ["assert_fit_for"]


def assert_fit_for(
    data: Any, model: str | None, target: str | None = None, y: Any = None, **preflight_kwargs: Any
) -> Verdict:
    """Raise AssertionError, with the verdict table as the message, unless the data are fit for ``model``.

    Parameters
    ----------
    data : DataFrame or array-like
        Features, or a DataFrame that also holds the ``target`` column.
    model : str or None
        ``"lda"``, ``"regularized_lda"``, ``"qda"``, ``"logistic_regression"`` or
        ``"unpenalized_logistic_regression"``; None asks for any candidate.
    target : str, optional
        The class column of ``data``.
    y : array-like, optional
        Class labels, when ``data`` holds the features only.
    **preflight_kwargs
        Passed to :func:`discaudit.preflight` (``config``, ``random_state``); ``config``'s
        ``model`` is replaced by ``model``.

    Returns
    -------
    Verdict
        The verdict, when the data are fit (for further assertions).

    Raises
    ------
    AssertionError
        When the gate for ``model`` fails; the message holds the outcome and the verdict table.
    DataError
        When the data cannot be audited at all, or ``model`` is not a model the gate knows.
    """
    config = preflight_kwargs.pop("config", None) or Config()
    config = dataclasses.replace(config, model=model)  # validated again: an unknown model is a DataError
    verdict = preflight(data, y, target=target, config=config, **preflight_kwargs)
    gate = verdict.gate
    if gate is not None and not gate.passed:
        raise AssertionError(f"{gate.outcome}\n{gate.rule}\n\n{verdict}")
    return verdict
