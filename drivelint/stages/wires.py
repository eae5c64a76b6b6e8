"""Parts that simulation decks put in series for measurement or realism: wires to recognition.

Decks written for a simulator carry things a schematic reviewer reads straight through:
zero-volt sources in series that only measure a current (``V_sense sw dl 0``), lead and
loop inductances of a few nanohenries, current-sense shunts and ESRs of milliohms. Left in,
each one hides a connection: a low-side switch behind an ammeter is not "on the switch
node", a clamp behind one is not "across gate and source", a shunt in the low side's return
makes its source float. This module decides, in one place, which parts are wires, and
rebuilds the circuit with each group of nets they join merged into one net; recognition and
the rules then both work on that circuit.

What counts as a wire (common practice in simulation decks; the bounds are ours):

- an independent voltage source of 0 V DC (an ammeter);
- an inductor not coupled to another winding, of at most ``STRAY_MAX_INDUCTANCE`` (a
  package lead or a loop: never a filter, whatever capacitors sit beside it), or of at most
  ``WIRE_MAX_INDUCTANCE`` where it does not form a filter;
- a resistor of at most ``WIRE_MAX_RESISTANCE`` (a shunt, an ESR, a 0 Ω link).

What makes an inductor a filter is where the capacitor sits: an LC filter's capacitor holds
the inductor's far net, which nothing else holds, against ground or a rail (an output
filter, a supply's bulk capacitor behind its lead). A capacitor between two nets that are
both held already — a rail, ground, or a net tied to one by the parts above (a DC-link
ceramic from the bus to a shunt's top, which the shunt ties to ground) — is a decoupling
capacitor: it filters nothing, and an inductor beside it stays a stray.

Two nets held at different DC voltages are never merged, whatever joins them.

A supply that reaches the board through a lead is still that supply at DC: a net joined to
a rail by an inductance of at most ``WIRE_MAX_INDUCTANCE`` (one that is not a wire because
it filters) and held by a filter-sized capacitor to ground or a rail is taken as a rail at
the same level (a :class:`HeldRail`), and so is a net a DC source stacks on it (a driver's
supply on a negative rail). At most ``MAX_LEAD_STEPS`` leads are followed from a rail, and
a net with a switch's drain on it, or the source of a switch whose drain is at a rail (a
switch node), never becomes a rail.
"""

from __future__ import annotations

from collections.abc import Iterable, Mapping
from dataclasses import dataclass, replace

from drivelint.circuit.model import GROUND, Circuit, Device, Instance

WIRE_MAX_RESISTANCE = 0.1  # Ω: current-sense shunts, ESRs, 0 Ω links
WIRE_MAX_INDUCTANCE = 1e-6  # H: package leads, PCB loops and cables run from nH to ~µH
# H: package leads and commutation loops are 1-20 nH; the smallest inductors that filter a
# switching stage (MHz converters) are ~100 nH and up (common practice).
STRAY_MAX_INDUCTANCE = 20e-9
# A capacitor this large on an inductor's net makes the pair an LC filter, not a stray:
# switch-node and snubber capacitances are pF to nF, output and DC-link filters 100 nF up.
FILTER_MIN_CAPACITANCE = 100e-9
# Leads followed from a rail (bench lead, then a board filter): local, like every search.
MAX_LEAD_STEPS = 2


@dataclass(frozen=True, slots=True)
class Wire:
    """One part taken as a wire, and why."""

    device: str
    kind: str  # "ammeter", "stray inductance" or "low resistance"
    nets: tuple[str, str]
    value: float

    def describe(self) -> str:
        from drivelint.netlist.values import format_si

        what = {
            "ammeter": "0 V source (an ammeter)",
            "stray inductance": f"{format_si(self.value, 'H')} inductance",
            "low resistance": f"{format_si(self.value, 'Ω')} resistor",
        }[self.kind]
        return f"{self.device} ({what}) taken as a wire between {self.nets[0]} and {self.nets[1]}"


@dataclass(frozen=True, slots=True)
class HeldRail:
    """A net taken as a rail at DC: behind a lead from one, or stacked on one by a source."""

    net: str
    volts: float
    kind: str  # "lead" or "stacked"
    via: str  # the lead (inductor) or the DC source
    rail: str  # the rail (or held net) it follows
    holders: tuple[str, ...] = ()  # lead: the capacitors that hold the net

    def describe(self) -> str:
        from drivelint.netlist.values import format_si

        level = format_si(self.volts, "V")
        if self.kind == "lead":
            return (
                f"{self.net} taken as the rail {self.rail} ({level}) at DC: it is behind the "
                f"lead {self.via} and held by {', '.join(self.holders)}"
            )
        return f"{self.net} taken as a rail at {level}: {self.via} stacks it on {self.rail}"


@dataclass(frozen=True, slots=True)
class Collapsed:
    """The circuit with every wire group merged, and what was merged."""

    circuit: Circuit
    wires: tuple[Wire, ...]
    net_of: Mapping[str, str]  # original net -> merged net (only nets that changed)
    held: tuple[HeldRail, ...] = ()  # nets the merged circuit takes as rails at DC

    def net(self, name: str) -> str:
        return self.net_of.get(name, name)

    def wires_at(self, nets: Iterable[str]) -> tuple[Wire, ...]:
        """The wires whose merged net is one of ``nets`` (merged names)."""
        wanted = set(nets)
        return tuple(w for w in self.wires if self.net(w.nets[0]) in wanted)

    def held_at(self, nets: Iterable[str]) -> tuple[HeldRail, ...]:
        """The held rails among ``nets`` (merged names), with those they follow."""
        by_net = {h.net: h for h in self.held}
        out: dict[str, HeldRail] = {}
        todo = [n for n in nets if n in by_net]
        while todo:
            held = by_net[todo.pop()]
            if held.net not in out:
                out[held.net] = held
                if held.rail in by_net:
                    todo.append(held.rail)
        return tuple(sorted(out.values(), key=lambda h: h.net))


def _two_nets(device: Device) -> tuple[str, str] | None:
    if len(device.pins) != 2:
        return None
    (_, a), (_, b) = device.pins
    return (a, b) if a != b else None


def _filter_nets(
    circuit: Circuit, rails: Mapping[str, float], coupled: frozenset[str]
) -> frozenset[str]:
    """Nets held by a filter-sized capacitor and nothing else: the capacitor goes from the
    net (or from nets tied to it by milliohms, ammeters or nH strays) to ground or a rail
    (also behind its ESR), and no such tie holds the net itself at a DC level."""
    tied = _Groups(rails)
    counts: dict[str, int] | None = None
    for device in circuit.devices.values():
        nets = _two_nets(device)
        if nets is None:
            continue
        if device.kind == "resistor" and device.value is not None:
            if abs(device.value) / device.multiplier <= WIRE_MAX_RESISTANCE:
                tied.join(*nets)
        elif device.kind == "inductor" and device.value is not None:
            if device.name not in coupled and (
                abs(device.value) / device.multiplier <= STRAY_MAX_INDUCTANCE
            ):
                tied.join(*nets)
        elif device.kind == "vsource" and _is_zero_volts(device):
            if counts is None:
                counts = _terminal_counts(circuit)
            if all(counts.get(n, 0) > 1 for n in nets):
                tied.join(*nets)

    def held(net: str) -> bool:
        return tied.level.get(tied.find(net)) is not None

    filtered: set[str] = set()
    for device in circuit.devices.values():
        if device.kind != "capacitor" or device.value is None:
            continue
        if device.value * device.multiplier < FILTER_MIN_CAPACITANCE:
            continue
        nets = _two_nets(device)
        if nets is None:
            continue
        a, b = nets
        if held(a) and not held(b):
            filtered.add(tied.find(b))
        elif held(b) and not held(a):
            filtered.add(tied.find(a))
    if not filtered:
        return frozenset()
    return frozenset(n for n in circuit.nets if tied.find(n) in filtered)


def _is_zero_volts(device: Device) -> bool:
    wave = device.waveform
    return wave is not None and wave.kind == "dc" and wave.dc_level() == 0.0


def _terminal_counts(circuit: Circuit) -> dict[str, int]:
    counts: dict[str, int] = {}
    for device in circuit.devices.values():
        for net in device.nets:
            counts[net] = counts.get(net, 0) + 1
    return counts


def find_wires(circuit: Circuit) -> tuple[Wire, ...]:
    """Every part of ``circuit`` that recognition reads as a wire.

    A 0 V source measures a current only where one flows: both its nets must carry some
    other device. One that only sets an input to 0 V (a command held low) is a source.
    """
    rails = {**circuit.rails, GROUND: 0.0}
    counts: dict[str, int] | None = None
    coupled = frozenset(
        name for d in circuit.devices.values() if d.kind == "coupling" for name in d.controls
    )
    filters: frozenset[str] | None = None
    out: list[Wire] = []
    for device in circuit.devices.values():
        nets = _two_nets(device)
        if nets is None:
            continue
        if device.kind == "vsource":
            if _is_zero_volts(device):
                if counts is None:
                    counts = _terminal_counts(circuit)
                if all(counts.get(n, 0) > 1 for n in nets):
                    out.append(Wire(device.name, "ammeter", nets, 0.0))
        elif device.kind == "resistor" and device.value is not None:
            ohms = abs(device.value) / device.multiplier
            if ohms <= WIRE_MAX_RESISTANCE:
                out.append(Wire(device.name, "low resistance", nets, ohms))
        elif device.kind == "inductor" and device.value is not None:
            henries = abs(device.value) / device.multiplier
            if henries > WIRE_MAX_INDUCTANCE or device.name in coupled:
                continue
            if henries > STRAY_MAX_INDUCTANCE:
                if filters is None:
                    filters = _filter_nets(circuit, rails, coupled)
                if any(n in filters for n in nets):
                    continue
            out.append(Wire(device.name, "stray inductance", nets, henries))
    return tuple(sorted(out, key=lambda w: w.device))


class _Groups:
    """Union-find over nets, refusing to join two different DC levels."""

    def __init__(self, rails: Mapping[str, float]) -> None:
        self.parent: dict[str, str] = {}
        self.level: dict[str, float] = dict(rails)

    def find(self, net: str) -> str:
        root = net
        while self.parent.get(root, root) != root:
            root = self.parent[root]
        while net != root:
            net, self.parent[net] = self.parent[net], root
        return root

    def join(self, a: str, b: str) -> bool:
        ra, rb = self.find(a), self.find(b)
        if ra == rb:
            return True
        la, lb = self.level.get(ra), self.level.get(rb)
        if la is not None and lb is not None and abs(la - lb) > 1e-9:
            return False
        self.parent[rb] = ra
        if la is None and lb is not None:
            self.level[ra] = lb
        return True


def _representative(members: list[str], circuit: Circuit, terminals: Mapping[str, int]) -> str:
    """The name a merged group is known by: ground, else a rail, else its busiest net."""
    if GROUND in members:
        return GROUND
    on_rail = sorted(m for m in members if m in circuit.rails)
    if on_rail:
        return on_rail[0]
    return min(members, key=lambda m: (-terminals.get(m, 0), len(m), m))


def held_rails(circuit: Circuit) -> tuple[HeldRail, ...]:
    """Nets of ``circuit`` (wires already merged) that are a rail at DC, behind a lead."""
    leads_at_all = any(
        d.kind == "inductor"
        and d.value is not None
        and abs(d.value) / d.multiplier <= WIRE_MAX_INDUCTANCE
        for d in circuit.devices.values()
    )
    if not leads_at_all:
        return ()
    rails = {**circuit.rails, GROUND: 0.0}
    coupled = {
        name for d in circuit.devices.values() if d.kind == "coupling" for name in d.controls
    }
    switch_nodes: set[str] = set()
    leads: list[tuple[Device, str, str]] = []
    sources: list[tuple[Device, str, str, float]] = []
    capacitors: dict[str, list[Device]] = {}
    for device in circuit.devices.values():
        if device.kind == "mosfet":
            drain, source = device.net("d"), device.net("s")
            if drain is not None:
                switch_nodes.add(drain)
                if source is not None and drain in rails:
                    switch_nodes.add(source)
            continue
        nets = _two_nets(device)
        if nets is None or device.value is None and device.kind != "vsource":
            continue
        if device.kind == "inductor" and device.name not in coupled:
            if device.value is not None and (
                abs(device.value) / device.multiplier <= WIRE_MAX_INDUCTANCE
            ):
                leads.append((device, *nets))
        elif device.kind == "capacitor" and device.value is not None:
            if device.value * device.multiplier >= FILTER_MIN_CAPACITANCE:
                for net in nets:
                    capacitors.setdefault(net, []).append(device)
        elif device.kind == "vsource":
            wave = device.waveform
            plus, minus = device.net("p"), device.net("n")
            if wave is not None and wave.kind == "dc" and plus is not None and minus is not None:
                sources.append((device, plus, minus, wave.dc_level()))
    if not leads:
        return ()
    out: list[HeldRail] = []
    for _ in range(MAX_LEAD_STEPS):
        found: list[HeldRail] = []
        for lead, a, b in leads:
            for near, far in ((a, b), (b, a)):
                if near not in rails or far in rails or far in switch_nodes:
                    continue
                if any(h.net == far for h in found):
                    continue
                holders = tuple(
                    c.name
                    for c in capacitors.get(far, ())
                    if next((n for n in c.nets if n != far), None) in rails
                )
                if holders:
                    found.append(HeldRail(far, rails[near], "lead", lead.name, near, holders))
        if not found:
            break
        for held in found:
            rails[held.net] = held.volts
        out += found
        # DC sources stacked on what is now a rail (a driver's supply on a negative rail)
        queue = [h.net for h in found]
        while queue:
            net = queue.pop(0)
            for stack, plus, minus, volts in sources:
                if minus == net and plus not in rails and plus not in switch_nodes:
                    far, level = plus, rails[net] + volts
                elif plus == net and minus not in rails and minus not in switch_nodes:
                    far, level = minus, rails[net] - volts
                else:
                    continue
                rails[far] = level
                out.append(HeldRail(far, level, "stacked", stack.name, net))
                queue.append(far)
    return tuple(out)


def _with_held_rails(collapsed: Collapsed) -> Collapsed:
    held = held_rails(collapsed.circuit)
    if not held:
        return collapsed
    circuit = collapsed.circuit
    rails = {**circuit.rails, **{h.net: h.volts for h in held}}
    return replace(collapsed, circuit=replace(circuit, rails=rails), held=held)


def _collapse(circuit: Circuit) -> Collapsed:
    from drivelint._gc import paused_gc

    # many small acyclic objects: the cyclic collector would walk the whole circuit
    with paused_gc():
        return _with_held_rails(_merge(circuit))


def _merge(circuit: Circuit) -> Collapsed:
    wires = find_wires(circuit)
    if not wires:
        return Collapsed(circuit, (), {})
    groups = _Groups({**circuit.rails, GROUND: 0.0})
    kept: list[Wire] = []
    for wire in wires:
        if groups.join(*wire.nets):
            kept.append(wire)
    names = {w.device for w in kept}
    terminals: dict[str, int] = {}
    for device in circuit.devices.values():
        if device.name in names:
            continue
        for net in device.nets:
            terminals[net] = terminals.get(net, 0) + 1
    members: dict[str, list[str]] = {}
    for net in dict.fromkeys(n for w in kept for n in w.nets):
        members.setdefault(groups.find(net), []).append(net)
    net_of: dict[str, str] = {}
    for group in members.values():
        name = _representative(group, circuit, terminals)
        for net in group:
            if net != name:
                net_of[net] = name

    def rename(device: Device) -> Device:
        if not any(net in net_of for net in device.nets):
            return device
        return replace(
            device, pins=tuple((role, net_of.get(net, net)) for role, net in device.pins)
        )

    devices = {n: rename(d) for n, d in circuit.devices.items() if n not in names}
    instances = {
        n: Instance(
            i.name, i.subckt, tuple((p, net_of.get(net, net)) for p, net in i.ports), i.span
        )
        for n, i in circuit.instances.items()
    }
    rails = {net_of.get(n, n): v for n, v in circuit.rails.items()}
    nets = tuple(dict.fromkeys(net_of.get(n, n) for n in circuit.nets))
    merged = replace(
        circuit, devices=devices, instances=instances, rails=rails, nets=nets, unmerged=circuit
    )
    return Collapsed(merged, tuple(kept), net_of)


# Recognition and the rules both ask for the same circuit, one after the other; keeping the
# last answer (by identity: a circuit is immutable once elaborated) makes that one pass.
_LAST: list[tuple[Circuit, Collapsed]] = []


def collapse_wires(circuit: Circuit) -> Collapsed:
    """``circuit`` with every wire group merged into one net (computed once per circuit)."""
    if _LAST and _LAST[0][0] is circuit:
        return _LAST[0][1]
    result = _collapse(circuit)
    _LAST[:] = [(circuit, result)]
    return result
