"""Switch-node undershoot: the switch pin's swing below the driver's common at turn-off.

As the high side turns off, the load current commutates to the low side's body diode (or a
freewheel diode) and every stray inductance of that loop between the driver's switch pin and
its common carries the change: the pin falls to −(V_F + L_s·di/dt)
(``physics.commutation``). The strays are the parts the wire merge took out of the circuit
(package leads, shunts, trace inductances written as small inductors), read back from the
circuit as written. Two things are judged: the pin's swing against the driver's negative
rating on its switch pin (parts ``vs_min``, else a stated default), and the boot capacitor
charged higher by the diode during the swing, against the switch's ``vgs_max`` and the
driver's boot supply rating ``vbs_max``.
"""

from __future__ import annotations

import math
from collections.abc import Iterator
from dataclasses import dataclass

from drivelint.checks.base import CheckContext, Finding
from drivelint.checks.corners import STRESS, with_corner
from drivelint.checks.facts import StageFacts
from drivelint.checks.induced import (
    GatePathFigure,
    _multiplier,
    edge_currents,
    high_side_path,
    miller_plateau,
)
from drivelint.checks.printed import sum_line
from drivelint.circuit.model import Device
from drivelint.diagnostics import Severity
from drivelint.netlist.values import format_si
from drivelint.physics import commutation
from drivelint.physics import gate as gate_physics
from drivelint.physics.preferred import next_preferred, previous_preferred
from drivelint.ratings.values import Value, computed
from drivelint.stages.model import DriveStage


def _v(value: float) -> str:
    return format_si(value, "V")


def _nh(value: float) -> str:
    return format_si(value, "H")


@dataclass(frozen=True, slots=True)
class Commutation:
    """The high side's turn-off edge and the loop its current moves into."""

    freewheel: str  # the part that takes the current (the low side, or a diode)
    i_load: Value
    v_f: Value
    l_s: Value
    strays: tuple[str, ...]
    pins: tuple[str, str]  # the driver's switch and common pins' nets, as written
    off: GatePathFigure
    c_iss: Value
    plateau: Value
    vth: Value
    g_m: Value
    di_dt: Value
    t_fall: Value  # I/(di/dt): the rectangle with the same L·I volt-seconds
    v_undershoot: Value  # signed, negative
    c_gd: Value | None  # C_gd at the blocking voltage: the undershoot's feedback
    model: commutation.TurnOffEdge | None  # the edge for the limits, where c_gd is known


def _load_current(stage: DriveStage, facts: StageFacts) -> Value | None:
    given = facts.condition("load_current")
    if given is not None:
        # no current out of the switch node at the turn-off: nothing commutates into the
        # freewheeling part
        if not given.value > 0:
            return None
        return Value(given.value, "A", f"condition load_current ({given.origin})")
    currents = edge_currents(stage, facts)
    # the steady-state relations hold where the current stays one way all cycle (a ripple
    # past twice the average, as an inductor small against its load gives, means they don't)
    if currents is None or not currents[1] > 0 or currents[0] < 0:
        return None
    return computed(
        currents[1],
        "A",
        "computed: the inductor's steady-state current at the high side's turn-off, "
        "I_avg + ΔI/2 (give load_current)",
    )


def _freewheel_part(stage: DriveStage, facts: StageFacts) -> tuple[Device, str, str] | None:
    """The part that takes the load current and its (top, bottom) nets as written."""
    original = facts.circuit.unmerged or facts.circuit
    for refresh in stage.refresh:
        if refresh.kind not in ("low-side switch", "freewheel diode") or not refresh.devices:
            continue
        device = original.devices.get(refresh.devices[0])
        if device is None:
            continue
        roles = ("d", "s") if device.kind == "mosfet" else ("k", "a")
        top, bottom = device.net(roles[0]), device.net(roles[1])
        if device.kind in ("mosfet", "diode") and top and bottom:
            return device, top, bottom
    return None


def _c_gd_blocking(facts: StageFacts, device: Device, plateau: float) -> Value | None:
    """The switch's small-signal C_gd with its drain up at the bus and its gate on the
    plateau: a VDMOS card's C_gd(V_GD = V_pl − V_bus), the parts' C_rss, or the card's
    CGDO·W; None where only a charge is known (Q_gd/ΔV averages over the swing and overstates
    C_gd at the bus, which would understate the undershoot)."""
    model = device.model
    params = model.params if model else {}
    m = _multiplier(device)
    if model is not None and model.type == "vdmos" and "cgdmax" in params:
        v_gd = plateau - facts.v_switched
        c_gd = gate_physics.vdmos_gate_drain_capacitance(
            v_gd, params.get("cgdmin", params["cgdmax"]), params["cgdmax"], params.get("a", 1.0)
        )
        return computed(c_gd * m, "F", f"computed: C_gd(V_GD = {_v(v_gd)}) of model {model.name}")
    crss = facts.ratings.get(device, "crss")
    if crss is not None:
        return Value(crss.value * m, "F", f"C_rss {crss.text()} ({crss.origin})")
    if model is not None and params.get("cgdo"):
        width = device.params.get("w", 1.0)
        return computed(params["cgdo"] * width * m, "F", f"computed: CGDO·W of model {model.name}")
    return None


def _c_iss_falling(
    facts: StageFacts, device: Device, plateau: float, c_gd: Value | None
) -> Value | None:
    """C_iss while the current falls, the drain up at the bus: a VDMOS card's C_gs plus
    its C_gd at V_GD = V_pl − V_bus; else the facts' C_iss (with the switch on, which is
    larger: a slower, milder edge)."""
    model = device.model
    params = model.params if model else {}
    if model is not None and model.type == "vdmos" and "cgs" in params and c_gd is not None:
        return computed(
            params["cgs"] * _multiplier(device) + c_gd.value,
            "F",
            f"computed: C_gs + {c_gd.origin.removeprefix('computed: ')}",
        )
    return facts.switch_gate(
        device, facts.v_boot_max.value if facts.v_boot_max else 10.0, facts.v_switched
    ).c_iss


def commutation_edge(stage: DriveStage, facts: StageFacts) -> Commutation | None:
    """The high side's turn-off into the freewheeling part, or None where the rule cannot
    judge it (no driver IC with its switch and common pins on that part, no load current,
    a gate path or gate figures not known)."""
    if stage.channel != "nmos" or stage.driver is None or facts.v_boot_max is None:
        return None
    part = _freewheel_part(stage, facts)
    load = _load_current(stage, facts)
    if part is None or load is None:
        return None
    device, top, bottom = part
    found = facts.commutation_strays(top, bottom)
    if found is None:
        return None
    henries, strays, pins = found
    switch = facts.switch
    vth = facts.ratings.get(switch, "vth")
    zero = Value(0.0, "V", f"the pull-down returns to {stage.switch}'s source")
    off = high_side_path(stage, facts, False, zero, facts.v_boot_max.value)
    if vth is None or off is None or not off.resistance.value > 0:
        return None
    plateau = miller_plateau(facts, switch, vth, load)
    c_gd = _c_gd_blocking(facts, switch, plateau.value)
    c_iss = _c_iss_falling(facts, switch, plateau.value, c_gd)
    if c_iss is None or not c_iss.value > 0 or not plateau.value > vth.value > 0:
        return None
    gfs = facts.ratings.get(switch, "gfs")
    if gfs is not None:
        g_m = Value(gfs.value * _multiplier(switch), "S", f"g_fs {gfs.text()} ({gfs.origin})")
    else:
        g_m = computed(
            commutation.square_law_transconductance(load.value, plateau.value, vth.value),
            "S",
            "computed: 2·I_load/(V_pl − V_th), square law",
        )
    r_off = off.resistance.value
    model = None
    if c_gd is not None and c_gd.value > 0:
        model = commutation.TurnOffEdge(
            load.value,
            g_m.value,
            plateau.value,
            vth.value,
            c_iss.value,
            c_gd.value,
            square_law=gfs is None,
        )
        rate = model.rate(r_off, henries)
        how = (
            f"computed: the fastest point of the fall with the undershoot's feedback through "
            f"C_gd {c_gd.text()} (the gate's node integrated), at most g_m·V_pl/(R_off·C_iss) "
            f"= {g_m.text()} × {plateau.text()}/({off.resistance.text()} × {c_iss.text()})"
        )
    else:
        rate = commutation.current_fall_rate(g_m.value, plateau.value, r_off, c_iss.value)
        how = (
            f"computed: g_m·V_pl/(R_off·C_iss) = {g_m.text()} × {plateau.text()}/"
            f"({off.resistance.text()} × {c_iss.text()}) (no small-signal C_gd known: the "
            "undershoot's feedback is not counted)"
        )
    di_dt = computed(rate, "A/s", how)
    v_f = facts.freewheel_drop_at(load.value, f"{load.text()} of load current")
    l_s = Value(
        henries,
        "H",
        f"the strays on the loop {stage.driver.device} switch pin – {device.name} – common "
        f"({', '.join(strays)})"
        if strays
        else "no stray inductance written on the loop",
    )
    v_us = commutation.switch_node_undershoot(v_f.value, henries, rate)
    held = _boot_path_hold(stage, facts, load.value, henries)
    boot_holds = held is not None and held < -v_us
    if held is not None and boot_holds:
        # the boot path takes the current the loop cannot yet, and holds the node there
        v_us = -held
    return Commutation(
        device.name,
        load,
        v_f,
        l_s,
        strays,
        pins,
        off,
        c_iss,
        plateau,
        vth,
        g_m,
        di_dt,
        computed(load.value / rate, "s", "computed: I_load/(di/dt)"),
        computed(
            v_us,
            "V",
            "computed: the boot path's hold, −(I_load·R_path + ΔV_boot)"
            if boot_holds
            else "computed: −(V_F + L_s·di/dt)",
        ),
        c_gd,
        model,
    )


def _boot_path(facts: StageFacts) -> tuple[float, float] | None:
    """(R_path, C_boot) of the bootstrap's charge path, where known."""
    tau, c_hold = facts._refill_tau, facts.c_hold
    if facts.stage.supply.kind != "bootstrap" or tau is None or c_hold is None:
        return None
    if not c_hold.value > 0:
        return None
    return tau / c_hold.value, c_hold.value


def _boot_path_hold(
    stage: DriveStage, facts: StageFacts, i_load: float, l_s: float
) -> float | None:
    """How far below the common the boot path holds the node while it carries the load
    current: I_load·R_path + the capacitor's rise (a bound on the undershoot's depth)."""
    path = _boot_path(facts)
    if path is None or not l_s > 0:
        return None
    r_path, c_hold = path
    return i_load * r_path + commutation.boot_path_overcharge(i_load, l_s, r_path, c_hold)


def check_switch_node_undershoot(stage: DriveStage, ctx: CheckContext) -> Iterator[Finding]:
    facts = ctx.facts
    if stage.mode != "switching" or facts.never_on:
        return
    edge = commutation_edge(stage, facts)
    if edge is None or not edge.l_s.value > 0:
        return
    found = _vs_finding(stage, ctx, edge)
    if found is not None:
        yield with_corner(found, facts, STRESS)
    boot = _boot_finding(stage, ctx, edge)
    if boot is not None:
        yield with_corner(boot, facts, STRESS)


def _common_values(edge: Commutation) -> dict[str, Value]:
    return {
        "v_undershoot": edge.v_undershoot,
        "undershoot_depth": computed(
            -edge.v_undershoot.value,
            "V",
            "computed: V_F + L_s·di/dt at the fastest point of the fall (an upper bound: "
            "the switch node's capacitance and any path across the loop's strays slow it "
            "further)",
        ),
        "l_s": edge.l_s,
        "di_dt": edge.di_dt,
        "i_load": edge.i_load,
        "v_f": edge.v_f,
        "r_off": edge.off.resistance,
        "c_iss": edge.c_iss,
        "v_plateau": edge.plateau,
        "vth": edge.vth,
        "g_m": edge.g_m,
        "t_fall": edge.t_fall,
        **({"c_gd": edge.c_gd} if edge.c_gd is not None else {}),
    }


def _derivation(edge: Commutation) -> tuple[str, ...]:
    return (
        (
            f"di/dt = {edge.di_dt.text()}: the fastest fall of the current, from the gate's "
            f"node with the feedback of the undershoot through C_gd {edge.c_gd.text()}, below "
            f"g_m·V_pl/(R_off·C_iss) = {edge.g_m.text()} × {edge.plateau.text()}/"
            f"({edge.off.resistance.text()} × {edge.c_iss.text()})"
            if edge.c_gd is not None and edge.model is not None
            else f"di/dt = g_m·V_pl/(R_off·C_iss) = {edge.g_m.text()} × "
            f"{edge.plateau.text()}/({edge.off.resistance.text()} × {edge.c_iss.text()}) = "
            f"{edge.di_dt.text()}"
        ),
        f"V_undershoot = −(V_F + L_s·di/dt) = −({edge.v_f.text()} + {edge.l_s.text()} × "
        f"{edge.di_dt.text()}) = {edge.v_undershoot.text()}",
    )


def _vs_finding(stage: DriveStage, ctx: CheckContext, edge: Commutation) -> Finding | None:
    facts = ctx.facts
    assert stage.driver is not None
    driver = stage.driver.device
    rated = facts.driver_value("vs_min", "V")
    if rated is not None:
        limit = Value(-abs(rated.value), "V", f"driver vs_min ({rated.origin})")
        severity = ctx.severity
    else:
        default = ctx.options["vs_min_default"]
        limit = Value(
            -abs(default),
            "V",
            "option vs_min_default: the short-transient figure many high-voltage half-bridge "
            f"drivers give (from memory); give {driver}'s vs_min",
        )
        severity = Severity.WARNING
    if edge.v_undershoot.value >= limit.value:
        return None
    room = abs(limit.value)
    r_off = edge.off.resistance.value
    if edge.model is not None:
        l_max = commutation.max_loop_inductance_with_feedback(
            edge.model, room, edge.v_f.value, r_off
        )
        r_min = commutation.min_turn_off_resistance_with_feedback(
            edge.model, room, edge.v_f.value, r_off, edge.l_s.value
        )
        how_l = "the L_s whose V_F + L_s·di/dt, the feedback counted, is |vs_min|"
        how_r = "the R_off whose V_F + L_s·di/dt, the feedback counted, is |vs_min|"
    else:
        l_max = commutation.max_loop_inductance(room, edge.v_f.value, edge.di_dt.value)
        r_min = commutation.min_turn_off_resistance(
            edge.g_m.value,
            edge.plateau.value,
            edge.c_iss.value,
            edge.l_s.value,
            room,
            edge.v_f.value,
        )
        how_l = "(|vs_min| − V_F)/(di/dt)"
        how_r = "g_m·V_pl·L_s/(C_iss·(|vs_min| − V_F))"
    values = {**_common_values(edge), "vs_min": limit}
    fixes = []
    if l_max > 0:
        l_max = previous_preferred(l_max, "E12")
        values["l_s_max"] = computed(l_max, "H", f"computed: {how_l}, the E12 value at or below it")
        fixes.append(
            f"cut the loop inductance ({', '.join(edge.strays)}: {edge.l_s.text()}) to at most "
            f"{_nh(l_max)}: the low side's source and the driver's common on one short, wide "
            "return, the driver's switch pin taken at the low side's drain"
        )
    off = edge.off
    budget = r_min - off.fixed
    if math.isfinite(budget) and budget > 0 and len(off.resistors) <= 1:
        chosen = next_preferred(budget, "E12")
        values["r_off_min"] = computed(r_min, "Ohm", f"computed: {how_r}")
        values["suggested_turn_off_resistor"] = computed(
            chosen,
            "Ohm",
            f"computed: the E12 value at or above R_off,min − {format_si(off.fixed, 'Ω')} "
            "(driver sink and internal gate resistance)",
        )
        which = f"raise {off.resistors[0]}" if off.resistors else "add a turn-off gate resistor"
        fixes.append(
            f"slow the turn-off: {which} to {format_si(chosen, 'Ω')} (R_off ≥ "
            f"{format_si(r_min, 'Ω')} in all), at the cost of turn-off loss and a later "
            "turn-off: lengthen the dead time to match (cross-conduction judges it)"
        )
    fixes.append(
        f"clamp the switch pin: a Schottky diode from {driver}'s common (anode) to its switch "
        "pin (cathode) at the pins, with a few ohms in series with the switch pin where the "
        "driver's datasheet allows"
    )
    message = (
        f"{stage.switch} turns off {edge.i_load.text()} into {edge.freewheel}: the current "
        f"falls at {edge.di_dt.text()} through {edge.l_s.text()} of loop inductance, and "
        f"{driver}'s switch pin swings up to {edge.v_undershoot.text()} against its common, past "
        f"its rating {limit.text()}: the driver can latch up or lose its high output's state"
    )
    fix = "; or ".join(fixes)
    derivation = (
        *_derivation(edge),
        f"against {driver}'s vs_min {limit.text()}",
    )
    return ctx.finding(driver, message, values, fix, derivation, severity)


def _boot_finding(stage: DriveStage, ctx: CheckContext, edge: Commutation) -> Finding | None:
    facts = ctx.facts
    cap = stage.supply.capacitor
    if stage.supply.kind != "bootstrap" or cap is None or facts.v_boot_max is None:
        return None
    path = _boot_path(facts)
    if path is None:
        return None
    r_path, c_hold = path
    limits: list[tuple[Value, str]] = []
    vgs_max = facts.ratings.get(facts.switch, "vgs_max")
    if vgs_max is not None:
        limits.append((vgs_max, f"{stage.switch}'s vgs_max"))
    vbs_max = facts.driver_value("vbs_max", "V")
    if vbs_max is not None and stage.driver is not None:
        limits.append((vbs_max, f"{stage.driver.device}'s vbs_max"))
    if not limits:
        return None
    limit, what = min(limits, key=lambda pair: pair[0].value)
    before = facts.v_boot_max.value
    extra = commutation.boot_path_overcharge(edge.i_load.value, edge.l_s.value, r_path, c_hold)
    peak = before + extra
    if peak <= limit.value or before > limit.value:
        return None  # within the rating; or over it already (gate-overvoltage's)
    room = limit.value - before
    values = {
        **_common_values(edge),
        "v_boot_undershoot": computed(peak, "V", "computed: V_boot,max + ΔV_boot"),
        "v_boot_max": facts.v_boot_max,
        "dv_boot": computed(
            extra,
            "V",
            "computed: I_load·√(L_s/C_boot)·exp(−ζ·φ(ζ)), the series L_s, R_path, C_boot",
        ),
        "r_boot_path": computed(r_path, "Ohm", "computed: series resistors + the diode's RS"),
        "v_limit": Value(limit.value, "V", f"{what} ({limit.origin})"),
    }
    fixes = []
    r_series = commutation.min_series_resistance(
        edge.i_load.value, edge.l_s.value, c_hold, r_path, room
    )
    if math.isfinite(r_series) and r_series > 0:
        chosen = next_preferred(r_series, "E12")
        values["suggested_series_resistor"] = computed(
            chosen,
            "Ohm",
            "computed: the E12 value at or above the resistance whose ΔV_boot is the room left",
        )
        fixes.append(
            f"put {format_si(chosen, 'Ω')} in series with the boot diode "
            f"{stage.supply.diode} (it slows the refresh: check the recharge)"
        )
    # ΔV_boot grows with L_s (as √L_s with little resistance, as L_s with much)
    l_ok = previous_preferred(edge.l_s.value * (room / extra) ** 2, "E12")
    values["l_s_max"] = computed(
        l_ok, "H", "computed: L_s·(room/ΔV_boot)² (a lower estimate), the E12 value at or below"
    )
    fixes.append(
        f"cut the loop inductance ({', '.join(edge.strays)}: {edge.l_s.text()}) to "
        f"{_nh(l_ok)} or less"
    )
    fixes.append("clamp the switch pin to the common with a Schottky diode at the driver's pins")
    message = (
        f"while {stage.driver.device if stage.driver else 'the driver'}'s switch pin swings "
        f"to {edge.v_undershoot.text()} as {stage.switch} turns off, the boot diode charges "
        f"{cap} {_v(extra)} higher, to {_v(peak)}, past {what} {limit.text()}"
    )
    fix = "; or ".join(fixes) + "."
    derivation = (
        *_derivation(edge),
        f"ΔV_boot = I_load·√(L_s/C_boot)·exp(−ζ·φ(ζ)) with R_path {format_si(r_path, 'Ω')}, "
        f"C_boot {format_si(c_hold, 'F')}: {_v(extra)}",
        f"V_boot = V_boot,max + ΔV_boot = {sum_line([(1, before), (1, extra)], 'V')} "
        f"against {what} {limit.text()}",
    )
    return ctx.finding(cap, message, values, fix, derivation)


CHECKS = {"switch-node-undershoot": check_switch_node_undershoot}
