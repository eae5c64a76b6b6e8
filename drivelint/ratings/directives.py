"""Inline directives: ``* drivelint: …`` comments in a netlist.

Three forms, one prefix (the reader collects the comments; this module gives them meaning)::

    * drivelint: part M1 qg=38n vgs_max=20          ratings of one device (SPICE numbers)
    * drivelint: conditions fsw=100k duty_max=0.95   operating conditions for the file
    * drivelint: accept dc-hold M1 -- charge pump fitted on the real board

An acceptance must give a reason after ``--``. Numbers use SPICE syntax and are taken in
the unit of the key (``qg=38n`` is 38 nC); temperatures (``ambient``, ``tj_max``) are in °C.
"""

from __future__ import annotations

from collections.abc import Iterable, Mapping
from dataclasses import dataclass, field

from drivelint.diagnostics import Diagnostic, Severity, Span
from drivelint.netlist.statements import Directive

# Keys a `part` directive may set, with their units (the parts library uses the same keys).
PART_KEYS: Mapping[str, str] = {
    "vds_max": "V",
    "vgs_max": "V",
    "vgs_min": "V",
    "qg": "C",
    "vgs_qg": "V",
    "qgd": "C",
    "rds_on": "Ohm",
    "vgs_plateau": "V",
    "vgs_on": "V",
    "vth": "V",
    "rg_internal": "Ohm",
    "rth_ja": "K/W",
    "tj_max": "K",
    "vceo_max": "V",
    "vrrm": "V",
    "trr": "s",
    "qrr": "C",
    "ir_leak": "A",
    "vf": "V",
    "vz": "V",
    "iq_boot": "A",
    "uvlo_boot": "V",
    "q_levelshift": "C",
    "i_source": "A",
    "i_sink": "A",
    "v_max": "V",
    "c": "F",
}
CONDITION_KEYS: Mapping[str, str] = {
    "fsw": "Hz",
    "duty_max": "1",
    "on_time_max": "s",
    "v_bus": "V",
    "v_aux": "V",
    "ambient": "K",
    "load_current": "A",
}
_CELSIUS_KEYS = frozenset({"tj_max", "ambient"})


@dataclass(frozen=True, slots=True)
class Acceptance:
    rule: str
    device: str
    reason: str
    span: Span


@dataclass(frozen=True, slots=True)
class DirectiveSet:
    """Everything the directives of one deck say."""

    parts: Mapping[str, Mapping[str, tuple[float, Span]]] = field(default_factory=dict)
    conditions: Mapping[str, tuple[float, Span]] = field(default_factory=dict)
    accepts: tuple[Acceptance, ...] = ()
    diagnostics: tuple[Diagnostic, ...] = ()


def _number(text: str, key: str) -> float | None:
    from drivelint.netlist.values import parse_number

    value = parse_number(text)
    if value is None:
        return None
    return value + 273.15 if key in _CELSIUS_KEYS else value


def parse_directives(
    directives: Iterable[Directive], line_text: object = None, known_rules: Iterable[str] = ()
) -> DirectiveSet:
    """Parse every directive; malformed ones become diagnostics naming line and column."""
    parts: dict[str, dict[str, tuple[float, Span]]] = {}
    conditions: dict[str, tuple[float, Span]] = {}
    accepts: list[Acceptance] = []
    problems: list[Diagnostic] = []
    rules = frozenset(known_rules)

    def problem(directive: Directive, offset: int, message: str) -> None:
        span = Span(directive.span.path, directive.span.line, directive.column + offset)
        text = line_text(directive.span) if callable(line_text) else ""
        problems.append(Diagnostic(Severity.ERROR, span, message, text, "directive"))

    for directive in directives:
        text = directive.text
        words = text.split()
        if not words:
            problem(directive, 0, "empty directive: expected 'part', 'conditions' or 'accept'")
            continue
        verb = words[0].lower()
        if verb == "accept":
            head, sep, reason = text.partition("--")
            fields = head.split()
            if len(fields) != 3:
                problem(directive, 0, "expected 'accept RULE DEVICE -- REASON'")
                continue
            if not sep or not reason.strip():
                problem(directive, len(head), "an acceptance needs a reason after '--'")
                continue
            rule, device = fields[1].lower(), fields[2].lower()
            if rules and rule not in rules:
                problem(directive, text.index(fields[1]), f"unknown rule '{fields[1]}'")
                continue
            accepts.append(Acceptance(rule, device, reason.strip(), directive.span))
        elif verb in ("part", "conditions"):
            allowed = PART_KEYS if verb == "part" else CONDITION_KEYS
            rest = words[2:] if verb == "part" else words[1:]
            if verb == "part" and len(words) < 2:
                problem(directive, 0, "expected 'part DEVICE KEY=VALUE …'")
                continue
            target: dict[str, tuple[float, Span]] = (
                parts.setdefault(words[1].lower(), {}) if verb == "part" else conditions
            )
            for item in rest:
                offset = text.index(item)
                key, sep, raw = item.partition("=")
                key = key.lower()
                if not sep or not raw:
                    problem(directive, offset, f"expected KEY=VALUE, found '{item}'")
                    continue
                if key not in allowed:
                    problem(
                        directive,
                        offset,
                        f"unknown key '{key}' for '{verb}'; expected one of "
                        + ", ".join(sorted(allowed)),
                    )
                    continue
                value = _number(raw, key)
                if value is None:
                    problem(directive, offset + len(key) + 1, f"'{raw}' is not a number")
                    continue
                target[key] = (value, directive.span)
        else:
            problem(
                directive,
                0,
                f"unknown directive '{words[0]}': expected 'part', 'conditions' or 'accept'",
            )
    return DirectiveSet(parts, conditions, tuple(accepts), tuple(problems))
