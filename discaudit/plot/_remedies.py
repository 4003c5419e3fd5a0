"""What the verdict's remedies would remove, for the plots to mark (read from ``verdict.remedies``)."""

from __future__ import annotations

from typing import Any


def _first(verdict: Any, action: str) -> Any:
    """The best-ranked remedy of one kind that is predicted to help, or None."""
    return next((r for r in getattr(verdict, "remedies", ()) if r.action == action and r.helps), None)


def dropped_features(verdict: Any) -> tuple[int, set[str]]:
    """(rank, features) of the best-ranked remedy that drops features; (0, empty) when there is none."""
    remedy = _first(verdict, "drop_features")
    if remedy is None:
        return 0, set()
    return int(remedy.rank), {str(f) for f in remedy.change.get("drop_features", [])}


def dropped_rows(verdict: Any) -> tuple[int, set[str]]:
    """(rank, row labels as text) of the best-ranked remedy that drops rows; (0, empty) when there is none."""
    remedy = _first(verdict, "drop_rows")
    if remedy is None:
        return 0, set()
    return int(remedy.rank), {str(r) for r in remedy.change.get("drop_rows", [])}
