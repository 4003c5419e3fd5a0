"""JUnit XML verdict, for CI systems that display test results.

Layout: ``<testsuites>`` holding one ``<testsuite name="discaudit">`` with one
``<testcase classname="discaudit" name="<check>">`` per check, in table order.

* ``fail`` -> ``<failure type="fail">``;
* ``warn`` -> ``<failure type="warn">`` when ``fail_on == "warn"``, else a passed test case;
* ``skip`` -> ``<skipped message="<why>">``;
* a check whose severity is ``advisory`` never fails (it does not gate), whatever its status.

The failure's ``message`` is the finding's summary and its body is the finding's details as
JSON. Every test case that ran carries ``STATUS (key figure): summary`` in
``<system-out>``; the suite's ``<system-out>`` holds the recommendation and the notes.
Test case times are the seconds each check took. So a JUnit report has a ``<failure>``
exactly when ``discaudit check --fail-on <level>`` exits 1.

The XML is built with :mod:`xml.etree.ElementTree`, which escapes every string.
"""

from __future__ import annotations

import json
import re
import xml.etree.ElementTree as ET
from typing import TYPE_CHECKING, Any

from discaudit.decision.gate import fails_gate
from discaudit.report.labels import MODEL_NAMES, format_params
from discaudit.report.table import build

if TYPE_CHECKING:
    from discaudit.verdict import Verdict

# Characters XML 1.0 cannot hold at all (ElementTree escapes the rest).
_NOT_XML = re.compile("[\x00-\x08\x0b\x0c\x0e-\x1f\ufffe\uffff]")


def render(verdict: Verdict, fail_on: str = "fail") -> str:
    """The verdict as JUnit XML text (UTF-8, with an XML declaration)."""
    fails_gate("pass", fail_on)  # validates fail_on before any work
    table = build(verdict)
    seconds: dict[str, Any] = getattr(verdict, "timings", None) or {}
    cases = []
    failures = skipped = 0
    for row in table.rows:
        case = ET.Element("testcase", classname="discaudit", name=row.check, time=_seconds(seconds.get(row.check)))
        if row.status == "skip":
            ET.SubElement(case, "skipped", message=_clean(row.summary))
            skipped += 1
        else:
            if row.severity != "advisory" and fails_gate(row.status, fail_on):
                failure = ET.SubElement(case, "failure", message=_clean(row.summary), type=row.status)
                failure.text = _clean(json.dumps(verdict.findings[row.check].details, indent=2, allow_nan=False))
                failures += 1
            advisory = " (advisory, does not gate)" if row.severity == "advisory" else ""
            out = ET.SubElement(case, "system-out")
            out.text = _clean(f"{row.status.upper()}{advisory} ({row.figure}): {row.summary}")
        cases.append(case)
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
        ("recommendation", table.model),
        ("suggested_settings", format_params(table.params)),
    ):
        ET.SubElement(properties, "property", name=name, value=_clean(value))
    suite.extend(cases)
    lines = [
        table.title,
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
