"""Findings as GitHub Actions workflow commands, so they show as annotations on the diff.

One line per finding and per input problem (warnings and errors), in path and line order:
``::error file=PATH,line=L,col=C,title=RULE::MESSAGE``. Values are escaped as the workflow
command syntax requires, so a message can never end the command early or start another.
"""

from __future__ import annotations

from collections.abc import Mapping, Sequence
from typing import TYPE_CHECKING

from drivelint.checks.base import Finding
from drivelint.checks.runner import CheckResult
from drivelint.diagnostics import Diagnostic, Severity, Span, printable
from drivelint.report.findings import finding_text
from drivelint.report.sarif import portable_path

if TYPE_CHECKING:
    from drivelint.report.formats import ReportOptions

COMMANDS: Mapping[Severity, str] = {
    Severity.ERROR: "error",
    Severity.WARNING: "warning",
    Severity.NOTE: "notice",
}


def escape_data(text: str) -> str:
    """A command's message: ``%`` first, so the escapes it adds are not escaped again."""
    return text.replace("%", "%25").replace("\r", "%0D").replace("\n", "%0A")


def escape_property(text: str) -> str:
    """A property value: as a message, and ``:`` and ``,`` which end a property."""
    return escape_data(text).replace(":", "%3A").replace(",", "%2C")


def annotation(severity: Severity, span: Span, title: str, message: str) -> str:
    properties = {
        "file": portable_path(span.path),
        "line": str(max(span.line, 1)),
        "col": str(max(span.column, 1)),
        "title": title,
    }
    # CR and LF are the workflow syntax's to escape; every other control character (ESC,
    # which the log viewer acts on, among them) becomes a visible escape first.
    listed = ",".join(
        f"{key}={escape_property(printable(value, keep_line_breaks=True))}"
        for key, value in properties.items()
    )
    text = escape_data(printable(message, keep_line_breaks=True))
    return f"::{COMMANDS[severity]} {listed}::{text}"


def finding_annotation(finding: Finding, explain: bool = False) -> str:
    # The message, then the text format's indented detail (values, derivation, fix).
    detail = [line.strip() for line in finding_text(finding, explain).split("\n")[1:]]
    message = "\n".join([finding.message, *detail])
    return annotation(finding.severity, finding.span, finding.rule, message)


def accepted_annotation(finding: Finding) -> str:
    waiver = finding.accepted
    reason = waiver.reason if waiver else ""
    where = f" ({waiver.span.path}:{waiver.span.line})" if waiver else ""
    message = f"accepted{where}: {reason}\n{finding.message}\nfix: {finding.fix}"
    return annotation(Severity.NOTE, finding.span, f"{finding.rule} (accepted)", message)


def diagnostic_annotation(diagnostic: Diagnostic) -> str:
    return annotation(
        diagnostic.severity, diagnostic.span, f"input ({diagnostic.code})", diagnostic.message
    )


def format_github(results: Sequence[CheckResult], options: ReportOptions) -> str:
    keyed: list[tuple[tuple[str, int, int, str, str], str]] = []
    for result in results:
        for diagnostic in result.diagnostics:
            if diagnostic.severity >= Severity.WARNING:
                span = diagnostic.span
                key = (portable_path(span.path), span.line, span.column, "", diagnostic.message)
                keyed.append((key, diagnostic_annotation(diagnostic)))
        for finding in result.findings:
            span = finding.span
            key = (portable_path(span.path), span.line, span.column, finding.rule, finding.device)
            keyed.append((key, finding_annotation(finding, options.explain)))
        for finding in result.accepted:
            # Still shown, as a notice: an accepted finding is a decision a reviewer may
            # want to see again, not a failure.
            span = finding.span
            key = (portable_path(span.path), span.line, span.column, finding.rule, finding.device)
            keyed.append((key, accepted_annotation(finding)))
        if result.circuit.partial:
            # The file status "partial": checked around what it names but does not hold.
            path = result.circuit.path
            needs = ", ".join(m.describe() for m in result.circuit.missing)
            line = annotation(
                Severity.NOTE, Span(path, 1, 1), "partial", f"checked in part: {needs}"
            )
            keyed.append(((portable_path(path), 0, 0, "partial", ""), line))
    return "".join(line + "\n" for _, line in sorted(keyed))
