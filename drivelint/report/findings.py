"""Findings as text (``path:line:col: severity: message [rule]``) and as JSON (DESIGN §9)."""

from __future__ import annotations

from collections.abc import Sequence
from typing import TYPE_CHECKING, Any

from drivelint import __version__
from drivelint.checks.base import Finding
from drivelint.checks.runner import CheckResult
from drivelint.diagnostics import Severity, printable, quoted_line
from drivelint.report.status import failed, file_status

if TYPE_CHECKING:
    from drivelint.report.formats import ReportOptions

JSON_VERSION = 1


_COLORS = {Severity.ERROR: "red", Severity.WARNING: "yellow", Severity.NOTE: "cyan"}


def finding_text(
    finding: Finding, explain: bool = False, color: bool = False, source_line: str = ""
) -> str:
    label = finding.severity.label
    if color:
        import click

        label = click.style(label, fg=_COLORS[finding.severity], bold=True)
    lines = [f"{printable(str(finding.span))}: {label}: {finding.message} [{finding.rule}]"]
    if source_line:
        lines.extend(quoted_line(source_line, finding.span.column).split("\n"))
    if explain:
        lines.append(f"    switch: {finding.switch}")
        for name, value in sorted(finding.values.items()):
            lines.append(f"    {name} = {value.text()}  ({value.origin})")
        for step in finding.derivation:
            lines.append(f"    | {step}")
    lines.append(f"    fix: {finding.fix}")
    # Names and messages carry text from the netlist: no control character reaches a terminal.
    return "\n".join(printable(line) for line in lines)


def results_text(results: Sequence[CheckResult], explain: bool = False, color: bool = False) -> str:
    blocks: list[str] = []
    for result in results:
        for diagnostic in result.diagnostics:
            if diagnostic.severity >= Severity.WARNING:
                blocks.append(diagnostic.render())
        for finding in result.findings:
            source = result.circuit.line_text(finding.span) if color else ""
            blocks.append(finding_text(finding, explain, color, source))
    blocks.append(summary_text(results))
    return "\n".join(blocks)


def summary_text(results: Sequence[CheckResult], from_cache: int = 0) -> str:
    """Files, stages, findings by rule and severity, files that could not be checked."""
    from collections import Counter

    findings = [f for r in results for f in r.findings]
    stages = sum(sum(1 for s in r.stages if s.floating) for r in results)
    files = len(results)
    head = f"{files} file{'s' * (files != 1)}"
    if from_cache:
        head += f" ({from_cache} from cache)"
    head += f", {stages} floating stage{'s' * (stages != 1)}, "
    head += f"{len(findings)} finding{'s' * (len(findings) != 1)}"
    by_severity = Counter(f.severity for f in findings)
    if findings:
        head += (
            " ("
            + ", ".join(f"{by_severity[s]} {s.label}" for s in sorted(by_severity, reverse=True))
            + ")"
        )
    lines = [head]
    by_rule = Counter(f.rule for f in findings)
    for rule, count in sorted(by_rule.items()):
        lines.append(f"  {rule}: {count}")
    broken = [r.circuit.path for r in results if failed(r)]
    if broken:
        lines.append(
            f"  files with errors: {len(broken)} ({', '.join(broken[:5])}"
            + (", …" if len(broken) > 5 else "")
            + ")"
        )
    partial = [r.circuit.path for r in results if file_status(r) == "partial"]
    if partial:
        lines.append(
            f"  files checked in part: {len(partial)} ({', '.join(partial[:5])}"
            + (", …" if len(partial) > 5 else "")
            + ")"
        )
    return "\n".join(printable(line) for line in lines)


def results_json(results: Sequence[CheckResult]) -> dict[str, Any]:
    files = []
    findings: list[Finding] = []
    for result in sorted(results, key=lambda r: r.circuit.path):
        files.append(
            {
                "path": result.circuit.path,
                "stages": sum(1 for s in result.stages if s.floating),
                "status": file_status(result),
                "diagnostics": [d.to_json() for d in result.diagnostics],
            }
        )
        findings.extend(result.findings)
    return {
        "version": JSON_VERSION,
        "tool": {"name": "drivelint", "version": __version__},
        "files": files,
        "findings": [f.to_json() for f in sorted(findings, key=Finding.sort_key)],
    }


def format_text(results: Sequence[CheckResult], options: ReportOptions) -> str:
    return results_text(results, options.explain, options.color)


def format_json(results: Sequence[CheckResult], options: ReportOptions) -> str:
    import json

    return json.dumps(results_json(results), indent=2, sort_keys=True)
