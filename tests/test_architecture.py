"""The layout's promises: every registered check runs, every figure the decision reads is written,
and the package's imports form no circle and flow one way (statistics -> checks -> decision ->
verdict -> renderers, sources above the core)."""

from __future__ import annotations

import ast
from pathlib import Path

import numpy as np
import pandas as pd
import pytest

import discaudit
from discaudit import checks
from discaudit.decision import figures
from discaudit.decision.rules import RULES
from discaudit.findings import Finding

PACKAGE = Path(discaudit.__file__).parent


def test_every_registered_check_runs_and_only_those(iris) -> None:
    X, y = iris
    verdict = discaudit.preflight(X, y)
    assert list(verdict.findings) == list(checks.CHECK_KEYS)
    assert all(f.status != "skip" or "could not run" not in f.summary for f in verdict.findings.values())


def test_a_new_registry_entry_runs_without_other_edits(iris, monkeypatch) -> None:
    # Adding a check is one module plus one registry line: a stand-in module is enough.
    class Probe:
        KEY = "probe"

        @staticmethod
        def run(data, config, random_state):
            return Finding("probe", "pass", f"Saw {data.n} rows.", {"n": data.n})

    monkeypatch.setattr(checks, "REGISTRY", (*checks.REGISTRY, Probe))
    X, y = iris
    verdict = discaudit.preflight(X, y)
    assert verdict.findings["probe"].details == {"n": 150}
    assert "probe" in verdict.to_dict()["findings"]


def _detail_paths(details: object, prefix: tuple[str, ...] = ()) -> set[tuple[str, ...]]:
    out: set[tuple[str, ...]] = set()
    if isinstance(details, dict):
        for key, value in details.items():
            out.add((*prefix, key))
            out |= _detail_paths(value, (*prefix, key))
    return out


def _audits(iris, wine, flakes) -> list[discaudit.Verdict]:
    rng = np.random.default_rng(11)
    base = rng.normal(size=(300, 3))
    collinear = pd.DataFrame(
        np.column_stack([base, base @ [1.0, 1.0, 0.0] + 1e-3 * rng.normal(size=300)]), columns=list("abcd")
    )
    labels = np.repeat(["u", "v"], 150)
    collinear.loc[labels == "v", "a"] += 1.0
    frame, _ = flakes
    return [
        discaudit.preflight(*iris),
        discaudit.preflight(*wine),
        discaudit.preflight(frame.drop(columns=["family"]), frame["family"]),
        discaudit.preflight(collinear, labels),
    ]


def test_every_figure_the_decision_reads_is_written_by_its_check(iris, wine, flakes) -> None:
    written: dict[str, set[tuple[str, ...]]] = {}
    for verdict in _audits(iris, wine, flakes):
        for key, finding in verdict.findings.items():
            written.setdefault(key, set()).update(_detail_paths(finding.details))
    missing = [f for f in figures.FIGURES if f.path not in written.get(f.check, set())]
    assert not missing, f"figures no check writes: {missing}"


def test_rules_read_only_declared_checks() -> None:
    for rule in RULES:
        assert set(rule.reads) <= set(checks.CHECK_KEYS), rule.name


def _imports() -> dict[str, set[str]]:
    """Module -> package modules it imports (module level and inside functions; not TYPE_CHECKING)."""
    modules = {
        ".".join(p.relative_to(PACKAGE.parent).with_suffix("").parts).removesuffix(".__init__"): p
        for p in PACKAGE.rglob("*.py")
    }

    def known(name: str) -> str | None:
        parts = name.split(".")
        while parts:
            if ".".join(parts) in modules:
                return ".".join(parts)
            parts.pop()
        return None

    graph: dict[str, set[str]] = {m: set() for m in modules}
    for mod, path in modules.items():
        tree = ast.parse(path.read_text(encoding="utf-8"))
        skip = {
            id(n)
            for node in ast.walk(tree)
            if isinstance(node, ast.If) and "TYPE_CHECKING" in ast.dump(node.test)
            for n in ast.walk(node)
        }
        for node in ast.walk(tree):
            if id(node) in skip:
                continue
            if isinstance(node, ast.ImportFrom) and node.module and node.module.startswith("discaudit"):
                for alias in node.names:
                    target = known(f"{node.module}.{alias.name}") or known(node.module)
                    if target and target != mod:
                        graph[mod].add(target)
            elif isinstance(node, ast.Import):
                for alias in node.names:
                    target = known(alias.name) if alias.name.startswith("discaudit") else None
                    if target and target != mod:
                        graph[mod].add(target)
    return graph


def test_no_import_circle() -> None:
    graph = _imports()
    state: dict[str, int] = {}

    def visit(m: str, trail: list[str]) -> None:
        state[m] = 1
        for d in graph[m]:
            if state.get(d) == 1:
                pytest.fail("import circle: " + " -> ".join([*trail[trail.index(d) :], d]))
            if d not in state:
                visit(d, [*trail, d])
        state[m] = 2

    for m in graph:
        if m not in state:
            visit(m, [m])


@pytest.mark.parametrize(
    ("layer", "forbidden"),
    [
        ("discaudit.stats", ("discaudit.checks", "discaudit.sources", "discaudit.decision", "discaudit.report")),
        ("discaudit.checks", ("discaudit.sources", "discaudit.decision", "discaudit.report", "discaudit.plot")),
        ("discaudit.report", ("discaudit.checks", "discaudit.stats", "discaudit.sources")),
        ("discaudit.plot", ("discaudit.checks", "discaudit.stats", "discaudit.sources")),
        ("discaudit.sources", ("discaudit.checks", "discaudit.decision", "discaudit.report", "discaudit.cli")),
    ],
)
def test_imports_flow_one_way(layer: str, forbidden: tuple[str, ...]) -> None:
    graph = _imports()
    bad = [
        f"{m} -> {d}"
        for m, deps in graph.items()
        if m == layer or m.startswith(layer + ".")
        for d in deps
        if any(d == f or d.startswith(f + ".") for f in forbidden)
    ]
    assert not bad, bad


def test_only_the_command_line_imports_it() -> None:
    graph = _imports()
    assert [m for m, deps in graph.items() if "discaudit.cli" in deps and m not in ("discaudit.__main__",)] == []
