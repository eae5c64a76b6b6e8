"""Findings as text (``path:line:col: severity: message [rule]``) and as JSON (DESIGN §9)."""

from __future__ import annotations

from collections.abc import Sequence
from typing import TYPE_CHECKING, Any

from drivelint import __version__
from drivelint.checks.base import Finding
from drivelint.checks.runner import CheckResult
from drivelint.diagnostics import Diagnostic, Severity, printable, quoted_line
from drivelint.report.status import file_status

if TYPE_CHECKING:
    from drivelint.report.formats import ReportOptions
    from drivelint.report.run import RunRecord

# 2: each file carries its whole result ("result", "order") and the report a "run" header,
# so that every format can be rendered from a JSON report (drivelint merge).
JSON_VERSION = 2


_COLORS = {Severity.ERROR: "red", Severity.WARNING: "yellow", Severity.NOTE: "cyan"}


def _wrapped(line: str, width: int | None) -> list[str]:
    """``line`` folded at ``width`` columns, continuation lines indented past its own indent;
    unchanged without a width (output that is piped or written to a file)."""
    if width is None or len(line) <= width:
        return [line]
    import textwrap

    indent = " " * (len(line) - len(line.lstrip(" ")))
    return textwrap.wrap(
        line,
        width=max(width, 40),
        subsequent_indent=indent + "    ",
        break_long_words=False,
        break_on_hyphens=False,
    ) or [line]


def finding_text(
    finding: Finding,
    explain: bool = False,
    color: bool = False,
    source_line: str = "",
    width: int | None = None,
) -> str:
    label = finding.severity.label
    head = f"{printable(str(finding.span))}: {label}: {finding.message} [{finding.rule}]"
    lines = _wrapped(printable(head), width)
    if color:
        import click

        styled = click.style(label, fg=_COLORS[finding.severity], bold=True)
        lines[0] = lines[0].replace(f": {label}: ", f": {styled}: ", 1)
    if source_line:
        lines.extend(quoted_line(source_line, finding.span.column).split("\n"))
    detail: list[str] = []
    if explain:
        detail.append(f"    switch: {finding.switch}")
        for name, value in sorted(finding.values.items()):
            detail.append(f"    {name} = {value.text()}  ({value.origin})")
        for step in finding.derivation:
            detail.append(f"    | {step}")
    detail.append(f"    fix: {finding.fix}")
    # Names and messages carry text from the netlist: no control character reaches a terminal.
    for line in detail:
        lines.extend(_wrapped(printable(line), width))
    return "\n".join(lines)


def accepted_text(finding: Finding, width: int | None = None) -> str:
    """One line for an accepted finding: where, what, and the reason it was accepted."""
    waiver = finding.accepted
    reason = f" -- {waiver.reason} ({waiver.span.path}:{waiver.span.line})" if waiver else ""
    line = (
        f"{finding.span}: accepted {finding.severity.label}: {finding.message} "
        f"[{finding.rule}]{reason}"
    )
    return "\n".join(_wrapped(printable(line), width))


def assumed_text(result: CheckResult, width: int | None = None) -> list[str]:
    """For ``--explain``: each floating stage's inputs taken from defaults or estimates."""
    lines: list[str] = []
    for stage in result.assumed:
        where = f"{stage.span.path}:{stage.span.line}"
        if not stage.values:
            lines.append(
                f"{where}: {stage.switch}: nothing assumed: every input from a rating, a "
                "directive, the model card or the netlist"
            )
            continue
        lines.append(f"{where}: {stage.switch}: assumed (no rating or directive gives these):")
        for key, value in sorted(stage.values.items()):
            shown = "unknown" if value.value != value.value else value.text()
            lines.append(f"    {key} = {shown}  ({value.origin})")
    return [w for line in lines for w in _wrapped(printable(line), width)]


def diagnostic_blocks(result: CheckResult, width: int | None = None) -> list[str]:
    """The text blocks of a result's warning and error diagnostics."""
    return [
        _wrap_block(d.render(), width) for d in result.diagnostics if d.severity >= Severity.WARNING
    ]


def result_blocks(
    result: CheckResult,
    explain: bool = False,
    color: bool = False,
    show_accepted: bool = False,
    width: int | None = None,
) -> list[str]:
    """One file's part of the text report (plain, it is what its brief holds)."""
    blocks = diagnostic_blocks(result, width)
    for finding in result.findings:
        source = result.circuit.line_text(finding.span) if color else ""
        blocks.append(finding_text(finding, explain, color, source, width))
    if show_accepted:
        blocks.extend(accepted_text(f, width) for f in result.accepted)
    if explain:
        blocks.extend(assumed_text(result, width))
    return blocks


def results_text(
    results: Sequence[CheckResult],
    explain: bool = False,
    color: bool = False,
    show_accepted: bool = False,
    width: int | None = None,
) -> str:
    blocks = [b for r in results for b in result_blocks(r, explain, color, show_accepted, width)]
    blocks.append(summary_text(results))
    return "\n".join(blocks)


def _wrap_block(text: str, width: int | None) -> str:
    """A diagnostic: its headline wrapped, its quoted line and caret kept as they are."""
    head, sep, rest = text.partition("\n")
    return "\n".join(_wrapped(head, width)) + sep + rest


def summary_text(results: Sequence[CheckResult], from_cache: int = 0) -> str:
    """Files, stages, findings by rule and severity, accepted findings, files that could
    not be checked (see :func:`drivelint.report.brief.brief_summary`)."""
    from drivelint.report.brief import brief_of, brief_summary

    return brief_summary([brief_of(r, render=False) for r in results], from_cache)


def results_json(
    results: Sequence[CheckResult],
    run: RunRecord | None = None,
    order: Sequence[int] | None = None,
) -> dict[str, Any]:
    """The JSON report: files (each with its status, diagnostics and whole result), findings,
    and the run's header; ``order`` is each result's position among the run's files
    (default: as given)."""
    from drivelint.codec import encode, fields_json, prepare

    prepare()
    positions = list(order) if order is not None else list(range(len(results)))
    if len(positions) != len(results):
        raise ValueError("one position per result")
    files = []
    findings: list[Finding] = []
    for position, result in sorted(zip(positions, results), key=lambda p: p[1].circuit.path):
        files.append(
            {
                "path": result.circuit.path,
                "stages": sum(1 for s in result.stages if s.floating),
                "status": file_status(result),
                "diagnostics": [d.to_json() for d in result.diagnostics],
                "order": position,
                "result": encode(_recorded(result), strict=True),
            }
        )
        findings.extend(result.findings)
        findings.extend(result.accepted)  # in their place, each with its "accepted" reason
    return {
        "version": JSON_VERSION,
        "tool": {"name": "drivelint", "version": __version__},
        "run": fields_json(run) if run is not None else None,
        "files": files,
        "findings": [f.to_json() for f in sorted(findings, key=Finding.sort_key)],
    }


def _recorded(result: CheckResult) -> CheckResult:
    """The result as the JSON report keeps it: input problems without the text of their
    line (it may be a line of a file that is not a netlist at all; a machine-readable
    report quotes only a finding's own device line, as SARIF's snippet does)."""
    from dataclasses import replace

    def bare(diagnostics: tuple[Diagnostic, ...]) -> tuple[Diagnostic, ...]:
        return tuple(replace(d, source_line="") if d.source_line else d for d in diagnostics)

    circuit = replace(result.circuit, diagnostics=bare(result.circuit.diagnostics))
    return replace(result, circuit=circuit, diagnostics=bare(result.diagnostics))


def format_text(results: Sequence[CheckResult], options: ReportOptions) -> str:
    return results_text(
        results, options.explain, options.color, options.show_accepted, options.width
    )


def format_json(results: Sequence[CheckResult], options: ReportOptions) -> str:
    """The report indented, each file's ``result`` on one line (indenting its nested lists
    would triple the size of a library's report)."""
    import json
    import re

    payload = results_json(results, options.run, options.order)
    encoded = [entry["result"] for entry in payload["files"]]
    records = [json.dumps(r, separators=(",", ":"), sort_keys=True) for r in encoded]
    for number, entry in enumerate(payload["files"]):
        entry["result"] = f"\0{number}\0"  # a mark, replaced below
    text = json.dumps(payload, indent=2, sort_keys=True)
    if text.count("\\u0000") != 2 * len(records):  # a NUL of the input's own: no marks
        for entry, record in zip(payload["files"], encoded):
            entry["result"] = record
        return json.dumps(payload, indent=2, sort_keys=True)
    return re.sub(r'"\\u0000(\d+)\\u0000"', lambda m: records[int(m.group(1))], text)
