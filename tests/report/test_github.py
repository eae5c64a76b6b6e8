"""GitHub Actions workflow-command annotations: one line each, escaped as the runner needs.

Syntax and escaping from GitHub's "Workflow commands for GitHub Actions" documentation
(from memory): ``::error file=F,line=L,col=C,title=T::MESSAGE``; in the message ``%`` is
written ``%25``, CR ``%0D`` and LF ``%0A``; in a property value also ``:`` ``%3A`` and
``,`` ``%2C``.
"""

from __future__ import annotations

import re
from dataclasses import replace
from pathlib import Path

import pytest
from hypothesis import given
from hypothesis import strategies as st

from drivelint.checks.runner import CheckResult
from drivelint.diagnostics import Severity, Span
from drivelint.pipeline import check_path, check_text
from drivelint.report.formats import ReportOptions
from drivelint.report.github import escape_data, escape_property, format_github

ROOT = Path(__file__).resolve().parents[2]
BROKEN = "broken deck\nR1 a\nM1 d g s nfet foo=(\n.end\n"
COMMAND = re.compile(r"^::(error|warning|notice) ([^:]*)::(.*)$")
COMMANDS = {Severity.ERROR: "error", Severity.WARNING: "warning", Severity.NOTE: "notice"}


def unescape(text: str) -> str:
    # The runner's decoding, written out here: the escapes for ':' ',' CR LF, then '%'.
    for code, char in (("%3A", ":"), ("%2C", ","), ("%0D", "\r"), ("%0A", "\n"), ("%25", "%")):
        text = text.replace(code, char)
    return text


def parse(line: str) -> tuple[str, dict[str, str], str]:
    match = COMMAND.match(line)
    assert match, line
    command, listed, message = match.groups()
    properties = dict(item.split("=", 1) for item in listed.split(","))
    return command, {k: unescape(v) for k, v in properties.items()}, unescape(message)


@pytest.fixture(scope="module")
def results() -> list[CheckResult]:
    with pytest.MonkeyPatch.context() as patch:
        patch.chdir(ROOT)
        found = [check_path(p.relative_to(ROOT)) for p in sorted((ROOT / "examples").glob("*.cir"))]
    return [*found, check_text(BROKEN, path="decks/broken.cir")]


def test_one_annotation_per_finding_and_input_problem(results: list[CheckResult]) -> None:
    lines = format_github(results, ReportOptions()).splitlines()
    findings = [f for r in results for f in r.findings]
    problems = [d for r in results for d in r.diagnostics if d.severity >= Severity.WARNING]
    assert findings and any(d.severity is Severity.ERROR for d in problems)
    assert len(lines) == len(findings) + len(problems)
    parsed = [parse(line) for line in lines]
    for finding in findings:
        expected = {
            "file": finding.span.path,
            "line": str(finding.span.line),
            "col": str(finding.span.column),
            "title": finding.rule,
        }
        match = [
            (c, m) for c, p, m in parsed if p == expected and m.split("\n")[0] == finding.message
        ]
        assert match, finding
        command, message = match[0]
        assert command == COMMANDS[finding.severity]
        assert f"fix: {finding.fix}" in message.split("\n")
    for diagnostic in problems:
        assert any(
            p["file"] == diagnostic.span.path
            and p["line"] == str(diagnostic.span.line)
            and m == diagnostic.message
            and c == COMMANDS[diagnostic.severity]
            for c, p, m in parsed
        )
    keys = [(p["file"], int(p["line"]), int(p["col"])) for _, p, _ in parsed]
    assert keys == sorted(keys)


def test_message_and_properties_cannot_break_the_command(results: list[CheckResult]) -> None:
    flawed = next(r for r in results if r.findings)
    finding = flawed.findings[0]
    awkward = replace(
        finding,
        message="duty 99.2% at 20 kHz:\r\nthen ::error::injected, 100%25",
        span=Span("decks/leg a,b:c.cir", 7, 3),
        rule="rule:with,comma",
        severity=Severity.NOTE,
    )
    output = format_github([replace(flawed, findings=(awkward,), diagnostics=())], ReportOptions())
    assert output.count("\n") == 1 and "\r" not in output  # one command, one line
    command, properties, message = parse(output.rstrip("\n"))
    assert command == "notice"
    assert properties == {
        "file": "decks/leg a,b:c.cir",
        "line": "7",
        "col": "3",
        "title": "rule:with,comma",
    }
    assert message.split("\n")[:2] == ["duty 99.2% at 20 kHz:\r", "then ::error::injected, 100%25"]


@given(st.text())
def test_escaping_round_trips_and_leaves_no_separator(text: str) -> None:
    data = escape_data(text)
    prop = escape_property(text)
    assert "\r" not in data and "\n" not in data
    assert not {"\r", "\n", ":", ","} & set(prop)
    assert unescape(data) == text and unescape(prop) == text


def test_documented_escapes() -> None:
    # The table in GitHub's workflow-command documentation (from memory).
    assert escape_data("50%\r\n") == "50%25%0D%0A"
    assert escape_property("a:b,c%") == "a%3Ab%2Cc%25"
    assert escape_data("a:b,c") == "a:b,c"  # the message keeps ':' and ','


def test_no_findings_no_output() -> None:
    clean = check_text("quiet\nR1 a 0 1k\nV1 a 0 DC 5\n.end\n")
    assert clean.findings == () and format_github([clean], ReportOptions()) == ""
