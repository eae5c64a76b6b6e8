"""Run the rules over the stages of one circuit; apply acceptances; collect diagnostics.

Besides the findings, the result keeps what a reviewer needs to trust a clean report:
the findings an acceptance directive accepted (each with its reason), the values each
floating stage took from defaults or estimates (``assumed``), and which operating
conditions and parts the rules used.
"""

from __future__ import annotations

import traceback
from collections.abc import Callable, Mapping, Sequence
from dataclasses import dataclass, field

from drivelint.checks.base import CheckContext, Finding, Waiver
from drivelint.checks.facts import StageFacts, devices_by_net
from drivelint.checks.registry import Rule, registry
from drivelint.checks.settings import RuleSetting
from drivelint.circuit.model import Circuit
from drivelint.diagnostics import Diagnostic, Severity, Span
from drivelint.netlist.statements import Missing
from drivelint.ratings.directives import ANY_DEVICE, Acceptance, DirectiveSet, parse_directives
from drivelint.ratings.parts import PartsLibrary
from drivelint.ratings.ratings import RatingError, Ratings
from drivelint.ratings.values import Value
from drivelint.stages.model import DriveStage


@dataclass(frozen=True, slots=True)
class StageAssumptions:
    """The inputs of one floating stage that no part rating or directive gave: defaults,
    estimates from a model card, currents taken as none because nothing gives them."""

    switch: str
    span: Span
    values: Mapping[str, Value] = field(default_factory=dict)


@dataclass(frozen=True, slots=True)
class CheckResult:
    """One circuit's stages, findings and diagnostics after every rule ran."""

    circuit: Circuit
    stages: tuple[DriveStage, ...]
    findings: tuple[Finding, ...]
    diagnostics: tuple[Diagnostic, ...]
    accepted: tuple[Finding, ...] = ()  # each with its Waiver (``Finding.accepted``)
    assumed: tuple[StageAssumptions, ...] = ()
    # operating conditions the rules asked for and got from the configuration
    conditions_used: frozenset[str] = frozenset()
    # the model and subcircuit names the netlist uses (lower case), for stale parts entries
    names_used: frozenset[str] = frozenset()


class _CountedFacts(StageFacts):
    """Stage facts that remember which operating conditions were asked for."""

    def __init__(self, *args: object, **kwargs: object) -> None:
        super().__init__(*args, **kwargs)  # type: ignore[arg-type]
        self.asked: set[str] = set()

    def condition(self, key: str) -> Value | None:
        self.asked.add(key)
        return super().condition(key)


def check_circuit(
    circuit: Circuit,
    stages: Sequence[DriveStage],
    parts: PartsLibrary,
    settings: Mapping[str, RuleSetting] | None = None,
    conditions: dict[str, Value] | None = None,
    rules: Mapping[str, Rule] | None = None,
) -> CheckResult:
    """Every enabled rule over every floating stage, with the collector paused meanwhile
    (the facts and findings are short-lived; see ``_gc.paused_gc``)."""
    from drivelint._gc import paused_gc

    with paused_gc(freeze=False):
        return _check_circuit(circuit, stages, parts, settings, conditions, rules)


def _check_circuit(
    circuit: Circuit,
    stages: Sequence[DriveStage],
    parts: PartsLibrary,
    settings: Mapping[str, RuleSetting] | None,
    conditions: dict[str, Value] | None,
    rules: Mapping[str, Rule] | None,
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
    asked: set[str] = set()
    assumed: list[StageAssumptions] = []
    enabled = {r for r in rules if settings.get(r, RuleSetting()).enabled}
    diagnostics.extend(_unknown_part_targets(circuit, directives))
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
        facts = _CountedFacts(stage, merged, ratings, directives, conditions, by_net)
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
        asked |= facts.asked
        found = _assumptions(stage, facts, ratings)
        if found is not None:
            assumed.append(found)
    kept, accepted, unused = _apply_acceptances(findings, directives)
    # An acceptance of a rule switched off for this file is not stale: it waits for the rule.
    unused = [a for a in unused if a.rule in enabled]
    diagnostics.extend(_unused_conditions(circuit, directives, asked))
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
    configured = {k for k in asked if k in (conditions or {}) and k not in directives.conditions}
    return CheckResult(
        circuit,
        tuple(stages),
        tuple(sorted(kept, key=Finding.sort_key)),
        tuple(diagnostics),
        tuple(sorted(accepted, key=Finding.sort_key)),
        tuple(assumed),
        frozenset(configured),
        _names_used(circuit),
    )


def _names_used(circuit: Circuit) -> frozenset[str]:
    names = {d.model_name.lower() for d in circuit.devices.values() if d.model_name}
    names |= {i.subckt.lower() for i in circuit.instances.values()}
    return frozenset(names)


def _unknown_part_targets(circuit: Circuit, directives: DirectiveSet) -> list[Diagnostic]:
    """A ``part`` directive for a device the netlist does not have gives nothing: say so."""
    out = []
    known = set(circuit.devices) | set(circuit.instances)
    for device, values in directives.parts.items():
        if device in known or not values:
            continue
        span = min(at for _, at in values.values())
        out.append(
            Diagnostic(
                Severity.WARNING,
                Span(span.path, span.line, 1),
                f"'part {device}' matches no device of this netlist; its ratings are not used "
                "(directives name devices, such as M1 or X1.M2; a parts library names models)",
                circuit.line_text(span),
                "directive",
            )
        )
    return out


def _unused_conditions(
    circuit: Circuit, directives: DirectiveSet, asked: set[str]
) -> list[Diagnostic]:
    """Directive conditions no rule asked for on any stage of this file."""
    out = []
    for key, (_, span) in sorted(directives.conditions.items()):
        if key in asked:
            continue
        out.append(
            Diagnostic(
                Severity.WARNING,
                span,
                f"condition {key} is used by no rule on this netlist's stages; remove it, or "
                "check that drivelint recognises the stage it is meant for (drivelint stages)",
                circuit.line_text(span),
                "directive",
            )
        )
    return out


# The stage inputs whose origin is listed when it is not a rating someone gave.
ASSUMED_KEYS = ("qg", "vgs_max", "vgs_on", "vf", "i_quiescent", "q_levelshift", "i_leak", "ambient")


def is_assumed(value: Value) -> bool:
    """A value from a documented default, an estimate, or none known (taken as zero)."""
    origin = value.origin
    if origin.startswith(("default", "no ", "none")):
        return True
    return "estimate" in origin or origin.startswith("computed:") and " of model " in origin


def _assumptions(stage: DriveStage, facts: StageFacts, ratings: Ratings) -> StageAssumptions | None:
    """What this stage's numbers rest on that nobody gave (see :func:`is_assumed`)."""
    candidates: dict[str, Value | None] = {}
    try:
        candidates["qg"] = facts.qg_switch
        candidates["vgs_max"] = ratings.get_or_default(facts.switch, "vgs_max")
        candidates["vgs_on"] = facts.vgs_on
        if stage.supply.kind in ("bootstrap", "charge-pump"):
            candidates["vf"] = facts.diode_vf if facts.diode is not None else None
            candidates["i_leak"] = facts.i_leak
        if stage.driver is not None:
            candidates["i_quiescent"] = facts.i_quiescent
            candidates["q_levelshift"] = facts.q_ls
        candidates["ambient"] = facts.temperature
    except (RatingError, ArithmeticError, ValueError):
        return None  # a bad rating is already a diagnostic of the rule that met it
    values = {k: v for k, v in candidates.items() if v is not None and is_assumed(v)}
    if stage.supply.kind in ("bootstrap", "charge-pump") and candidates.get("qg") is None:
        values["qg"] = Value(float("nan"), "C", "unknown: no rating and no model capacitances")
    return StageAssumptions(stage.switch, stage.span, values)


def expand_rule_patterns(patterns: Sequence[str], known: Sequence[str]) -> frozenset[str]:
    """The rule ids a ``--select``/``--ignore`` list names: an id, or its first words
    (``bootstrap`` is every ``bootstrap-…`` rule, ``bootstrap-diode`` both diode rules).

    Raises ValueError naming a pattern that names no rule.
    """
    out: set[str] = set()
    for raw in patterns:
        pattern = raw.strip().lower()
        if not pattern:
            continue
        found = {r for r in known if r == pattern or r.startswith(pattern + "-")}
        if not found:
            raise ValueError(f"'{raw.strip()}' names no rule; known rules: " + ", ".join(known))
        out |= found
    return frozenset(out)


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


def _accept(finding: Finding, waiver: Waiver) -> Finding:
    from dataclasses import replace

    return replace(finding, accepted=waiver)


def select_rules(result: CheckResult, keep: Callable[[str], bool]) -> CheckResult:
    """The result with only the findings (and accepted findings) of rules ``keep`` keeps.

    Used for ``--select``/``--ignore`` on the command line: applied to the whole result,
    so acceptances are judged stale or not on every rule, whatever is shown.
    """
    from dataclasses import replace

    return replace(
        result,
        findings=tuple(f for f in result.findings if keep(f.rule)),
        accepted=tuple(f for f in result.accepted if keep(f.rule)),
    )


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
                if a.rule == finding.rule
                and a.device in (finding.device, finding.switch, ANY_DEVICE)
            ),
            None,
        )
        if match is None:
            kept.append(finding)
        else:
            used.add(match)
            acceptance = directives.accepts[match]
            accepted.append(_accept(finding, Waiver(acceptance.reason, acceptance.span)))
    unused = [a for index, a in enumerate(directives.accepts) if index not in used]
    return kept, accepted, unused


def shifter_currents(
    circuit: Circuit,
    stages: Sequence[DriveStage],
    parts: PartsLibrary,
    conditions: dict[str, Value] | None = None,
) -> dict[str, Value]:
    """For ``drivelint stages``: the current each stage's level shifter draws from the boot
    supply while the switch is on (switch -> value), from the same account of drains the
    rules use."""
    from drivelint.stages.wires import collapse_wires

    directives = parse_directives(circuit.directives, circuit.line_text)
    ratings = Ratings(parts, directives)
    merged = collapse_wires(circuit).circuit
    by_net = devices_by_net(merged)
    out: dict[str, Value] = {}
    for stage in stages:
        shifter = stage.level_shifter
        if not stage.floating or shifter is None or _needs(circuit, stage):
            continue
        try:
            facts = StageFacts(stage, merged, ratings, directives, conditions, by_net)
            drains = facts.on_drains.resistive
        except (RatingError, ArithmeticError, ValueError, KeyError):
            continue
        mine = {shifter.transistor, *shifter.resistors}
        total = sum(d.current.value for d in drains if mine & set(d.device.split("+")))
        names = ", ".join(d.device for d in drains if mine & set(d.device.split("+")))
        out[stage.switch] = Value(
            total, "A", f"computed: drains through {names}" if names else "none while on"
        )
    return out
