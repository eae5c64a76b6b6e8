"""Supplies held at the levels the rule judged: a rail's source rewritten as a DC level.

A rule judges a supply at one level: a PULSE/PWL bus (a load dump, a dip, a soft start) at
its highest for a stress figure and its lowest for a hold or headroom figure, a condition
or tolerance corner at the level it names. A testbench that reproduces the finding holds
the rail there for the whole run: the source that sets it (an independent voltage source
from the rail to ground or to another DC rail) is rewritten as ``DC`` at that level, with
the reason in a comment. A rail already at that level is left as written.
"""

from __future__ import annotations

import math
from collections.abc import Iterable, Mapping
from dataclasses import dataclass

from drivelint.circuit.model import GROUND, Circuit, Device
from drivelint.diagnostics import Span
from drivelint.netlist.statements import Word
from drivelint.netlist.values import format_si
from drivelint.ratings.values import Value
from drivelint.testbench.design import Design, Edit
from drivelint.testbench.stimulus import number

# Two levels this close are the same level (relative, against 1 V).
SAME_LEVEL = 1e-9


@dataclass(frozen=True, slots=True)
class Level:
    """A rail and the level the rule took it at."""

    net: str
    value: Value  # the level and where the rule took it from

    @property
    def volts(self) -> float:
        return self.value.value


@dataclass(frozen=True, slots=True)
class Held:
    """Edits that hold rails at their levels, and what they say."""

    edits: dict[Span, Edit]
    notes: tuple[str, ...]


def setting_source(circuit: Circuit, net: str) -> tuple[Device, str, float] | None:
    """The independent voltage source that sets ``net`` against ground or a DC rail: the
    source, the net at its other terminal, and that net's level."""
    rails = {**circuit.rails, GROUND: 0.0}
    found: list[tuple[str, Device, str]] = []
    for device in circuit.devices.values():
        if device.kind != "vsource" or device.waveform is None:
            continue
        plus, minus = device.net("p"), device.net("n")
        if plus == net and minus is not None and minus in rails:
            found.append((device.name, device, minus))
        elif minus == net and plus is not None and plus in rails and device.waveform.kind == "dc":
            found.append((device.name, device, plus))
    if not found:
        return None
    _, device, other = min(found, key=lambda f: f[0])
    return device, other, rails[other]


def _is_at(device: Device, net: str, volts: float, other: float) -> bool:
    wave = device.waveform
    if wave is None or wave.kind != "dc":
        return False
    level = other + wave.dc_level() if device.net("p") == net else other - wave.dc_level()
    return math.isclose(level, volts, rel_tol=SAME_LEVEL, abs_tol=SAME_LEVEL)


def hold_rails(design: Design, circuit: Circuit, levels: Iterable[Level], why: str) -> Held | str:
    """Edits that set each rail of ``levels`` to its level (DC), or why they cannot."""
    targets: dict[str, Level] = {}
    for level in levels:
        targets.setdefault(level.net, level)
    edits: dict[Span, Edit] = {}
    notes: list[str] = []
    for net, level in sorted(targets.items()):
        current = circuit.rails.get(net)
        if current is not None and math.isclose(
            current, level.volts, rel_tol=SAME_LEVEL, abs_tol=SAME_LEVEL
        ):
            continue
        found = setting_source(circuit, net)
        if found is None:
            return (
                f"no independent source sets the rail {net}, so it cannot be held at "
                f"{format_si(level.volts, 'V')}"
            )
        device, other, other_volts = found
        if other in targets:
            other_volts = targets[other].volts
        if _is_at(device, net, level.volts, other_volts):
            continue
        element = design.element_of(device.name)
        nodes = element.fields[:2] if element is not None else ()
        if element is None or len(nodes) < 2 or not all(isinstance(n, Word) for n in nodes):
            return f"{device.name}'s statement cannot be rewritten where it is written"
        first, second = nodes
        assert isinstance(first, Word) and isinstance(second, Word)
        dc = level.volts - other_volts if device.net("p") == net else other_volts - level.volts
        line = f"{design.raw_name(element)} {first.raw} {second.raw} DC {number(dc)}"
        what = f"rail {net} held at {format_si(level.volts, 'V')} ({level.value.origin})"
        edits[element.span] = Edit(lines=(line,), note=f"{what}: {why}")
        notes.append(f"{device.name}: {what}, {why}")
    return Held(edits, tuple(notes))


def levels_of(pairs: Mapping[str, Value | None]) -> list[Level]:
    """Levels from (net, value) pairs, leaving out unknown ones."""
    return [Level(net, value) for net, value in pairs.items() if value is not None and net]


def hold_floating(
    design: Design,
    circuit: Circuit,
    name: str,
    positive_net: str | None,
    level: Value | None,
    why: str,
) -> Held | str:
    """An isolated gate supply (a DC source between the boot net and the switch node)
    rewritten to ``level`` where it is not there already."""
    device = circuit.devices.get(name)
    wave = device.waveform if device is not None else None
    if level is None or device is None or device.kind != "vsource" or wave is None:
        return Held({}, ())
    positive = device.net("p") == positive_net
    present = wave.dc_level() if wave.kind == "dc" else None
    wanted = level.value
    if present is not None and math.isclose(
        present if positive else -present, wanted, rel_tol=SAME_LEVEL, abs_tol=SAME_LEVEL
    ):
        return Held({}, ())
    element = design.element_of(name)
    nodes = element.fields[:2] if element is not None else ()
    if element is None or len(nodes) < 2 or not all(isinstance(n, Word) for n in nodes):
        return f"{name}'s statement cannot be rewritten where it is written"
    first, second = nodes
    assert isinstance(first, Word) and isinstance(second, Word)
    value = wanted if positive else -wanted
    line = f"{design.raw_name(element)} {first.raw} {second.raw} DC {number(value)}"
    what = f"isolated supply {name} at {format_si(wanted, 'V')} ({level.origin})"
    return Held({element.span: Edit(lines=(line,), note=f"{what}: {why}")}, (f"{what}, {why}",))
