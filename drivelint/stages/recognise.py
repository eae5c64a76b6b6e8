"""Recognise gate-drive stages: for every MOSFET, what floats, what supplies and drives it.

Every search starts at one switch and walks outward a bounded number of devices, so the
cost grows with the number of switches, never with the size of the whole netlist.
Where the circuit does not match a shape drivelint knows, the stage says so ("none",
no path, no control) rather than guess: the rules then stay quiet about what they
cannot see, and ``drivelint stages`` shows the user what was and was not recognised.
"""

from __future__ import annotations

from collections.abc import Mapping, Sequence
from dataclasses import dataclass, replace
from typing import Any

from drivelint._gc import paused_gc
from drivelint.circuit.model import GROUND, Circuit, Device
from drivelint.netlist.waveforms import Dc, Pulse, Pwl, Waveform
from drivelint.ratings.parts import PartsLibrary
from drivelint.ratings.ratings import switch_technology
from drivelint.stages import behaviour
from drivelint.stages.drivers import find_drivers
from drivelint.stages.model import (
    Clamp,
    Control,
    DriverInfo,
    DriveStage,
    GatePath,
    LevelShifter,
    Rail,
    Refresh,
    Supply,
)
from drivelint.stages.wires import Collapsed, collapse_wires

MAX_PATH_DEVICES = 4  # devices in one pull-up or pull-down path
MAX_CONTROL_HOPS = 8  # devices between a level shifter's input and its source
MAX_SERIES_TO_RAIL = 2  # series R/L between a drain or diode and its rail
MAX_NEGATIVE_STACK = 2  # DC sources stacked from the source to a turn-off supply below it
MAX_COMBINE_DEPTH = 3  # behavioural sources that combine signals, nested
MAX_SHIFT_RESISTORS = 3  # series resistors from a P-type pull-up's base to its level shifter
# A diode between gate and source with a breakdown this low is a Zener/TVS clamp; rectifier
# and fast diodes are rated for the bus, far above any gate rating (common practice).
ZENER_MAX_BV = 60.0

# Which terminals of a device conduct, and which way conventional current flows:
# (from pin, to pin). Passive parts conduct both ways and are handled separately.
_CONDUCTION: Mapping[str, tuple[str, str]] = {
    "npn": ("c", "e"),
    "pnp": ("e", "c"),
    "nmos": ("d", "s"),
    "pmos": ("s", "d"),
    "d": ("a", "k"),
}
_CONTROL_PIN = {"npn": "b", "pnp": "b", "nmos": "g", "pmos": "g"}
# A command held at a DC level counts as "on" above this (logic inputs read below about
# 0.8 V as low: common practice); a DC waveform has no edges to take a threshold from.
DC_LOGIC_THRESHOLD = 1.0


def supply_range(wave: Waveform) -> tuple[float, float]:
    """(lowest once up, highest) of a supply given as a waveform.

    The highest value is what stress checks use. The lowest is taken after the start-up:
    an initial rise (a soft start from 0 V, a ramp up to the operating level) is skipped,
    so a PWL that ramps up and then surges or dips gives the dip, not the 0 V it started
    from. A periodic waveform's low level counts as it is.
    """
    if isinstance(wave, Pwl):
        values = [v for _, v in wave.points]
    elif isinstance(wave, Pulse):
        if wave.period() is not None:
            return wave.low(), wave.high()
        peak = wave.high() if wave.v2 >= wave.v1 else wave.low()
        values = [wave.v1, peak] + ([wave.v1] if wave.pw != float("inf") else [])
    else:
        return wave.low(), wave.high()
    end = 0
    while end + 1 < len(values) and values[end + 1] >= values[end]:
        end += 1
    return min(values[end:]), max(values)


@dataclass(frozen=True, slots=True)
class _Node:
    """A terminal seen by recognition: a device, or a driver IC kept opaque."""

    name: str
    device: Device | None
    driver: DriverInfo | None


def _inside(name: str, drivers: Mapping[str, object]) -> bool:
    """True when ``name`` is a device within one of ``drivers`` (a "<driver>." prefix)."""
    dot = name.find(".")
    while dot > 0:
        if name[:dot] in drivers:
            return True
        dot = name.find(".", dot + 1)
    return False


class _View:
    """The circuit as recognition sees it: driver ICs opaque, terminals indexed by net."""

    def __init__(self, circuit: Circuit, parts: PartsLibrary) -> None:
        self.circuit = circuit
        self.parts = parts
        self.rails = dict(circuit.rails)
        self.rails[GROUND] = 0.0
        self.drivers = find_drivers(circuit, parts)
        # A device inside a driver is named "<driver>.<...>": look each dotted prefix of its
        # name up among the drivers (one test per dot, not one per driver).
        drivers = self.drivers
        self.devices: Mapping[str, Device] = (
            {n: d for n, d in circuit.devices.items() if not _inside(n, drivers)}
            if drivers
            else circuit.devices
        )
        # Terminals by net: the circuit graph's net-to-device adjacency, with each driver's
        # internals replaced by one driver node. Kept as plain lists because recognition
        # asks for little else and this is several times faster to build than a graph copy.
        self._terminals: dict[str, list[tuple[str, str]]] = {}
        for device in self.devices.values():
            for role, net in device.pins:
                self._terminals.setdefault(net, []).append((device.name, role))
        for info in self.drivers.values():
            for role, net in info.pins.items():
                self._terminals.setdefault(net, []).append((info.device, role))
        # Driver outputs by net, in the drivers' order (high before low within a driver):
        # a switch's driver is looked up from the nets near its gate, never searched for
        # across every driver of the circuit.
        self.driver_outputs: dict[str, list[tuple[int, int, DriverInfo, str]]] = {}
        for order, info in enumerate(self.drivers.values()):
            for rank, role in enumerate(("high_out", "low_out")):
                out_net = info.pins.get(role)
                if out_net is not None:
                    self.driver_outputs.setdefault(out_net, []).append((order, rank, info, role))
        self.coupled_inductors = frozenset(
            name for d in self.devices.values() if d.kind == "coupling" for name in d.controls
        )
        self.positive_rails = frozenset(n for n, v in self.rails.items() if v > 0)
        self.negative_rails = frozenset(n for n, v in self.rails.items() if v < 0)
        self.varying = self._varying_supplies()

    def _varying_supplies(self) -> dict[str, Rail]:
        """Nets set by an independent source that is not DC (PULSE, PWL, …) against ground
        or a DC rail: candidates for a bus or an auxiliary rail given as a surge or a soft
        start. Used only where the structure says "supply" (a drain, a diode's anode)."""
        out: dict[str, Rail] = {}
        for device in self.devices.values():
            wave = device.waveform
            if device.kind != "vsource" or wave is None or wave.kind == "dc":
                continue
            plus, minus = device.net("p"), device.net("n")
            if plus is None or minus is None or plus in self.rails:
                continue
            offset = self.rails.get(minus)
            if offset is None:
                continue
            low, high = supply_range(wave)
            out[plus] = Rail(plus, high + offset, low + offset, device.name)
        return out

    def supply_rail(self, net: str) -> Rail | None:
        """The supply on ``net``: a DC rail, or a varying supply source; None otherwise."""
        volts = self.rails.get(net)
        if volts is not None:
            return Rail(net, volts)
        return self.varying.get(net)

    def at(self, net: str) -> list[tuple[str, str]]:
        """(device or driver name, pin) for each terminal on ``net``."""
        return self._terminals.get(net, [])

    def device(self, name: str) -> Device | None:
        return self.devices.get(name)

    def kind(self, name: str) -> str:
        if name in self.drivers:
            return "driver"
        device = self.devices.get(name)
        return device.kind if device else "unknown"

    def polarity(self, device: Device) -> str | None:
        if device.kind == "diode":
            return "d"
        return device.model_type

    def is_rail(self, net: str) -> bool:
        return net in self.rails

    def is_supply_node(self, net: str) -> bool:
        """A net held by a filter-sized capacitor to ground or a rail (a decoupled supply
        pin); never a rail itself here, and never a switch's drain or source."""
        from drivelint.stages.wires import FILTER_MIN_CAPACITANCE

        found = False
        for name, pin in self.at(net):
            device = self.device(name)
            if device is None:
                continue
            if device.kind == "mosfet" and pin in ("d", "s"):
                return False
            if device.kind != "capacitor" or device.value is None:
                continue
            if device.value * device.multiplier < FILTER_MIN_CAPACITANCE:
                continue
            far = _other_net(device, net)
            found = found or (far is not None and far in self.rails)
        return found

    def zener_voltage(self, device: Device) -> float | None:
        part = self.parts.get(device.model_name)
        if part is not None and part.kind == "zener":
            raw = part.raw("vz")
            if raw is not None:
                from drivelint.ratings.units import parse_quantity

                return parse_quantity(raw, "V")
            return None
        if part is not None and part.kind == "diode":
            return None
        bv = device.model.params.get("bv") if device.model else None
        return bv if bv is not None and 0 < bv <= ZENER_MAX_BV else None

    def is_zener(self, device: Device) -> bool:
        part = self.parts.get(device.model_name)
        if part is not None:
            return part.kind == "zener"
        return self.zener_voltage(device) is not None


def _other_net(device: Device, net: str) -> str | None:
    """The far terminal of a two-terminal part."""
    if len(device.pins) != 2:
        return None
    (_, a), (_, b) = device.pins
    if a == net:
        return b
    if b == net:
        return a
    return None


class _StageBuilder:
    def __init__(self, view: _View, switch: Device, collapsed: Collapsed) -> None:
        self.view = view
        self.collapsed = collapsed
        self.switch = switch
        self.gate = switch.net("g") or ""
        self.source = switch.net("s") or ""
        self.drain = switch.net("d") or ""
        self.boot_net = ""  # set once the floating supply is known
        # (supply node, rail) when the boot diode is fed through a decoupled supply node
        self.fed_through: tuple[str, str] | None = None

    # -- floating or not ---------------------------------------------------------------

    def bus(self) -> Rail | None:
        """The positive rail the drain reaches directly or through series R/L."""
        view = self.view
        frontier = [(self.drain, 0)]
        seen = {self.drain}
        while frontier:
            net, steps = frontier.pop(0)
            rail = view.supply_rail(net)
            if rail is not None and net != GROUND:
                return rail if rail.volts is not None and rail.volts > 0 else None
            if steps >= MAX_SERIES_TO_RAIL:
                continue
            for name, _ in view.at(net):
                device = view.device(name)
                if device is None or device.kind not in ("resistor", "inductor"):
                    continue
                far = _other_net(device, net)
                if far is not None and far not in seen and far != self.source:
                    seen.add(far)
                    frontier.append((far, steps + 1))
        return None

    def floating(self) -> tuple[bool, str, Rail | None]:
        rails = self.view.rails
        name = self.switch.name
        if self.switch.model_type == "pmos":
            where = f"at rail '{self.source}'" if self.source in rails else f"at '{self.source}'"
            return (
                False,
                f"P-channel switch, source {where}: "
                "its gate is driven from ground-referenced rails",
                None,
            )
        if self.source == GROUND:
            return False, "source at ground (low-side switch)", None
        if self.source in rails:
            return False, f"source held at DC rail '{self.source}' ({rails[self.source]:g} V)", None
        if self.source in self.view.varying:
            return (
                False,
                f"source held by the supply source {self.view.varying[self.source].source}",
                None,
            )
        bus = self.bus()
        if bus is None and self.switch_node_shape():
            output = self.converter_output()
            if output is not None:
                on_node = ", ".join(self.source_loads())
                return (
                    True,
                    f"source '{self.source}' is a switch node ({on_node}); the drain at "
                    f"'{output.net}' is a converter's output, held by {output.source} but at "
                    "no DC rail: the rules estimate its level where an inductor feeds the node "
                    "from a rail (give the condition v_bus to set it)",
                    Rail(output.net, None),
                )
        if bus is None:
            return (
                False,
                (
                    f"source '{self.source}' is not a rail, but the drain '{self.drain}' "
                    "reaches no "
                    "positive rail: not recognised as a high-side switch"
                ),
                None,
            )
        loads = self.source_loads()
        what = ", ".join(loads) if loads else "nothing else recognised on it"
        level = f"{bus.volts:g} V"
        if bus.low is not None:
            level = f"{bus.low:g} to {bus.volts:g} V from {bus.source}"
        return (
            True,
            (
                f"source '{self.source}' is neither ground nor a DC rail; the drain at "
                f"'{bus.net}' ({level}) pulls it up when {name} conducts ({what})"
            ),
            bus,
        )

    def switch_node_shape(self) -> bool:
        """The source is a switch node: an inductor on it, and a low-side switch's drain or a
        freewheel diode's cathode (its anode at ground or a rail)."""
        view = self.view
        inductor = commutating = False
        for name, pin in view.at(self.source):
            device = view.device(name)
            if device is None or name == self.switch.name:
                continue
            if device.kind == "inductor":
                inductor = True
            elif device.kind == "mosfet" and pin == "d" and device.net("s") in view.rails:
                commutating = True
            elif device.kind == "diode" and pin == "k" and device.net("a") in view.rails:
                commutating = True
        return inductor and commutating

    def converter_output(self) -> Rail | None:
        """The drain's net as a converter's output (a synchronous boost's rectifier, the
        output leg of a buck-boost): not a rail, but held by a filter-sized capacitor to
        ground or a rail. ``source`` names that capacitor; the level is not known."""
        from drivelint.stages.wires import FILTER_MIN_CAPACITANCE

        view = self.view
        if self.drain in view.rails or self.drain == self.source:
            return None
        for name, _ in view.at(self.drain):
            device = view.device(name)
            if device is None or device.kind != "capacitor" or device.value is None:
                continue
            if device.value * device.multiplier < FILTER_MIN_CAPACITANCE:
                continue
            if _other_net(device, self.drain) in view.rails:
                return Rail(self.drain, None, source=name)
        return None

    def source_loads(self) -> list[str]:
        out = []
        for name, pin in self.view.at(self.source):
            if name == self.switch.name:
                continue
            kind = self.view.kind(name)
            device = self.view.device(name)
            if device is not None and self.gate in device.nets:
                continue
            if kind == "mosfet" and pin == "d":
                out.append(f"low-side switch {name}")
            elif kind in ("inductor", "resistor"):
                out.append(f"load {name}")
            elif kind == "diode" and pin == "k":
                out.append(f"diode {name}")
        return out

    # -- the floating supply ----------------------------------------------------------------

    def driver(self) -> tuple[DriverInfo, str] | None:
        """The driver IC whose high (or low) output reaches this gate."""
        return self.driver_output(self.gate, ("high_out", "low_out"))

    def driver_output(self, gate: str, roles: tuple[str, ...]) -> tuple[DriverInfo, str] | None:
        """The first driver (in the drivers' order) with an output of ``roles`` on ``gate``
        or a net one or two series resistors or diodes away: a lookup in the view's index
        of driver outputs for each net near the gate."""
        found = [
            entry
            for net in self.series_reach(gate)
            for entry in self.view.driver_outputs.get(net, ())
            if entry[3] in roles
        ]
        if not found:
            return None
        _, _, info, role = min(found, key=lambda entry: (entry[0], entry[1]))
        return info, role

    def series_reach(self, start: str, limit: int = 2) -> set[str]:
        """The nets reached from ``start`` through up to ``limit`` series resistors or
        diodes (never through the switch's source), ``start`` included."""
        frontier = [(start, 0)]
        seen = {start}
        while frontier:
            net, steps = frontier.pop()
            # Ground and the rails are where series paths end: a resistor to ground is a
            # pull-down, not a way to a driver output (and every device meets there).
            if steps >= limit or (net != start and (net == GROUND or self.view.is_rail(net))):
                continue
            for name, _ in self.view.at(net):
                device = self.view.device(name)
                if device is None or device.kind not in ("resistor", "diode"):
                    continue
                far = _other_net(device, net)
                if far is not None and far not in seen and far != self.source:
                    seen.add(far)
                    frontier.append((far, steps + 1))
        return seen

    def boot_candidates(self) -> list[tuple[str, str]]:
        """(boot net, device) for capacitors and sources between the switch node and a net."""
        out = []
        for name, _ in self.view.at(self.source):
            device = self.view.device(name)
            if device is None or device is self.switch:
                continue
            if device.kind == "capacitor" or (
                device.kind == "vsource" and device.net("n") == self.source
            ):
                far = _other_net(device, self.source)
                if far and far not in (self.gate, GROUND) and not self.view.is_rail(far):
                    out.append((far, name))
        return out

    def supply(self, driver: DriverInfo | None) -> Supply:
        if driver is not None and driver.pins.get("boot"):
            boot = driver.pins["boot"]
            hold = next((n for b, n in self.boot_candidates() if b == boot), None)
            return self.classify_boot(boot, hold)
        candidates = self.boot_candidates()
        # Prefer the candidate that actually feeds the gate.
        for boot, device in candidates:
            if self.pull_paths({boot}, up=True):
                return self.classify_boot(boot, device)
        for boot, device in candidates:
            supply = self.classify_boot(boot, device)
            if supply.kind != "none":
                return supply
        behavioural = self.behavioural_driver()
        if behavioural is not None:
            return behavioural
        return self.pump_at_gate() or Supply("none")

    def classify_boot(self, boot: str, hold: str | None) -> Supply:
        view = self.view
        hold_device = view.device(hold) if hold else None
        if hold_device is not None and hold_device.kind == "vsource":
            return Supply(
                "isolated", boot, None, source=hold, aux=self.floating_level(hold_device, boot)
            )
        capacitor = hold if hold_device is not None and hold_device.kind == "capacitor" else None
        # A source between boot net and switch node, not found as the hold element.
        for name, _ in view.at(boot):
            device = view.device(name)
            if (
                device is not None
                and device.kind == "vsource"
                and {device.net("p"), device.net("n")} == {boot, self.source}
            ):
                return Supply(
                    "isolated", boot, capacitor, source=name, aux=self.floating_level(device, boot)
                )
        winding = self.winding(boot)
        if winding is not None:
            return Supply("isolated", boot, capacitor, source=winding)
        found = self.boot_diode(boot)
        if found is not None:
            diode, orientation, resistors, far = found
            aux = view.supply_rail(far)
            if aux is not None:
                ohms = sum((view.devices[r].value or 0.0) for r in resistors) if resistors else None
                return Supply(
                    "bootstrap",
                    boot,
                    capacitor,
                    diode,
                    orientation,
                    tuple(resistors),
                    ohms,
                    aux,
                )
            pump = self.pump(far, diode)
            if pump is not None and orientation == "forward":
                return self.pump_supply(boot, capacitor, diode, resistors, pump, riding=True)
        if capacitor is not None and self.pull_paths({boot}, up=True):
            # A hold capacitor with no way to charge it: still a bootstrap, with no diode.
            return Supply("bootstrap", boot, capacitor)
        return Supply("none")

    def floating_level(self, device: Device, boot: str) -> Rail:
        """The level of a source between the boot net and the switch node: its DC value, a
        supply waveform's range, or — for a periodic command riding on the switch node (an
        ideal floating driver) — its high level."""
        wave = device.waveform
        if wave is None:
            return Rail(boot, None)
        if wave.period() is not None:
            return Rail(boot, wave.high())
        if wave.kind == "dc":
            return Rail(boot, wave.dc_level())
        low, high = supply_range(wave)
        return Rail(boot, high, low if low != high else None, device.name)

    def boot_diode(self, boot: str) -> tuple[str, str, list[str], str] | None:
        """(diode, orientation, series resistors, far net) of the boot net's charging path."""
        view = self.view
        starts: list[tuple[str, list[str]]] = [(boot, [])]
        for name, _ in view.at(boot):
            device = view.device(name)
            if device is not None and device.kind == "resistor":
                far = _other_net(device, boot)
                if far and far not in (self.source, self.gate):
                    starts.append((far, [name]))
        for net, resistors in starts:
            for name, pin in view.at(net):
                device = view.device(name)
                if device is None or device.kind != "diode":
                    continue
                far = _other_net(device, net)
                if far is None or far in (self.source, self.gate, boot):
                    continue
                orientation = "forward" if pin == "k" else "reversed"
                far_net, more = self.to_rail(far, exclude={boot, net})
                return name, orientation, resistors + more, far_net
        return None

    def to_rail(self, net: str, exclude: set[str]) -> tuple[str, list[str]]:
        """The supply reached from ``net`` through series resistors and leads (else ``net``).

        The first step is the charge path's own resistor (any value); beyond it the path
        may go on only through a supply node — a net held by a filter-sized capacitor to
        ground or a rail, such as a driver's VCC behind its RC filter — for at most
        ``MAX_SERIES_TO_RAIL`` parts in all. The resistors passed are returned, to count in
        the charge path. Ground is not a supply here.
        """
        view = self.view
        if view.supply_rail(net) is not None:
            return net, []
        blocked = exclude | {self.source, self.gate, GROUND}
        frontier: list[tuple[str, list[str]]] = [(net, [])]
        seen = {net}
        for _ in range(MAX_SERIES_TO_RAIL):
            following: list[tuple[str, list[str]]] = []
            for here, passed in frontier:
                if passed and not view.is_supply_node(here):
                    continue
                for name, _ in view.at(here):
                    device = view.device(name)
                    if device is None or device.kind not in ("resistor", "inductor"):
                        continue
                    if device.kind == "inductor" and name in view.coupled_inductors:
                        continue
                    far = _other_net(device, here)
                    if far is None or far in seen or far in blocked:
                        continue
                    seen.add(far)
                    resistors = [*passed, name] if device.kind == "resistor" else passed
                    if view.supply_rail(far) is not None:
                        if here != net:
                            self.fed_through = (here, far)
                        return far, resistors
                    following.append((far, resistors if device.kind == "resistor" else passed))
            frontier = following
        return net, []

    def pump(self, net: str, diode: str) -> tuple[str, str, str, str] | None:
        """(pump capacitor, feed diode, feed net, clock net) of a diode-capacitor pump whose
        middle node is ``net``: a capacitor from ``net`` to a clock node, and another diode
        feeding ``net`` from a rail, a supply or the switch's source."""
        view = self.view
        feed = next(
            (
                (n, view.devices[n])
                for n, pin in view.at(net)
                if view.kind(n) == "diode" and n != diode and pin == "k"
            ),
            None,
        )
        if feed is None:
            return None
        feed_net = feed[1].net("a")
        if feed_net is None:
            return None
        for name, _ in view.at(net):
            device = view.device(name)
            if device is not None and device.kind == "capacitor":
                far = _other_net(device, net)
                if far is not None and far not in (self.source, GROUND) and not view.is_rail(far):
                    return name, feed[0], feed_net, far
        return None

    def pump_supply(
        self,
        boot: str,
        capacitor: str | None,
        diode: str,
        resistors: list[str],
        pump: tuple[str, str, str, str],
        riding: bool,
    ) -> Supply:
        """A charge-pump supply: the feed rail (or the source) and the clock's amplitude."""
        pump_cap, feed_diode, feed_net, clock_net = pump
        view = self.view
        feed = view.supply_rail(feed_net)
        if feed is None and feed_net == self.source:
            feed = Rail(feed_net, None)
        clock = None
        traced = self.trace_source(clock_net, inverting=False, path=[pump_cap])
        wave = traced.waveform
        if wave is not None and traced.source is not None and wave.period() is not None:
            clock = Rail(clock_net, wave.high() - wave.low(), None, traced.source)
        return Supply(
            "charge-pump",
            boot,
            capacitor,
            diode,
            "forward",
            tuple(resistors),
            None,
            feed,
            source=pump_cap,
            feed_diode=feed_diode,
            clock=clock,
            riding=riding,
        )

    def behavioural_driver(self) -> Supply | None:
        """A behavioural voltage source that drives the gate (directly or through series
        resistors) and follows the switch node: an ideal floating driver.

        Either written against the switch node (``B1 hd sw V = …``) or against ground with
        the switch node's voltage added (``B1 hd 0 V = V(sw) + …``, checked by evaluating
        it with the node 1 V apart: the output must move with it). Its drive level is the
        swing of its value as its other inputs go between their commands' low and high
        levels; None when the expression cannot be evaluated.
        """
        view = self.view
        circuit = view.circuit
        starts = [self.gate]
        for name, _ in view.at(self.gate):
            device = view.device(name)
            if device is not None and device.kind == "resistor":
                far = _other_net(device, self.gate)
                if far and far not in (self.source, GROUND) and not view.is_rail(far):
                    starts.append(far)
        for net in starts:
            for name, pin in view.at(net):
                device = view.device(name)
                if device is None or pin != "p" or device.kind != "behavioral":
                    continue
                if not behaviour.is_voltage_source(circuit, device):
                    continue
                reference = device.net("n")
                inputs = [n for n in behaviour.referenced_nets(circuit, device) if n != self.source]
                if reference != self.source:
                    if self.source not in behaviour.referenced_nets(circuit, device):
                        continue
                    if reference != GROUND and not view.is_rail(reference or ""):
                        continue
                levels = self.input_levels(inputs)
                swing = self.behavioural_swing(device, inputs, levels)
                if reference != self.source and swing is not None and not swing[1]:
                    continue  # written against ground but does not move with the node
                amplitude = swing[0] if swing is not None else None
                return Supply("isolated", net, None, source=name, aux=Rail(net, amplitude))
        return None

    def input_levels(self, nets: list[str]) -> dict[str, tuple[float, float]]:
        """(low, high) of each net's command, where a source for it is found."""
        out: dict[str, tuple[float, float]] = {}
        for net in nets:
            if net in self.view.rails:
                out[net] = (self.view.rails[net], self.view.rails[net])
                continue
            traced = self.trace_source(net, inverting=False, path=[])
            if traced.waveform is not None:
                out[net] = (traced.waveform.low(), traced.waveform.high())
        return out

    def behavioural_swing(
        self, device: Device, inputs: list[str], levels: dict[str, tuple[float, float]]
    ) -> tuple[float, bool] | None:
        """(drive swing, follows the node) of a behavioural driver; None if not computable."""
        if any(n not in levels for n in inputs):
            return None
        circuit = self.view.circuit
        reference = device.net("n")
        node = {} if reference == self.source else {self.source: 0.0}
        low = {**node, **{n: levels[n][0] for n in inputs}}
        high = {**node, **{n: levels[n][1] for n in inputs}}
        v_low, v_high = (
            behaviour.value(circuit, device, low),
            behaviour.value(circuit, device, high),
        )
        if v_low is None or v_high is None:
            return None
        follows = True
        if reference != self.source:
            moved = behaviour.value(circuit, device, {**high, self.source: 1.0})
            follows = moved is not None and abs(moved - v_high - 1.0) < 1e-6
        return abs(v_high - v_low), follows

    def pump_at_gate(self) -> Supply | None:
        """A charge pump whose output the gate is pulled up from, with its reservoir (if any)
        to ground or a rail rather than riding on the source."""
        view = self.view
        nets = {self.gate}
        frontier = [self.gate]
        for _ in range(MAX_PATH_DEVICES):
            following = []
            for net in frontier:
                for name, _ in view.at(net):
                    device = view.device(name)
                    if device is None or device is self.switch:
                        continue
                    if device.kind in ("resistor", "bjt", "mosfet", "switch"):
                        for far in device.nets:
                            if far not in nets and far not in (self.source, GROUND):
                                if not view.is_rail(far):
                                    nets.add(far)
                                    following.append(far)
            frontier = following
        for net in sorted(nets - {self.gate}):
            for name, pin in view.at(net):
                device = view.device(name)
                if device is None or device.kind != "diode" or pin != "k":
                    continue
                anode = device.net("a")
                if anode is None:
                    continue
                pump = self.pump(anode, name)
                if pump is None or not self.pull_paths({net}, up=True):
                    continue
                reservoir = next(
                    (
                        n
                        for n, _ in view.at(net)
                        if view.kind(n) == "capacitor"
                        and (_other_net(view.devices[n], net) or "") in (GROUND, *view.rails)
                    ),
                    None,
                )
                return self.pump_supply(net, reservoir, name, [], pump, riding=False)
        return None

    def winding(self, boot: str) -> str | None:
        """A coupled inductor between the switch node and the boot net (or its rectifier)."""
        view = self.view
        coupled = view.coupled_inductors
        if not coupled:
            return None
        for name, _ in view.at(self.source):
            device = view.device(name)
            if device is None or device.kind != "inductor" or name not in coupled:
                continue
            far = _other_net(device, self.source)
            if far == boot:
                return name
            for other, pin in view.at(far or ""):
                diode = view.device(other)
                if (
                    diode is not None
                    and diode.kind == "diode"
                    and pin == "a"
                    and diode.net("k") == boot
                ):
                    return name
        return None

    # -- gate paths ----------------------------------------------------------------------------

    def pull_paths(self, ends: set[str], up: bool) -> list[GatePath]:
        """Paths from the gate to any of ``ends`` along which current can flow the right way.

        Pull-up current flows from the end into the gate, pull-down current from the gate
        to the end, so a transistor or diode on the path must conduct in that direction.
        """
        found: list[GatePath] = []
        stop = ends | {self.source, GROUND, self.boot_net}
        # A method, not a nested function calling itself: that closure would be a reference
        # cycle keeping this builder, and through it the whole view, alive while the
        # collector is paused (and then frozen).
        self._walk(self.gate, [], {self.gate}, ends, stop, up, found)
        return found

    def _walk(
        self,
        net: str,
        path: list[str],
        visited: set[str],
        ends: set[str],
        stop: set[str],
        up: bool,
        found: list[GatePath],
    ) -> None:
        if len(path) >= MAX_PATH_DEVICES:
            return
        view = self.view
        for name, pin in view.at(net):
            if name == self.switch.name or name in path:
                continue
            far = self.step(name, pin, net, up)
            if far is None or far in visited:
                continue
            if far in ends:
                found.append(GatePath(tuple(path + [name]), far, far))
            elif far not in stop and not view.is_rail(far):
                self._walk(far, path + [name], visited | {far}, ends, stop, up, found)

    def step(self, name: str, pin: str, net: str, up: bool) -> str | None:
        """The net reached through device ``name`` entered at ``pin``, if it conducts that way."""
        view = self.view
        info = view.drivers.get(name)
        if info is not None:
            if pin == "high_out":
                if not up and info.pins.get("negative"):
                    return info.pins["negative"]  # the output sinks to its VEE
                return info.pins.get("boot" if up else "switch")
            if pin == "low_out":
                return info.pins.get("supply" if up else "ground")
            return None
        device = view.device(name)
        if device is None:
            return None
        if device.kind in ("resistor", "inductor"):
            return _other_net(device, net)
        if device.kind == "switch":  # a voltage-controlled switch conducts both ways
            if pin == "p":
                return device.net("n")
            return device.net("p") if pin == "n" else None
        polarity = view.polarity(device)
        if polarity is None or polarity not in _CONDUCTION:
            return None
        if device.kind == "diode" and self.is_clamp_position(device):
            return None
        source_pin, sink_pin = _CONDUCTION[polarity]
        # Pull-up: current arrives at the gate side, so the gate side is the sink pin.
        near, far = (sink_pin, source_pin) if up else (source_pin, sink_pin)
        if pin != near:
            return None
        return device.net(far)

    def is_clamp_position(self, device: Device) -> bool:
        return {device.net("a"), device.net("k")} == {self.gate, self.source}

    # -- clamps and refresh ------------------------------------------------------------------

    def clamps(self) -> list[Clamp]:
        view = self.view
        out: list[Clamp] = []
        seen: set[str] = set()
        for name, pin in view.at(self.gate):
            device = view.device(name)
            if device is None or device.kind != "diode" or name in seen:
                continue
            far = _other_net(device, self.gate)
            zener = view.is_zener(device)
            kind = "zener" if zener else "diode"
            if far == self.source:
                seen.add(name)
                # Cathode at the gate: a Zener clamps +V_GS, a plain diode clamps -V_GS.
                orientation = "normal" if pin == "k" else "reversed"
                out.append(Clamp(name, kind, orientation, (name,), view.zener_voltage(device)))
                continue
            if far is None or far in (GROUND,) or view.is_rail(far):
                continue
            partner = self.series_partner(device, far)
            if partner is not None:
                seen.update({name, partner.name})
                partner_pin = "k" if partner.net("k") == far else "a"
                first_pin = "k" if device.net("k") == far else "a"
                back_to_back = partner_pin == first_pin
                orientation = (
                    "back-to-back" if back_to_back else ("normal" if pin == "k" else "reversed")
                )
                volts = [v for v in (view.zener_voltage(device), view.zener_voltage(partner)) if v]
                out.append(
                    Clamp(
                        f"{name}+{partner.name}",
                        kind,
                        orientation,
                        (name, partner.name),
                        max(volts) if volts else None,
                    )
                )
        return out

    def series_partner(self, device: Device, middle: str) -> Device | None:
        """The second diode of a gate-to-source pair through ``middle``, if that is all there is."""
        terminals = list(self.view.at(middle))
        if len(terminals) != 2:
            return None
        for name, _ in terminals:
            other = self.view.device(name)
            if other is not None and other is not device and other.kind == "diode":
                if _other_net(other, middle) == self.source:
                    return other
        return None

    def refresh(self) -> list[Refresh]:
        view = self.view
        out: list[Refresh] = []
        for name, pin in view.at(self.source):
            if name == self.switch.name:
                continue
            device = view.device(name)
            if device is None:
                continue
            if device.kind == "mosfet" and pin == "d":
                low = device.net("s")
                if low == GROUND or (low in view.rails and view.rails[low] <= 0):
                    command = self.low_side_command(device)
                    out.append(Refresh("low-side switch", (name,), reference=low, command=command))
            elif device.kind == "diode" and pin == "k":
                anode = device.net("a")
                if anode == GROUND or (anode in view.rails and view.rails[anode] <= 0):
                    out.append(Refresh("freewheel diode", (name,), reference=anode))
            elif device.kind == "resistor":
                far = _other_net(device, self.source)
                if far == GROUND:
                    out.append(Refresh("load", (name,), device.value, reference=GROUND))
            elif device.kind == "inductor":
                far = _other_net(device, self.source)
                if far is None:
                    continue
                if far == GROUND or view.is_rail(far):
                    out.append(Refresh("inductor-load", (name,), reference=far))
                    continue
                for other, _ in view.at(far):
                    load = view.device(other)
                    if load is None or other == name:
                        continue
                    if load.kind in ("resistor", "capacitor") and _other_net(load, far) == GROUND:
                        ohms = load.value if load.kind == "resistor" else None
                        out.append(Refresh("inductor-load", (name, other), ohms, reference=GROUND))
        return out

    def low_side_command(self, device: Device) -> Control | None:
        """The command of a low-side switch: through a driver's low channel, or traced from
        its gate; None when no waveform is found."""
        gate = device.net("g")
        if gate is None:
            return None
        found = self.driver_output(gate, ("low_out",))
        if found is not None:
            info = found[0]
            net, active_low = driver_input(info, "low")
            if net is None:
                return None
            traced = self.trace_source(net, inverting=active_low, path=[info.device])
            return traced if traced.waveform is not None else None
        traced = self.trace_source(gate, inverting=False, path=[])
        return traced if traced.waveform is not None else None

    # -- control -------------------------------------------------------------------------------

    def control(
        self,
        pullups: Sequence[GatePath],
        pulldowns: Sequence[GatePath],
        driver: tuple[DriverInfo, str] | None,
        behavioural: Device | None = None,
        floating_command: Device | None = None,
    ) -> Control | None:
        if driver is not None:
            info, out_role = driver
            net, active_low = driver_input(info, "high" if out_role == "high_out" else "low")
            if net is None:
                return Control(None, False, None, (info.device,))
            return self.trace_source(net, inverting=active_low, path=[info.device])
        if floating_command is not None:
            wave = floating_command.waveform
            return Control(floating_command.name, False, wave, (floating_command.name,))
        if behavioural is not None:
            circuit = self.view.circuit
            inputs = [
                n for n in behaviour.referenced_nets(circuit, behavioural) if n != self.source
            ]
            if len(inputs) == 1:
                return self.trace_source(inputs[0], inverting=False, path=[behavioural.name])
            if inputs:
                combined = self.combine(
                    behavioural, [(n, False) for n in inputs], [behavioural.name], 0
                )
                if combined is not None:
                    return combined
            return Control(None, False, None, (behavioural.name,))
        # The transistor or switch on a gate path that is commanded from outside. A
        # common-emitter (common-source) stage, with its collector (drain) toward the gate,
        # inverts its input; an emitter follower or a switch does not.
        kind = self.view.kind
        candidates = [
            *((n, False) for p in pulldowns for n in p.devices if kind(n) in ("bjt", "mosfet")),
            *(
                (n, True)
                for p in pullups
                for n in p.devices
                if kind(n) in ("bjt", "mosfet", "switch")
            ),
            *((n, False) for p in pulldowns for n in p.devices if kind(n) == "switch"),
        ]
        for name, up in candidates:
            device = self.view.device(name)
            assert device is not None
            if device.kind == "switch":
                # On when V(cp) - V(cn) is high; the signal is whichever is not a rail.
                base, on_low = device.net("cp"), False
                if base is None or self.view.is_rail(base):
                    base, on_low = device.net("cn"), True
                if base is None or self.view.is_rail(base):
                    continue
                inverting = (not up) != on_low
            else:
                polarity = device.model_type or ""
                if polarity not in _CONDUCTION:
                    continue
                source_pin, sink_pin = _CONDUCTION[polarity]
                gate_side = sink_pin if up else source_pin
                base, inverting = device.net(_CONTROL_PIN[polarity]), gate_side in ("c", "d")
            if base is None:
                continue
            return self.trace_source(base, inverting=inverting, path=[name])
        for path in pullups:
            if path.end_net != self.gate and self.view.is_rail(path.end_net):
                held = self.trace_source(path.end_net, inverting=False, path=list(path.devices))
                return held if held.source else Control(None, False, None, path.devices)
        return None

    def trace_source(self, net: str, inverting: bool, path: list[str], depth: int = 0) -> Control:
        """Follow an input net back through resistors, inverters and logic buffers to its source.

        A resistor to a DC rail is a pull-up, not the signal: it is followed only when
        nothing else leads to a source. An input tied straight to a rail (ground included)
        is a DC command at that level. A behavioural or controlled source that combines
        several signals (a comparator of a ramp against an error amplifier) is a modulator:
        the duty is not in the netlist, and the control says so.
        """
        view = self.view
        if net in view.rails:
            for name, pin in view.at(net):
                device = view.device(name)
                if device is not None and device.kind == "vsource" and pin == "p":
                    reference = device.net("n")
                    if reference == GROUND or view.is_rail(reference or ""):
                        return Control(name, inverting, device.waveform, tuple([*path, name]))
            return Control(None, inverting, Dc(view.rails[net]), tuple(path), kind="tied")
        frontier = [(net, inverting, path)]
        fallback: list[tuple[str, bool, list[str]]] = []
        blocked = {self.source, self.gate, self.boot_net}
        seen = {net}
        while frontier or fallback:
            if not frontier:
                frontier.append(fallback.pop(0))
            current, invert, trail = frontier.pop(0)
            for name, pin in view.at(current):
                device = view.device(name)
                if device is None or name in trail:
                    continue
                if device.kind == "vsource" and pin == "p":
                    reference = device.net("n")
                    if reference == GROUND or view.is_rail(reference or ""):
                        return Control(name, invert, device.waveform, tuple([*trail, name]))
            if len(trail) >= MAX_CONTROL_HOPS:
                continue
            for name, pin in view.at(current):
                device = view.device(name)
                if device is None or name in trail:
                    continue
                nexts: list[tuple[str, bool]] = []
                later: list[tuple[str, bool]] = []
                if device.kind == "resistor":
                    far = _other_net(device, current)
                    if far is not None and far != GROUND:
                        (later if view.is_rail(far) else nexts).append((far, invert))
                elif device.kind in ("vcvs", "behavioral") and pin == "p":
                    inputs = [(n, f) for n, f in self.buffer_inputs(device, invert) if n != GROUND]
                    if len(inputs) >= 2:
                        combined = self.combine(device, inputs, [*trail, name], depth)
                        if combined is not None:
                            return combined
                        continue
                    nexts.extend(inputs)
                elif device.kind in ("bjt", "mosfet"):
                    polarity = device.model_type or ""
                    if polarity in ("npn", "nmos") and pin == _CONDUCTION[polarity][0]:
                        # An inverter: collector (drain) here, input at its base (gate).
                        base = device.net(_CONTROL_PIN[polarity])
                        if base is not None:
                            nexts.append((base, not invert))
                for far, flip in nexts:
                    if far not in seen and far not in blocked:
                        seen.add(far)
                        frontier.append((far, flip, [*trail, name]))
                for far, flip in later:
                    if far not in seen:
                        fallback.append((far, flip, [*trail, name]))
        return Control(None, inverting, None, tuple(path))

    def combine(
        self, device: Device, inputs: list[tuple[str, bool]], trail: list[str], depth: int
    ) -> Control | None:
        """The command out of a source that reads several nets.

        Inputs tied to a fixed level (a comparator's reference) do not count. When what is
        left traces to one source (logic that only reshapes one command, such as a
        dead-time generator), that is the command. When it reaches more than one signal, or
        one that cannot be traced (an error amplifier's output), the device is a modulator.
        """
        if depth >= MAX_COMBINE_DEPTH or len(trail) >= MAX_CONTROL_HOPS:
            return None
        origins = [self.trace_source(n, flip, trail, depth + 1) for n, flip in inputs]
        # a fixed level (a tied input, a DC reference source) is a threshold, not a signal
        signals = [
            o
            for o in origins
            if o.kind != "tied" and not (o.waveform is not None and o.waveform.kind == "dc")
        ]
        if not signals:
            return None
        names = {o.source for o in signals}
        if len(names) == 1 and None not in names:
            return signals[0]
        known = [o for o in signals if o.source is not None]
        sources = tuple(sorted({n for o in known for n in (o.inputs or (o.source,)) if n}))
        periodic = [
            o.waveform for o in known if o.waveform is not None and o.waveform.period() is not None
        ]
        carrier = max(periodic, key=lambda w: w.frequency() or 0.0) if periodic else None
        return Control(
            device.name,
            signals[0].inverting,
            carrier,
            tuple(trail),
            kind="modulator",
            inputs=sources,
        )

    def buffer_inputs(self, device: Device, invert: bool) -> list[tuple[str, bool]]:
        if device.kind == "vcvs" and device.net("cp"):
            gain = device.value if device.value is not None else 1.0
            plus = [(device.net("cp") or "", invert != (gain < 0))]
            minus = device.net("cn")
            return plus + ([(minus, invert == (gain < 0))] if minus and minus != GROUND else [])
        if device.expression:
            return [(n, invert) for n in behaviour.referenced_nets(self.view.circuit, device)]
        return []

    # -- the whole stage -------------------------------------------------------------------------

    def build(self) -> DriveStage:
        floating, reason, bus = self.floating()
        channel = self.switch.model_type or "unknown"
        technology = switch_technology(self.view.parts, self.switch)
        base = DriveStage(
            switch=self.switch.name,
            channel=channel,
            gate=self.gate,
            source=self.source,
            drain=self.drain,
            floating=floating,
            floating_reason=reason,
            span=self.switch.span,
            bus=bus,
            technology=technology,
        )
        if not floating:
            return base
        driver = self.driver()
        supply = self.supply(driver[0] if driver else None)
        self.boot_net = supply.boot_net or ""
        behavioural = self.view.device(supply.source) if supply.source else None
        if behavioural is not None and behavioural.kind != "behavioral":
            behavioural = None
        up_ends = {supply.boot_net} if supply.boot_net else set()
        up_ends |= self.view.positive_rails
        pullups = self.pull_paths(up_ends, up=True)
        vee = driver[0].pins.get("negative") if driver is not None else None
        negative = self.negative_supply() if supply.kind == "isolated" or vee else None
        if negative is not None and vee and negative.net != vee:
            negative = None  # the driver's VEE is not the supply found: not guessed
        if negative is not None:
            supply = replace(supply, negative=negative)
        down_ends = {self.source, GROUND} | self.view.negative_rails
        if negative is not None:
            down_ends.add(negative.net)
        if vee:
            down_ends.add(vee)
        if driver is not None and driver[0].pins.get("switch"):
            down_ends.add(driver[0].pins["switch"])
        if behavioural is not None and supply.boot_net:
            down_ends.add(supply.boot_net)  # the driver's low level is the switch node
        pulldowns = [
            GatePath(
                p.devices,
                p.end_net,
                "source"
                if p.end_net == supply.boot_net
                else "negative"
                if negative is not None and p.end_net == negative.net
                else self.returns(p.end_net),
            )
            for p in self.pull_paths(down_ends, up=False)
        ]
        pullups = [
            GatePath(
                p.devices[::-1], p.end_net, "boot" if p.end_net == supply.boot_net else p.end_net
            )
            for p in pullups
        ]
        command = self.view.device(supply.source) if supply.source else None
        if command is None or command.kind != "vsource" or command.waveform is None:
            command = None
        elif command.waveform.period() is None:
            command = None
        control = self.control(pullups, pulldowns, driver, behavioural, command)
        waveform = control.waveform if control else None
        periodic = waveform is not None and waveform.period() is not None
        analog = waveform is not None and waveform.kind in ("sin", "exp")
        # An independent source's enable (PWL, a single pulse) through the gate's transistor
        # turns a rail-fed switch on and off: a load switch, static, not a linear stage.
        enabled = (
            control is not None
            and control.kind == "source"
            and not control.modulated
            and waveform is not None
            and waveform.kind in ("pwl", "pulse")
        )
        notes: list[str] = []
        if supply.kind == "none" and (not periodic or analog) and not enabled:
            mode = "linear"
            notes.append(
                "no floating supply and no switching command: a linear stage (source "
                "follower); its gate limits are judged for an output short"
            )
        elif control is not None and control.modulated:
            mode = "switching"
            notes.append(
                f"the command comes from the modulator {control.source}"
                + (f" ({', '.join(control.inputs)})" if control.inputs else "")
                + ": its duty is the loop's, not in the netlist"
            )
        elif waveform is None or not periodic:
            mode = "static"
        else:
            mode = "switching"
        if behavioural is not None:
            level = supply.aux.volts if supply.aux else None
            notes.append(
                f"{behavioural.name} (behavioural source) follows the switch node: taken as an "
                "ideal floating driver"
                + (f" of {level:g} V" if level is not None else " of unknown level")
            )
        if supply.kind == "charge-pump":
            notes.append(self.pump_note(supply))
        if self.fed_through is not None and supply.diode and supply.aux:
            node, rail = self.fed_through
            notes.append(
                f"{supply.diode} is fed from {rail} through the decoupled supply node {node} "
                f"({', '.join(supply.series_resistors)} counted in the charge path)"
            )
        if driver is not None and driver[0].origin == "pin names":
            info = driver[0]
            notes.append(
                f"{info.device} (subcircuit {info.subckt}) taken as a driver IC by its pin names"
            )
        clamps = self.clamps()
        refresh = self.refresh()
        related = {
            *(d for p in (*pullups, *pulldowns) for d in p.devices),
            *(d for c in clamps for d in c.devices),
            *(d for r in refresh for d in r.devices),
            *(control.path if control else ()),
            *(n for n in (supply.capacitor, supply.diode, supply.source) if n),
            *supply.series_resistors,
        }
        related.discard(self.switch.name)
        nets = {self.source, self.gate, self.drain, supply.boot_net, bus.net if bus else None}
        nets |= {supply.aux.net if supply.aux else None} | {r.reference for r in refresh}
        shown = [n for n in nets if n]
        held = self.collapsed.held_at(shown)
        notes = (
            [w.describe() for w in self.collapsed.wires_at([*shown, *(h.rail for h in held)])]
            + [h.describe() for h in held]
            + notes
        )
        return DriveStage(
            switch=self.switch.name,
            channel=channel,
            gate=self.gate,
            source=self.source,
            drain=self.drain,
            floating=True,
            floating_reason=reason,
            span=self.switch.span,
            mode=mode,
            bus=bus,
            supply=supply,
            pullups=tuple(pullups),
            pulldowns=tuple(pulldowns),
            clamps=tuple(clamps),
            refresh=tuple(refresh),
            control=control,
            driver=driver[0] if driver else None,
            related=tuple(sorted(related)),
            notes=tuple(notes),
            technology=technology,
            level_shifter=self.level_shifter(control, pullups),
        )

    # -- the level shifter (every usual layout) ----------------------------------------------

    def level_shifter(
        self, control: Control | None, pullups: list[GatePath]
    ) -> LevelShifter | None:
        """The ground-referenced NPN or N-channel transistor that carries the command up to
        the floating side, in every usual layout:

        - driving a P-type pull-up (emitter or source at the boot or gate net): found from
          the pull-up's control terminal through up to MAX_SHIFT_RESISTORS series
          resistors, with or without resistors from the boot node to its own collector
          (the base resistor after the collector pull-up); it conducts while the switch
          is on, so its current drains the boot supply for the whole on-time;
        - else the first such transistor on the command's path whose collector is pulled
          up from the boot node by a resistor (pulling the gate, or a totem pole's bases,
          down against it): it conducts while the switch is off. A transistor that only
          pulls a gate to ground is a pull-down, not a level shifter.

        Its emitter (source) must sit at ground or a rail, directly or through one
        resistor. Its resistors: those on the nets between it and the floating side, and
        its emitter resistor."""
        view = self.view
        high = {n for n in (self.gate, self.boot_net) if n}
        for path in pullups:
            pull_up = view.device(path.devices[0]) if path.devices else None
            if pull_up is None or pull_up.model_type not in ("pnp", "pmos"):
                continue
            if pull_up.net("e" if pull_up.kind == "bjt" else "s") not in high:
                continue
            start = pull_up.net("b" if pull_up.kind == "bjt" else "g")
            found = self._shifter_below(start, high) if start else None
            if found is not None:
                transistor, resistors = found
                return LevelShifter(transistor, resistors, pull_up.name, True)
        if control is None:
            return None
        for name in control.path:
            device = view.device(name)
            if device is None or device.model_type not in ("npn", "nmos"):
                continue
            below = self._grounded_emitter(device)
            if below is None:
                continue
            collector = device.net(_CONDUCTION[device.model_type or ""][0]) or ""
            later = set(control.path[control.path.index(name) + 1 :])
            around = {n for n, _ in view.at(collector) if view.kind(n) == "resistor"} - later
            fed = any(_other_net(view.devices[n], collector) == self.boot_net for n in around)
            if not fed:
                return None  # a plain pull-down to ground: no level is shifted
            return LevelShifter(name, tuple(sorted(around | set(below))), None, False)
        return None

    def _grounded_emitter(self, device: Device) -> list[str] | None:
        """[] when the emitter (source) is at ground or a rail, [resistor] when one resistor
        takes it there, else None."""
        view = self.view
        emitter = device.net(_CONDUCTION[device.model_type or ""][1])
        if emitter is None:
            return None
        if emitter == GROUND or view.is_rail(emitter):
            return []
        below = [
            n
            for n, _ in view.at(emitter)
            if n != device.name
            and view.kind(n) == "resistor"
            and (_other_net(view.devices[n], emitter) or "") in (GROUND, *view.rails)
        ]
        return below if len(below) == 1 else None

    def _shifter_below(self, start: str, high: set[str]) -> tuple[str, tuple[str, ...]] | None:
        """From a pull-up's control net through series resistors to the collector (drain)
        of a ground-referenced transistor: (transistor, the resistors on the nets passed
        and on its collector net, and its emitter resistor)."""
        view = self.view
        frontier = [(start, [start])]
        seen = {start}
        for _ in range(MAX_SHIFT_RESISTORS + 1):
            following = []
            for net, nets in frontier:
                for name, pin in view.at(net):
                    device = view.device(name)
                    if device is None:
                        continue
                    if device.model_type in ("npn", "nmos") and pin in ("c", "d"):
                        below = self._grounded_emitter(device)
                        if below is None:
                            continue
                        around = {
                            n for on in nets for n, _ in view.at(on) if view.kind(n) == "resistor"
                        }
                        return name, tuple(sorted(around | set(below)))
                    if device.kind == "resistor":
                        far = _other_net(device, net)
                        if far and far not in seen and far not in high and not view.is_rail(far):
                            seen.add(far)
                            following.append((far, [*nets, far]))
            frontier = following
        return None

    def pump_note(self, supply: Supply) -> str:
        feed = supply.aux
        clock = supply.clock
        fed = (
            "the switch's source"
            if feed is not None and feed.net == self.source
            else (f"{feed.net}" if feed is not None else "an unknown net")
        )
        swing = (
            f"a {clock.volts:g} V clock from {clock.source}"
            if clock is not None and clock.volts is not None
            else "a clock of unknown amplitude"
        )
        hold = (
            f", reservoir {supply.capacitor} riding on the source"
            if supply.riding and supply.capacitor
            else (f", reservoir {supply.capacitor} to a fixed net" if supply.capacitor else "")
        )
        return f"charge pump {supply.source} fed from {fed} by {swing}{hold}"

    def negative_supply(self) -> Rail | None:
        """A turn-off supply below the source: a net one or two DC sources (an isolated
        supply's negative output, stacked on the source) hold below the source, not a
        ground-referenced rail. One such net or none; two are not guessed between."""
        found: list[Rail] = []
        level = {self.source: 0.0}
        frontier = [self.source]
        for _ in range(MAX_NEGATIVE_STACK):
            onward = []
            for net in frontier:
                for name, pin in self.view.at(net):
                    device = self.view.device(name)
                    wave = device.waveform if device is not None else None
                    if device is None or device.kind != "vsource" or wave is None:
                        continue
                    if wave.kind != "dc":
                        continue
                    other = device.net("n" if pin == "p" else "p")
                    if other is None or other in level or self.view.is_rail(other):
                        continue
                    volts = wave.dc_level()
                    level[other] = level[net] + (-volts if pin == "p" else volts)
                    onward.append(other)
                    if level[other] < 0:
                        found.append(Rail(other, level[other], source=device.name))
            frontier = onward
        return found[0] if len(found) == 1 else None

    def returns(self, net: str) -> str:
        if net == self.source:
            return "source"
        if net == GROUND:
            return "ground"
        return net


def driver_input(info: DriverInfo, side: str) -> tuple[str | None, bool]:
    """The net of a driver's ``side`` ("high" or "low") input, and whether that input is
    active-low (its output on while the input is low: an inverting input)."""
    net = info.pins.get(f"{side}_in")
    if net is not None:
        return net, False
    return info.pins.get(f"{side}_in_active_low"), True


def recognise(circuit: Circuit, parts: PartsLibrary | None = None) -> tuple[DriveStage, ...]:
    """One stage per MOSFET switch; level shifters and totem-pole parts of a floating stage
    are reported inside that stage, not as switches of their own.

    Recognition works on the circuit with its wires merged (:mod:`drivelint.stages.wires`):
    net names in the stages are the merged ones, and each stage's notes list the wires it
    read through.
    """
    collapsed = collapse_wires(circuit)
    with paused_gc():
        view = _View(collapsed.circuit, parts or PartsLibrary())
        switches = [
            d
            for d in view.devices.values()
            if d.kind == "mosfet" and d.model_type in ("nmos", "pmos")
        ]
        stages = [_StageBuilder(view, s, collapsed).build() for s in switches]
    helpers = {
        name
        for stage in stages
        if stage.floating
        for path in (*stage.pullups, *stage.pulldowns)
        for name in path.devices
    } | {
        name for stage in stages if stage.floating and stage.control for name in stage.control.path
    }
    return tuple(s for s in stages if s.floating or s.switch not in helpers)


def stages_json(stages: Sequence[DriveStage]) -> dict[str, Any]:
    return {"stages": [s.to_json() for s in stages]}
