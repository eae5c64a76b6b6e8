"""What recognition reads from a behavioural source's expression: the nets it refers to, and
its value for given node voltages.

Both go through the two functions below and nothing else, so that when the expression
grammar learns node and branch references (``V(a)``, ``V(a,b)``, ``I(Vx)``) on devices,
only this module changes. Today the expression is the text the elaborated circuit keeps
(``Device.expression``): references are found with a pattern, and the value is computed by
replacing each reference with a number and evaluating the rest with the project's own
expression grammar (never Python ``eval``). An expression that grammar cannot read (an
unknown function such as ``u()`` or ``limit()``) has no value here: recognition then says
"not known" rather than guess.
"""

from __future__ import annotations

import re
from collections.abc import Mapping
from dataclasses import dataclass

from drivelint.circuit.model import GROUND, Circuit, Device

_V_REFERENCE = re.compile(r"\bv\(\s*([^,\s()]+)\s*(?:,\s*([^\s()]+)\s*)?\)", re.IGNORECASE)
_GROUND_NAMES = frozenset({"0", "gnd"})
# Placeholder names for references while the rest is evaluated; never a netlist name.
_SLOT = "dlref_{}"


@dataclass(frozen=True, slots=True)
class Reference:
    """``V(plus)`` or ``V(plus, minus)`` in an expression, with nets resolved in the circuit."""

    plus: str
    minus: str  # GROUND for a single-node reference
    start: int
    end: int


def _resolve(circuit: Circuit, device: Device, name: str) -> str:
    name = name.lower()
    if name in _GROUND_NAMES:
        return GROUND
    if name in circuit.global_nets:
        return name
    if device.instance:
        ports = dict(circuit.instances[device.instance].ports)
        if name in ports:
            return ports[name]
        return f"{device.instance}.{name}"
    return name


def references(circuit: Circuit, device: Device) -> tuple[Reference, ...]:
    """Every node-voltage reference in ``device``'s expression, in order of appearance."""
    text = device.expression or ""
    out = []
    for match in _V_REFERENCE.finditer(text):
        plus = _resolve(circuit, device, match.group(1))
        minus = _resolve(circuit, device, match.group(2)) if match.group(2) else GROUND
        out.append(Reference(plus, minus, match.start(), match.end()))
    return tuple(out)


def referenced_nets(circuit: Circuit, device: Device) -> tuple[str, ...]:
    """The nets ``device``'s expression reads, ground left out, each once."""
    nets = [n for r in references(circuit, device) for n in (r.plus, r.minus)]
    return tuple(dict.fromkeys(n for n in nets if n != GROUND))


def value(circuit: Circuit, device: Device, volts: Mapping[str, float]) -> float | None:
    """The expression's value with each net at ``volts`` (ground 0 V); None when it cannot
    be evaluated (a net not given, or something the expression grammar does not read)."""
    from drivelint.netlist.expressions import ExpressionError, compile_expression

    text = device.expression or ""
    refs = references(circuit, device)
    pieces: list[str] = []
    numbers: dict[str, float] = {}
    last = 0
    for index, ref in enumerate(refs):
        plus = 0.0 if ref.plus == GROUND else volts.get(ref.plus)
        minus = 0.0 if ref.minus == GROUND else volts.get(ref.minus)
        if plus is None or minus is None:
            return None
        slot = _SLOT.format(index)
        numbers[slot] = plus - minus
        pieces.append(text[last : ref.start])
        pieces.append(f"({slot})")
        last = ref.end
    pieces.append(text[last:])
    try:
        compiled = compile_expression("".join(pieces))
        return compiled.evaluate(numbers.get)
    except (ExpressionError, ArithmeticError, ValueError):
        return None


_FORM = re.compile(r"\b([vi])\s*=", re.IGNORECASE)


def is_voltage_source(circuit: Circuit, device: Device) -> bool:
    """A behavioural source written ``V = …`` (a voltage), not ``I = …`` (a current).

    The elaborated device keeps the expression but not which of the two it was, so the
    form is read from the element's own line.
    """
    if device.kind != "behavioral":
        return device.kind == "vcvs"
    found = _FORM.search(circuit.line_text(device.span))
    return found is not None and found.group(1).lower() == "v"
