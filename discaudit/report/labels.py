"""Words every renderer shares: status labels, model names, the caution, the version."""

from __future__ import annotations

from typing import Any

from discaudit._version import __version__

__all__ = [
    "CAUTION",
    "MODEL_NAMES",
    "REMEDIES_NOTE",
    "REMEDIES_TITLE",
    "STATUS_SYMBOLS",
    "VERSION",
    "format_params",
    "status_label",
]

VERSION = __version__

CAUTION = (
    "Caution: this audit checks statistical assumptions only; it does not validate a model for decisions about "
    "people (credit, diagnosis, hiring), test fairness, or replace the review required where the model is used."
)

MODEL_NAMES = {
    "lda": "LDA",
    "regularized_lda": "regularized (shrinkage) LDA",
    "qda": "QDA",
    "logistic_regression": "logistic regression",
}

#: The remedies section: its title and how its predictions were made.
REMEDIES_TITLE = "What would help"
REMEDIES_NOTE = (
    "Predicted by auditing the changed data (moments updated exactly; the checks that read rows only where the "
    "change alters them); verdict.what_if(**remedy.change) or --what-if SPEC re-audits a change in full."
)

#: Status words with a symbol, so a status reads without colour.
STATUS_SYMBOLS = {"pass": "\u2713", "warn": "\u26a0", "fail": "\u2717", "skip": "\u2013"}


def status_label(status: str, severity: str = "gate") -> str:
    """``"✗ FAIL"``, with ``" (advisory)"`` for a check that does not gate."""
    word = f"{STATUS_SYMBOLS.get(status, '?')} {status.upper()}"
    return word + (" (advisory)" if severity == "advisory" else "")


def format_params(params: dict[str, Any]) -> str:
    """Settings as ``key=value`` pairs, rule descriptions left out."""
    shown = {k: v for k, v in params.items() if not k.endswith(("_rule", "_estimator"))}
    return ", ".join(f"{k}={v}" for k, v in shown.items()) or "defaults"
