"""Inline directives: ``* drivelint: …`` comments in a netlist.

Three forms, one prefix (the reader collects the comments; this module gives them meaning)::

    * drivelint: part M1 qg=38n vgs_max=20V          ratings of one device
    * drivelint: conditions fsw=20k duty_max=0.95    operating conditions for the file
    * drivelint: accept dc-hold M1 -- charge pump fitted on the real board
    * drivelint: accept dc-hold * -- every device of this file

An acceptance must give a reason after ``--``; ``*`` for the device accepts the rule's
findings on every device of the file. Values are read by the same quantity reader as the
parts library and the configuration (:func:`drivelint.ratings.units.parse_quantity`), with
the same keys and ranges: SPICE numbers (``38n``, ``2m``) or numbers with their unit
(``38nC``, ``20kHz``); a bare temperature (``ambient``, ``tj_max``) is in °C.
"""

from __future__ import annotations

import re
from collections.abc import Iterable, Mapping
from dataclasses import dataclass, field

from drivelint.diagnostics import Diagnostic, Severity, Span
from drivelint.netlist.statements import Directive
from drivelint.ratings.conditions import CONDITION_KEYS as CONDITION_KEYS
from drivelint.ratings.conditions import read_condition
from drivelint.ratings.parts import PART_KEY_TABLE, out_of_range
from drivelint.ratings.units import UnitError, parse_quantity

# Keys a `part` directive may set, with their units: the parts library's table.
PART_KEYS: Mapping[str, str] = {key: spec.unit for key, spec in PART_KEY_TABLE.items()}
ANY_DEVICE = "*"


@dataclass(frozen=True, slots=True)
class Acceptance:
    """An inline acceptance of one rule's finding on one device, with its reason."""

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


def _part_value(key: str, raw: str) -> float:
    """A part key's SI value, in the key's unit and range (as in a parts file)."""
    spec = PART_KEY_TABLE[key]
    value = parse_quantity(raw, spec.unit, bare_celsius=True)
    problem = out_of_range(abs(value) if spec.signed else value, spec)
    if problem:
        raise UnitError(problem)
    return value


_WORD = re.compile(r"\S+")


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
        words = [(m.group(), m.start()) for m in _WORD.finditer(text)]
        if not words:
            problem(directive, 0, "empty directive: expected 'part', 'conditions' or 'accept'")
            continue
        verb = words[0][0].lower()
        if verb == "accept":
            head, sep, reason = text.partition("--")
            fields = head.split()
            if len(fields) != 3:
                problem(directive, 0, "expected 'accept RULE DEVICE -- REASON' (DEVICE * for all)")
                continue
            if not sep or not reason.strip():
                problem(directive, len(head), "an acceptance needs a reason after '--'")
                continue
            rule, device = fields[1].lower(), fields[2].lower()
            if rules and rule not in rules:
                problem(directive, words[1][1], f"unknown rule '{fields[1]}'")
                continue
            accepts.append(Acceptance(rule, device, reason.strip(), directive.span))
        elif verb in ("part", "conditions"):
            if verb == "part" and len(words) < 2:
                problem(directive, 0, "expected 'part DEVICE KEY=VALUE …'")
                continue
            allowed = PART_KEYS if verb == "part" else CONDITION_KEYS
            rest = words[2:] if verb == "part" else words[1:]
            target: dict[str, tuple[float, Span]] = (
                parts.setdefault(words[1][0].lower(), {}) if verb == "part" else conditions
            )
            for item, offset in rest:
                key, sep, raw = item.partition("=")
                key = key.lower()
                if not sep or not raw:
                    problem(directive, offset, f"expected KEY=VALUE, found '{item}'")
                    continue
                if key not in allowed:
                    problem(
                        directive,
                        offset,
                        f"unknown key '{key}' for '{verb}'"
                        + _suggest(key, allowed)
                        + "; expected one of "
                        + ", ".join(sorted(allowed)),
                    )
                    continue
                try:
                    value = _part_value(key, raw) if verb == "part" else read_condition(key, raw)
                except UnitError as exc:
                    problem(directive, offset + len(key) + 1, f"{key}: {exc}")
                    continue
                at = Span(directive.span.path, directive.span.line, directive.column + offset)
                target[key] = (value, at)
        else:
            problem(
                directive,
                0,
                f"unknown directive '{words[0][0]}': expected 'part', 'conditions' or 'accept'",
            )
    return DirectiveSet(parts, conditions, tuple(accepts), tuple(problems))


def _suggest(word: str, choices: Iterable[str]) -> str:
    import difflib

    close = difflib.get_close_matches(word, sorted(choices), n=1, cutoff=0.6)
    return f" (did you mean '{close[0]}'?)" if close else ""
