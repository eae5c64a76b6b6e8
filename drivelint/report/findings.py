"""Findings as text (``path:line:col: severity: message [rule]``) and as JSON (DESIGN §9)."""

from __future__ import annotations

from collections.abc import Sequence
from typing import Any

from drivelint import __version__
from drivelint.checks.base import Finding
from drivelint.checks.runner import CheckResult
from drivelint.diagnostics import Severity

JSON_VERSION = 1


def finding_text(finding: Finding, explain: bool = False) -> str:
    lines = [f"{finding.span}: {finding.severity.label}: {finding.message} [{finding.rule}]"]
    if explain:
        lines.append(f"    switch: {finding.switch}")
        for name, value in sorted(finding.values.items()):
            lines.append(f"    {name} = {value.text()}  ({value.origin})")
        for step in finding.derivation:
            lines.append(f"    | {step}")
    lines.append(f"    fix: {finding.fix}")
    return "\n".join(lines)


def results_text(results: Sequence[CheckResult], explain: bool = False) -> str:
    blocks: list[str] = []
    for result in results:
        for diagnostic in result.diagnostics:
            if diagnostic.severity >= Severity.WARNING:
                blocks.append(diagnostic.render())
        blocks.extend(finding_text(f, explain) for f in result.findings)
    findings = sum(len(r.findings) for r in results)
    stages = sum(sum(1 for s in r.stages if s.floating) for r in results)
    blocks.append(
        f"{len(results)} file{'s' * (len(results) != 1)}, {stages} floating "
        f"stage{'s' * (stages != 1)}, {findings} finding{'s' * (findings != 1)}"
    )
    return "\n".join(blocks)


def results_json(results: Sequence[CheckResult]) -> dict[str, Any]:
    files = []
    findings: list[Finding] = []
    for result in sorted(results, key=lambda r: r.circuit.path):
        errors = any(d.severity is Severity.ERROR for d in result.circuit.diagnostics)
        files.append(
            {
                "path": result.circuit.path,
                "stages": sum(1 for s in result.stages if s.floating),
                "status": "error" if errors else ("findings" if result.findings else "clean"),
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
