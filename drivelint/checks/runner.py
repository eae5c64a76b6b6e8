"""Run the rules over the stages of one circuit; apply acceptances; collect diagnostics."""

from __future__ import annotations

import traceback
from collections.abc import Mapping, Sequence
from dataclasses import dataclass, field

from drivelint.checks.base import CheckContext, Finding
from drivelint.checks.facts import StageFacts, devices_by_net
from drivelint.checks.registry import Rule, registry
from drivelint.circuit.model import Circuit
from drivelint.diagnostics import Diagnostic, Severity
from drivelint.netlist.statements import Missing
from drivelint.ratings.directives import Acceptance, DirectiveSet, parse_directives
from drivelint.ratings.parts import PartsLibrary
from drivelint.ratings.ratings import RatingError, Ratings
from drivelint.ratings.values import Value
from drivelint.stages.model import DriveStage


@dataclass(frozen=True, slots=True)
class RuleSetting:
    enabled: bool = True
    severity: Severity | None = None
    options: Mapping[str, float] = field(default_factory=dict)


@dataclass(frozen=True, slots=True)
class CheckResult:
    circuit: Circuit
    stages: tuple[DriveStage, ...]
    findings: tuple[Finding, ...]
    diagnostics: tuple[Diagnostic, ...]
    accepted: tuple[Finding, ...] = ()


def check_circuit(
    circuit: Circuit,
    stages: Sequence[DriveStage],
    parts: PartsLibrary,
    settings: Mapping[str, RuleSetting] | None = None,
    conditions: dict[str, Value] | None = None,
    rules: Mapping[str, Rule] | None = None,
) -> CheckResult:
    rules = rules if rules is not None else registry()
    settings = settings or {}
    directives = parse_directives(circuit.directives, circuit.line_text, known_rules=rules.keys())
    ratings = Ratings(parts, directives)
    diagnostics: list[Diagnostic] = list(circuit.diagnostics) + list(directives.diagnostics)
    findings: list[Finding] = []
    # The rules see the circuit recognition saw: wires (ammeters, strays, shunts) merged.
    from drivelint.stages.wires import collapse_wires

    merged = collapse_wires(circuit).circuit
    by_net = devices_by_net(merged)
    for stage in stages:
        if not stage.floating:
            continue
        needs = _needs(circuit, stage)
        if needs:
            # A stage built around something the deck names but does not hold is not
            # checked: its numbers would come from what is not there.
            diagnostics.append(
                Diagnostic(
                    Severity.WARNING,
                    stage.span,
                    f"stage of {stage.switch} not checked: needs "
                    + ", ".join(m.describe() for m in needs),
                    circuit.line_text(stage.span),
                    "not-checked",
                )
            )
            continue
        facts = StageFacts(stage, merged, ratings, directives, conditions, by_net)
        for rule in rules.values():
            setting = settings.get(rule.id, RuleSetting())
            if not setting.enabled:
                continue
            context = CheckContext(
                rule.id,
                setting.severity or rule.severity,
                facts,
                rule.option_values(setting.options),
            )
            try:
                produced = list(rule.check(stage, context))
            except RatingError as exc:
                diagnostics.append(
                    Diagnostic(
                        Severity.ERROR, stage.span, str(exc), circuit.line_text(stage.span), "parts"
                    )
                )
                continue
            except Exception as exc:  # a bug in a rule must not lose the rest of the run
                where = traceback.extract_tb(exc.__traceback__)[-1]
                diagnostics.append(
                    Diagnostic(
                        Severity.ERROR,
                        stage.span,
                        f"internal error in rule {rule.id} on {stage.switch}: "
                        f"{type(exc).__name__}: {exc} ({where.filename}:{where.lineno}); "
                        "please report it",
                        circuit.line_text(stage.span),
                        "internal-error",
                    )
                )
                continue
            if setting.severity is not None:
                produced = [_with_severity(f, setting.severity) for f in produced]
            findings.extend(produced)
    kept, accepted, unused = _apply_acceptances(findings, directives)
    for acceptance in unused:
        diagnostics.append(
            Diagnostic(
                Severity.WARNING,
                acceptance.span,
                f"'accept {acceptance.rule} {acceptance.device}' matches no finding; "
                "remove the stale acceptance",
                circuit.line_text(acceptance.span),
                "directive",
            )
        )
    return CheckResult(
        circuit,
        tuple(stages),
        tuple(sorted(kept, key=Finding.sort_key)),
        tuple(diagnostics),
        tuple(sorted(accepted, key=Finding.sort_key)),
    )


def _needs(circuit: Circuit, stage: DriveStage) -> tuple[Missing, ...]:
    """What is missing that the stage's devices or its gate, source and boot nets need."""
    if not circuit.missing:
        return ()
    nets = [stage.gate, stage.source, stage.drain]
    if stage.supply.boot_net:
        nets.append(stage.supply.boot_net)
    return circuit.needs((stage.switch, *stage.related), nets)


def _with_severity(finding: Finding, severity: Severity) -> Finding:
    from dataclasses import replace

    return replace(finding, severity=severity)


def _apply_acceptances(
    findings: list[Finding], directives: DirectiveSet
) -> tuple[list[Finding], list[Finding], list[Acceptance]]:
    used: set[int] = set()
    kept: list[Finding] = []
    accepted: list[Finding] = []
    for finding in findings:
        match = next(
            (
                index
                for index, a in enumerate(directives.accepts)
                if a.rule == finding.rule and a.device in (finding.device, finding.switch)
            ),
            None,
        )
        if match is None:
            kept.append(finding)
        else:
            used.add(match)
            accepted.append(finding)
    unused = [a for index, a in enumerate(directives.accepts) if index not in used]
    return kept, accepted, unused
