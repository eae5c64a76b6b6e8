"""The level shifter of a discrete floating drive: its voltage, its contention with the
pull-up, and its dissipation.

A ground-referenced transistor carries the command up to the floating side. Its collector
(drain) sits on the floating side, so it blocks the bus plus the boot supply whenever it is
off with the switch on. Where it pulls a node down against a resistor from the boot supply
(the switch's gate, or a totem pole's bases), its sink current must win by a margin, or the
node stays high and the switch does not turn off. Where it conducts while the switch is on,
it carries its current across nearly the whole bus and heats.
"""

from __future__ import annotations

from collections.abc import Iterator, Mapping
from dataclasses import dataclass

from drivelint.checks.base import CheckContext, Finding
from drivelint.checks.corners import STRESS, with_corner
from drivelint.checks.facts import StageFacts
from drivelint.circuit.model import GROUND, Device
from drivelint.diagnostics import Severity
from drivelint.netlist.values import format_si
from drivelint.physics import gate as gate_physics
from drivelint.physics import stress as stress_physics
from drivelint.physics.preferred import next_preferred, preferred_at_most
from drivelint.ratings.values import Value, computed
from drivelint.stages.model import DriveStage

# SPICE's default forward gain and a silicon junction's drop (SPICE3/ngspice manual, BJT
# model: BF defaults to 100; V_BE ≈ 0.7 V, common practice).
DEFAULT_BETA = 100.0
V_BE = 0.7
V_CE_SAT = 0.2  # a small-signal transistor's saturation drop at a few mA (common practice)
_BLOCKING = {"npn": ("c", "e", "vceo_max", "V_CE"), "nmos": ("d", "s", "vds_max", "V_DS")}


def _v(value: float) -> str:
    return format_si(value, "V")


def _ohms(device: Device | None) -> float | None:
    if device is None or device.kind != "resistor" or not device.value:
        return None
    return device.value / device.multiplier


def _other(device: Device, net: str) -> str | None:
    return next((n for n in device.nets if n != net), None)


@dataclass(frozen=True, slots=True)
class _Shifter:
    """The transistor of a level shifter and its pins."""

    device: Device
    polarity: str  # "npn" or "nmos"
    collector: str
    emitter: str

    @property
    def pins(self) -> tuple[str, str, str, str]:
        return _BLOCKING[self.polarity]


def _shifter(stage: DriveStage, facts: StageFacts) -> _Shifter | None:
    shifter = stage.level_shifter
    device = facts.device(shifter.transistor) if shifter else None
    polarity = device.model_type if device is not None else None
    if device is None or polarity not in _BLOCKING:
        return None
    c_pin, e_pin, _, _ = _BLOCKING[polarity]
    collector, emitter = device.net(c_pin), device.net(e_pin)
    if collector is None or emitter is None:
        return None
    return _Shifter(device, polarity, collector, emitter)


def _emitter_level(facts: StageFacts, emitter: str) -> float:
    """The emitter's (source's) level while off: ground, a rail, or through its resistor
    to one of them (no current flows while it is off)."""
    rails = facts.circuit.rails
    if emitter == GROUND:
        return 0.0
    if emitter in rails and rails[emitter] is not None:
        return float(rails[emitter] or 0.0)
    for device in facts.by_net.get(emitter, ()):
        far = _other(device, emitter) if _ohms(device) is not None else None
        if far == GROUND:
            return 0.0
        if far is not None and rails.get(far) is not None:
            return float(rails[far] or 0.0)
    return 0.0


# -- blocking ---------------------------------------------------------------------------------


def blocking_finding(stage: DriveStage, ctx: CheckContext, shifter: _Shifter) -> Finding | None:
    """Off with the switch on, the collector rides at the top of the floating supply."""
    facts = ctx.facts
    if facts.v_bus is None or facts.v_boot_max is None or facts.never_on:
        return None
    _, _, key, name = shifter.pins
    rating = facts.ratings.get(shifter.device, key)
    if rating is None:
        return None
    low = _emitter_level(facts, shifter.emitter)
    k_ring = ctx.options["ringing"]
    steady = facts.v_bus.value + facts.v_boot_max.value - low
    ringing = k_ring * facts.v_switched
    applied = steady + ringing
    derating = ctx.options["derating"]
    limit = stress_physics.derated_limit(rating.value, derating)
    if applied <= limit:
        return None
    severity = Severity.ERROR if applied > rating.value else Severity.WARNING
    where = (
        f"beyond its {rating.text()} rating"
        if applied > rating.value
        else f"above {_v(limit)} ({derating:.0%} of its {rating.text()} rating)"
    )
    values = {
        "shifter_voltage": computed(applied, "V", "computed: V_bus + V_boot − V_E + ringing"),
        "shifter_voltage_steady": computed(steady, "V", "computed: V_bus + V_boot − V_E"),
        "v_bus": facts.v_bus,
        "v_boot": facts.v_boot_max,
        "v_emitter": Value(low, "V", "the emitter's (source's) net, or its resistor's far end"),
        "ringing_margin": computed(ringing, "V", "option ringing × (V_bus − V_sw,low)"),
        "shifter_rating": rating,
        "derating": Value(derating, "1", "option derating"),
        "derated_limit": computed(limit, "V", "computed: rating × derating"),
    }
    return ctx.finding(
        shifter.device.name,
        f"level shifter {shifter.device.name} blocks {_v(applied)} {name} while off with "
        f"{stage.switch} on (its {'collector' if shifter.polarity == 'npn' else 'drain'} "
        f"rides at V_bus + V_boot), {where}",
        values,
        fix=f"use a transistor rated at least {_v(applied / derating)} {name} (so that "
        f"{_v(applied)} is within {derating:.0%} of its rating), or put a resistor or a "
        "cascode between it and the floating side to share the voltage",
        derivation=(
            f"{name} = V_bus + V_boot − V_E + k_ring·(V_bus − V_sw,low)",
            f"     = {facts.v_bus.text()} + {facts.v_boot_max.text()} − {_v(low)} + "
            f"{_v(ringing)} = {_v(applied)}",
            f"limit = {rating.text()} × {derating:g} = {_v(limit)}",
        ),
        severity=severity,
    )


# -- contention ------------------------------------------------------------------------------


@dataclass(frozen=True, slots=True)
class _Drive:
    """How a level shifter's transistor is driven: level and base resistor."""

    level: Value
    r_base: float
    base_resistor: str


def _base_drive(stage: DriveStage, facts: StageFacts, shifter: _Shifter) -> _Drive | None:
    """The base resistor on the command's path and the level behind it: the command
    source's high level, or a rail; None where the base is fed some other way."""
    base = shifter.device.net("b" if shifter.polarity == "npn" else "g")
    control = stage.control
    if base is None or control is None or control.source is None:
        return None
    source = facts.device(control.source)
    high = source.waveform.high() if source is not None and source.waveform else None
    source_net = source.net("p") if source is not None else None
    for device in facts.by_net.get(base, ()):
        ohms = _ohms(device)
        far = _other(device, base) if ohms is not None else None
        if far is None or ohms is None:
            continue
        if far == source_net and high is not None:
            return _Drive(
                Value(high, "V", f"the high level of {control.source}"), ohms, device.name
            )
        rail = facts.circuit.rails.get(far)
        if rail is not None:
            return _Drive(Value(float(rail), "V", f"rail {far}"), ohms, device.name)
    return None


def _emitter_resistance(facts: StageFacts, shifter: _Shifter) -> tuple[float, str | None]:
    if shifter.emitter == GROUND or shifter.emitter in facts.circuit.rails:
        return 0.0, None
    for device in facts.by_net.get(shifter.emitter, ()):
        ohms = _ohms(device)
        if ohms is not None and device.name != shifter.device.name:
            return ohms, device.name
    return 0.0, None


def _beta(facts: StageFacts, device: Device) -> Value:
    model = device.model
    if model is not None and model.params.get("bf"):
        return Value(model.params["bf"], "1", f"model {model.name} BF")
    return Value(DEFAULT_BETA, "1", "default: BF = 100 (SPICE3/ngspice BJT model default)")


def contention_finding(stage: DriveStage, ctx: CheckContext, shifter: _Shifter) -> Finding | None:
    """A shifter that pulls a node down against a resistor from the boot supply."""
    facts = ctx.facts
    level = stage.level_shifter
    boot = stage.supply.boot_net
    if level is None or level.on_with_switch or shifter.polarity != "npn" or boot is None:
        return None
    ups = [
        d
        for d in facts.by_net.get(shifter.collector, ())
        if _ohms(d) is not None and _other(d, shifter.collector) == boot
    ]
    drive = _base_drive(stage, facts, shifter)
    if not ups or drive is None or facts.v_boot_max is None:
        return None
    r_pu = 1.0 / sum(1.0 / (_ohms(d) or 1.0) for d in ups)
    r_e, r_e_name = _emitter_resistance(facts, shifter)
    beta = _beta(facts, shifter.device)
    i_sink = gate_physics.bjt_sink_capability(
        drive.level.value, V_BE, drive.r_base, r_e, beta.value
    )
    # With the switch off its source sits at the node's low level; the pull-up feeds the
    # boot supply's full level into the collector node.
    v_top = facts.v_boot_max.value
    i_pull = (v_top - V_CE_SAT) / r_pu
    margin = gate_physics.level_shift_margin(i_sink, i_pull) if i_pull > 0 else float("inf")
    needed = ctx.options["margin"]
    if margin >= needed:
        return None
    node = gate_physics.node_against_pull_up(v_top, i_sink, r_pu, V_CE_SAT + i_sink * r_e)
    vth = facts.ratings.get(facts.switch, "vth")
    threshold = vth.value if vth is not None else None
    stuck = threshold is not None and node >= threshold
    severity = Severity.ERROR if stuck or margin < 1 else Severity.WARNING
    names = "+".join(d.name for d in ups)
    values = {
        "shifter_sink": computed(i_sink, "A", "computed: β·(V_drive − V_BE)/(R_B + (β+1)·R_E)"),
        "pull_up_current": computed(i_pull, "A", f"computed: (V_boot − V_CE,sat)/R_pu ({names})"),
        "shifter_margin": computed(margin, "1", "computed: I_sink / I_pull-up"),
        "margin_needed": Value(needed, "1", "option margin"),
        "node_low": computed(node, "V", "computed: max(V_boot − I_sink·R_pu, V_CE,sat + I·R_E)"),
        "beta": beta,
        "v_drive": drive.level,
        "r_base": Value(drive.r_base, "Ohm", f"base resistor {drive.base_resistor}"),
        "r_emitter": Value(r_e, "Ohm", r_e_name or "none"),
        "r_pull_up": Value(r_pu, "Ohm", names),
        "v_boot": facts.v_boot_max,
    }
    if vth is not None:
        values["vth"] = vth
    consequence = (
        f"the node stays at {_v(node)}, above the switch's {_v(threshold)} threshold: "
        f"{stage.switch} does not turn off"
        if stuck and threshold is not None
        else f"the node falls only to {_v(node)} with β at its typical value; a low-β part "
        "or a hot day leaves the switch partly on"
    )
    target = i_pull * needed
    r_b_max = gate_physics.base_resistor_for(target, drive.level.value, V_BE, r_e, beta.value)
    r_b_new = preferred_at_most(r_b_max) if r_b_max > 0 else None
    r_pu_new = next_preferred(r_pu * needed / margin) if margin > 0 else None
    drive_fix = (
        f"lower the base resistor {drive.base_resistor} from {format_si(drive.r_base, 'Ω')} to "
        f"{format_si(r_b_new, 'Ω')} (E12; ≤ {format_si(r_b_max, 'Ω')} lets β·I_B reach "
        f"{format_si(target, 'A')})"
        if r_b_new is not None
        else f"lower the emitter resistor {r_e_name}: it alone caps the sink below "
        f"{format_si(target, 'A')}"
    )
    if r_pu_new is not None:
        values["suggested_pull_up"] = computed(
            r_pu_new, "Ohm", "computed: R_pu·margin/margin_found, E12 above"
        )
    if r_b_new is not None:
        values["suggested_base_resistor"] = computed(
            r_b_new, "Ohm", "computed: β·(V_drive − V_BE)/(margin·I_pull-up) − (β+1)·R_E, E12 below"
        )
    return ctx.finding(
        shifter.device.name,
        f"level shifter {shifter.device.name} can sink {format_si(i_sink, 'A')} against the "
        f"{format_si(i_pull, 'A')} pull-up {names} draws (margin {margin:.2g}, needs "
        f"{needed:g}): {consequence}",
        values,
        fix=drive_fix
        + (
            f", or raise the pull-up {names} to {format_si(r_pu_new, 'Ω')} or more (slower turn-on)"
            if r_pu_new is not None
            else ""
        ),
        derivation=(
            "I_sink = β·(V_drive − V_BE)/(R_B + (β+1)·R_E) = "
            f"{beta.value:g} × ({drive.level.text()} − {_v(V_BE)})/({format_si(drive.r_base, 'Ω')}"
            f" + {beta.value + 1:g} × {format_si(r_e, 'Ω')}) = {format_si(i_sink, 'A')}",
            f"I_pull-up = (V_boot − V_CE,sat)/R_pu = ({facts.v_boot_max.text()} − "
            f"{_v(V_CE_SAT)})/{format_si(r_pu, 'Ω')} = {format_si(i_pull, 'A')}",
            f"margin = I_sink/I_pull-up = {margin:.3g}",
        ),
        severity=severity,
    )


def check_level_shift(stage: DriveStage, ctx: CheckContext) -> Iterator[Finding]:
    facts = ctx.facts
    shifter = _shifter(stage, facts)
    if shifter is None or stage.supply.kind == "none":
        return
    blocking = blocking_finding(stage, ctx, shifter)
    if blocking is not None:
        yield with_corner(blocking, facts, STRESS, frozenset({"bus", "supply"}))
    contention = contention_finding(stage, ctx, shifter)
    if contention is not None:
        yield with_corner(contention, facts, STRESS, frozenset({"supply"}))


def pull_up_resistors(stage: DriveStage, facts: StageFacts) -> tuple[str, ...]:
    """The resistors from the boot net to the shifter's collector."""
    shifter = _shifter(stage, facts)
    boot = stage.supply.boot_net
    if shifter is None or boot is None:
        return ()
    return tuple(
        d.name
        for d in facts.by_net.get(shifter.collector, ())
        if _ohms(d) is not None and _other(d, shifter.collector) == boot
    )


def base_resistor(stage: DriveStage, facts: StageFacts) -> str | None:
    """The name of the shifter's base resistor on the command's path, if it has one."""
    shifter = _shifter(stage, facts)
    drive = _base_drive(stage, facts, shifter) if shifter is not None else None
    return drive.base_resistor if drive is not None else None


def finding_kind(values: Mapping[str, Value]) -> str:
    return "blocking" if "shifter_voltage" in values else "contention"


CHECKS = {"level-shift-contention": check_level_shift}
