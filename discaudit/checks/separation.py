"""Check ``separation``: can a hyperplane split the classes (Albert & Anderson 1984)?"""

from __future__ import annotations

from typing import TYPE_CHECKING, Any

import pandas as pd

from discaudit.checks._robust import canonical_layout
from discaudit.dataset import AuditData
from discaudit.findings import Finding, names
from discaudit.jsonable import label
from discaudit.stats.separation import detect_separation

if TYPE_CHECKING:
    from discaudit.config import Config

KEY = "separation"
_MAX_LISTED_ROWS = 50


def run(data: AuditData, config: Config, random_state: int | None = None) -> Finding:
    """Complete and quasi-complete separation, by linear programming on the standardized features.

    Separation is good news for a discriminant model and a warning for unpenalized logistic
    regression, whose maximum likelihood estimate then does not exist: the check warns (it
    never fails) and the verdict suggests a penalty for logistic regression. Large classes
    are first tested on a seeded subsample: non-separability of a subsample proves
    non-separability of the whole.
    """
    X = pd.DataFrame(data.values, columns=list(data.features), copy=False)
    # The moments cover exactly the rows held unless those are a sample of a larger input.
    moments = data.moments if data.sample is None else None
    result = detect_separation(
        X, data.codes, max_rows=config.separation_max_rows, random_state=random_state, moments=moments
    )
    comparisons = []
    for c in result.comparisons:
        boundary = [label(data.row_labels[i]) for i in c.boundary_rows[:_MAX_LISTED_ROWS]]
        comparisons.append(
            {
                "class": label(data.classes[int(c.label)]),
                "versus": [label(data.classes[int(v)]) for v in c.versus],
                "kind": c.kind,
                "separating_features": list(c.separating_features),
                "direction": c.direction,
                "boundary_rows": boundary,
                "n_boundary": c.n_boundary,
                "n_used": c.n_used,
                "subsampled": c.subsampled,
            }
        )
    # One class against the rest: list the comparisons in the canonical class order (content, not names),
    # so the sentence names the same classes and features whatever the labels are.
    _, ranks = canonical_layout(data)
    rank = {label(data.classes[k]): ranks[k] for k in range(len(data.classes))}
    comparisons.sort(key=lambda c: rank[c["class"]])
    details: dict[str, Any] = {
        "any_complete": result.any_complete,
        "any_quasi_complete": result.any_quasi_complete,
        "comparisons": comparisons,
        "method": "linear programming (scipy HiGHS) on standardized features; one class against the rest when K > 2",
        "max_rows": config.separation_max_rows,
        "random_state": result.random_state,
        "notes": list(result.notes),
    }
    complete = [c for c in comparisons if c["kind"] == "complete"]
    quasi = [c for c in comparisons if c["kind"] == "quasi_complete"]
    if complete:
        which = names([str(c["class"]) for c in complete])
        subject = f"Classes {which} are each" if len(complete) > 1 else f"Class {which} is"
        return Finding(
            KEY,
            "warn",
            f"{subject} completely separated from the rest (e.g. by {names(complete[0]['separating_features'], 3)}): "
            "good for LDA, but unpenalized logistic regression has no maximum likelihood estimate; use a penalty.",
            details,
            f"{len(complete)} complete",
        )
    if quasi:
        first = quasi[0]
        return Finding(
            KEY,
            "warn",
            f"Class {first['class']} is quasi-completely separated ({first['n_boundary']} rows on the boundary, e.g. "
            f"{names([str(r) for r in first['boundary_rows']], 3)}): unpenalized logistic regression diverges; use a penalty.",
            details,
            f"{len(quasi)} quasi-complete",
        )
    return Finding(
        KEY,
        "pass",
        "No class is linearly separable from the others; logistic regression's estimate exists.",
        details,
        "overlap",
    )
