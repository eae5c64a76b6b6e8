"""Switching loss: how fast the gate drive moves the floating switch, and what that costs.

The gate charge description of a MOSFET's transitions (the gate current through the driver's
output, the gate resistors and the internal gate resistance moving the charge split of the
datasheet): at turn-on the current rises while the gate takes Q_gs2 (threshold to plateau),
then the drain voltage falls while it takes Q_gd on the Miller plateau; turn-off runs the
same intervals backwards. The transition times give the hard-switching loss
½·V·I·(t_on + t_off)·f, the load current and R_DS(on) the conduction loss, and the thermal
resistance the junction temperature. Two findings: edges that take more than a set part of
the period (judged whenever the gate path is known), and a junction above its derated or its
absolute limit (judged only where the load current is known: a condition, or the steady
state of an inductor into resistors; never guessed), for the floating switch and for its
low-side partner.
"""

from __future__ import annotations

import math
from collections.abc import Iterator
from dataclasses import dataclass

from drivelint.checks.base import CheckContext, Finding
from drivelint.checks.corners import HOLD, charge_spread, with_corner
from drivelint.checks.facts import StageFacts
from drivelint.checks.induced import (
    GatePathFigure,
    high_side_path,
    inductor_load,
    miller_plateau,
    partner_paths,
    switch_figures,
)
from drivelint.circuit.model import Device
from drivelint.diagnostics import Severity
from drivelint.netlist.values import format_si
from drivelint.physics import dvdt
from drivelint.physics import switching as sw
from drivelint.physics.preferred import previous_preferred
from drivelint.physics.stress import (
    NASA_JUNCTION_LIMIT,
    TemperatureLimit,
    junction_temperature_limit,
)
from drivelint.ratings.values import Value, computed
from drivelint.stages.model import DriveStage

# The corner the figures take: the gate supply at its lowest and the gate charge at the top
# of its spread (the slower edges), the bus at its highest (the larger swing).
CORNER_USES = frozenset({"supply", "charge", "bus"})
# A load whose L/R is under this share of the on- and the off-time is taken as resistive.
RESISTIVE_TAU_SHARE = 0.1


def _s(value: float) -> str:
    return format_si(value, "s")


def _a(value: float) -> str:
    return format_si(value, "A")


def _w(value: float) -> str:
    return format_si(value, "W")


def _ohm(value: float) -> str:
    return format_si(value, "Ω")


def _c(kelvin: float) -> str:
    return f"{kelvin - 273.15:.1f} °C"


def _spread_text(spread: float) -> str:
    return f", × {spread:g} (qg_spread)" if spread != 1.0 else ""


@dataclass(frozen=True, slots=True)
class Transitions:
    """The turn-on and turn-off of one switch through its gate paths."""

    on: GatePathFigure
    off: GatePathFigure
    q_gd: Value
    q_gs2: Value
    plateau: Value
    vth: Value
    i_on: Value  # on the plateau
    i_on_rise: Value  # while the current rises (gate between V_th and V_pl)
    i_off: Value
    i_off_fall: Value
    t_on: Value
    t_off: Value
    rds_on: Value | None

    @property
    def limited(self) -> bool:
        """A driver's rated current, not the resistance, sets some gate current."""
        return any("at most the driver" in v.origin for v in (self.i_on, self.i_off))


def _gate_current(level: float, v_gate: float, path: GatePathFigure, what: str) -> Value:
    """|level − v_gate|/R_path, capped by the driver's rated output current."""
    amps = abs(level - v_gate) / path.resistance.value
    how = (
        f"computed: |{path.level.text()} − {format_si(v_gate, 'V')} ({what})|/"
        f"{path.resistance.text()}"
    )
    limit = path.current_limit
    if limit is not None and 0 < limit.value < amps:
        amps = limit.value
        how += f", at most the driver's rated {limit.text()}"
    return computed(amps, "A", how)


def transitions(
    facts: StageFacts,
    device_name: str,
    on: GatePathFigure,
    off: GatePathFigure,
    swing: float,
    current: Value | None = None,
) -> Transitions | None:
    """The switch's transition times through ``on`` and ``off``, its plateau at ``current``
    where that is known; None where the gate charge, threshold or a path's resistance is not
    known."""
    device = facts.device(device_name)
    if device is None or swing <= 0:
        return None
    # the gate charge at the top of its spread (checks/corners.py): the slower edges
    spread = charge_spread(facts)
    gate = facts.switch_gate(device, on.level.value, swing, spread)
    vth, q_gd = gate.v_threshold, gate.q_gd
    if vth is None or q_gd is None or q_gd.value <= 0:
        return None
    if on.resistance.value <= 0 or off.resistance.value <= 0:
        return None  # an ideal driver and no resistor: no time to compute
    plateau = miller_plateau(facts, device, vth, current)
    v_on, v_off = on.level.value, off.level.value
    if not v_off < vth.value <= plateau.value < v_on:
        return None
    qgs = facts.ratings.get(device, "qgs")
    multiplier = float(device.multiplier) if device.multiplier else 1.0
    if qgs is not None:
        q_gs2 = computed(
            sw.current_rise_charge(qgs.value * multiplier * spread),
            "C",
            f"computed: ½·Q_gs = ½ × {qgs.text()} ({qgs.origin}; the charge above V_th taken "
            f"as half of Q_gs, common practice){_spread_text(spread)}",
        )
    else:
        figures = switch_figures(facts, device, swing, plateau.value)
        if figures is None:
            return None
        q_gs2 = computed(
            figures.c_gs.value * (plateau.value - vth.value) * spread,
            "C",
            f"computed: C_gs·(V_pl − V_th) = {figures.c_gs.text()} ({figures.c_gs.origin}) × "
            f"({plateau.text()} − {vth.text()}){_spread_text(spread)}",
        )
    middle = (vth.value + plateau.value) / 2
    i_on = _gate_current(v_on, plateau.value, on, "the plateau")
    i_on_rise = _gate_current(v_on, middle, on, "mid-way from V_th to the plateau")
    i_off = _gate_current(v_off, plateau.value, off, "the plateau")
    i_off_fall = _gate_current(v_off, middle, off, "mid-way from the plateau to V_th")
    t_on = sw.transition_time(q_gs2.value, i_on_rise.value) + sw.transition_time(
        q_gd.value, i_on.value
    )
    t_off = sw.transition_time(q_gd.value, i_off.value) + sw.transition_time(
        q_gs2.value, i_off_fall.value
    )
    return Transitions(
        on,
        off,
        q_gd,
        q_gs2,
        plateau,
        vth,
        i_on,
        i_on_rise,
        i_off,
        i_off_fall,
        computed(t_on, "s", "computed: Q_gs2/I_g,rise + Q_gd/I_g,on"),
        computed(t_off, "s", "computed: Q_gd/I_g,off + Q_gs2/I_g,fall"),
        gate.rds_on,
    )


@dataclass(frozen=True, slots=True)
class OperatingPoint:
    """The current the switch turns on and off, and its RMS while it conducts."""

    i_turn_on: Value
    i_turn_off: Value
    i_rms: Value
    resistive: bool = False  # the current follows a resistor (none through the partner)


def operating_point(stage: DriveStage, facts: StageFacts) -> OperatingPoint | None:
    """The condition load_current, else the steady state of an inductor from the switch
    node into resistors to fixed levels; None otherwise (the losses are then not judged).

    The inductor's current is a triangle (textbook buck relations) only where its L/R is long
    against the off-time: the ripple then stays within the average (ΔI ≤ I_avg). Where L/R
    is short against both the on- and the off-time (a resistive load with its lead
    inductance) the current follows the resistor: (V_bus − V_ref)/R while on, decayed to
    nothing by the next turn-on. In between it is not estimated.
    """
    given = facts.condition("load_current")
    if given is not None:
        return OperatingPoint(given, given, given)
    load = inductor_load(stage, facts)
    bus, duty, fsw = facts.v_bus, facts.duty_max, facts.fsw
    if load is None or bus is None or duty is None or fsw is None:
        return None
    henries, v_ref, conductance, _ = load
    if conductance <= 0:
        return None
    low, high = dvdt.load_current_at_edges(
        bus.value, facts.v_sw_low.value, duty.value, fsw.value, henries, v_ref, conductance
    )
    average, ripple = (low + high) / 2, high - low
    tau = henries * conductance
    period = 1.0 / fsw.value
    shortest = min(duty.value, 1.0 - duty.value) * period
    if average > 0 and ripple <= average:
        how = "computed: the steady-state inductor current at the switch node"
        rms = math.sqrt(average * average + ripple * ripple / 12)
        return OperatingPoint(
            computed(low, "A", f"{how}, I_avg − ΔI/2 (as the switch turns on)"),
            computed(high, "A", f"{how}, I_avg + ΔI/2 (as the switch turns off)"),
            computed(rms, "A", f"{how}: √(I_avg² + ΔI²/12), I_avg {_a(average)}, ΔI {_a(ripple)}"),
        )
    if tau <= RESISTIVE_TAU_SHARE * shortest:
        amps = (bus.value - v_ref) * conductance
        how = (
            f"computed: (V_bus − V_ref)/R = ({bus.text()} − {format_si(v_ref, 'V')})·"
            f"{format_si(conductance, 'S')}, a resistive load (L/R {_s(tau)} short against "
            "the on- and off-time)"
        )
        on_current = computed(amps, "A", how)
        zero = Value(0.0, "A", f"the load current decays within the off-time (L/R {_s(tau)})")
        return OperatingPoint(zero, on_current, on_current, resistive=True)
    return None


def gate_paths(
    stage: DriveStage, facts: StageFacts
) -> tuple[GatePathFigure, GatePathFigure] | None:
    """The floating switch's turn-on path (to the boot supply) and turn-off path (to its
    source), through the recognised driver and plain series resistors; None otherwise."""
    drive = facts.v_boot0 or facts.v_boot_max
    if drive is None:
        return None
    on = high_side_path(stage, facts, True, drive, drive.value)
    zero = Value(0.0, "V", f"the pull-down returns to {stage.switch}'s source")
    off = high_side_path(stage, facts, False, zero, drive.value)
    if on is None or off is None:
        return None
    return on, off


def check_switching_loss(stage: DriveStage, ctx: CheckContext) -> Iterator[Finding]:
    facts = ctx.facts
    if stage.mode != "switching" or facts.never_on or stage.channel != "nmos":
        return
    fsw = facts.fsw
    device = facts.switch
    if fsw is None or fsw.value <= 0 or device.kind != "mosfet":
        return
    paths = gate_paths(stage, facts)
    if paths is None:
        return
    on, off = paths
    # a modulated command switches at its carrier, its duty the loop's: edges only
    point = None if facts.modulated else operating_point(stage, facts)
    current = point.i_rms if point is not None else None
    found = transitions(facts, stage.switch, on, off, facts.v_switched, current)
    if found is None:
        return
    edge = _edge_finding(found, facts, ctx)
    if edge is not None:
        yield with_corner(edge, facts, HOLD, CORNER_USES)
    if point is None or facts.duty_max is None:
        return
    subjects = [Subject(facts.switch, facts.duty_max, point, found, found.rds_on)]
    partner = _partner_subject(stage, facts, point)
    if partner is not None:
        subjects.append(partner)
    for subject in subjects:
        heat = _junction_finding(subject, facts, ctx)
        if heat is not None:
            # a partner whose edges are soft depends on the bus alone (its conduction)
            uses = CORNER_USES if subject.found is not None else frozenset({"bus"})
            yield with_corner(heat, facts, HOLD, uses)


def _partner_subject(stage: DriveStage, facts: StageFacts, point: OperatingPoint) -> Subject | None:
    """The low-side partner of the leg, conducting the rest of the period: the same load
    current, flowing the other way through its edges (a current out of the node at the high
    side's turn-off is one the partner's body diode takes before it turns on: a soft edge).
    Its edges are worked out only where one is hard, through its own gate path; a load whose
    current follows a resistor is not judged (what the partner carries then is not known)."""
    name = next(
        (r.devices[0] for r in stage.refresh if r.kind == "low-side switch" and r.devices), None
    )
    partner = facts.device(name)
    duty = facts.duty_max
    if partner is None or partner.kind != "mosfet" or point.resistive or duty is None:
        return None
    into = OperatingPoint(
        computed(
            -point.i_turn_off.value,
            "A",
            f"computed: −I as {stage.switch} turns off ({point.i_turn_off.text()} out of the node)",
        ),
        computed(
            -point.i_turn_on.value,
            "A",
            f"computed: −I as {stage.switch} turns on ({point.i_turn_on.text()} out of the node)",
        ),
        point.i_rms,
    )
    share = computed(
        1.0 - duty.value, "1", f"computed: 1 − D ({duty.text()}), the dead times not counted"
    )
    paths = partner_paths(stage, facts, partner)
    drive = paths[0].level.value if paths is not None else None
    rds = facts.ratings.get(partner, "rds_on")
    if rds is None and drive is not None:
        rds = facts.switch_gate(partner, drive, facts.v_switched).rds_on
    found: Transitions | None = None
    if into.i_turn_on.value > 0 or into.i_turn_off.value > 0:
        if paths is None:
            return None
        found = transitions(facts, partner.name, *paths, facts.v_switched, point.i_rms)
        if found is None:
            return None
    return Subject(partner, share, into, found, rds)


def _common_values(found: Transitions, facts: StageFacts) -> dict[str, Value]:
    fsw = facts.fsw
    assert fsw is not None
    return {
        "t_on": found.t_on,
        "t_off": found.t_off,
        "fsw": fsw,
        "q_gd": found.q_gd,
        "q_gs2": found.q_gs2,
        "v_plateau": found.plateau,
        "vth": found.vth,
        "v_drive": found.on.level,
        "v_off": found.off.level,
        "r_on": found.on.resistance,
        "r_off": found.off.resistance,
        "i_gate_on": found.i_on,
        "i_gate_on_rise": found.i_on_rise,
        "i_gate_off": found.i_off,
        "i_gate_off_fall": found.i_off_fall,
        "t_voltage_on": computed(
            found.q_gd.value / found.i_on.value, "s", "computed: Q_gd/I_g,on (the node's swing)"
        ),
        "t_voltage_off": computed(
            found.q_gd.value / found.i_off.value, "s", "computed: Q_gd/I_g,off (the node's swing)"
        ),
    }


def _time_lines(found: Transitions) -> tuple[str, ...]:
    return (
        f"I_g,on = {found.i_on.text()} ({found.i_on.origin}); I_g,rise = {found.i_on_rise.text()}",
        f"t_on = Q_gs2/I_g,rise + Q_gd/I_g,on = {found.q_gs2.text()}/{found.i_on_rise.text()} "
        f"+ {found.q_gd.text()}/{found.i_on.text()} = {found.t_on.text()}",
        f"I_g,off = {found.i_off.text()} ({found.i_off.origin}); I_g,fall = "
        f"{found.i_off_fall.text()}",
        f"t_off = Q_gd/I_g,off + Q_gs2/I_g,fall = {found.q_gd.text()}/{found.i_off.text()} "
        f"+ {found.q_gs2.text()}/{found.i_off_fall.text()} = {found.t_off.text()}",
    )


def faster_fix(found: Transitions, factor: float, why: str) -> tuple[str, float | None]:
    """What makes both edges ``factor`` (< 1) times as long: the gate resistors lowered to an
    E12 value (the driver and internal resistance stay), else a stronger driver; with the
    suggested resistor value where there is one."""
    on, off = found.on, found.off
    shared = on.resistors and on.resistors == off.resistors and len(on.resistors) == 1
    if not found.limited and shared:
        # t(R) = a_on·(fixed_on + R) + a_off·(fixed_off + R), both edges through R
        a_on = found.t_on.value / on.resistance.value
        a_off = found.t_off.value / off.resistance.value
        target = factor * (found.t_on.value + found.t_off.value)
        ohms = (target - a_on * on.fixed - a_off * off.fixed) / (a_on + a_off)
        if ohms > 0:
            value = previous_preferred(ohms, "E12")
            return (
                f"lower {on.resistors[0]} to {_ohm(value)} or less ({why}; the driver and "
                f"the internal gate resistance keep {_ohm(on.fixed)} on and "
                f"{_ohm(off.fixed)} off), checking the faster edge's dv/dt against the "
                "partner's gate hold and EMI",
                value,
            )
    i_source = found.i_on.value / factor
    i_sink = found.i_off.value / factor
    return (
        f"a stronger driver ({why}): about {_a(i_source)} source and {_a(i_sink)} sink on the "
        f"plateau instead of {found.i_on.text()} and {found.i_off.text()}, with the gate "
        f"resistors lowered to match",
        None,
    )


def _edge_finding(found: Transitions, facts: StageFacts, ctx: CheckContext) -> Finding | None:
    fsw = facts.fsw
    assert fsw is not None
    allowed = ctx.options["edge_fraction"]
    fraction = sw.edge_fraction(found.t_on.value, found.t_off.value, fsw.value)
    if fraction <= allowed:
        return None
    name = ctx.facts.stage.switch
    values = _common_values(found, facts)
    values["edge_fraction"] = computed(fraction, "1", "computed: (t_on + t_off)·f_sw")
    values["edge_fraction_max"] = Value(allowed, "1", "option edge_fraction")
    period = 1.0 / fsw.value
    fix, value = faster_fix(
        found,
        allowed / fraction,
        f"the edges may take {_s(allowed * period)} of the {_s(period)} period together",
    )
    if value is not None:
        values["suggested_gate_resistor"] = computed(
            value, "Ohm", "computed: the E12 value at or below the resistance that meets the option"
        )
    message = (
        f"{name} takes {found.t_on.text()} to turn on and {found.t_off.text()} to turn off "
        f"through its gate drive ({found.i_on.text()} on, {found.i_off.text()} off on the "
        f"Miller plateau): {fraction * 100:.2g} % of each {_s(period)} period in transition, "
        f"above the {allowed * 100:.2g} % allowed; the switching loss grows with it"
    )
    derivation = (
        *_time_lines(found),
        f"(t_on + t_off)·f_sw = ({found.t_on.text()} + {found.t_off.text()}) × {fsw.text()} "
        f"= {fraction * 100:.3g} % against edge_fraction {allowed * 100:.3g} %",
    )
    device = found.on.resistors[0] if found.on.resistors else name
    return ctx.finding(
        device,
        message,
        values,
        fix=fix[0].upper() + fix[1:],
        derivation=derivation,
        severity=Severity.WARNING,
    )


@dataclass(frozen=True, slots=True)
class Heat:
    """A switch's losses and junction temperature at the steady state."""

    p_sw: float
    p_cond: float
    rds_hot: float
    t_j: float


def _heat(
    found: Transitions | None,
    point: OperatingPoint,
    facts: StageFacts,
    rth: float,
    tempco: float,
    rds: float,
    duty: float | None = None,
) -> Heat:
    fsw = facts.fsw
    share = facts.duty_max.value if duty is None and facts.duty_max else duty
    assert fsw is not None and share is not None
    v = facts.v_switched
    # an edge whose current flows the other way is soft: the body diode of the partner
    # (or its own) moves the node, and the switch makes no overlap loss on it
    p_sw = 0.0
    if found is not None:
        p_sw = sw.switching_loss(
            v, max(point.i_turn_on.value, 0.0), found.t_on.value, 0.0, fsw.value
        ) + sw.switching_loss(
            v, max(point.i_turn_off.value, 0.0), 0.0, found.t_off.value, fsw.value
        )
    t_a = facts.temperature.value
    rated = sw.conduction_loss(point.i_rms.value, rds, share)
    t_j = sw.junction_temperature_self_heating(t_a, p_sw, rated, rth, tempco)
    if not math.isfinite(t_j):
        return Heat(p_sw, math.inf, math.inf, t_j)
    hot = sw.rds_on_at_temperature(rds, t_j, tempco)
    return Heat(p_sw, sw.conduction_loss(point.i_rms.value, hot, share), hot, t_j)


@dataclass(frozen=True, slots=True)
class Subject:
    """One switch whose junction is judged: the floating switch, or its low-side partner."""

    device: Device
    duty: Value  # the share of the period it conducts
    point: OperatingPoint  # the currents it turns on and off (positive: a hard edge)
    found: Transitions | None  # its edges, None when both are soft
    rds_on: Value | None


def _junction_finding(subject: Subject, facts: StageFacts, ctx: CheckContext) -> Finding | None:
    device, duty, point, found = subject.device, subject.duty, subject.point, subject.found
    name = device.name
    rth = facts.ratings.get(device, "rth_ja")
    fsw = facts.fsw
    if rth is None or rth.value <= 0 or fsw is None:
        return None
    tempco = ctx.options["rds_tempco"]
    rds_on = subject.rds_on
    rds = rds_on.value if rds_on is not None else 0.0
    heat = _heat(found, point, facts, rth.value, tempco, rds, duty.value)
    rule = TemperatureLimit(
        NASA_JUNCTION_LIMIT.cap,
        ctx.options["tj_margin"],
        NASA_JUNCTION_LIMIT.source,
        NASA_JUNCTION_LIMIT.from_memory,
    )
    tj_max = facts.ratings.get(device, "tj_max")
    limit = junction_temperature_limit(tj_max.value, rule) if tj_max else rule.cap
    if heat.t_j <= limit:
        return None
    runaway = not math.isfinite(heat.t_j)
    # R_DS(on) and the conduction loss with the junction at its limit: what a fix must meet
    hot_limit = sw.rds_on_at_temperature(rds, limit, tempco)
    p_at_limit = heat.p_sw + sw.conduction_loss(point.i_rms.value, hot_limit, duty.value)
    if runaway:
        heat = Heat(heat.p_sw, p_at_limit - heat.p_sw, hot_limit, heat.t_j)
    severity = ctx.severity if tj_max is not None and heat.t_j > tj_max.value else Severity.WARNING
    t_a = facts.temperature
    p_total = heat.p_sw + heat.p_cond
    values = _common_values(found, facts) if found is not None else {"fsw": fsw}
    values.update(
        {
            "i_turn_on": point.i_turn_on,
            "i_turn_off": point.i_turn_off,
            "i_rms": point.i_rms,
            "duty": duty,
            "v_switched": computed(facts.v_switched, "V", "computed: V_bus − V_sw,low"),
            "p_switching": computed(heat.p_sw, "W", "computed: ½·V·(I_on·t_on + I_off·t_off)·f_sw"),
            "p_conduction": computed(heat.p_cond, "W", "computed: I_rms²·R_DS(on)(T_j)·D"),
            "p_switch": computed(p_total, "W", "computed: P_sw + P_cond"),
            "p_switch_cold": computed(
                heat.p_sw + sw.conduction_loss(point.i_rms.value, rds, duty.value),
                "W",
                "computed: P_sw + I_rms²·R_DS(on)·D with R_DS(on) as rated (25 °C), what a "
                "simulation at its nominal temperature dissipates",
            ),
            "rth_ja": rth,
            "ambient": t_a,
            "thermal_gain": computed(
                rth.value * sw.conduction_loss(point.i_rms.value, rds, duty.value) * tempco,
                "1",
                "computed: R_thJA·P_cond(25 °C)·α (at 1 or more, no steady temperature)",
            ),
            "t_junction_limit": computed(
                limit,
                "K",
                f"computed: min({_c(rule.cap)}, T_j,max − {rule.margin:g} K) ({rule.source}, "
                "from memory; margin option tj_margin)"
                if tj_max
                else f"{_c(rule.cap)} cap ({rule.source}, from memory; no tj_max for the part)",
            ),
            "rds_tempco": Value(tempco, "1", "option rds_tempco (per kelvin)"),
        }
    )
    if tj_max is not None:
        values["tj_max"] = tj_max
    if not runaway:
        values["t_junction"] = computed(
            heat.t_j,
            "K",
            "computed: T_a + (P_sw + P_cond(T_j))·R_thJA, R_DS(on) rising with T_j (closed form)",
        )
    if rds_on is not None:
        values["rds_on"] = rds_on
        values["rds_on_hot"] = computed(
            heat.rds_hot, "Ohm", "computed: R_DS(on)·(1 + α·(T_j − 25 °C))"
        )
    p_allowed = (limit - t_a.value) / rth.value
    fixes: list[str] = []
    if found is not None and 0 < p_allowed and heat.p_sw > 0 and heat.p_cond < p_allowed:
        factor = (p_allowed - heat.p_cond) / heat.p_sw
        text, value = faster_fix(
            found, min(factor, 0.95), f"switching loss down to {_w(p_allowed - heat.p_cond)}"
        )
        fixes.append(text)
        if value is not None:
            values["suggested_gate_resistor"] = computed(
                value, "Ohm", "computed: the E12 value whose edges bring T_j to its limit"
            )
    if rds_on is not None and heat.p_sw < p_allowed and point.i_rms.value > 0:
        share = hot_limit / rds_on.value if rds_on.value > 0 else 1.0
        needed = (p_allowed - heat.p_sw) / (point.i_rms.value**2 * duty.value * share)
        fixes.append(f"a part with R_DS(on) of {_ohm(needed)} or less at 25 °C")
    rth_jc = facts.ratings.get(device, "rth_jc")
    if rth_jc is not None:
        r_ca = sw.heatsink_resistance_needed(limit, t_a.value, p_at_limit, rth_jc.value)
        if r_ca > 0:
            values["rth_case_ambient_needed"] = computed(
                r_ca, "K/W", "computed: (T_limit − T_a)/P − R_thJC"
            )
            fixes.append(
                f"a heatsink: case to ambient (interface included) {r_ca:.3g} K/W or less "
                f"(R_thJC {rth_jc.text()})"
            )
    if not fixes:
        fixes.append(
            f"less dissipation or a better thermal path: at {rth.text()} the junction may "
            f"dissipate {_w(max(p_allowed, 0.0))}"
        )
    over = "its rating" if severity is not Severity.WARNING else "its derated limit"
    reaches = (
        f"its junction reaches {_c(heat.t_j)} through {rth.text()} from {_c(t_a.value)}, "
        f"above {over} of {_c(tj_max.value if tj_max and over == 'its rating' else limit)}"
        if not runaway
        else f"through {rth.text()} from {_c(t_a.value)} its junction has no steady "
        "temperature (thermal runaway: each kelvin raises R_DS(on) and the loss by more than "
        "a kelvin's worth)"
    )
    at = " with the junction at its limit" if runaway else ""
    message = (
        f"{name} dissipates {_w(p_total)}{at} ({_w(heat.p_sw)} switching, "
        f"{_w(heat.p_cond)} conduction) at {point.i_rms.text()} and {fsw.text()}: {reaches}"
    )
    switching_lines = (
        (
            *_time_lines(found),
            f"P_sw = ½·V·(I_on·t_on + I_off·t_off)·f = ½ × {format_si(facts.v_switched, 'V')} "
            f"× ({point.i_turn_on.text()} × {found.t_on.text()} + {point.i_turn_off.text()} × "
            f"{found.t_off.text()}) × {fsw.text()} = {_w(heat.p_sw)}",
        )
        if found is not None
        else (
            f"P_sw = 0: both edges of {name} are soft (the load current moves the node: "
            f"{point.i_turn_on.text()} as it turns on, {point.i_turn_off.text()} as it turns "
            "off)",
        )
    )
    derivation = (
        *switching_lines,
        f"P_cond = I_rms²·R_DS(on)(T_j)·D = ({point.i_rms.text()})² × {_ohm(heat.rds_hot)} × "
        f"{duty.value:.3g} = {_w(heat.p_cond)}",
        f"T_j = T_a + P·R_thJA = {_c(t_a.value)} + {_w(p_total)} × {rth.text()} = "
        f"{_c(heat.t_j)} against {_c(limit)}"
        if not runaway
        else "T_j = (T_a + R_th·(P_sw + P_cond,25(1 − α·T_25)))/(1 − R_th·P_cond,25·α): "
        f"R_th·P_cond,25·α = {values['thermal_gain'].value:.3g} ≥ 1, no steady T_j",
    )
    text = "; or ".join(fixes)
    return ctx.finding(
        name,
        message,
        values,
        fix=text[0].upper() + text[1:],
        derivation=derivation,
        severity=severity,
    )


CHECKS = {"switching-loss": check_switching_loss}
