"""JUnit XML output: one test case per netlist, counts that agree with the cases.

The shape checked is the JUnit XML report as CI services read it (the Ant JUnit task's
report: ``testsuite`` with ``tests``/``failures``/``errors``, ``testcase`` with ``classname``
and ``name``, ``failure``/``error`` children with ``message`` and ``type``; from memory).
"""

from __future__ import annotations

import xml.etree.ElementTree as ET
from dataclasses import replace
from pathlib import Path

import pytest

from drivelint.checks.runner import CheckResult
from drivelint.diagnostics import Diagnostic, Severity, Span
from drivelint.pipeline import check_path, check_text
from drivelint.report.findings import finding_text
from drivelint.report.formats import ReportOptions
from drivelint.report.junit import format_junit

ROOT = Path(__file__).resolve().parents[2]
BROKEN = "broken deck\nR1 a\nM1 d g s nfet foo=(\n.end\n"


@pytest.fixture(scope="module")
def results() -> list[CheckResult]:
    with pytest.MonkeyPatch.context() as patch:
        patch.chdir(ROOT)
        found = [check_path(p.relative_to(ROOT)) for p in sorted((ROOT / "examples").glob("*.cir"))]
    return [*found, check_text(BROKEN, path="decks/broken.cir")]


def parse(results: list[CheckResult], explain: bool = False) -> ET.Element:
    text = format_junit(results, ReportOptions(explain=explain))
    assert text.startswith('<?xml version="1.0" encoding="UTF-8"?>')
    return ET.fromstring(text.encode("utf-8"))


def test_counts_agree_with_the_cases_and_with_the_results(results: list[CheckResult]) -> None:
    root = parse(results)
    (suite,) = root.findall("testsuite")
    cases = suite.findall("testcase")
    errored = [c for c in cases if c.find("error") is not None]
    failed = [c for c in cases if c.find("error") is None and c.find("failure") is not None]
    # The counts as a CI service recomputes them from the cases...
    for element in (root, suite):
        assert int(element.get("tests", "-1")) == len(cases) == len(results)
        assert int(element.get("failures", "-1")) == len(failed)
        assert int(element.get("errors", "-1")) == len(errored)
    # ...and as the results say: a file with input errors, one with findings, the rest clean.
    with_errors = [r for r in results if any(d.severity is Severity.ERROR for d in r.diagnostics)]
    with_findings = [r for r in results if r.findings and r not in with_errors]
    assert len(errored) == len(with_errors) >= 1
    assert len(failed) == len(with_findings) >= 1
    assert suite.get("name") == "drivelint"


def test_one_failure_per_finding_with_the_text_line_and_the_fix(
    results: list[CheckResult],
) -> None:
    cases = {c.get("name"): c for c in parse(results).iter("testcase")}
    for result in results:
        case = cases[result.circuit.path]
        assert case.get("classname") == "drivelint"
        failures = case.findall("failure")
        assert len(failures) == len(result.findings)
        for failure, finding in zip(failures, result.findings, strict=True):
            assert failure.get("type") == finding.rule
            assert failure.get("message") == finding.message
            text = failure.text or ""
            # DESIGN §9's text line: path:line:col: severity: message [rule-id]
            head = f"{finding.span}: {finding.severity.label}: {finding.message} [{finding.rule}]"
            assert text.splitlines()[0] == head
            assert f"fix: {finding.fix}" in text


def test_explain_carries_the_derivation(results: list[CheckResult]) -> None:
    flawed = next(r for r in results if r.findings)
    (case,) = parse([flawed], explain=True).iter("testcase")
    text = case.findall("failure")[0].text or ""
    assert text == finding_text(flawed.findings[0], explain=True)
    assert "switch:" in text


def test_input_errors_are_one_error_element(results: list[CheckResult]) -> None:
    broken = results[-1]
    errors = [d for d in broken.diagnostics if d.severity is Severity.ERROR]
    (case,) = parse([broken]).iter("testcase")
    (error,) = case.findall("error")
    assert case.get("name") == "decks/broken.cir"
    assert error.get("type") == errors[0].code
    assert errors[0].message in (error.get("message") or "")
    for diagnostic in errors:
        assert f"decks/broken.cir:{diagnostic.span.line}:" in (error.text or "")


def test_characters_xml_cannot_carry_still_give_a_readable_report(
    results: list[CheckResult],
) -> None:
    # XML 1.0 §2.2 (Char production, from memory): U+0001..U+0008, U+000B, U+000C, U+000E..
    # U+001F are not allowed, not even as character references.
    hostile = Diagnostic(
        Severity.ERROR, Span("decks/bad.cir", 2), "stray \x01 and \x1b[31m", "R1 a\x0b b", "syntax"
    )
    result = replace(results[-1], diagnostics=(hostile,))
    (case,) = parse([result]).iter("testcase")
    error = case.find("error")
    assert error is not None
    assert "\\x01" in (error.get("message") or "") and "\\x1b" in (error.text or "")


def test_output_is_deterministic(results: list[CheckResult]) -> None:
    forward = format_junit(results, ReportOptions())
    assert forward == format_junit(list(reversed(results)), ReportOptions())
    names = [c.get("name", "") for c in ET.fromstring(forward).iter("testcase")]
    assert names == sorted(names)
