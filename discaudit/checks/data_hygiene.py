"""Check ``data_hygiene``: what intake dropped or set aside, and columns constant within a class."""

from __future__ import annotations

from typing import TYPE_CHECKING

import numpy as np

from discaudit.dataset import AuditData
from discaudit.findings import Finding, names, sentence
from discaudit.jsonable import label

if TYPE_CHECKING:
    from discaudit.config import Config

KEY = "data_hygiene"


def run(data: AuditData, config: Config, random_state: int | None = None) -> Finding:
    """Report constant, duplicated and dropped columns, dropped rows, and within-class constants.

    Constant and duplicated columns fail the check (they make every covariance singular)
    and have been set aside from the other checks; dropped rows and non-numeric columns
    set aside by policy warn.
    """
    rec = data.record
    class_sd = data.moments.class_covariances().diagonal(axis1=1, axis2=2)
    within_constant = {
        label(c): [data.features[j] for j in np.flatnonzero(class_sd[k] <= 0)]
        for k, c in enumerate(data.classes)
        if np.any(class_sd[k] <= 0)
    }
    dropped_rows = sum(rec.dropped_rows_per_class.values()) + rec.dropped_rows_unlabelled
    details = {
        "n_rows_input": rec.n_rows_input,
        "n_rows_used": data.n,
        "n_features_input": rec.n_features_input,
        "n_features_used": data.p,
        "features_used": list(data.features),
        "constant_columns": list(rec.constant_columns),
        "duplicate_columns": [{"column": a, "duplicate_of": b} for a, b in rec.duplicate_columns],
        "non_numeric_dropped": list(rec.non_numeric_dropped),
        "rows_dropped_per_class": rec.dropped_rows_per_class,
        "rows_dropped_unlabelled": rec.dropped_rows_unlabelled,
        "constant_within_class": within_constant,
    }
    problems = []
    if rec.constant_columns:
        problems.append(f"constant columns {names(list(rec.constant_columns))}")
    if rec.duplicate_columns:
        problems.append("duplicated columns " + names([f"{a} (= {b})" for a, b in rec.duplicate_columns]))
    if problems:
        set_aside = len(rec.constant_columns) + len(rec.duplicate_columns)
        return Finding(
            KEY,
            "fail",
            sentence(problems + ["set aside from the other checks; drop them before fitting"]),
            details,
            figure=f"{set_aside} column{'s' if set_aside > 1 else ''} set aside",
        )
    notes = []
    if dropped_rows:
        notes.append(f"{dropped_rows} rows with missing values were dropped")
    if rec.non_numeric_dropped:
        notes.append(f"non-numeric columns {names(list(rec.non_numeric_dropped))} were set aside")
    if within_constant:
        first = next(iter(within_constant.items()))
        notes.append(f"class {first[0]} has constant {names(first[1])}, so its covariance is singular")
    if notes:
        return Finding(KEY, "warn", sentence(notes), details, figure=f"{len(notes)} note(s)")
    return Finding(
        KEY, "pass", f"All {data.p} features are numeric, finite and vary; no rows dropped.", details, "clean"
    )
