"""Findings, and what a check is given."""

from __future__ import annotations

from collections.abc import Callable, Iterator, Mapping
from dataclasses import dataclass, field

from drivelint.checks.facts import StageFacts
from drivelint.diagnostics import Severity, Span, positional_reduce
from drivelint.ratings.values import Value
from drivelint.stages.model import DriveStage


@dataclass(frozen=True, slots=True)
class Waiver:
    """The acceptance directive that accepted a finding: its reason and where it is."""

    __reduce__ = positional_reduce

    reason: str
    span: Span

    def to_json(self) -> dict[str, object]:
        return {"reason": self.reason, "path": self.span.path, "line": self.span.line}


@dataclass(frozen=True, slots=True)
class Finding:
    """One problem with a design, with the numbers behind it and a fix."""

    __reduce__ = positional_reduce

    rule: str
    severity: Severity
    message: str
    span: Span
    switch: str
    device: str
    values: Mapping[str, Value]
    fix: str
    related: tuple[Span, ...] = ()
    derivation: tuple[str, ...] = ()
    accepted: Waiver | None = None  # set when an acceptance directive accepts it

    def sort_key(self) -> tuple[str, int, int, str, str]:
        return (self.span.path, self.span.line, self.span.column, self.rule, self.device)

    def to_json(self) -> dict[str, object]:
        return {
            "rule": self.rule,
            "severity": self.severity.label,
            "path": self.span.path,
            "line": self.span.line,
            "column": self.span.column,
            "message": self.message,
            "device": self.device,
            "switch": self.switch,
            "values": {k: v.to_json() for k, v in sorted(self.values.items())},
            "fix": self.fix,
            "related": [{"path": s.path, "line": s.line, "column": s.column} for s in self.related],
            "accepted": self.accepted.to_json() if self.accepted else None,
        }


@dataclass(frozen=True, slots=True)
class CheckContext:
    """What a check gets besides the stage: the shared facts and its rule's settings."""

    rule: str
    severity: Severity
    facts: StageFacts
    options: Mapping[str, float] = field(default_factory=dict)

    def finding(
        self,
        device: str,
        message: str,
        values: Mapping[str, Value],
        fix: str,
        derivation: tuple[str, ...] = (),
        severity: Severity | None = None,
    ) -> Finding:
        """A finding on ``device``, with the other devices of the stage as related spans."""
        facts = self.facts
        stage = facts.stage
        related = tuple(
            sorted(
                {facts.span_of(name) for name in (stage.switch, *stage.related) if name != device}
            )
        )
        if stage.technology == "igbt":
            message, fix = igbt_words(message), igbt_words(fix)
            derivation = tuple(igbt_words(line) for line in derivation)
        return Finding(
            rule=self.rule,
            severity=severity or self.severity,
            message=message,
            span=facts.span_of(device),
            switch=stage.switch,
            device=device,
            values=dict(values),
            fix=fix,
            related=related,
            derivation=derivation,
        )


def igbt_words(text: str) -> str:
    """A message about an IGBT in its own terms: V_GE for V_GS, V_CE for V_DS (the rules
    judge it as an N-channel switch; the value keys keep their names)."""
    return text.replace("V_GS", "V_GE").replace("V_DS", "V_CE")


Check = Callable[[DriveStage, CheckContext], Iterator[Finding]]
