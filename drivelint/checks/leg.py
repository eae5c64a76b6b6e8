"""Cross-conduction: do the two commands of a half-bridge leg overlap, or leave too little
dead time for the driver's delay mismatch and the outgoing switch's turn-off?

The leg is the floating stage and the low-side switch recognition found refreshing it
(``Refresh.command`` is that switch's own command). Each command is read on its control
waveform where it crosses the midpoint of its levels (an inverting path commands the
switch on below it), as every other rule reads on-times. Commands that come out of a
modulator, or one command reshaped twice by behavioural logic (a dead-time generator),
carry edges the netlist does not show: they are not judged.
"""

from __future__ import annotations

import math
from collections.abc import Iterator, Sequence
from dataclasses import dataclass

from drivelint.checks.base import CheckContext, Finding
from drivelint.checks.corners import HOLD, charge_spread, with_corner
from drivelint.checks.facts import StageFacts, SwitchGate
from drivelint.checks.printed import sum_line
from drivelint.circuit.model import GROUND, Device
from drivelint.diagnostics import Severity
from drivelint.netlist.values import format_si
from drivelint.netlist.waveforms import Waveform, steady_windows
from drivelint.physics import switching
from drivelint.ratings.values import Value, computed
from drivelint.stages.model import Control, DriveStage

# A suggested dead time is rounded up to this step (common practice: drivers and
# controllers set dead time in steps of ten nanoseconds or coarser).
DEAD_TIME_STEP = 10e-9
# Series resistors followed from a low-side gate back to its driver output or source.
MAX_GATE_RESISTORS = 3
# Behavioural and controlled sources: logic that may reshape a command's edges.
RESHAPING_KINDS = frozenset({"behavioral", "vcvs"})


@dataclass(frozen=True, slots=True)
class LegTiming:
    """The two commands over one period, referred to the high side's turn-on command.

    ``overlaps``: stretches with both commanded on, (start, end) after that edge;
    ``lead``: the dead time before the high side's turn-on (the low side's turn-off edge
    first); ``trail``: the dead time after its turn-off; None where the edges overlap.
    """

    period: float
    origin: float  # the high side's turn-on command, absolute time of one steady period
    on_time: float  # the high side's commanded on-time
    overlaps: tuple[tuple[float, float], ...]
    lead: float | None
    trail: float | None


HELD = "held"


def _windows(
    wave: Waveform, inverting: bool
) -> str | tuple[float, float, tuple[tuple[float, float], ...]] | None:
    """ "on" or "off" for a DC command, else its steady on-windows; None if unreadable."""
    if wave.kind == "dc":
        from drivelint.stages.recognise import DC_LOGIC_THRESHOLD

        on = (wave.dc_level() > DC_LOGIC_THRESHOLD) != inverting
        return "on" if on else "off"
    threshold = (wave.high() + wave.low()) / 2
    found = steady_windows(wave, threshold, below=inverting)
    if found is None:
        return None
    if not found[2]:
        return "off"
    if any(math.isinf(end) for _, end in found[2]):
        return "on"  # past the threshold through the whole period
    return found


def leg_timing(
    high: Waveform, high_inverting: bool, low: Waveform, low_inverting: bool
) -> LegTiming | str | None:
    """The leg's timing; ``HELD`` when one side is never commanded on; None when the
    commands cannot be compared (not periodic, periods that differ, both held on)."""
    hs, ls = _windows(high, high_inverting), _windows(low, low_inverting)
    if hs == "off" or ls == "off":
        return HELD
    if hs is None or ls is None or isinstance(hs, str):
        return None
    _, period, hs_runs = hs
    ls_runs: tuple[tuple[float, float], ...] = ()
    if not isinstance(ls, str):
        if not math.isclose(ls[1], period, rel_tol=1e-6):
            return None
        ls_runs = ls[2]
    origin = hs_runs[0][0]

    def refer(run: tuple[float, float]) -> tuple[float, float]:
        start = (run[0] - origin) % period
        return start, start + (run[1] - run[0])

    highs = [refer(r) for r in hs_runs]
    lows = [
        (s + k * period, e + k * period) for s, e in (refer(r) for r in ls_runs) for k in (-1, 0, 1)
    ]
    if isinstance(ls, str):  # the low side held on under a switching high side
        lows = [(-math.inf, math.inf)]
    overlaps = sorted(
        (max(a, c), min(b, d)) for a, b in highs for c, d in lows if min(b, d) > max(a, c)
    )
    lead = trail = None
    if not overlaps:
        lead = min((a - d for a, _ in highs for _, d in lows if d <= a), default=None)
        trail = min((c - b for _, b in highs for c, _ in lows if c >= b), default=None)
    return LegTiming(period, origin, highs[0][1] - highs[0][0], tuple(overlaps), lead, trail)


def _reshaped(facts: StageFacts, controls: Sequence[Control]) -> bool:
    """A command passes through behavioural or controlled sources on its way (a dead-time
    stage shaping one command into two)."""
    for control in controls:
        for name in control.path[:-1]:
            device = facts.device(name)
            if device is not None and device.kind in RESHAPING_KINDS:
                return True
    return False


def _ns(value: float) -> str:
    return format_si(value, "s")


def _rounded_up(seconds: float) -> float:
    return max(DEAD_TIME_STEP, math.ceil(seconds / DEAD_TIME_STEP - 1e-9) * DEAD_TIME_STEP)


@dataclass(frozen=True, slots=True)
class TurnOff:
    """One switch's turn-off at the edge where it hands over to its partner."""

    switch: str
    t_off: Value | None
    v_drive: Value | None
    r_off: Value | None
    gate: SwitchGate


def _series_to(facts: StageFacts, start: str, targets: set[str]) -> tuple[float, list[str]] | None:
    """Resistance of the series resistors from ``start`` to one of ``targets`` (breadth
    first, at most a few resistors, never through ground or a rail)."""
    frontier: list[tuple[str, float, list[str]]] = [(start, 0.0, [])]
    seen = {start}
    for _ in range(MAX_GATE_RESISTORS + 1):
        nxt: list[tuple[str, float, list[str]]] = []
        for net, ohms, names in frontier:
            if net in targets:
                return ohms, names
            for device in facts.by_net.get(net, ()):
                if device.kind != "resistor" or device.value is None:
                    continue
                far = next((n for n in device.nets if n != net), None)
                if far is None or far in seen or far == GROUND or far in facts.circuit.rails:
                    continue
                seen.add(far)
                nxt.append((far, ohms + device.value, [*names, device.name]))
        frontier = nxt
    return None


def _driver_sink(facts: StageFacts, drive: float) -> Value:
    """The driver output's pull-down: r_sink, else the drive over its peak sink current."""
    stage = facts.stage
    if stage.driver is None:
        return Value(0.0, "Ohm", "none: the gate is driven from its command path directly")
    given = facts.driver_value("r_sink", "Ohm")
    if given is not None:
        return given
    sink = facts.driver_value("i_sink", "A")
    if sink is not None and drive > 0:
        return computed(
            drive / sink.value,
            "Ohm",
            f"computed: V_drive/i_sink = {format_si(drive, 'V')}/{sink.text()} ({sink.origin})",
        )
    return Value(
        0.0,
        "Ohm",
        f"none given for driver {stage.driver.device} (give r_sink or i_sink): taken as 0",
    )


def _turn_off(
    facts: StageFacts,
    device: Device,
    drive: Value | None,
    external: Value | None,
    spread: float = 1.0,
    v_off: Value | None = None,
) -> TurnOff:
    """t_off of ``device`` from the parts key t_off, else the gate-charge relations;
    ``v_off`` is the level the pull-down drives the gate to below the source (None: 0)."""
    v_blocked = facts.v_switched
    gate = facts.switch_gate(device, drive.value if drive else 10.0, v_blocked, spread)
    if gate.t_off is not None:
        return TurnOff(device.name, gate.t_off, drive, None, gate)
    if drive is None or external is None or gate.c_iss is None or gate.q_gd is None:
        return TurnOff(device.name, None, drive, None, gate)
    if not drive.value > 0:
        return TurnOff(device.name, None, drive, None, gate)
    if gate.v_plateau is None or not 0 < gate.v_plateau.value:
        return TurnOff(device.name, None, drive, None, gate)
    sink = _driver_sink(facts, drive.value)
    internal = gate.rg_internal.value if gate.rg_internal else 0.0
    r_off = computed(
        sink.value + external.value + internal,
        "Ohm",
        f"computed: driver pull-down {sink.text()} ({sink.origin}) + gate path "
        f"{external.text()} ({external.origin}) + internal "
        f"{Value(internal, 'Ohm', '').text()}"
        + (f" ({gate.rg_internal.origin})" if gate.rg_internal else " (none given)"),
    )
    if r_off.value < 0 or gate.c_iss.value < 0 or gate.q_gd.value < 0:
        return TurnOff(device.name, None, drive, r_off, gate)  # not a physical gate
    threshold = gate.v_threshold.value if gate.v_threshold else None
    off = v_off.value if v_off is not None and v_off.value < 0 else 0.0
    t = switching.turn_off_time(
        r_off.value,
        gate.c_iss.value,
        drive.value,
        gate.v_plateau.value,
        gate.q_gd.value,
        threshold,
        off,
    )
    how = "R_off·C_iss·ln(V_drive/V_pl) + Q_gd·R_off/V_pl" + (
        " + R_off·C_iss·ln(V_pl/V_th)" if threshold is not None else ""
    )
    if off:
        assert v_off is not None
        how = (
            how.replace("V_drive", "(V_drive − V_off)")
            .replace("/V_pl", "/(V_pl − V_off)")
            .replace("(V_pl/V_th)", "((V_pl − V_off)/(V_th − V_off))")
            + f", V_off = {v_off.text()} ({v_off.origin})"
        )
    return TurnOff(device.name, computed(t, "s", f"computed: {how}"), drive, r_off, gate)


def _high_turn_off(facts: StageFacts) -> TurnOff:
    stage = facts.stage
    drive = facts.v_boot0  # at the corner the deck of a finding holds (the hold side)
    ohms, names = 0.0, []
    # the path through the driver's sink turns the gate off; a gate–source resistor beside
    # it only helps (paths are listed by name, not by strength)
    driver = stage.driver.device if stage.driver is not None else None
    driven = [p for p in stage.pulldowns if driver is not None and driver in p.devices]
    first = next(iter(driven or stage.pulldowns), None)
    for name in first.devices if first is not None else ():
        device = facts.device(name)
        if device is not None and device.kind == "resistor" and device.value is not None:
            ohms += device.value
            names.append(name)
    external = Value(
        ohms,
        "Ohm",
        f"resistors on the pull-down path ({', '.join(names)})"
        if names
        else "no resistor on the pull-down path",
    )
    # the stage's own switch at the top of its gate-charge spread (checks/corners.py): the
    # slowest turn-off; its partner is taken at its values as given. A pull-down to a
    # turn-off supply below the source discharges the gate toward that level.
    v_off = facts.v_off_nearest if first is not None and first.returns_to == "negative" else None
    return _turn_off(facts, facts.switch, drive, external, charge_spread(facts), v_off)


def _low_turn_off(facts: StageFacts, device: Device, command: Control) -> TurnOff:
    """The low side's turn-off: driven through the driver's low channel (its supply rail the
    drive level) or straight from its command source (that source's on-level)."""
    stage = facts.stage
    gate = device.net("g")
    driver = stage.driver
    drive: Value | None = None
    v_off: Value | None = None
    targets: set[str] = set()
    via_driver = driver is not None and command.path[:1] == (driver.device,)
    if via_driver:
        assert driver is not None
        low_out, supply = driver.pins.get("low_out"), driver.pins.get("supply")
        rails = facts.circuit.rails
        if low_out is not None:
            targets = {low_out}
        source_net = device.net("s") or GROUND
        low_level = 0.0 if source_net == GROUND else rails.get(source_net)
        if supply is not None and supply in rails and low_level is not None:
            level = rails[supply] - low_level
            if level > 0:
                drive = Value(
                    level,
                    "V",
                    f"driver {driver.device}'s supply pin {supply} against {device.name}'s source",
                )
            # the low output sinks to the driver's ground pin: below the source, a turn-off
            # bias
            ground = driver.pins.get("ground")
            ground_level = 0.0 if ground in (None, GROUND) else rails.get(ground or "")
            if ground_level is not None and low_level is not None and ground_level < low_level:
                v_off = Value(
                    ground_level - low_level,
                    "V",
                    f"driver {driver.device}'s ground pin {ground} against {device.name}'s source",
                )
    elif command.waveform is not None and command.source is not None:
        wave = command.waveform
        level = wave.low() if command.inverting else wave.high()
        source = facts.device(command.source)
        if source is not None:
            targets = {n for n in source.nets if n != GROUND}
            drive = Value(level, "V", f"the on-level of {command.source}'s waveform")
    found = _series_to(facts, gate, targets) if gate and targets else None
    external = None
    if found is not None:
        ohms, names = found
        external = Value(
            ohms,
            "Ohm",
            f"series resistors to the gate ({', '.join(names)})" if names else "no series resistor",
        )
    if drive is not None and facts.v_sw_low.value and not via_driver:
        drive = computed(
            drive.value - facts.v_sw_low.value, "V", f"{drive.origin}, less the node's low level"
        )
    return _turn_off(facts, device, drive, external, v_off=v_off)


def check_cross_conduction(stage: DriveStage, ctx: CheckContext) -> Iterator[Finding]:
    facts = ctx.facts
    if stage.channel != "nmos" or stage.mode != "switching" or facts.never_on:
        return
    partner = next((r for r in stage.refresh if r.kind == "low-side switch"), None)
    high, low = stage.control, partner.command if partner else None
    if partner is None or high is None or low is None:
        return
    if high.waveform is None or low.waveform is None or high.modulated or low.modulated:
        return  # a modulator's edges are the loop's: not judged
    if high.source == low.source and _reshaped(facts, (high, low)):
        return  # one command shaped into two by logic the waveform does not show
    timing = leg_timing(high.waveform, high.inverting, low.waveform, low.inverting)
    if timing is None or timing == HELD:
        return
    assert isinstance(timing, LegTiming)
    low_device = facts.device(partner.devices[0])
    if low_device is None:
        return
    driver = stage.driver
    shared_driver = driver is not None and low.path[:1] == (driver.device,)
    interlock = facts.driver_value("dead_time_min", "s") if shared_driver else None
    mismatch = facts.driver_value("t_prop_mismatch", "s") if shared_driver else None
    if mismatch is None:
        mismatch = Value(
            0.0,
            "s",
            "none given: taken as 0 (give the driver's t_prop_mismatch)"
            if shared_driver
            else "none known: the two commands reach their gates by separate paths "
            "(give t_prop_mismatch for a driver); taken as 0",
        )
    margin = Value(ctx.options["margin"], "s", "option margin")
    values: dict[str, Value] = {
        "period": Value(timing.period, "s", facts._control_origin()),
        "t_prop_mismatch": mismatch,
        "margin": margin,
    }
    if facts.v_bus is not None:
        values["v_bus"] = facts.v_bus
    if interlock is not None:
        values["dead_time_min"] = interlock
    high_off = _high_turn_off(facts)
    low_off = _low_turn_off(facts, low_device, low)
    hs_name, ls_name = stage.switch, low_device.name
    hs_cmd, ls_cmd = high.source or "the high-side command", low.source or "the low-side command"
    if timing.overlaps and interlock is None:
        found = _overlap_finding(ctx, timing, values, high_off, low_off, (hs_cmd, ls_cmd))
        uses = frozenset({"charge"}) if "t_off" in found.values else frozenset()
        yield with_corner(found, facts, HOLD, uses)
        return
    # each edge: (dead time, the switch turning off, the command whose edge moves)
    lead = timing.lead if timing.lead is not None else 0.0
    trail = timing.trail if timing.trail is not None else 0.0
    if interlock is not None:
        lead, trail = max(lead, interlock.value), max(trail, interlock.value)
    edges = (
        ("lead", lead, low_off, hs_cmd, f"{ls_name}'s turn-off and {hs_name}'s turn-on"),
        ("trail", trail, high_off, ls_cmd, f"{hs_name}'s turn-off and {ls_name}'s turn-on"),
    )
    values["dead_time_lead"] = computed(
        lead, "s", f"computed: from {ls_cmd}'s off-edge to {hs_cmd}'s on-edge (midpoints)"
    )
    values["dead_time_trail"] = computed(
        trail, "s", f"computed: from {hs_cmd}'s off-edge to {ls_cmd}'s on-edge (midpoints)"
    )
    if interlock is not None:
        for key in ("dead_time_lead", "dead_time_trail"):
            values[key] = computed(
                values[key].value,
                "s",
                f"computed: the commands' dead time, at least the driver's dead_time_min "
                f"{interlock.text()} ({interlock.origin})",
            )
    short = []
    for edge, dead, turn_off, command, where in edges:
        if turn_off.t_off is None:
            continue
        needed = mismatch.value + turn_off.t_off.value + margin.value
        if dead < needed:
            short.append((needed - dead, edge, dead, needed, turn_off, command, where))
    if not short:
        return
    short.sort(key=lambda s: -s[0])
    _, edge, dead, needed, turn_off, command, where = short[0]
    other = short[1] if len(short) > 1 else None
    finding = _short_finding(
        ctx, values, edge, dead, needed, turn_off, command, where, interlock, other
    )
    high_side = turn_off is high_off or (other is not None and other[4] is high_off)
    yield with_corner(finding, facts, HOLD, frozenset({"charge"}) if high_side else frozenset())


def _turn_off_values(values: dict[str, Value], turn_off: TurnOff, prefix: str = "") -> None:
    assert turn_off.t_off is not None or not prefix
    if turn_off.t_off is not None:
        values[f"{prefix}t_off"] = turn_off.t_off
    gate = turn_off.gate
    for key, value in (
        ("v_drive", turn_off.v_drive),
        ("r_off", turn_off.r_off),
        ("c_iss", gate.c_iss),
        ("q_gd", gate.q_gd),
        ("v_plateau", gate.v_plateau),
        ("v_threshold", gate.v_threshold),
    ):
        if value is not None:
            values[f"{prefix}{key}"] = value


def _soft_turn_off(turn_off: TurnOff) -> Value | None:
    """The channel's turn-off with no Miller plateau (the load current freewheels in the
    body diode, V_DS stays near zero): R_off·C_iss·ln(V_drive/V_th)."""
    gate, r_off, drive = turn_off.gate, turn_off.r_off, turn_off.v_drive
    if r_off is None or drive is None or gate.c_iss is None or gate.v_threshold is None:
        return None
    if not 0 < gate.v_threshold.value < drive.value:
        return None
    t = switching.turn_off_time(
        r_off.value, gate.c_iss.value, drive.value, gate.v_threshold.value, 0.0
    )
    return computed(t, "s", "computed: R_off·C_iss·ln(V_drive/V_th) (no plateau: a soft turn-off)")


def _t_switch_off(facts: StageFacts, turn_off: TurnOff) -> Value | None:
    """From the command's edge to the switch's threshold: the driver's delay plus t_off."""
    if turn_off.t_off is None:
        return None
    prop = facts.driver_value("t_prop", "s") if facts.stage.driver else None
    delay = prop.value if prop else 0.0
    return computed(
        delay + turn_off.t_off.value,
        "s",
        "computed: t_prop + t_off"
        + (f" (t_prop {prop.text()}, {prop.origin})" if prop else " (no t_prop given: 0)"),
    )


def _overlap_finding(
    ctx: CheckContext,
    timing: LegTiming,
    values: dict[str, Value],
    high_off: TurnOff,
    low_off: TurnOff,
    commands: tuple[str, str],
) -> Finding:
    facts = ctx.facts
    stage = facts.stage
    hs_cmd, ls_cmd = commands
    total = sum(e - s for s, e in timing.overlaps)
    start, end = timing.overlaps[0]
    values["command_overlap"] = computed(
        total, "s", f"computed: both commands on ({hs_cmd}, {ls_cmd}), per period"
    )
    values["overlap_start"] = computed(
        start, "s", f"computed: after {stage.switch}'s turn-on command"
    )
    # Which edge overlaps: at the high side's turn-on the low side is still on (the low
    # side is the one turning off), else at its turn-off.
    at_turn_on = start <= 1e-9 * timing.period
    outgoing = low_off if at_turn_on else high_off
    needed_off = outgoing.t_off.value if outgoing.t_off else 0.0
    needed = _rounded_up(values["t_prop_mismatch"].value + needed_off + values["margin"].value)
    values["dead_time_needed"] = computed(
        needed,
        "s",
        "computed: t_prop_mismatch + t_off of the switch turning off + margin, rounded up to "
        f"{_ns(DEAD_TIME_STEP)}" + ("" if outgoing.t_off else " (its t_off not known: 0)"),
    )
    if outgoing.t_off is not None:
        _turn_off_values(values, outgoing)
    where = (
        f"at {stage.switch}'s turn-on ({outgoing.switch} still commanded on)"
        if at_turn_on
        else f"at {stage.switch}'s turn-off ({low_off.switch} commanded on before it is off)"
    )
    rds_high, rds_low = high_off.gate.rds_on, low_off.gate.rds_on
    bound_text = ""
    if rds_high is not None and rds_low is not None and facts.v_bus is not None:
        bound = switching.shoot_through_current(
            facts.v_bus.value, rds_high.value, rds_low.value, 0.0
        )
        values["rds_on_high"] = rds_high
        values["rds_on_low"] = rds_low
        values["shoot_through_bound"] = computed(
            bound,
            "A",
            "computed: V_bus/(R_DS(on),hs + R_DS(on),ls), the loop's own resistance and "
            "inductance taken as none (an upper bound)",
        )
        bound_text = (
            f"; the bus drives up to {format_si(bound, 'A')} through both "
            f"({facts.v_bus.text()} over {rds_high.text()} + {rds_low.text()}, less where the "
            "loop's inductance or the switches' saturation limit it)"
        )
    elif facts.v_bus is not None:
        bound_text = (
            f"; the {facts.v_bus.text()} bus is shorted through both, limited only by "
            "their on-resistances (give rds_on to bound it)"
        )
    move = hs_cmd if at_turn_on else ls_cmd
    message = (
        f"the commands of {stage.switch} ({hs_cmd}) and its low-side partner "
        f"{low_off.switch} ({ls_cmd}) overlap by {_ns(total)} each period, {where}, from "
        f"{_ns(start)} to {_ns(end)} after {stage.switch}'s turn-on command: both switches "
        f"conduct across the bus{bound_text}"
    )
    shift = total + needed
    values["dead_time_shift"] = computed(
        shift, "s", f"computed: the overlap + the dead time needed: how far {move}'s on-edge moves"
    )
    fix = (
        f"move {move}'s turn-on edge {_ns(shift)} later (a dead time of at least "
        f"{_ns(needed)} after the other switch's turn-off command, from "
        f"t_prop_mismatch + t_off + margin), or use a driver with a shoot-through interlock"
    )
    derivation = (
        f"period {_ns(timing.period)}; {stage.switch} on for {_ns(timing.on_time)} from its "
        "turn-on command",
        "both on: "
        + ", ".join(f"{_ns(s)} to {_ns(e)}" for s, e in timing.overlaps)
        + f" = {_ns(total)}",
        "needed dead time = "
        + sum_line(
            [(1, values["t_prop_mismatch"].value), (1, needed_off), (1, values["margin"].value)],
            "s",
        )
        + f", rounded up to {_ns(needed)}",
    )
    return ctx.finding(move, message, values, fix=fix, derivation=derivation)


def _short_finding(
    ctx: CheckContext,
    values: dict[str, Value],
    edge: str,
    dead: float,
    needed: float,
    turn_off: TurnOff,
    command: str,
    where: str,
    interlock: Value | None,
    other: tuple[float, str, float, float, TurnOff, str, str] | None = None,
) -> Finding:
    facts = ctx.facts
    stage = facts.stage
    assert turn_off.t_off is not None
    values["dead_time"] = values[f"dead_time_{edge}"]
    values["dead_time_needed"] = computed(needed, "s", "computed: t_prop_mismatch + t_off + margin")
    _turn_off_values(values, turn_off)
    switched = _t_switch_off(facts, turn_off)
    if switched is not None:
        values["t_switch_off"] = switched
    suggested = _rounded_up(needed)
    values["dead_time_shift"] = computed(
        suggested - dead,
        "s",
        f"computed: {_ns(suggested)} − the dead time: how far {command}'s on-edge moves",
    )
    mismatch, margin = values["t_prop_mismatch"], values["margin"]
    soft = _soft_turn_off(turn_off)
    message = (
        f"the dead time between {where} is {_ns(dead)}, shorter than the {_ns(needed)} "
        f"{turn_off.switch} takes to turn off plus the delay mismatch ({turn_off.t_off.text()} "
        f"+ {mismatch.text()}" + (f" + margin {margin.text()}" if margin.value else "") + "): "
        f"the two switches conduct together across the bus at each such edge where the load "
        f"current flows into {turn_off.switch} (a hard turn-off: braking, a reversed or light "
        "load)"
        + (
            f"; with the current in its body diode instead its channel is off after about "
            f"{soft.text()}"
            if soft is not None
            else ""
        )
    )
    if soft is not None:
        values["t_off_soft"] = soft
    also = ""
    if other is not None:
        _, _, other_dead, other_needed, other_off, other_command, other_where = other
        other_suggested = _rounded_up(other_needed)
        values["other_dead_time"] = values[f"dead_time_{other[1]}"]
        values["other_dead_time_needed"] = computed(
            other_needed, "s", f"computed: t_prop_mismatch + t_off({other_off.switch}) + margin"
        )
        values["other_dead_time_shift"] = computed(
            other_suggested - other_dead,
            "s",
            f"computed: {_ns(other_suggested)} − the dead time: how far {other_command}'s "
            "on-edge moves",
        )
        message += (
            f"; the other edge, between {other_where}, is short too ({_ns(other_dead)} "
            f"against {_ns(other_needed)})"
        )
        also = (
            f", and at the other edge to at least {_ns(other_suggested)}: move "
            f"{other_command}'s turn-on edge {_ns(other_suggested - other_dead)} later"
        )
    fix = (
        f"widen the dead time at that edge to at least {_ns(suggested)}: move {command}'s "
        f"turn-on edge {_ns(suggested - dead)} later{also}"
        + (
            f" (or use a driver whose built-in dead time exceeds {_ns(suggested)})"
            if interlock is not None
            else ""
        )
        + ", or speed up the turn-off (a smaller turn-off gate resistance, a diode across it "
        "or a stronger sink)"
    )
    derivation = (
        f"dead time at {where}: {_ns(dead)} ({values['dead_time'].origin})",
        f"t_off({turn_off.switch}) = {turn_off.t_off.text()} ({turn_off.t_off.origin})",
        "needed = "
        + sum_line([(1, mismatch.value), (1, turn_off.t_off.value), (1, margin.value)], "s")
        + f", rounded up to {_ns(suggested)}",
    )
    device = command if facts.device(command) is not None else stage.switch
    return ctx.finding(
        device, message, values, fix=fix, derivation=derivation, severity=Severity.WARNING
    )


CHECKS = {"cross-conduction": check_cross_conduction}
