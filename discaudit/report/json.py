"""JSON form of a verdict, with a versioned schema.

Schema (``schema_version`` 1): ``{"schema_version", "discaudit_version", "status",
"recommendation": {"model", "params", "reasons", "alternatives", "rules_fired"},
"findings": {check: {"check", "status", "figure", "summary", "details"}}, "meta": {...},
"caution"}``. Keys are stable; non-finite numbers are written as null.
"""

from __future__ import annotations

from typing import Any

from discaudit._plain import plain
from discaudit.result import CAUTION, Verdict

SCHEMA_VERSION = 1


def verdict_to_dict(verdict: Verdict) -> dict[str, Any]:
    from discaudit import __version__

    return {
        "schema_version": SCHEMA_VERSION,
        "discaudit_version": __version__,
        "status": verdict.status,
        "recommendation": verdict.recommendation.to_dict(),
        "findings": {key: f.to_dict() for key, f in verdict.findings.items()},
        "meta": plain(verdict.meta),
        "caution": CAUTION,
    }
