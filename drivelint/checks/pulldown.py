"""Gate pull-down: does a passive path hold a floating switch off while its driver is unpowered?

A driver's sink, a level shifter's transistor or a behavioural driver holds the gate low
only while it is powered. At power-up (the bus rising before the bootstrap charges, the
driver's VCC missing, a controller still in reset) the gate is held by whatever passive
parts tie it to the switch's own source — or by nothing, and then the bus step couples
onto it through C_gd. This rule finds those passive paths (resistors and inductors from
the gate, a bounded number of steps), works out where they hold the gate with the floating
supply charged and every active part off, and computes what the bus step induces on a gate
that nothing holds.
"""

from __future__ import annotations

from collections.abc import Iterator
from dataclasses import dataclass

from drivelint.checks.base import CheckContext, Finding
from drivelint.checks.corners import STRESS, with_corner
from drivelint.checks.facts import StageFacts
from drivelint.circuit.model import GROUND
from drivelint.diagnostics import Severity
from drivelint.netlist.values import format_si
from drivelint.physics import gate as gate_physics
from drivelint.physics.preferred import preferred_values
from drivelint.ratings.values import Value, computed
from drivelint.stages.model import DriveStage

# Passive parts followed from the gate; everything else (transistors, switches, drivers,
# behavioural sources) is active and off when unpowered.
_PASSIVE_KINDS = frozenset({"resistor", "inductor"})
MAX_HOLD_STEPS = 4  # series parts followed from the gate (gate stopper, divider, pull-up)
# Above this a resistor is a leakage figure, not a hold: gate leakage of 100 nA at 20 V is
# 200 MΩ (common practice: datasheets give I_GSS of 10–100 nA).
HOLD_MAX_OHMS = 100e6
# Gate–source resistors are usually 10 kΩ–100 kΩ (common practice); a smaller one is
# suggested only when the bus edge needs it, down to this.
FIX_HIGHEST, FIX_LOWEST = 100e3, 100.0
FIX_SERIES = "E12"


def _v(value: float) -> str:
    return format_si(value, "V")


@dataclass(frozen=True, slots=True)
class Anchor:
    """A net the gate reaches through passive parts, and where it sits against the source's
    low level with the floating supply charged (``None``: the source itself)."""

    net: str
    ohms: float
    devices: tuple[str, ...]
    volts: float  # against the source at its low level
    what: str
    rides: bool = False  # moves with the source (the source itself, a floating supply)


def passive_reach(stage: DriveStage, facts: StageFacts) -> dict[str, tuple[float, tuple[str, ...]]]:
    """Nets the gate reaches through resistors and inductors (at most ``MAX_HOLD_STEPS``
    in series), each with the series resistance of its cheapest path and its parts. The
    search stops at the source, the boot net, ground and the rails."""
    stops = {stage.source, GROUND, *facts.circuit.rails}
    if stage.supply.boot_net:
        stops.add(stage.supply.boot_net)
    best: dict[str, tuple[float, tuple[str, ...]]] = {stage.gate: (0.0, ())}
    frontier = [stage.gate]
    for _ in range(MAX_HOLD_STEPS):
        following = []
        for net in frontier:
            ohms, path = best[net]
            for device in facts.by_net.get(net, ()):
                if device.kind not in _PASSIVE_KINDS or device.behaviour is not None:
                    continue
                if device.name in path or len(device.nets) != 2:
                    continue
                step = 0.0
                if device.kind == "resistor":
                    if device.value is None or device.value <= 0:
                        continue
                    step = device.value / device.multiplier
                far = next((n for n in device.nets if n != net), None)
                if far is None or ohms + step > HOLD_MAX_OHMS:
                    continue
                if far in best and best[far][0] <= ohms + step:
                    continue
                best[far] = (ohms + step, (*path, device.name))
                if far not in stops:
                    following.append(far)
        frontier = following
    best.pop(stage.gate)
    return best


def anchors(stage: DriveStage, facts: StageFacts) -> list[Anchor]:
    """The held nets among the passive reach, with their levels against the source."""
    low = facts.v_sw_low.value
    found = []
    for net, (ohms, devices) in sorted(passive_reach(stage, facts).items()):
        if net == stage.source:
            found.append(Anchor(net, ohms, devices, 0.0, "the switch's source", rides=True))
        elif net == stage.supply.boot_net:
            boot = facts.v_boot0
            level = boot.value if boot is not None else 0.0
            supply = stage.supply
            if supply.kind == "charge-pump" and not supply.riding:
                # a reservoir to ground: its output stays put while the source moves
                what = f"the pump output {net}"
                found.append(Anchor(net, ohms, devices, level + facts.v_switched, what))
            else:
                what = f"the floating supply's net {net}"
                found.append(Anchor(net, ohms, devices, level, what, rides=True))
        elif net == GROUND:
            found.append(Anchor(net, ohms, devices, -low, "ground"))
        elif net in facts.circuit.rails:
            volts = facts.circuit.rails[net]
            if volts is not None:
                found.append(Anchor(net, ohms, devices, volts - low, f"the rail {net}"))
    return found


def driver_hold(stage: DriveStage, facts: StageFacts) -> Value | None:
    """The driver's own passive hold of its high output (parts ``r_hold_unpowered``), when
    the gate reaches that output through passive parts and the output returns to the
    switch's source."""
    driver = stage.driver
    if driver is None or driver.pins.get("switch") != stage.source:
        return None
    output = driver.pins.get("high_out")
    if output is None:
        return None
    reach = passive_reach(stage, facts)
    if output != stage.gate and output not in reach:
        return None
    held = facts._driver_value("r_hold_unpowered", "Ohm")
    if held is None:
        return None
    series = reach[output][0] if output in reach else 0.0
    return Value(held.value + series, "Ohm", held.origin)


def held_level(found: list[Anchor]) -> float:
    """V_GS the passive paths set with the supply charged: the resistive divider of the
    anchors (an inductor-only path counts as a resistance of zero)."""
    wires = [a for a in found if a.ohms == 0.0]
    if wires:
        return min(a.volts for a in wires)
    conductance = sum(1.0 / a.ohms for a in found)
    return sum(a.volts / a.ohms for a in found) / conductance


@dataclass(frozen=True, slots=True)
class GateCapacitances:
    """The gate's capacitances as a bus step sees them."""

    c_gd: Value  # averaged over the bus step
    c_gs: Value  # with the capacitors on the gate that the step does not move
    # a VDMOS model's C_gd curve (CGDMIN, CGDMAX, A, and the C_gd added outside the model),
    # which the resistor sizing follows through the ramp
    vdmos: tuple[float, float, float, float] | None = None

    def ramp_peak(self, delta_v: float, rise: float, ohms: float) -> float:
        """The induced peak with ``ohms`` from gate to source for a bus ramp."""
        if self.vdmos is None:
            return gate_physics.induced_gate_voltage_ramp(
                delta_v, rise, self.c_gd.value, self.c_gs.value, ohms
            )
        lo, hi, a, extra = self.vdmos
        # capacitance added outside the model joins C_gs's side or, to the drain, both ends
        # of the curve
        return gate_physics.induced_gate_voltage_ramp_vdmos(
            delta_v, rise, self.c_gs.value, lo + extra, hi + extra, a, ohms
        )


def capacitances(stage: DriveStage, facts: StageFacts, delta_v: float) -> GateCapacitances | None:
    """C_gd over the step and C_gs of the switch, from its model card, plus the capacitors
    on its gate (to the drain: C_gd's side; to the source or ground: C_gs's side)."""
    switch = facts.switch
    model = switch.model
    params = model.params if model is not None else {}
    m = switch.multiplier
    if model is not None and model.type == "vdmos" and "cgs" in params:
        lo = params.get("cgdmin", params.get("cgdmax", 0.0))
        hi = params.get("cgdmax", 0.0)
        c_gd = gate_physics.vdmos_average_gate_drain_capacitance(
            delta_v, lo, hi, params.get("a", 1.0)
        )
        c_gs = params["cgs"]
        how_gd = (
            f"computed: VDMOS C_gd of model {model.name} averaged over the drain rising "
            f"{_v(delta_v)} (CGDMAX {format_si(hi, 'F')}, CGDMIN {format_si(lo, 'F')})"
        )
        how_gs = f"model {model.name} CGS"
        curve: tuple[float, float, float] | None = (lo * m, hi * m, params.get("a", 1.0))
    elif model is not None and ("cgdo" in params or "cgso" in params):
        width = switch.params.get("w", 1.0)
        c_gd, c_gs = params.get("cgdo", 0.0) * width, params.get("cgso", 0.0) * width
        how_gd = f"computed: model {model.name} CGDO × W (overlap, constant with voltage)"
        how_gs = f"model {model.name} CGSO × W"
        curve = None
    else:
        return None
    c_gd, c_gs = c_gd * m, c_gs * m
    drain_side, source_side = [], []
    for device in facts.by_net.get(stage.gate, ()):
        if device.kind != "capacitor" or device.value is None or device.behaviour is not None:
            continue
        far = next((n for n in device.nets if n != stage.gate), None)
        value = device.value * device.multiplier
        if far == stage.drain:
            c_gd += value
            drain_side.append(device.name)
        elif far in (stage.source, GROUND):
            c_gs += value
            source_side.append(device.name)
    outside = sum(
        d.value * d.multiplier
        for d in facts.by_net.get(stage.gate, ())
        if d.name in drain_side and d.value is not None
    )
    if drain_side:
        how_gd += f", + {', '.join(drain_side)}"
    if source_side:
        how_gs += f", + {', '.join(source_side)}"
    if c_gd <= 0 or c_gs + c_gd <= 0:
        return None
    return GateCapacitances(
        computed(c_gd, "F", how_gd),
        Value(c_gs, "F", how_gs),
        (*curve, outside) if curve is not None else None,
    )


def suggest_resistor(
    delta_v: float, rise: float, caps: GateCapacitances, bound: float
) -> tuple[float, float] | None:
    """The largest preferred resistor from ``FIX_HIGHEST`` down to ``FIX_LOWEST`` whose
    induced peak for the bus ramp stays at or below ``bound``, and that peak."""
    table = preferred_values(FIX_SERIES)
    candidates = sorted(
        {
            float(f"{step!r}e{decade}")
            for decade in range(2, 6)
            for step in table
            if FIX_LOWEST <= float(f"{step!r}e{decade}") <= FIX_HIGHEST
        }
    )
    # the peak grows with R: bisect for the largest value that holds
    low, high = 0, len(candidates)
    while low < high:
        middle = (low + high) // 2
        if caps.ramp_peak(delta_v, rise, candidates[middle]) <= bound:
            low = middle + 1
        else:
            high = middle
    if low == 0:
        return None
    ohms = candidates[low - 1]
    return ohms, caps.ramp_peak(delta_v, rise, ohms)


def _ideal_driver(stage: DriveStage, facts: StageFacts) -> bool:
    """A behavioural source that is the floating supply and the driver in one (its output
    follows the switch node): an ideal model with no unpowered state to judge."""
    supply = stage.supply
    source = facts.device(supply.source) if supply.kind == "isolated" else None
    return source is not None and (source.behaviour is not None or source.expression is not None)


def check_gate_pulldown(stage: DriveStage, ctx: CheckContext) -> Iterator[Finding]:
    facts = ctx.facts
    if stage.channel != "nmos":
        return
    if driver_hold(stage, facts) is not None or _ideal_driver(stage, facts):
        return
    found = anchors(stage, facts)
    if stage.mode == "linear" and found:
        return  # a follower's gate is set by its DC path on purpose
    vth = facts.ratings.get(facts.switch, "vth")
    if found:
        level = held_level(found)
        if vth is None or level < vth.value:
            return
        yield _pulled_on(stage, ctx, found, level, vth)
        return
    yield _floating(stage, ctx, vth)


def settled_level(found: list[Anchor], facts: StageFacts, vth: float) -> tuple[float | None, str]:
    """V_GS once the switch is on and its source has risen to the bus: the source and the
    floating supply ride with it, ground and the rails stay behind by the swing. Below the
    threshold the switch is a source follower whose gate stays about a threshold above
    its source."""
    swing = facts.v_switched
    moved = [
        Anchor(a.net, a.ohms, a.devices, a.volts - (0.0 if a.rides else swing), a.what, a.rides)
        for a in found
    ]
    level = held_level(moved)
    if level >= vth:
        return level, (
            "computed: the resistive divider of the gate's passive paths with the floating "
            "supply charged, every active pull-down unpowered and the source up at the bus"
        )
    return None, (
        f"the passive paths alone would give {_v(level)} with the source at the bus: the "
        "switch conducts as a source follower, its gate about a threshold above its source"
    )


def _pulled_on(
    stage: DriveStage, ctx: CheckContext, found: list[Anchor], level: float, vth: Value
) -> Finding:
    facts = ctx.facts
    settled, how = settled_level(found, facts, vth.value)
    paths = "; ".join(
        f"{'–'.join(a.devices)} ({format_si(a.ohms, 'Ω')}) to {a.what} at {_v(a.volts)}"
        for a in found
    )
    pull_up = max(found, key=lambda a: a.volts)
    values: dict[str, Value] = {
        "vgs_turn_on": computed(
            level,
            "V",
            "computed: the resistive divider of the gate's passive paths with the floating "
            "supply charged, every active pull-down unpowered and the source at its low level",
        ),
        "vth": vth,
    }
    if settled is not None:
        values["vgs_pulled_on"] = computed(settled, "V", how)
    if facts.v_boot0 is not None:
        values["v_boot"] = facts.v_boot0
    held = f"holds {_v(settled)} once on" if settled is not None else how.split(": ", 1)[1]
    message = (
        f"the only passive paths from {stage.switch}'s gate ({paths}) pull it on: with the "
        f"source at its low level ({facts.v_sw_low.text()}), "
        + (
            "the floating supply charged "
            if pull_up.rides
            else ("" if pull_up.net == GROUND else f"{pull_up.what} up ")
        )
        + "and the active pull-down unpowered (a controller in reset, a missing logic "
        f"supply), V_GS reaches {_v(level)} with the source low, above the "
        f"{vth.text()} threshold, so the switch turns on uncommanded ({held})"
    )
    returned = ""
    if not pull_up.rides and len(pull_up.devices) == 1:
        returned = (
            f"return {pull_up.devices[0]} to the source {stage.source} instead of "
            f"{pull_up.what}, or "
        )
    fix = returned + (
        f"make the passive default off: drive the pull-up {pull_up.devices[0]} actively (a "
        "transistor that the command turns on) and tie the gate to its source with a "
        "resistor (10 kΩ–100 kΩ, common practice), or use a driver whose output is held "
        "low when unpowered; a gate–source resistor alone would have to be below "
        f"{format_si(pull_up.ohms * vth.value / 2 / max(pull_up.volts - vth.value / 2, 1e-9), 'Ω')}"
        " to hold V_GS at half the threshold, which leaves no on-drive"
    )
    derivation = (
        "V_GS,held = Σ(V_k/R_k)/Σ(1/R_k) over the passive paths: "
        + ", ".join(f"{_v(a.volts)} through {format_si(a.ohms, 'Ω')}" for a in found),
        f"= {_v(level)} ≥ V_th {vth.text()} ({vth.origin}); once on: {held}",
    )
    return ctx.finding(stage.switch, message, values, fix=fix, derivation=derivation)


def _floating(stage: DriveStage, ctx: CheckContext, vth: Value | None) -> Finding:
    facts = ctx.facts
    rise = ctx.options["bus_rise_time"]
    fraction = ctx.options["hold_fraction"]
    values: dict[str, Value] = {
        "bus_rise_time": Value(rise, "s", "option bus_rise_time"),
        "hold_fraction": Value(fraction, "1", "option hold_fraction"),
    }
    if vth is not None:
        values["vth"] = vth
    bus = facts.v_bus
    delta_v = facts.v_switched if bus is not None else 0.0
    caps = capacitances(stage, facts, delta_v) if delta_v > 0 else None
    active = sorted(
        {
            name
            for path in stage.pulldowns
            for name in path.devices
            if (device := facts.device(name)) is None or device.kind not in _PASSIVE_KINDS
        }
    )
    held_by = (
        f" (only {', '.join(active)}, active parts that hold nothing unpowered)" if active else ""
    )
    derivation: list[str] = []
    severity = Severity.WARNING
    if caps is None or bus is None:
        message = (
            f"no passive path ties {stage.switch}'s gate to its source{held_by}: while the "
            "driver is unpowered the gate floats and leakage or a bus edge sets V_GS "
            "(its capacitances are not known here, so the induced voltage is not computed)"
        )
        fix = (
            "add a resistor from the gate to the source (10 kΩ–100 kΩ, common practice), or "
            "use a driver whose output is held low when unpowered (parts r_hold_unpowered)"
        )
        return ctx.finding(stage.switch, message, values, fix=fix, severity=severity)
    induced = gate_physics.induced_gate_voltage(delta_v, caps.c_gd.value, caps.c_gs.value)
    clamp = next(
        (
            c
            for c in stage.clamps
            if c.orientation in ("normal", "back-to-back") and c.voltage is not None
        ),
        None,
    )
    values.update(
        {
            "v_bus": bus,
            "delta_v_ds": computed(
                delta_v,
                "V",
                f"computed: the bus {bus.text()} − the source's low level "
                f"{facts.v_sw_low.text()} ({facts.v_sw_low.origin})",
            ),
            "c_gd_step": caps.c_gd,
            "c_gs": caps.c_gs,
            "vgs_induced": computed(
                induced, "V", "computed: ΔV_DS·C_gd/(C_gd + C_gs), the gate floating"
            ),
        }
    )
    derivation.append(
        f"V_G,induced = ΔV_DS·C_gd/(C_gd + C_gs) = {_v(delta_v)} × "
        f"{format_si(caps.c_gd.value, 'F')}/({format_si(caps.c_gd.value, 'F')} + "
        f"{format_si(caps.c_gs.value, 'F')}) = {_v(induced)}"
    )
    clamped = ""
    if clamp is not None and clamp.voltage is not None and clamp.voltage < induced:
        clamped = f"; the clamp {clamp.device} stops it at about {_v(clamp.voltage)}"
    if (
        vth is not None
        and induced >= vth.value
        and not (clamp is not None and clamp.voltage is not None and clamp.voltage < vth.value)
    ):
        severity = ctx.severity
        consequence = (
            f"at or above the {vth.text()} threshold: the switch can turn on by itself at power-up"
        )
    elif vth is not None:
        consequence = (
            f"below the {vth.text()} threshold, but the gate still floats: leakage and the "
            "charge left on it set V_GS"
        )
    else:
        consequence = "against a threshold that is not known here"
    message = (
        f"no passive path ties {stage.switch}'s gate to its source{held_by}: while the driver "
        f"is unpowered a {_v(delta_v)} bus step couples {_v(induced)} onto the floating gate "
        f"through C_gd{clamped}, {consequence}"
    )
    fix = _fix_text(stage, facts, delta_v, rise, caps, fraction, vth, values, derivation)
    finding = ctx.finding(
        stage.switch, message, values, fix=fix, derivation=tuple(derivation), severity=severity
    )
    return with_corner(finding, facts, STRESS, uses=frozenset({"bus"}))


def _fix_text(
    stage: DriveStage,
    facts: StageFacts,
    delta_v: float,
    rise: float,
    caps: GateCapacitances,
    fraction: float,
    vth: Value | None,
    values: dict[str, Value],
    derivation: list[str],
) -> str:
    if vth is None:
        return (
            f"add a resistor from {stage.switch}'s gate to its source (10 kΩ–100 kΩ, common "
            "practice), or use a driver whose output is held low when unpowered"
        )
    bound = fraction * vth.value
    chosen = suggest_resistor(delta_v, rise, caps, bound)
    if chosen is None:
        return (
            f"no gate–source resistor of {format_si(FIX_LOWEST, 'Ω')} or more holds the gate "
            f"below {_v(bound)} for a {_v(delta_v)} bus rising in {format_si(rise, 's')}: "
            "slow the bus's rise (a precharge), add capacitance from gate to source, or use "
            "a driver that holds its output low when unpowered"
        )
    ohms, peak = chosen
    tau = ohms * (caps.c_gs.value + caps.c_gd.value)
    values["suggested_r_gs"] = computed(
        ohms,
        "Ohm",
        f"computed: the largest {FIX_SERIES} value ≤ {format_si(FIX_HIGHEST, 'Ω')} that holds "
        f"the gate within hold_fraction × V_th for the bus rise",
    )
    values["vgs_induced_with_fix"] = computed(
        peak,
        "V",
        "computed: (C_gs + C_gd)·dV/dt = C_gd·ΔV/t_r − V/R integrated over the ramp (the "
        "VDMOS C_gd curve)"
        if caps.vdmos is not None
        else "computed: R·C_gd·(ΔV/t_r)·(1 − e^(−t_r/τ)), τ = R·(C_gs + C_gd)",
    )
    how = (
        "(C_gs + C_gd(V))·dV/dt = C_gd(V)·ΔV/t_r − V/R over the ramp"
        if caps.vdmos is not None
        else "R·C_gd·(ΔV/t_r)·(1 − e^(−t_r/τ))"
    )
    derivation.append(
        f"with R_GS = {format_si(ohms, 'Ω')}: τ = R·(C_gs + C_gd) = {format_si(tau, 's')}, peak "
        f"of {how} = {_v(peak)} for t_r = {format_si(rise, 's')}, within {fraction:g} × V_th "
        f"= {_v(bound)}"
    )
    drain = ""
    supply = stage.supply
    if supply.kind in ("bootstrap", "charge-pump", "isolated") and facts.v_boot0 is not None:
        current = facts.v_boot0.value / ohms
        values["v_boot"] = facts.v_boot0
        values["r_gs_drain"] = computed(
            current, "A", "computed: V_boot,0/R_GS, drawn from the floating supply while on"
        )
        drain = (
            f"; it draws {format_si(current, 'A')} from the floating supply during each "
            "on-time, which the hold rules count as a drain"
        )
    return (
        f"add {format_si(ohms, 'Ω')} from {stage.switch}'s gate to its source (the largest "
        f"{FIX_SERIES} value that holds the gate within {fraction:g} × V_th = {_v(bound)} for "
        f"a bus rising in {format_si(rise, 's')}: its peak is {_v(peak)}, τ = "
        f"{format_si(tau, 's')}){drain}; or "
        "use a driver whose output is held low when unpowered"
    )


CHECKS = {"gate-pulldown-missing": check_gate_pulldown}
