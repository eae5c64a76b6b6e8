"""A checked file as the plain text report, the summary and the exit code read it.

A :class:`Brief` holds a file's counts, severities and status, what its rules used (for
the unused-settings warnings), and the blocks of the plain text report already rendered
(no colour, no wrapping, no ``--explain``). The cache keeps one beside each full result,
and a worker sends one back instead of the result: a warm re-scan or a batch printed as
plain text then builds no finding, stage or circuit at all. Only this module and
:mod:`drivelint.diagnostics` are imported on that path.

Every plain text report is joined from briefs, fresh or cached, by :func:`brief_text`, so
a re-scan prints byte for byte what the first scan printed; ``results_text`` renders the
same blocks with :func:`drivelint.report.findings.result_blocks` (a test holds the two
equal).
"""

from __future__ import annotations

from collections.abc import Callable, Sequence
from dataclasses import dataclass, replace
from typing import TYPE_CHECKING

from drivelint.diagnostics import Severity, printable

if TYPE_CHECKING:
    from drivelint.checks.runner import CheckResult


@dataclass(frozen=True, slots=True)
class Brief:
    """One file's result as every report format needs it, small enough to cache."""

    path: str  # the file as reports name it
    floating: int  # floating stages
    status: str  # report.status.file_status: error, partial, findings or clean
    partial: bool  # read around something missing (counts as a warning for the exit code)
    # (rule, severity, the finding's text block) per finding, in the report's order
    findings: tuple[tuple[str, Severity, str], ...]
    # (rule, the accepted finding's text block) per accepted finding
    accepted: tuple[tuple[str, str], ...]
    diagnostics: tuple[str, ...]  # the text blocks of its warning and error diagnostics
    conditions_used: frozenset[str]
    names_used: frozenset[str]

    def __post_init__(self) -> None:
        from drivelint.report.status import STATUSES

        if self.status not in STATUSES:
            raise ValueError(f"unknown file status {self.status!r}")


def brief_of(result: CheckResult, render: bool = True) -> Brief:
    """The brief of a result; without ``render``, its counts alone (blocks left empty)."""
    from drivelint.report.findings import accepted_text, diagnostic_blocks, finding_text
    from drivelint.report.status import file_status

    return Brief(
        path=result.circuit.path,
        floating=sum(1 for s in result.stages if s.floating),
        status=file_status(result),
        partial=result.circuit.partial,
        findings=tuple(
            (f.rule, f.severity, finding_text(f) if render else "") for f in result.findings
        ),
        accepted=tuple((f.rule, accepted_text(f) if render else "") for f in result.accepted),
        diagnostics=tuple(diagnostic_blocks(result, None)) if render else (),
        conditions_used=result.conditions_used,
        names_used=result.names_used,
    )


def select_brief(brief: Brief, keep: Callable[[str], bool]) -> Brief:
    """The brief with only the findings and accepted findings of the rules ``keep`` keeps
    (as :func:`drivelint.checks.runner.select_rules` does for a result)."""
    return replace(
        brief,
        findings=tuple(f for f in brief.findings if keep(f[0])),
        accepted=tuple(a for a in brief.accepted if keep(a[0])),
    )


def brief_text(briefs: Sequence[Brief], show_accepted: bool = False) -> str:
    """The plain text report: each file's blocks, then the summary."""
    blocks: list[str] = []
    for brief in briefs:
        blocks.extend(brief.diagnostics)
        blocks.extend(block for _, _, block in brief.findings)
        if show_accepted:
            blocks.extend(block for _, block in brief.accepted)
    blocks.append(brief_summary(briefs))
    return "\n".join(blocks)


def brief_summary(briefs: Sequence[Brief], from_cache: int = 0) -> str:
    """Files, stages, findings by rule and severity, accepted findings, files that could
    not be checked, files checked in part."""
    from collections import Counter

    severities = [severity for b in briefs for _, severity, _ in b.findings]
    found = len(severities)
    accepted = sum(len(b.accepted) for b in briefs)
    stages = sum(b.floating for b in briefs)
    files = len(briefs)
    head = f"{files} file{'s' * (files != 1)}"
    if from_cache:
        head += f" ({from_cache} from cache)"
    head += f", {stages} floating stage{'s' * (stages != 1)}, "
    head += f"{found} finding{'s' * (found != 1)}"
    by_severity = Counter(severities)
    if found:
        head += (
            " ("
            + ", ".join(f"{by_severity[s]} {s.label}" for s in sorted(by_severity, reverse=True))
            + ")"
        )
    if accepted:
        head += f", {accepted} accepted by a directive"
    lines = [head]
    by_rule = Counter(rule for b in briefs for rule, _, _ in b.findings)
    for rule, count in sorted(by_rule.items()):
        lines.append(f"  {rule}: {count}")
    for status, label in (("error", "files with errors"), ("partial", "files checked in part")):
        paths = [b.path for b in briefs if b.status == status]
        if paths:
            lines.append(
                f"  {label}: {len(paths)} ({', '.join(paths[:5])}"
                + (", …" if len(paths) > 5 else "")
                + ")"
            )
    return "\n".join(printable(line) for line in lines)
