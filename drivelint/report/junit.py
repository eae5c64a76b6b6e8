"""Findings as JUnit XML, for the test-report pages of CI services.

Each checked netlist is one test case: it passes when clean, fails with one ``<failure>``
per finding, and is in error when its input could not be read as written. The suite's
counts are of test cases, so ``tests − failures − errors`` is the number of clean files.
"""

from __future__ import annotations

import re
import xml.etree.ElementTree as ET
from collections.abc import Sequence
from typing import TYPE_CHECKING

from drivelint.checks.base import Finding
from drivelint.checks.runner import CheckResult
from drivelint.diagnostics import Severity, printable
from drivelint.report.findings import finding_text
from drivelint.report.sarif import portable_path
from drivelint.report.status import file_status as status_of

if TYPE_CHECKING:
    from drivelint.report.formats import ReportOptions

SUITE = "drivelint"

# XML 1.0 cannot carry these characters even as references; a hostile netlist line may hold
# them, and one such byte would make the whole report unreadable.
_NOT_XML = re.compile("[^\t\n\r\x20-\ud7ff\ue000-\ufffd\U00010000-\U0010ffff]")


def _xml_safe(text: str) -> str:
    """Text XML can carry and a terminal showing it will not act on: each line made
    printable (control characters as visible escapes), the lines kept."""
    text = "\n".join(printable(line) for line in text.split("\n"))
    return _NOT_XML.sub(lambda m: f"\\x{ord(m.group()):02x}", text)


JUNIT_STATUS = {"error": "error", "findings": "failure", "clean": "passed"}


def file_status(result: CheckResult) -> str:
    """JUnit's words for :func:`drivelint.report.status.file_status`: ``error`` (input
    errors), ``failure`` (findings), ``partial`` or ``passed``.

    A partial file (read around something missing) with findings is a failure; without
    findings it is reported as skipped in part, since some of its stages were not checked.
    """
    status = status_of(result)
    if status == "partial":
        return "failure" if result.findings else "partial"
    return JUNIT_STATUS[status]


def _testcase(result: CheckResult, explain: bool) -> ET.Element:
    name = _xml_safe(portable_path(result.circuit.path))
    case = ET.Element("testcase", {"classname": SUITE, "name": name})
    errors = [d for d in result.diagnostics if d.severity is Severity.ERROR]
    if status_of(result) == "error":
        first = errors[0]
        error = ET.SubElement(
            case,
            "error",
            {
                "message": _xml_safe(
                    first.message
                    if len(errors) == 1
                    else f"{first.message} (and {len(errors) - 1} more input errors)"
                ),
                "type": first.code,
            },
        )
        # Positions and messages only: no line of an input file goes into the report.
        error.text = _xml_safe("\n".join(d.headline() for d in errors))
    for finding in result.findings:
        failure = ET.SubElement(
            case, "failure", {"message": _xml_safe(finding.message), "type": finding.rule}
        )
        failure.text = _xml_safe(finding_text(finding, explain))
    if result.circuit.partial and not errors and not result.findings:
        needs = ", ".join(m.describe() for m in result.circuit.missing)
        ET.SubElement(case, "skipped", {"message": _xml_safe(f"partial: read without {needs}")})
    # What does not fail the file is still worth seeing beside it.
    notes = [d.headline() for d in result.diagnostics if d.severity is Severity.WARNING]
    notes += [_accepted_note(f) for f in result.accepted]
    if notes:
        ET.SubElement(case, "system-out").text = _xml_safe("\n".join(notes))
    return case


def _accepted_note(finding: Finding) -> str:
    waiver = finding.accepted
    why = f" ({waiver.reason}; {waiver.span.path}:{waiver.span.line})" if waiver else ""
    return f"accepted{why}: {finding_text(finding)}"


def junit_tree(results: Sequence[CheckResult], explain: bool = False) -> ET.Element:
    """The ``<testsuites>`` element holding the one ``drivelint`` suite."""
    ordered = sorted(results, key=lambda r: portable_path(r.circuit.path))
    statuses = [file_status(r) for r in ordered]
    counts = {
        "tests": str(len(ordered)),
        "failures": str(statuses.count("failure")),
        "errors": str(statuses.count("error")),
    }
    root = ET.Element("testsuites", {"name": SUITE, **counts})
    skipped = str(statuses.count("partial"))
    suite = ET.SubElement(root, "testsuite", {"name": SUITE, **counts, "skipped": skipped})
    suite.extend(_testcase(r, explain) for r in ordered)
    return root


def format_junit(results: Sequence[CheckResult], options: ReportOptions) -> str:
    root = junit_tree(results, options.explain)
    ET.indent(root)
    body = ET.tostring(root, encoding="unicode")
    return f'<?xml version="1.0" encoding="UTF-8"?>\n{body}\n'
