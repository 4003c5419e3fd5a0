"""``preflight`` and the core: input source -> validated data -> checks -> findings -> decision -> verdict.

:func:`preflight` opens the input through :func:`discaudit.sources.open_source`; :func:`audit`
runs every registered check once and builds the verdict once. Neither knows which source the
data came from.
"""

from __future__ import annotations

import contextlib
import dataclasses
import functools
import time
from typing import Any

from discaudit import checks, remedy_effects
from discaudit._threads import in_background, one_blas_thread, recorded_warnings
from discaudit.config import Config
from discaudit.dataset import AuditData
from discaudit.decision import recommend, with_gate
from discaudit.decision.baseline import class_moments_record
from discaudit.decision.gate import gate_status, judge
from discaudit.findings import Finding, skipped
from discaudit.jsonable import label
from discaudit.sources import open_source
from discaudit.sources.what_if import Change, apply
from discaudit.verdict import Verdict


def preflight(
    X: Any,
    y: Any = None,
    *,
    target: str | None = None,
    config: Config | None = None,
    random_state: int | None = 0,
) -> Verdict:
    """Audit a labelled data set before fitting a discriminant classifier.

    Runs every check (data hygiene, sample size, scale disparity, collinearity, outliers,
    normality, covariance homogeneity, separation, discriminant signal) and turns the
    findings into a recommendation among LDA, regularized LDA, QDA and logistic
    regression. Nothing is fitted.

    Parameters
    ----------
    X : DataFrame or array-like, shape (n, p)
        Features, or a DataFrame that also holds the target column named by ``target``.
    y : array-like, shape (n,), optional
        Class labels (when ``target`` is not given).
    target : str, optional
        Name of the class column in the DataFrame ``X``.
    config : Config, optional
        Thresholds and policies; defaults documented in :class:`Config`.
    random_state : int or None, default 0
        Seed of every random step (robust fits, subsamples), so a verdict is reproducible.

    Returns
    -------
    Verdict

    Raises
    ------
    DataError
        When the input makes an audit impossible (no target, one class, a class with one
        row, no numeric feature, non-finite values under the default policy); the message
        names the column, class or row at fault.

    Examples
    --------
    >>> import discaudit  # doctest: +SKIP
    >>> v = discaudit.preflight(df, target="family")  # doctest: +SKIP
    >>> v.recommendation.model  # doctest: +SKIP
    'regularized_lda'
    """
    config = config or Config()
    return audit(open_source(X, y, target=target, config=config, random_state=random_state), config, random_state)


def audit(data: AuditData, config: Config, random_state: int | None) -> Verdict:
    """Run every check on validated data and assemble the verdict.

    BLAS runs on one thread meanwhile (see :mod:`discaudit._threads`); per-class work is
    spread over the cores by the checks themselves.
    """
    findings: dict[str, Finding] = {}
    timings: dict[str, float] = {}
    fingerprint = in_background(functools.partial(_fingerprint, data))  # hashing overlaps with the checks
    with one_blas_thread():
        start = time.perf_counter()
        _read_rows_once(data, config, random_state)
        timings["row_pass"] = time.perf_counter() - start
        for key, run in checks.registry():
            start = time.perf_counter()
            if config.severity_of(key) == "off":
                findings[key] = skipped(key, "Turned off in Config.severity.")
            else:
                findings[key] = _run_check(key, run, data, config, random_state)
            timings[key] = time.perf_counter() - start
    return _assemble(findings, data, config, random_state, timings, fingerprint())


def _assemble(
    findings: dict[str, Finding],
    data: AuditData,
    config: Config,
    random_state: int | None,
    timings: dict[str, float],
    fingerprint: dict[str, Any],
) -> Verdict:
    """Findings -> recommendation, gate status, remedies and metadata: the one place a verdict is built."""
    meta = _meta(data, config, random_state, fingerprint)
    recommendation = recommend(findings, config)
    gate = judge(findings, config)
    recommendation = with_gate(recommendation, gate, findings, config)
    start = time.perf_counter()
    try:
        with one_blas_thread(), recorded_warnings() as caught:  # the checks it re-runs record their own
            remedies = remedy_effects.evaluate(findings, recommendation.model, data, config, random_state, _run_check)
        if caught:
            meta["remedies_warnings"] = sorted(set(caught))
    except Exception as exc:  # remedies are advice: a failure to find them never costs the verdict
        remedies = ()
        meta["remedies_error"] = f"{type(exc).__name__}: {exc}"
    timings["remedies"] = time.perf_counter() - start
    return Verdict(
        findings,
        recommendation,
        gate_status(findings, config),
        meta,
        timings,
        gate,
        remedies=remedies,
        data=data,
        rerun=functools.partial(what_if, data, config, random_state),
    )


def what_if(data: AuditData, config: Config, random_state: int | None, **changes: Any) -> Verdict:
    """The verdict of ``data`` changed as ``changes`` says (``Verdict.what_if``'s keywords), audited afresh.

    The what-if source (:mod:`discaudit.sources.what_if`) updates the moments exactly and changes the
    rows held and the row pass with them; every check then runs on the result as on any input.
    """
    return audit(
        apply(data, Change.of(**changes), few_distinct_values=config.few_distinct_values), config, random_state
    )


def _read_rows_once(data: AuditData, config: Config, random_state: int | None) -> None:
    """Compute the row tasks of every check in one read of the rows (:meth:`AuditData.run_tasks`).

    A streamed input is then read once for all the checks that score every row. If that shared
    read fails, nothing is stored and each check reads the rows on its own and reports its own
    error.
    """
    with recorded_warnings(), contextlib.suppress(Exception):
        data.run_tasks(checks.row_tasks(data, config, random_state))


def _run_check(
    key: str, run: checks.CheckFunction, data: AuditData, config: Config, random_state: int | None
) -> Finding:
    """Run one check, turning third-party warnings into details and errors into a skip.

    Warnings are recorded per audit, in a context this check owns (``_threads.recorded_warnings``:
    safe when several audits run in threads; the caller's filters are restored exactly).
    """
    with recorded_warnings() as caught:
        try:
            finding = run(data, config, random_state)
        except Exception as exc:
            return skipped(key, f"The check could not run: {type(exc).__name__}: {exc}", check_error=True)
    if caught:
        return dataclasses.replace(finding, details={**finding.details, "warnings": sorted(set(caught))})
    return finding


def _meta(data: AuditData, config: Config, random_state: int | None, fingerprint: dict[str, Any]) -> dict[str, Any]:
    sample = None
    if data.sample is not None:
        sample = {
            "n_sampled": data.n,
            "per_class": {label(c): n for c, n in data.sample.per_class.items()},
            "capacity_per_class": data.sample.capacity,
            "random_state": data.sample.random_state,
            "method": data.sample.method,
        }
    return {
        "n_rows": data.moments.n_total,
        "sample": sample,
        "n_features": data.p,
        "n_classes": len(data.classes),
        "classes": [label(c) for c in data.classes],
        "features": list(data.features),
        "random_state": random_state,
        "severity": {k: config.severity_of(k) for k in checks.CHECK_KEYS},
        "config": config.to_dict(),
        "fingerprint": fingerprint,
        "class_moments": class_moments_record(data.moments, data.features),
        **({"what_if": list(data.changes)} if data.changes else {}),
    }


def _fingerprint(data: AuditData) -> dict[str, Any]:
    """SHA-256 of the audited rows and labels, so a report can be matched to its data.

    Hashed, in order: the audited float matrix (n x p, C order, little-endian float64),
    each row's class code (little-endian int64) and the class labels in code order (JSON,
    UTF-8). Row order, values, column order and labels all change it; column names do not.
    """
    import hashlib
    import json

    import numpy as np

    digest = hashlib.sha256()
    digest.update(np.ascontiguousarray(data.values, dtype="<f8").data)  # .data: a typed buffer, no copy
    digest.update(np.ascontiguousarray(data.codes, dtype="<i8").data)
    digest.update(json.dumps([str(label(c)) for c in data.classes]).encode("utf-8"))
    scope = "the stratified sample of rows held in memory" if data.sample is not None else "all audited rows"
    return {
        "sha256": digest.hexdigest(),
        "rows": data.n,
        "columns": data.p,
        "covers": f"{scope}: feature matrix (C order, little-endian float64), then class codes (little-endian int64), "
        "then the class labels in code order (JSON)",
    }
