"""Induced turn-on: the switch-node edge lifts the gate of the switch that is off.

While one switch of a leg turns on, the switch node slews at the rate its gate drive sets
(dv/dt = I_g/C_gd on the Miller plateau) and the other switch's C_gd pushes C_gd·dv/dt into
its gate. The path that holds that gate at its off level (driver sink, gate resistors, the
internal gate resistance) and its C_gs decide how far the gate rises
(``physics.dvdt.peak_induced_voltage``). Two edges of a recognised bridge leg are judged:
the low side off while the floating (high) side turns on, and the high side off while its
bridge partner turns on. A leg whose gate paths are not understood is left alone.
"""

from __future__ import annotations

import math
from collections.abc import Iterator
from dataclasses import dataclass

from drivelint.checks.base import CheckContext, Finding
from drivelint.checks.corners import STRESS, with_corner
from drivelint.checks.facts import StageFacts
from drivelint.circuit.model import GROUND, Device
from drivelint.diagnostics import Severity
from drivelint.netlist.values import format_si
from drivelint.physics import dvdt
from drivelint.physics import gate as gate_physics
from drivelint.physics.preferred import next_preferred, previous_preferred
from drivelint.physics.switching import gate_current_turn_on
from drivelint.ratings.values import Value, computed
from drivelint.stages.model import DriveStage

# Without a plateau from the parts library or from the model and the load current, the
# Miller plateau is taken this far above the threshold (power MOSFETs at moderate current:
# about 1–2 V above V_th, from memory; the lower end gives the faster, worse edge).
PLATEAU_OVERDRIVE_DEFAULT = 1.0
# A suggested negative turn-off bias is rounded to this step.
BIAS_STEP = 0.5
# Gate paths are followed through at most this many series resistors.
MAX_SERIES_STEPS = 4


def _v(value: float) -> str:
    return format_si(value, "V")


def _ohm(value: float) -> str:
    return format_si(value, "Ω")


@dataclass(frozen=True, slots=True)
class GatePathFigure:
    """One gate path (on or off) of a switch: its total resistance and its parts."""

    resistance: Value  # driver output + series resistors + internal gate resistance
    resistors: tuple[str, ...]  # the series gate resistors on it (the parts one can change)
    external: float  # their sum [Ω]
    fixed: float  # what a resistor change leaves: driver output + internal [Ω]
    level: Value  # the level the path drives the gate to, relative to the source [V]
    driver: str | None  # the driver IC or command source at its far end
    current_limit: Value | None = None  # the driver's rated output current, where given


@dataclass(frozen=True, slots=True)
class Switch:
    """What the rule needs of one switch of the leg."""

    device: Device
    c_gd: Value  # charge-equivalent over the swing
    c_gs: Value  # own C_gs plus capacitors across gate and source
    c_gs_external: tuple[str, ...]
    vth: Value


def _multiplier(device: Device) -> float:
    return float(device.multiplier) if device.multiplier else 1.0


def _internal_gate_resistance(facts: StageFacts, device: Device) -> tuple[float, str | None]:
    internal = facts.ratings.get(device, "rg_internal")
    if internal is not None:
        return internal.value, f"R_G,int {internal.text()} ({internal.origin})"
    model = device.model
    if model is not None and model.params.get("rg"):
        ohms = model.params["rg"] / _multiplier(device)
        return ohms, f"model RG {_ohm(ohms)}"
    return 0.0, None


def switch_figures(
    facts: StageFacts, device: Device, v_swing: float, v_gate: float
) -> Switch | None:
    """The capacitances and threshold of ``device`` over a drain swing of ``v_swing``,
    its gate at ``v_gate`` against its source; None when they are not known."""
    ratings = facts.ratings
    vth = ratings.get(device, "vth")
    if vth is None or v_swing <= 0:
        return None
    m = _multiplier(device)
    model = device.model
    params = model.params if model else {}
    width = device.params.get("w", 1.0)
    crss = ratings.get(device, "crss")
    qgd = ratings.get(device, "qgd")
    c_gd: Value | None = None
    # A capacitance given as such (C_rss, or the model's) comes before a charge converted
    # into one: Q_gd is specified at a test V_DS the parts key does not record.
    if crss is not None:
        c_gd = Value(crss.value * m, "F", f"C_rss {crss.text()} ({crss.origin})")
    elif model is not None and model.type == "vdmos" and "cgdmax" in params:
        low = params.get("cgdmin", params["cgdmax"])
        charge = gate_physics.vdmos_gate_drain_charge(
            v_gate, low, params["cgdmax"], params.get("a", 1.0)
        ) - gate_physics.vdmos_gate_drain_charge(
            v_gate - v_swing, low, params["cgdmax"], params.get("a", 1.0)
        )
        c_gd = computed(
            dvdt.charge_equivalent_capacitance(charge, v_swing) * m,
            "F",
            f"computed: the VDMOS C_gd of model {model.name} averaged by charge over V_DS "
            f"0–{_v(v_swing)}",
        )
    elif model is not None and params.get("cgdo"):
        c_gd = computed(params["cgdo"] * width * m, "F", f"computed: CGDO·W of model {model.name}")
    elif qgd is not None:
        c_gd = computed(
            dvdt.charge_equivalent_capacitance(qgd.value * m, v_swing),
            "F",
            f"computed: Q_gd/ΔV = {qgd.text()}/{_v(v_swing)} ({qgd.origin})",
        )
    if c_gd is None or c_gd.value <= 0:
        return None
    c_gs_own: Value | None = None
    qgs = ratings.get(device, "qgs")
    plateau = ratings.get(device, "vgs_plateau")
    if model is not None and model.type == "vdmos" and "cgs" in params:
        c_gs_own = Value(params["cgs"] * m, "F", f"model {model.name} CGS")
    elif model is not None and params.get("cgso"):
        c_gs_own = computed(
            params["cgso"] * width * m, "F", f"computed: CGSO·W of model {model.name}"
        )
    elif qgs is not None and plateau is not None and plateau.value > 0:
        c_gs_own = computed(
            qgs.value * m / plateau.value,
            "F",
            f"computed: Q_gs/V_plateau = {qgs.text()}/{plateau.text()}",
        )
    if c_gs_own is None:
        return None
    gate, source = device.net("g"), device.net("s")
    extra, names = 0.0, []
    for other in facts.by_net.get(gate or "", ()):
        if other.kind != "capacitor" or other.value is None or other.name == device.name:
            continue
        if set(other.nets) == {gate, source}:
            extra += other.value * other.multiplier
            names.append(other.name)
    c_gs = c_gs_own
    if extra:
        c_gs = computed(
            c_gs_own.value + extra,
            "F",
            f"computed: {c_gs_own.text()} ({c_gs_own.origin}) + {', '.join(names)} "
            f"{format_si(extra, 'F')}",
        )
    return Switch(device, c_gd, c_gs, tuple(names), vth)


def miller_plateau(
    facts: StageFacts, device: Device, vth: Value, current: Value | None = None
) -> Value:
    """The Miller plateau of the switch that turns on: parts vgs_plateau, else V_th plus
    the overdrive of the load current (``current``, else the condition load_current)
    through the model's square law, else a default."""
    found = facts.ratings.get(device, "vgs_plateau")
    if found is not None:
        return found
    load = current if current is not None else facts.condition("load_current")
    gfs = facts.ratings.get(device, "gfs")
    if load is not None and gfs is not None and gfs.value > 0:
        # a datasheet's g_fs is a linear slope at its test current (common practice)
        over = load.value / (gfs.value * _multiplier(device))
        return computed(
            vth.value + over,
            "V",
            f"computed: V_th + I_load/g_fs = {vth.text()} + {load.text()}/{gfs.text()} "
            f"({gfs.origin})",
        )
    model = device.model
    params = model.params if model else {}
    if load is not None and model is not None and params.get("kp"):
        beta = params["kp"] * _multiplier(device)
        if model.type != "vdmos":
            beta *= device.params.get("w", 1.0) / device.params.get("l", 1.0)
        over = math.sqrt(2.0 * load.value / beta)
        return computed(
            vth.value + over,
            "V",
            f"computed: V_th + √(2·I_load/β) = {vth.text()} + {_v(over)} (I_load "
            f"{load.text()} ({load.origin}), model {model.name} KP)",
        )
    return computed(
        vth.value + PLATEAU_OVERDRIVE_DEFAULT,
        "V",
        f"default: V_th {vth.text()} + {_v(PLATEAU_OVERDRIVE_DEFAULT)} (no vgs_plateau; "
        "plateaus sit about 1–2 V above V_th, from memory)",
    )


def _resistor(device: Device | None) -> float | None:
    if device is None or device.kind != "resistor" or device.value is None:
        return None
    return float(device.value) / _multiplier(device)


def _driver_resistance(
    facts: StageFacts, up: bool, level: float
) -> tuple[float, str, Value | None]:
    """The driver IC's output resistance (parts r_source / r_sink), else the level over its
    rated peak current (i_source / i_sink: a peak rated into a short, common practice),
    else 0 Ω (stated)."""
    key, current_key = ("r_source", "i_source") if up else ("r_sink", "i_sink")
    given = facts._driver_value(key, "Ohm")
    current = facts._driver_value(current_key, "A")
    if given is not None:
        return given.value, f"driver {key} {given.text()}", current
    if current is not None and current.value > 0 and level > 0:
        ohms = level / current.value
        return ohms, f"driver {_v(level)}/{current_key} {current.text()} = {_ohm(ohms)}", current
    return 0.0, f"driver {key} not known, taken as 0 Ω", None


def high_side_path(
    stage: DriveStage, facts: StageFacts, up: bool, level: Value, drive: float
) -> GatePathFigure | None:
    """The high side's on (``up``) or off path from the recognised pull-ups/pull-downs;
    ``level`` is where it drives the gate, ``drive`` the driver's swing (what its rated
    peak current is rated from)."""
    paths = stage.pullups if up else stage.pulldowns
    # off: to the source, or through a driver's VEE to a turn-off supply below it (the
    # level is then that supply's)
    wanted = "boot" if up else "source"
    if not up and any(p.returns_to == "negative" for p in paths):
        wanted = "negative"
    best: GatePathFigure | None = None
    for path in paths:
        if path.returns_to != wanted:
            continue
        ohms, resistors, parts, fixed = 0.0, [], [], 0.0
        driver = None
        limit: Value | None = None
        known = True
        for name in path.devices:
            device = facts.device(name)
            r = _resistor(device)
            if r is not None:
                ohms += r
                resistors.append(name)
                parts.append(f"{name} {_ohm(r)}")
            elif stage.driver is not None and name == stage.driver.device:
                r_drv, how, limit = _driver_resistance(facts, up, drive)
                ohms += r_drv
                fixed += r_drv
                parts.append(how)
                driver = name
            else:
                known = False  # a transistor or a switch on the path: resistance unknown
        if not known or driver is None:
            continue
        figure = _path_figure(
            facts, facts.switch, ohms, fixed, resistors, parts, level, driver, limit
        )
        if best is None or figure.resistance.value < best.resistance.value:
            best = figure
    return best


def _path_figure(
    facts: StageFacts,
    device: Device,
    ohms: float,
    fixed: float,
    resistors: list[str],
    parts: list[str],
    level: Value,
    driver: str,
    limit: Value | None = None,
) -> GatePathFigure:
    internal, how = _internal_gate_resistance(facts, device)
    if how:
        parts.append(how)
    total = ohms + internal
    return GatePathFigure(
        computed(total, "Ohm", "computed: " + " + ".join(parts) if parts else "no resistance"),
        tuple(resistors),
        ohms - fixed,
        fixed + internal,
        level,
        driver,
        limit,
    )


def partner_paths(
    stage: DriveStage, facts: StageFacts, partner: Device
) -> tuple[GatePathFigure, GatePathFigure] | None:
    """The low-side partner's (on, off) gate paths: series resistors from its gate to the
    low-side output of the stage's driver IC, or to an independent source that commands it.
    None for anything else (a totem pole, a buffer, a behavioural gate): not understood."""
    gate, source = partner.net("g"), partner.net("s")
    if gate is None or source is None:
        return None
    rails = facts.circuit.rails
    v_source = 0.0 if source == GROUND else rails.get(source)
    if v_source is None:
        return None
    driver = stage.driver
    low_out = driver.pins.get("low_out") if driver else None
    net, ohms, seen = gate, 0.0, {partner.name}
    resistors: list[str] = []
    for _ in range(MAX_SERIES_STEPS + 1):
        if driver is not None and net == low_out:
            supply_net = driver.pins.get("supply", "")
            supply = rails.get(supply_net)
            where = f"driver {driver.device} {supply_net}"
            aux = facts.v_aux_max
            if supply is None and stage.supply.kind == "bootstrap" and aux is not None:
                # a supply pin behind a filter or a soft-started rail: the rail that feeds
                # the boot diode is the driver's supply in a half-bridge driver's layout
                supply = aux.value
                where = f"{aux.origin} (the rail that feeds the boot diode, for {supply_net})"
            ground = driver.pins.get("ground")
            low = 0.0 if ground in (None, GROUND) else rails.get(ground or "")
            if supply is None or low is None:
                return None
            high = supply - v_source
            r_up, up_how, up_limit = _driver_resistance(facts, True, high - (low - v_source))
            r_dn, dn_how, dn_limit = _driver_resistance(facts, False, high - (low - v_source))
            on_level = Value(high, "V", f"{where} against {partner.name}'s source")
            # A driver output returns to its own ground pin at the lowest; a ground pin above
            # the low side's source (a logic ground beside a power return) says nothing of
            # the return, which is then taken at the source.
            off_level = (
                Value(low - v_source, "V", f"driver {driver.device} ground {ground}")
                if low < v_source
                else Value(0.0, "V", f"{partner.name}'s source (driver {driver.device} low)")
            )
            return (
                _partner_figure(
                    facts, partner, ohms, r_up, up_how, resistors, on_level, driver.device, up_limit
                ),
                _partner_figure(
                    facts,
                    partner,
                    ohms,
                    r_dn,
                    dn_how,
                    resistors,
                    off_level,
                    driver.device,
                    dn_limit,
                ),
            )
        onward = [d for d in facts.by_net.get(net, ()) if d.name not in seen]
        command = [
            d
            for d in onward
            if d.kind == "vsource" and d.waveform is not None and _other(d, net) in (GROUND, source)
        ]
        if len(command) == 1 and command[0].waveform is not None:
            wave = command[0].waveform
            sign = 1.0 if command[0].net("p") == net else -1.0
            levels = sorted((sign * wave.high(), sign * wave.low()))
            where = f"command source {command[0].name}"
            on_level = Value(levels[1], "V", f"{where} high level")
            off_level = Value(levels[0], "V", f"{where} low level")
            return (
                _partner_figure(
                    facts, partner, ohms, 0.0, f"{where} 0 Ω", resistors, on_level, command[0].name
                ),
                _partner_figure(
                    facts, partner, ohms, 0.0, f"{where} 0 Ω", resistors, off_level, command[0].name
                ),
            )
        series = [
            d
            for d in onward
            if _resistor(d) is not None and source not in d.nets and GROUND not in d.nets
        ]
        others = [
            d
            for d in onward
            if d not in series and not (d.kind in ("resistor", "capacitor") and source in d.nets)
        ]
        if len(series) != 1 or others:
            return None
        step = series[0]
        resistors.append(step.name)
        ohms += _resistor(step) or 0.0
        seen.add(step.name)
        far = _other(step, net)
        if far is None:
            return None
        net = far
    return None


def _other(device: Device, net: str) -> str | None:
    return next((n for n in device.nets if n != net), None)


def _partner_figure(
    facts: StageFacts,
    partner: Device,
    ohms: float,
    r_driver: float,
    driver_how: str,
    resistors: list[str],
    level: Value,
    driver: str,
    limit: Value | None = None,
) -> GatePathFigure:
    parts = [f"{name} {_ohm(_resistor(facts.device(name)) or 0.0)}" for name in resistors]
    parts.insert(0, driver_how)
    return _path_figure(
        facts, partner, ohms + r_driver, r_driver, list(resistors), parts, level, driver, limit
    )


@dataclass(frozen=True, slots=True)
class Edge:
    """One edge of the leg: ``aggressor`` turns on, ``victim`` is held off."""

    victim: Switch
    victim_off: GatePathFigure
    aggressor: Switch
    aggressor_on: GatePathFigure
    plateau: Value
    v_swing: Value
    i_gate: Value
    dv_dt: Value

    @property
    def rate_given(self) -> bool:
        """The edge rate is a condition, not the gate drive's estimate."""
        return self.dv_dt.origin.startswith("condition")


def _edge(
    facts: StageFacts,
    victim: Device,
    victim_off: GatePathFigure,
    aggressor: Device,
    aggressor_on: GatePathFigure,
) -> Edge | None:
    swing = facts.v_switched
    if swing <= 0 or facts.v_bus is None:
        return None
    v_swing = computed(swing, "V", f"computed: bus {facts.v_bus.text()} − {facts.v_sw_low.text()}")
    drive = aggressor_on.level.value
    off = victim_off.level.value
    victim_sw = switch_figures(facts, victim, swing, off)
    if victim_sw is None:
        return None
    vth = facts.ratings.get(aggressor, "vth")
    if vth is None:
        return None
    plateau = miller_plateau(facts, aggressor, vth)
    aggressor_sw = switch_figures(facts, aggressor, swing, plateau.value)
    if aggressor_sw is None or drive <= plateau.value or aggressor_on.resistance.value <= 0:
        return None
    current = gate_current_turn_on(drive, plateau.value, aggressor_on.resistance.value)
    how = (
        f"computed: (V_drive − V_plateau)/R_on = ({aggressor_on.level.text()} − "
        f"{plateau.text()})/{aggressor_on.resistance.text()}"
    )
    limit = aggressor_on.current_limit
    if limit is not None and limit.value < current:
        current = limit.value
        how += f", at most the driver's rated {limit.text()}"
    i_gate = computed(current, "A", how)
    rate = dvdt.plateau_slew_rate(current, aggressor_sw.c_gd.value)
    if not (math.isfinite(rate) and rate > 0):
        return None  # an edge that does not slew (a capacitance beyond any real part)
    dv_dt = computed(
        rate,
        "V/s",
        f"computed: I_g/C_gd = {i_gate.text()}/{aggressor_sw.c_gd.text()} of {aggressor.name}",
    )
    given = facts.condition("dv_dt")
    if given is not None:
        # an edge rate known from the bench or set by a snubber wins over the gate's estimate
        dv_dt = Value(given.value, "V/s", f"condition dv_dt ({given.origin})")
    return Edge(victim_sw, victim_off, aggressor_sw, aggressor_on, plateau, v_swing, i_gate, dv_dt)


def edges(stage: DriveStage, facts: StageFacts) -> list[Edge]:
    """The leg's two edges that the rule can judge (none, one or both)."""
    partner_name = next(
        (r.devices[0] for r in stage.refresh if r.kind == "low-side switch" and r.devices), None
    )
    partner = facts.device(partner_name)
    if partner is None or partner.kind != "mosfet" or stage.channel != "nmos":
        return []
    paths = partner_paths(stage, facts, partner)
    drive = facts.v_boot_max
    out: list[Edge] = []
    if paths is None or drive is None:
        return out
    partner_on, partner_off = paths
    high_on = high_side_path(stage, facts, True, drive, drive.value)
    high_off = high_side_path(stage, facts, False, _high_off_level(stage, facts), drive.value)
    currents = edge_currents(stage, facts)
    # the high side's turn-on swings the node unless the load current flows into it then
    high_hard = currents is None or currents[0] > 0 or facts.modulated
    low_hard = (currents is not None and currents[1] < 0) or (
        currents is None and _partner_edge_hard(stage, facts)
    )
    if high_on is not None and high_hard:
        found = _edge(facts, partner, partner_off, facts.switch, high_on)
        if found is not None:
            out.append(found)
    if high_off is not None and partner_on.level.value > 0 and low_hard:
        found = _edge(facts, facts.switch, high_off, partner, partner_on)
        if found is not None:
            out.append(found)
    return out


def _high_off_level(stage: DriveStage, facts: StageFacts) -> Value:
    """Where the high side's pull-down holds its gate: the source, or a turn-off supply
    below it at its nearest to the source (the low end of its tolerance: the least help
    against an induced rise)."""
    through = any(p.returns_to == "negative" for p in stage.pulldowns)
    if facts.v_off_nearest is None or not through:
        return Value(0.0, "V", f"the pull-down returns to {stage.switch}'s source")
    return facts.v_off_nearest


def edge_currents(stage: DriveStage, facts: StageFacts) -> tuple[float, float] | None:
    """The load current out of the switch node as the high side turns on (its lowest, at
    the end of the off-time) and as the low side turns on (its highest), for a node whose
    load is one inductor into resistors (and capacitors) to fixed levels; None otherwise.

    ``physics.dvdt.load_current_at_edges`` gives the two currents. A current out of the
    node at the high side's turn-on must be taken from the bus by it (a hard edge); a current
    into the node at the low side's turn-on, likewise by the low side. A modulated command
    (the duty is the loop's) is not estimated.
    """
    load = inductor_load(stage, facts)
    if load is None or facts.v_bus is None or facts.duty_max is None or facts.fsw is None:
        return None
    henries, v_ref, conductance, farads = load
    bus, low = facts.v_bus.value, facts.v_sw_low.value
    currents = dvdt.load_current_at_edges(
        bus, low, facts.duty_max.value, facts.fsw.value, henries, v_ref, conductance
    )
    # Into resistors alone (no capacitor holds the far end over a period), the current can
    # never pass the ones the two states approach, (V − V_ref)·G: a triangle beyond them
    # (an inductor small against its load) is outside its range, and is not estimated.
    held = conductance > 0 and farads / conductance >= 1.0 / facts.fsw.value
    bound = max(abs(bus - v_ref), abs(low - v_ref)) * conductance
    if conductance > 0 and not held and max(map(abs, currents)) > bound * (1 + 1e-9):
        return None
    return currents


def inductor_load(stage: DriveStage, facts: StageFacts) -> tuple[float, float, float, float] | None:
    """(L [H], V_ref [V], G [S], C [F]) of a switch node whose load is one inductor into
    resistors and capacitors (C in all) to fixed levels, with a steady duty and frequency;
    None otherwise."""
    if facts.modulated or facts.v_bus is None:
        return None
    duty, fsw = facts.duty_max, facts.fsw
    if duty is None or fsw is None or not 0 < duty.value < 1 or fsw.value <= 0:
        return None
    rails = facts.circuit.rails
    inductors = [
        d
        for d in facts.by_net.get(stage.source, ())
        if d.kind == "inductor" and d.value is not None and d.value > 0
    ]
    if len(inductors) != 1:
        return None
    inductor = inductors[0]
    henries = float(inductor.value or 0.0)
    far = _other(inductor, stage.source)
    if far is None or far == GROUND or far in rails:
        return None
    conductance, pulled, farads = 0.0, 0.0, 0.0
    for device in facts.by_net.get(far, ()):
        if device.name == inductor.name:
            continue
        end = _other(device, far)
        level = 0.0 if end == GROUND else rails.get(end or "")
        if device.kind not in ("resistor", "capacitor") or level is None:
            return None
        if device.kind == "resistor":
            ohms = _resistor(device)
            if not ohms:
                return None
            conductance += 1.0 / ohms
            pulled += level / ohms
        else:
            farads += (device.value or 0.0) * device.multiplier
    v_ref = pulled / conductance if conductance else 0.0
    return henries, v_ref, conductance, farads


def _partner_edge_hard(stage: DriveStage, facts: StageFacts) -> bool:
    """Whether the low side's turn-on swings the node: only where the load current reverses
    each cycle, a load returned between the rails of a split supply (a class-D output).
    A load to the bottom of the leg (a buck's output) carries its current out of the node,
    so the low side turns on after its body diode has brought the node down and makes no
    edge; a load to another leg's node (an H-bridge) reverses only with the other leg's
    command, and is not judged (nor is reversed current at light load)."""
    low = facts.v_sw_low.value
    top = facts.v_bus.value if facts.v_bus else low
    for refresh in stage.refresh:
        if refresh.kind not in ("load", "inductor-load"):
            continue
        ref = refresh.reference
        level = 0.0 if ref in (None, GROUND) else facts.circuit.rails.get(ref or "")
        if level is not None and low < level < top:
            return True
    return False


def _peak(edge: Edge, r_off: float, c_gs: float | None = None, rate: float | None = None) -> float:
    return dvdt.peak_induced_voltage(
        edge.victim.c_gd.value,
        edge.victim.c_gs.value if c_gs is None else c_gs,
        r_off,
        edge.dv_dt.value if rate is None else rate,
        edge.v_swing.value,
    )


def check_induced_turn_on(stage: DriveStage, ctx: CheckContext) -> Iterator[Finding]:
    facts = ctx.facts
    if stage.mode != "switching" or facts.never_on:
        return
    margin = ctx.options["margin"]
    for edge in edges(stage, facts):
        finding = _judge(edge, ctx, margin)
        if finding is not None:
            yield with_corner(finding, facts, STRESS, frozenset({"bus", "supply"}))


def _judge(edge: Edge, ctx: CheckContext, margin: float) -> Finding | None:
    victim, off = edge.victim, edge.victim_off
    c_gd, c_gs, r_off = victim.c_gd.value, victim.c_gs.value, off.resistance.value
    rate, swing = edge.dv_dt.value, edge.v_swing.value
    induced = _peak(edge, r_off)
    v_off = off.level.value
    peak = v_off + induced
    vth = victim.vth.value
    limit = vth - margin
    if peak < limit:
        return None
    severity = ctx.severity if peak >= vth else Severity.WARNING
    t_edge = dvdt.edge_time(swing, rate)
    tau = r_off * (c_gs + c_gd)
    resistive = dvdt.resistive_limit(c_gd, r_off, rate)
    divider = dvdt.divider_limit(c_gd, c_gs, swing)
    name, other = victim.device.name, edge.aggressor.device.name
    allowed = limit - v_off  # what the induced rise may reach, below the margin
    r_max = dvdt.largest_off_resistance(c_gd, c_gs, rate, swing, allowed)
    values: dict[str, Value] = {
        "vgs_peak": computed(peak, "V", "computed: V_off + V_induced"),
        "v_induced": computed(
            induced,
            "V",
            "computed: C_gd·(dv/dt)·R_off·(1 − exp(−t_edge/(R_off·(C_gs + C_gd))))",
        ),
        "dv_dt": edge.dv_dt,
        "vth": victim.vth,
        "v_limit": computed(limit, "V", f"computed: V_th − margin {_v(margin)}"),
        "margin": Value(margin, "V", "option margin"),
        "v_off": off.level,
        "c_gd": victim.c_gd,
        "c_gs": victim.c_gs,
        "r_off": off.resistance,
        "r_off_max": computed(
            r_max, "Ohm", "computed: the off-path resistance whose peak reaches V_th − margin"
        ),
        "c_gd_partner": edge.aggressor.c_gd,
        "r_on_partner": edge.aggressor_on.resistance,
        "v_drive_partner": edge.aggressor_on.level,
        "v_plateau_partner": edge.plateau,
        "i_gate_partner": edge.i_gate,
        "v_swing": edge.v_swing,
        "t_edge": computed(t_edge, "s", "computed: ΔV/(dv/dt)"),
        "tau_gate": computed(tau, "s", "computed: R_off·(C_gs + C_gd)"),
        "v_resistive": computed(resistive, "V", "computed: C_gd·(dv/dt)·R_off"),
        "v_divider": computed(divider, "V", "computed: ΔV·C_gd/(C_gd + C_gs)"),
    }
    # the gate resistor nearest the gate, else the switch itself (its hold is missing)
    device = off.resistors[0] if off.resistors else name
    where = (
        f"through {', '.join(off.resistors)} and {off.driver}"
        if off.resistors
        else f"by {off.driver} alone"
    )
    if peak >= vth:
        what = "reaches its threshold"
        then = "it conducts briefly across the leg (shoot-through)"
    else:
        what = f"comes within {_v(vth - peak)} of its threshold"
        then = "a hotter switch's lower threshold or a faster part leaves no margin"
    message = (
        f"{name} is off while {other} turns on: the switch-node edge of "
        f"{edge.dv_dt.text()} through its C_gd {victim.c_gd.text()} lifts its "
        f"gate to {_v(peak)}, held {where} ({off.resistance.text()}), and {what} "
        f"{victim.vth.text()}: {then}"
    )
    budget = r_max - off.fixed
    if len(off.resistors) == 1 and budget > 0 and math.isfinite(budget):
        values["suggested_gate_resistor"] = computed(
            previous_preferred(budget, "E12"),
            "Ohm",
            f"computed: the E12 value at or below R_off,max − {_ohm(off.fixed)} (driver and "
            "internal gate resistance)",
        )
    fix = _fix(edge, r_max, allowed, margin)
    rate_line = (
        f"dv/dt = {edge.dv_dt.text()} ({edge.dv_dt.origin})"
        if edge.rate_given
        else f"I_g = {edge.i_gate.text()} ({edge.i_gate.origin}); "
        f"dv/dt = I_g/C_gd({other}) = {edge.dv_dt.text()}"
    )
    derivation = (
        f"{rate_line}; t_edge = ΔV/(dv/dt) = {_v(swing)}/{edge.dv_dt.text()} = "
        f"{format_si(t_edge, 's')}",
        f"τ = R_off·(C_gs + C_gd) = {off.resistance.text()} × ({victim.c_gs.text()} + "
        f"{victim.c_gd.text()}) = {format_si(tau, 's')}",
        f"V_induced = C_gd·(dv/dt)·R_off·(1 − exp(−t_edge/τ)) = {_v(induced)} "
        f"(limits: C_gd·(dv/dt)·R_off = {_v(resistive)}, ΔV·C_gd/(C_gd + C_gs) = {_v(divider)})",
        f"V_GS,peak = V_off + V_induced = {off.level.text()} + {_v(induced)} = {_v(peak)} "
        f"against V_th − margin = {_v(limit)}",
    )
    return ctx.finding(device, message, values, fix=fix, derivation=derivation, severity=severity)


def _fix(edge: Edge, r_max: float, allowed: float, margin: float) -> str:
    victim, off = edge.victim, edge.victim_off
    name = victim.device.name
    options: list[str] = []
    budget = r_max - off.fixed
    if off.resistors and budget > 0 and math.isfinite(budget):
        value = previous_preferred(budget, "E12")
        single = off.resistors[0] if len(off.resistors) == 1 else " + ".join(off.resistors)
        options.append(
            f"lower {single} to {_ohm(value)} or less (the off path may total "
            f"{_ohm(r_max)}; {_ohm(off.fixed)} of it is the driver and the internal gate "
            "resistance)"
        )
        left = (
            f"leaves {_ohm(off.fixed)} ({_v(_peak(edge, off.fixed))} induced) plus the diode's "
            "forward drop"
            if off.fixed > 0
            else "leaves only the diode's forward drop (about 0.6 V) on the off path"
        )
        options.append(
            f"or, to keep {single} for the turn-on, a turn-off diode across it (cathode "
            f"towards the driver), which {left}"
        )
    elif off.resistors:
        single = " + ".join(off.resistors)
        options.append(
            f"take {single} out of the off path with a turn-off diode across it (cathode "
            "towards the driver): the driver and the internal gate resistance alone "
            f"({_ohm(off.fixed)}) already exceed the {_ohm(r_max)} the off path may have"
        )
    elif budget > 0:
        options.append(
            f"hold the gate of {name} with a stronger sink: the off path may total at most "
            f"{_ohm(r_max)} (it is {off.resistance.text()})"
        )
    c_add = dvdt.gate_source_capacitance_needed(
        victim.c_gd.value,
        victim.c_gs.value,
        off.resistance.value,
        edge.dv_dt.value,
        edge.v_swing.value,
        allowed,
    )
    if c_add is not None and c_add > 0:
        chosen = next_preferred(c_add, "E12")
        c_iss = victim.c_gs.value + victim.c_gd.value
        ratio = (c_iss + chosen) / c_iss
        slower = f"{(ratio - 1) * 100:.0f} % longer" if ratio < 1.5 else f"{ratio:.2g}× as long"
        options.append(
            f"or a {format_si(chosen, 'F')} capacitor from gate to source of {name}: its gate "
            f"then holds {format_si(c_iss + chosen, 'F')} instead of {format_si(c_iss, 'F')}, so "
            f"its own turn-on and turn-off delays become about {slower}, and its driver "
            "delivers that much more charge"
        )
    bias = victim.vth.value - margin - _peak(edge, off.resistance.value)
    if bias < 0:
        # in half-volt steps: a split driver supply is a few volts, not millivolts
        step = -BIAS_STEP * math.ceil(-bias / BIAS_STEP)
        options.append(
            f"or a turn-off bias of {_v(step)} or lower on {name}'s gate (a split driver supply; "
            f"{_v(bias)} is the least that holds it)"
        )
    rate = None if edge.rate_given else _allowed_rate(edge, allowed)
    if rate is not None:
        on = edge.aggressor_on
        needed = on.resistance.value * edge.dv_dt.value / rate
        extra = needed - on.fixed
        if on.resistors and extra > on.external:
            value = next_preferred(extra, "E12")
            options.append(
                f"or turn {edge.aggressor.device.name} on more slowly: its on path "
                f"({', '.join(on.resistors)}) of {_ohm(value)} or more gives at most "
                f"{rate * 1e-9:.3g} V/ns, an edge of "
                f"{format_si(edge.v_swing.value / rate, 's')} instead of "
                f"{format_si(edge.v_swing.value / edge.dv_dt.value, 's')} (more switching "
                "loss)"
            )
        elif not on.resistors:
            value = next_preferred(max(needed - on.fixed, 1e-3), "E12")
            options.append(
                f"or turn {edge.aggressor.device.name} on more slowly through a "
                f"{_ohm(value)} gate resistor (at most {rate * 1e-9:.3g} V/ns, an edge of "
                f"{format_si(edge.v_swing.value / rate, 's')})"
            )
    if not options:
        options.append(
            f"hold the gate of {name} off more firmly: a lower off-path resistance, a negative "
            "turn-off bias, or a slower edge of the other switch"
        )
    text = "; ".join(options).removeprefix("or ")
    return text[0].upper() + text[1:]


def _allowed_rate(edge: Edge, allowed: float) -> float | None:
    """The edge rate whose peak stays at ``allowed`` (the peak grows with the rate)."""
    if allowed <= 0:
        return None
    r = edge.victim_off.resistance.value
    if (
        dvdt.divider_limit(edge.victim.c_gd.value, edge.victim.c_gs.value, edge.v_swing.value)
        <= allowed
    ):
        return None
    low, high = edge.dv_dt.value * 1e-6, edge.dv_dt.value
    if not low > 0:
        return None  # a rate so small its millionth underflows: no edge to slow
    if _peak(edge, r, rate=high) <= allowed:
        return None
    for _ in range(200):
        middle = math.sqrt(low) * math.sqrt(high)  # no underflow of the product
        if _peak(edge, r, rate=middle) > allowed:
            high = middle
        else:
            low = middle
        if high / low < 1 + 1e-9:
            break
    return low


CHECKS = {"induced-turn-on": check_induced_turn_on}
