"""The result of one check."""

from __future__ import annotations

from dataclasses import dataclass, field
from typing import Any

from discaudit.jsonable import plain

STATUSES = ("pass", "warn", "fail", "skip")
STATUS_RANK = {"skip": -1, "pass": 0, "warn": 1, "fail": 2}


@dataclass(frozen=True)
class Finding:
    """What one check found.

    Attributes
    ----------
    check : str
        The check's key (e.g. ``"collinearity"``).
    status : str
        ``"pass"``, ``"warn"``, ``"fail"`` or ``"skip"``.
    summary : str
        One sentence a user can act on.
    details : dict
        Plain JSON values: statistics, p-values, thresholds used, affected features and rows.
    figure : str
        The key figure, short enough for a table cell (e.g. ``"max VIF 41.2"``).
    arrays : dict
        Per-row arrays behind the details (e.g. robust distances of every row), for
        ``Verdict.outlier_rows()`` and the plots; not part of the JSON.
    """

    check: str
    status: str
    summary: str
    details: dict[str, Any] = field(default_factory=dict)
    figure: str = ""
    arrays: dict[str, Any] = field(default_factory=dict, repr=False, compare=False)

    def __post_init__(self) -> None:
        if self.status not in STATUSES:
            raise ValueError(f"status must be one of {STATUSES}; got {self.status!r}")
        object.__setattr__(self, "details", plain(self.details))

    def to_dict(self) -> dict[str, Any]:
        """Plain JSON mapping of the finding."""
        return {
            "check": self.check,
            "status": self.status,
            "figure": self.figure,
            "summary": self.summary,
            "details": self.details,
        }


def skipped(check: str, why: str, **details: Any) -> Finding:
    """A ``skip`` finding that says why the check did not run."""
    return Finding(check, "skip", why, {"reason": why, **details}, figure="-")


def worst(statuses: list[str]) -> str:
    """The worst of some statuses; ``skip`` counts as nothing, and nothing is a pass."""
    ranked = [s for s in statuses if s != "skip"]
    return max(ranked, key=STATUS_RANK.__getitem__) if ranked else "pass"


def fmt(x: float | None, digits: int = 3) -> str:
    """A number for a sentence or table cell: compact, never 'nan'."""
    if x is None or x != x:
        return "n/a"
    if x in (float("inf"), float("-inf")):
        return "inf" if x > 0 else "-inf"
    if x != 0 and (abs(x) >= 1e5 or abs(x) < 1e-3):
        return f"{x:.{max(digits - 1, 1)}e}"
    return f"{x:.{digits}g}"


def fmt_p(p: float | None) -> str:
    """A p-value as text: 'p < 1e-16' below double precision, else compact."""
    if p is None or p != p:
        return "p n/a"
    if p < 1e-16:
        return "p < 1e-16"
    return f"p = {fmt(p, 2)}"


def sentence(parts: list[str]) -> str:
    """Join clauses with semicolons into one sentence, upper-casing only the first letter."""
    text = "; ".join(parts)
    return text[:1].upper() + text[1:] + ("" if text.endswith(".") else ".")


def names(items: list[Any], limit: int = 5) -> str:
    """A short readable list of names for a sentence."""
    shown = ", ".join(str(i) for i in items[:limit])
    return shown + (f" and {len(items) - limit} more" if len(items) > limit else "")
