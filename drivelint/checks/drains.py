"""What discharges the hold capacitor while the switch is on: one account for every rule.

While the switch conducts, the switch node sits at V_bus and the boot and gate nets at
V_bus + V_boot. The boot supply then feeds: the driver's floating-side quiescent current,
the bootstrap diode's reverse leakage, the clamps' leakage, every resistor from the boot
or gate net to a lower net, and the base (or gate) drive of a pull-up transistor that a
level shifter holds on.
"""

from __future__ import annotations

import math
import re
from dataclasses import dataclass
from typing import TYPE_CHECKING

from drivelint.checks.corners import leakage
from drivelint.circuit.model import GROUND, Device
from drivelint.ratings.values import Value
from drivelint.stages.model import DriveStage

if TYPE_CHECKING:
    from drivelint.checks.facts import StageFacts

# Forward drop of a conducting silicon base–emitter junction, and the collector–emitter
# drop of a saturated small-signal transistor (common practice).
V_BE_ON = 0.7
V_CE_SAT = 0.1
# Series elements a level-shifter branch may have before the search gives up: enough for
# resistor, transistor, emitter resistor; more is no longer a simple branch.
MAX_BRANCH_HOPS = 4


@dataclass(frozen=True, slots=True)
class Drain:
    """One current that discharges the boot supply while the switch is on."""

    device: str
    current: Value
    why: str


def hidden_in_driver(facts: StageFacts, device: Device) -> bool:
    """Inside a driver IC whose boot current the parts library already gives (a driver
    without one is charged its model's own drains, or a default when it has none)."""
    driver = facts.stage.driver
    return (
        driver is not None
        and device.name.startswith(driver.device + ".")
        and facts.i_quiescent.value > 0
        and not facts.i_quiescent.origin.startswith("default")
    )


def resistor_drains(facts: StageFacts, v_boot: float) -> tuple[Drain, ...]:
    """Resistors from the boot or gate net to a net of known voltage.

    A resistor to the source draws V_boot/R, one to ground (V_bus + V_boot)/R, one to a rail
    at V_r (V_bus + V_boot − V_r)/R; a resistor whose far end feeds only another resistor
    to a known net is followed one step, as a divider.
    """
    stage = facts.stage
    v_bus = facts.v_bus.value if facts.v_bus else 0.0
    v_high = v_bus + v_boot
    high = {n for n in (stage.supply.boot_net, stage.gate) if n}
    out: list[Drain] = []
    seen: set[str] = set()
    candidates = {d.name: d for net in high for d in facts.by_net.get(net, ())}
    for device in candidates.values():
        resistance = _resistance(device)
        if resistance is None or device.name in seen or hidden_in_driver(facts, device):
            continue
        nets = set(device.nets)
        start = nets & high
        rest = nets - high
        if not start or len(rest) != 1:
            continue
        (far,) = rest
        volts, onward, chain = _far_end(facts, far, device, v_bus)
        if volts is None:
            continue
        current = (v_high - volts) / (resistance + onward)
        if current <= 0:
            continue
        seen.update(chain | {device.name})
        names = "+".join(sorted(chain | {device.name}))
        out.append(
            Drain(
                names,
                Value(current, "A", f"computed: (V_bus + V_boot − V_end)/R through {names}"),
                f"{names} from {'/'.join(sorted(start))} to {far if not chain else 'a lower net'}",
            )
        )
    return tuple(out)


def _far_end(
    facts: StageFacts, net: str, via: Device, v_bus: float
) -> tuple[float | None, float, set[str]]:
    """The on-time voltage of ``net``, or of the net one more resistor away."""
    known = _known_voltage(facts, net, v_bus)
    if known is not None:
        return known, 0.0, set()
    for other in facts.by_net.get(net, ()):
        resistance = _resistance(other)
        if other is via or resistance is None:
            continue
        far = _other_net(other, net)
        volts = _known_voltage(facts, far, v_bus) if far else None
        if volts is not None:
            return volts, resistance, {other.name}
    return None, 0.0, set()


@dataclass(frozen=True, slots=True)
class OnDrains:
    """Every steady current the hold capacitor feeds while the switch is on, by kind."""

    quiescent: Value
    diode_leak: Value
    clamp_leak: Value
    resistive: tuple[Drain, ...]

    @property
    def i_resistive(self) -> Value:
        total = sum(d.current.value for d in self.resistive)
        names = ", ".join(d.device for d in self.resistive) or "none"
        return Value(total, "A", f"computed: resistive drains ({names})")

    @property
    def i_leak(self) -> Value:
        """Leakage of the diode and the clamps together (the budget's I_leak)."""
        return Value(
            self.diode_leak.value + self.clamp_leak.value,
            "A",
            "computed: diode leakage + clamp leakage",
        )

    @property
    def total(self) -> Value:
        total = self.quiescent.value + self.i_leak.value + self.i_resistive.value
        return Value(total, "A", "computed: I_q + I_leak + I_R")

    def named(self) -> list[tuple[str, float]]:
        """Each non-zero drain as (label, amperes), largest first, for messages."""
        items = [(d.device, d.current.value) for d in self.resistive]
        items.append(("driver quiescent", self.quiescent.value))
        items.append(("diode leakage", self.diode_leak.value))
        items.append(("clamp leakage", self.clamp_leak.value))
        return sorted(((n, i) for n, i in items if i > 0), key=lambda item: -item[1])

    def values(self) -> dict[str, Value]:
        out = {
            "i_quiescent": self.quiescent,
            "i_diode_leak": self.diode_leak,
            "i_clamp_leak": self.clamp_leak,
            "i_leak": self.i_leak,
            "i_resistive": self.i_resistive,
            "i_drain": self.total,
        }
        for drain in self.resistive:
            out[f"drain_{_snake(drain.device)}"] = drain.current
        return out


def _snake(name: str) -> str:
    return re.sub(r"[^0-9a-z]+", "_", name.lower()).strip("_")


def _resistance(device: Device) -> float | None:
    if device.kind != "resistor" or not device.value:
        return None
    return device.value / device.multiplier


def _other_net(device: Device, net: str) -> str | None:
    return next((n for n in device.nets if n != net), None)


@dataclass(frozen=True, slots=True)
class _Branch:
    """A series path from a pull-up's control net down to a net of known voltage.

    ``joint`` is the net where resistors from the boot or gate net (``feeds``: name and
    resistance) join the path: the layout with a resistor from the boot node to the level
    shifter's collector and the pull-up's base resistor after it. ``before`` is the path's
    resistance from the control net to that joint.
    """

    devices: tuple[str, ...]
    resistance: float
    drop: float
    end_net: str
    end_volts: float
    joint: str | None = None
    feeds: tuple[tuple[str, float], ...] = ()
    before: float = 0.0


def _known_voltage(facts: StageFacts, net: str, v_bus: float) -> float | None:
    """The voltage of ``net`` to ground while the switch is on, where the circuit fixes it."""
    if net == facts.stage.source:
        return v_bus
    if net == GROUND:
        return 0.0
    return facts.circuit.rails.get(net)


def _follow_branch(
    facts: StageFacts, first: Device, start: str, high: set[str], v_bus: float
) -> _Branch | None:
    """Walk from ``start`` through ``first`` and on through single series elements.

    A collector (NPN) or drain (N-channel) met on the way is taken as conducting: the
    branch feeds the control terminal of a pull-up that is on, so whatever sits in series
    with it must conduct too. At one net on the way, resistors up to the boot or gate net
    may join (a pull-up resistor on the level shifter's collector): they are kept as the
    branch's ``feeds``, since the transistor then sinks their current too.
    """
    resistance = _resistance(first)
    at = _other_net(first, start)
    if resistance is None or at is None:
        return None
    names = [first.name]
    drop = 0.0
    joint: str | None = None
    feeds: tuple[tuple[str, float], ...] = ()
    before = 0.0
    for _ in range(MAX_BRANCH_HOPS):
        if at in high:
            return None
        volts = _known_voltage(facts, at, v_bus)
        if volts is not None:
            return _Branch(tuple(names), resistance, drop, at, volts, joint, feeds, before)
        onward = [
            d for d in facts.by_net.get(at, ()) if d.name not in names and d.kind != "capacitor"
        ]
        if len(onward) > 1 and joint is None:
            up = [
                d
                for d in onward
                if _resistance(d) is not None and (_other_net(d, at) or "") in high
            ]
            if up and len(onward) - len(up) == 1:
                joint, before = at, resistance
                feeds = tuple((d.name, _resistance(d) or math.inf) for d in up)
                onward = [d for d in onward if d not in up]
        if len(onward) != 1:
            return None
        (device,) = onward
        r = _resistance(device)
        following: str | None
        if r is not None:
            resistance += r
            following = _other_net(device, at)
        elif device.kind == "bjt" and device.model_type == "npn" and device.net("c") == at:
            drop += V_CE_SAT
            following = device.net("e")
        elif (
            device.kind == "mosfet"
            and device.model_type == "nmos"
            and device.net("d") == at
            and device.name != facts.stage.switch
        ):
            following = device.net("s")  # R_DS(on) is small beside the branch's resistors
        else:
            return None
        if following is None:
            return None
        at = following
        names.append(device.name)
    return None


def _joint_currents(branch: _Branch, v_top: float, junction: float | None) -> tuple[float, float]:
    """(through the pull-up's base path, through the feeds) for a branch with a joint.

    With the joint at V_x, the base path draws (V_top − V_EB − V_x)/R_before and each feed
    (V_top − V_x)/R_feed, and both return through what follows the joint (R_after, V_sat)
    to V_end: V_x = V_end + V_sat + R_after·(I_base + I_feeds), solved for V_x (Kirchhoff's
    current law at the joint).
    """
    after = branch.resistance - branch.before
    g_feed = sum(1.0 / r for _, r in branch.feeds if r > 0)
    v_eb = junction or 0.0
    g_base = 1.0 / branch.before if branch.before > 0 else 0.0
    floor = branch.end_volts + branch.drop
    v_x = (floor + after * ((v_top - v_eb) * g_base + v_top * g_feed)) / (
        1.0 + after * (g_base + g_feed)
    )
    base = max((v_top - v_eb - v_x) * g_base, 0.0) if junction is not None else 0.0
    return base, max((v_top - v_x) * g_feed, 0.0)


def _pull_up_control(device: Device | None, high: set[str]) -> tuple[str, float | None] | None:
    """The control net of a pull-up transistor that is on while the switch is on.

    Returns (net, junction drop): a PNP whose emitter sits on the boot or gate net (its
    base must be pulled down, V_EB), or a P-channel MOSFET whose source does (no junction:
    its gate takes no steady current). An NPN or N-channel follower is driven from above
    and draws nothing extra, so it is not returned.
    """
    if device is None:
        return None
    if device.kind == "bjt" and device.model_type == "pnp" and device.net("e") in high:
        base = device.net("b")
        return (base, V_BE_ON) if base else None
    if device.kind == "mosfet" and device.model_type == "pmos" and device.net("s") in high:
        gate = device.net("g")
        return (gate, None) if gate else None
    return None


def level_shift_drains(
    stage: DriveStage, facts: StageFacts, v_boot: float, counted: frozenset[str] = frozenset()
) -> tuple[Drain, ...]:
    """Currents that hold a P-type pull-up on: from the boot net, through its control
    terminal and the level shifter, to a lower net.

    For each branch from the control net down to a known voltage V_end (resistance R_b,
    saturation drops V_sat) with resistance R_up from the control net back to the boot
    net: I = max((V_top − V_EB − V_sat − V_end)/R_b, (V_top − V_sat − V_end)/(R_up + R_b)),
    the first with the junction conducting, the second as a plain divider (the larger is
    the one that holds). Devices in ``counted`` are already in another drain and skipped.
    """
    v_bus = facts.v_bus.value if facts.v_bus else 0.0
    v_top = v_bus + v_boot
    high = {n for n in (stage.supply.boot_net, stage.gate) if n}
    out: list[Drain] = []
    seen: set[str] = set(counted)
    for path in stage.pullups:
        pull_up = facts.device(path.devices[0]) if path.devices else None
        found = _pull_up_control(pull_up, high)
        if found is None or pull_up is None:
            continue
        control, junction = found
        resistors = [
            d
            for d in facts.by_net.get(control, ())
            if _resistance(d) is not None and d.name not in seen
        ]
        up = [d for d in resistors if set(d.nets) & high]
        conductance = sum(1.0 / (_resistance(d) or math.inf) for d in up)
        r_up = 1.0 / conductance if conductance > 0 else None
        for first in resistors:
            if first in up:
                continue
            branch = _follow_branch(facts, first, control, high, v_bus)
            if branch is None or seen & set(branch.devices):
                continue
            if branch.joint is not None:
                out.extend(_joint_drains(branch, pull_up, control, v_top, junction))
                seen.update(branch.devices)
                seen.update(name for name, _ in branch.feeds)
                continue
            span = v_top - branch.drop - branch.end_volts
            clamped = (span - junction) / branch.resistance if junction is not None else 0.0
            divider = span / (r_up + branch.resistance) if r_up is not None else 0.0
            current = max(clamped, divider)
            if current <= 0:
                continue
            seen.update(branch.devices)
            names = "+".join(branch.devices)
            formula = (
                "(V_bus + V_boot − V_EB − V_sat − V_end)/R"
                if clamped >= divider
                else "(V_bus + V_boot − V_sat − V_end)/(R_up + R)"
            )
            how = f"{formula} through {', '.join(branch.devices)}"
            out.append(
                Drain(
                    names,
                    Value(current, "A", f"computed: {how}"),
                    f"drive of pull-up {pull_up.name} from {control} through "
                    f"{', '.join(branch.devices)} to {branch.end_net}",
                )
            )
    return tuple(out)


def _joint_drains(
    branch: _Branch, pull_up: Device, control: str, v_top: float, junction: float | None
) -> list[Drain]:
    """The drains of a level shifter whose collector is pulled up from the boot node: the
    pull-up's base current and the collector resistor's own current, both sunk while the
    switch is on."""
    base, fed = _joint_currents(branch, v_top, junction)
    out = []
    names = "+".join(branch.devices)
    how = (
        f"computed: Kirchhoff's current law at {branch.joint}, V_x = V_end + V_sat + "
        "R_after·(I_base + I_feed)"
    )
    if base > 0:
        out.append(
            Drain(
                names,
                Value(base, "A", f"{how}; I_base = (V_bus + V_boot − V_EB − V_x)/R_base"),
                f"drive of pull-up {pull_up.name} from {control} through "
                f"{', '.join(branch.devices)} to {branch.end_net}",
            )
        )
    for name, _ in branch.feeds:
        share = fed / len(branch.feeds) if len(branch.feeds) == 1 else None
        if share is None:
            # Several feeds in parallel: each its own share of the joint's current.
            total_g = sum(1.0 / r for _, r in branch.feeds)
            share = fed * (1.0 / dict(branch.feeds)[name]) / total_g
        if share > 0:
            out.append(
                Drain(
                    name,
                    Value(share, "A", f"{how}; I_feed = (V_bus + V_boot − V_x)/R"),
                    f"{name} from the boot node to the level shifter at {branch.joint}",
                )
            )
    return out


def clamp_leakage(stage: DriveStage, facts: StageFacts) -> Value:
    """Reverse leakage of the gate–source clamps (the larger of a series pair, which
    blocks and so sets the current)."""
    total = 0.0
    origins: list[str] = []
    for clamp in stage.clamps:
        leaks = [
            facts.ratings.get(facts.device(name), "ir_leak")
            for name in (clamp.devices or (clamp.device,))
        ]
        known = [leakage(facts, v) for v in leaks if v is not None]  # at the hot corner
        if not known:
            continue
        largest = max(known, key=lambda v: v.value)
        total += largest.value
        origins.append(f"{clamp.device}: {largest.origin}")
    if not origins:
        return Value(0.0, "A", "no clamp leakage known")
    return Value(total, "A", "; ".join(origins))


def on_drains(stage: DriveStage, facts: StageFacts, v_boot: float) -> OnDrains:
    """Every steady current out of the hold capacitor while the switch is on."""
    plain = resistor_drains(facts, v_boot)
    counted = frozenset(n for d in plain for n in d.device.split("+"))
    resistive = plain + level_shift_drains(stage, facts, v_boot, counted)
    return OnDrains(facts.i_quiescent, facts.i_leak, clamp_leakage(stage, facts), resistive)
