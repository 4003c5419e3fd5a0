"""JUnit XML verdict, for CI systems that display test results.

Layout: ``<testsuites>`` holding one ``<testsuite name="discaudit">`` with one
``<testcase classname="discaudit" name="<check>">`` per check, in table order, then a test case
named ``gate`` and, when a baseline was compared, one named ``baseline``.

* a check whose finding fails the gate (``verdict.gate.failing_checks``: it matters for the
  gated model and reaches the gate's level) -> ``<failure type="<status>">``; any other status,
  including a ``fail`` that does not bear on the gated model, is a passed test case;
* ``skip`` -> ``<skipped message="<why>">``;
* ``gate`` -> ``<failure type="gate">`` with the gate's outcome when the data gate fails (also
  when no single check is to blame: a model that could not be scored, no candidate fit);
* ``baseline`` -> ``<failure type="drift">`` with the comparison's outcome when the batch drifted.

The failure's ``message`` is the finding's summary and its body is the finding's details as
JSON. Every test case that ran carries ``STATUS (key figure): summary`` in
``<system-out>``; the gate's carries its rule; the suite's ``<system-out>`` holds the
recommendation and the notes. Test case times are the seconds each check took. So a JUnit
report has a ``<failure>`` exactly when ``discaudit check`` exits 1.

The XML is built with :mod:`xml.etree.ElementTree`, which escapes every string.
"""

from __future__ import annotations

import json
import re
import xml.etree.ElementTree as ET
from typing import TYPE_CHECKING, Any

from discaudit.report.labels import MODEL_NAMES, format_params
from discaudit.report.table import build

if TYPE_CHECKING:
    from discaudit.verdict import Verdict

# Characters XML 1.0 cannot hold at all (ElementTree escapes the rest).
_NOT_XML = re.compile("[\x00-\x08\x0b\x0c\x0e-\x1f\ufffe\uffff]")


def render(verdict: Verdict) -> str:
    """The verdict as JUnit XML text (UTF-8, with an XML declaration)."""
    table = build(verdict)
    fail_on = verdict.gate.fail_on if verdict.gate is not None else "fail"
    seconds: dict[str, Any] = getattr(verdict, "timings", None) or {}
    cases = []
    failures = skipped = 0
    for row in table.rows:
        case = ET.Element("testcase", classname="discaudit", name=row.check, time=_seconds(seconds.get(row.check)))
        if row.status == "skip":
            ET.SubElement(case, "skipped", message=_clean(row.summary))
            skipped += 1
        else:
            if row.gates:
                kind = row.status if row.status in ("warn", "fail") else "gate"
                failure = ET.SubElement(case, "failure", message=_clean(row.summary), type=kind)
                failure.text = _clean(json.dumps(verdict.findings[row.check].details, indent=2, allow_nan=False))
                failures += 1
            advisory = " (advisory, does not gate)" if row.severity == "advisory" else ""
            out = ET.SubElement(case, "system-out")
            out.text = _clean(f"{row.status.upper()}{advisory} ({row.figure}): {row.summary}")
        cases.append(case)
    gate_case = ET.Element("testcase", classname="discaudit", name="gate", time="0")
    if verdict.gate is not None and not verdict.gate.data_passed:
        failure = ET.SubElement(gate_case, "failure", message=_clean(table.gate_outcome), type="gate")
        failure.text = _clean("\n".join(verdict.gate.reasons))
        failures += 1
    ET.SubElement(gate_case, "system-out").text = _clean(f"{table.gate_outcome}\n{table.gate_rule}")
    cases.append(gate_case)
    if table.baseline is not None:
        drift_case = ET.Element("testcase", classname="discaudit", name="baseline", time="0")
        if table.baseline.drifted:
            failure = ET.SubElement(drift_case, "failure", message=_clean(table.baseline.outcome), type="drift")
            failure.text = _clean("\n".join(c.summary for c in table.baseline.changes if c.counts))
            failures += 1
        noted = [f"{'counts' if c.counts else 'noted'}: {c.summary}" for c in table.baseline.changes]
        ET.SubElement(drift_case, "system-out").text = _clean(
            "\n".join([table.baseline.outcome, *noted, table.baseline.rule])
        )
        cases.append(drift_case)
    total = _seconds(sum(v for v in seconds.values() if isinstance(v, (int, float))))
    counts = {
        "name": "discaudit",
        "tests": str(len(cases)),
        "failures": str(failures),
        "errors": "0",
        "skipped": str(skipped),
        "time": total,
    }
    root = ET.Element("testsuites", counts)
    suite = ET.SubElement(root, "testsuite", counts)
    properties = ET.SubElement(suite, "properties")
    for name, value in (
        ("status", table.status),
        ("fail_on", fail_on),
        ("gated_model", (verdict.gate.model if verdict.gate is not None else None) or "any candidate"),
        ("gate_passed", str(table.gate_passed).lower()),
        ("recommendation", table.model),
        ("suggested_settings", format_params(table.params)),
    ):
        ET.SubElement(properties, "property", name=name, value=_clean(value))
    suite.extend(cases)
    lines = [
        table.title,
        table.gate_outcome,
        table.gate_rule,
        f"Recommendation: {MODEL_NAMES[table.model]} ({table.model})",
        f"Suggested settings: {format_params(table.params)}",
        "Why:",
    ]
    lines += [f"  - {reason}" for reason in table.reasons]
    lines += table.notes
    ET.SubElement(suite, "system-out").text = _clean("\n".join(lines))
    ET.indent(root)
    return ET.tostring(root, encoding="unicode", xml_declaration=True) + "\n"


def _clean(text: str) -> str:
    """Text with the characters XML cannot represent replaced by U+FFFD."""
    return _NOT_XML.sub("\ufffd", text)


def _seconds(value: Any) -> str:
    return f"{float(value):.6f}" if isinstance(value, (int, float)) else "0"
