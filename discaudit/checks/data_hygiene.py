"""Check ``data_hygiene``: what intake dropped, set aside or converted, columns constant within a
class, and features that encode the class."""

from __future__ import annotations

from typing import TYPE_CHECKING, Any

import numpy as np

from discaudit.dataset import AuditData
from discaudit.findings import Finding, names, sentence
from discaudit.jsonable import label

if TYPE_CHECKING:
    from discaudit.config import Config

KEY = "data_hygiene"


def _constant_in_class(data: AuditData) -> np.ndarray:
    """(K, p) exact facts: the feature takes one value in the class (minimum == maximum).

    From the per-class ranges every source records; moments without them (built by hand) fall
    back to a zero within-class variance.
    """
    exact = data.moments.constant_in_class
    if exact is not None:
        return exact
    return np.asarray(data.moments.class_covariances().diagonal(axis1=1, axis2=2) <= 0)


def _coordinates(data: AuditData) -> dict[str, Any]:
    """Which features were audited after a shift or a power-of-two rescaling, and by how much."""
    coords = data.coordinates
    if coords is None:
        return {}
    centred = {f: loc for f, loc in zip(data.features, coords.locations, strict=True) if loc}
    rescaled = {f: -e for f, e in zip(data.features, coords.exponents, strict=True) if e}
    return {
        "centred": centred,
        "rescaled_by_power_of_two": rescaled,
        "definition": "audited value = (x - location) * 2**power; constant means min == max exactly, judged "
        "before any shift; a feature is centred when its spread is below 2**-20 of its magnitude "
        "(offset-dominated) or it holds integers beyond 2**53, and rescaled when its centred magnitude is "
        "below 1e-150. Every statistic but the scale comparison is unchanged by both.",
    }


def run(data: AuditData, config: Config, random_state: int | None = None) -> Finding:
    """Report constant, duplicated and dropped columns, dropped rows, conversions, within-class
    constants and class-encoding features.

    Constant and duplicated columns fail the check (they make every covariance singular) and
    have been set aside from the other checks. A feature constant within every class that
    still varies across classes (it "encodes the class") also fails: it separates the classes
    perfectly and makes the pooled within-class covariance singular, so plain LDA cannot be
    fitted with it, and such a column is most often the label leaking into the features; it is
    kept in the audit so the other checks show what it does. Dropped rows, set-aside
    non-numeric columns and a class with a constant feature warn.
    """
    rec = data.record
    flat = _constant_in_class(data)
    present = data.moments.counts > 0
    within_constant = {
        label(c): [data.features[j] for j in np.flatnonzero(flat[k])]
        for k, c in enumerate(data.classes)
        if flat[k].any()
    }
    encoding = [data.features[j] for j in np.flatnonzero(flat[present].all(axis=0))] if present.any() else []
    dropped_rows = sum(rec.dropped_rows_per_class.values()) + rec.dropped_rows_unlabelled
    details: dict[str, Any] = {
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
        "class_encoding_features": encoding,
        "conversions": dict(rec.conversions),
        "coordinates": _coordinates(data),
        "constant_rule": "constant: min == max exactly, over all rows or within a class (no tolerance)",
    }
    problems = []
    if rec.constant_columns:
        problems.append(f"constant columns {names(list(rec.constant_columns))}")
    if rec.duplicate_columns:
        problems.append("duplicated columns " + names([f"{a} (= {b})" for a, b in rec.duplicate_columns]))
    set_aside = len(rec.constant_columns) + len(rec.duplicate_columns)
    if set_aside:
        problems.append("set aside from the other checks; drop them before fitting")
    if encoding:
        one = len(encoding) == 1
        problems.append(
            f"{'feature' if one else 'features'} {names(encoding)} {'encodes' if one else 'encode'} the class "
            f"(one value per class): {'it separates' if one else 'they separate'} perfectly and "
            f"{'makes' if one else 'make'} the pooled covariance singular, so plain LDA cannot use "
            f"{'it' if one else 'them'}; drop {'it' if one else 'them'} if {'it leaks' if one else 'they leak'} the label"
        )
    if problems:
        figure = f"{set_aside} column{'s' if set_aside > 1 else ''} set aside" if set_aside else ""
        if encoding:
            figure = (
                figure + "; " if figure else ""
            ) + f"{len(encoding)} encode{'s' if len(encoding) == 1 else ''} class"
        return Finding(KEY, "fail", sentence(problems), details, figure=figure)
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
