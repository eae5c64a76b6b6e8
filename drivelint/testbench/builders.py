"""One testbench builder per rule: the operating point the rule assumed, as a stimulus, and
one ``.meas`` card per claimed value.

Which of a finding's values are claims is decided here, per rule (and per kind of finding
where a rule has several): the quantities the finding computes and asserts about the
circuit's behaviour (a hold time, a droop, a V_GS extreme, a reverse voltage, a sustained
boot voltage), never its inputs (ratings, options, conditions). Each builder also states
the limit whose violation is the failure, so that the design's deck can show it and the
fixed deck can show it gone.

``BUILDERS`` is keyed by rule id; a rule for which no simulation can show the failure
goes in ``NOT_SIMULATED`` with the reason. ``tests/testbench`` holds every registered
rule to one of the two.
"""

from __future__ import annotations

import math
from collections.abc import Callable, Mapping
from dataclasses import dataclass, replace

from drivelint.checks.base import Finding
from drivelint.checks.corners import HOLD, STRESS
from drivelint.checks.levelshift import finding_kind as shift_kind
from drivelint.checks.stress import finding_kind as stress_kind
from drivelint.circuit.model import GROUND, Device
from drivelint.diagnostics import Span
from drivelint.netlist.statements import Word
from drivelint.netlist.values import format_si
from drivelint.ratings.values import Value
from drivelint.stages.model import DriveStage
from drivelint.testbench.bench import (
    MAX_STOP,
    Bench,
    BenchContext,
    Declined,
    Stimulus,
    analysis_step,
    boot_vector_nets,
    charge_time,
    design_schedule,
    held_supplies,
    matches,
    partner_dead_time,
    periodic_conditions,
    stimulus,
)
from drivelint.testbench.corners import corner_deck
from drivelint.testbench.design import Edit, merge_edits
from drivelint.testbench.measure import (
    Card,
    Claim,
    Limit,
    Trace,
    at,
    average,
    device_vector,
    difference,
    expression,
    extreme,
    integral,
    source_current,
    time_to_fall,
    voltage,
    voltage_trace,
)
from drivelint.testbench.stimulus import Schedule, number

Builder = Callable[[BenchContext], Bench | Declined]

# One-shot turn-ons last this long when the rule's operating point is a state, not a
# timing (a reverse voltage, a clamp level): long enough for the switch node to settle.
ONE_SHOT_ON = 20e-6
SETTLE_AFTER = 5e-6
# Cycles simulated before a steady-state cycle is measured, in refresh time constants per
# off-time: four e-folds leave 2 % of the start-up difference.
STEADY_TIME_CONSTANTS = 4
MIN_CYCLES, MAX_CYCLES = 10, 2000
# A DC-held stage is run this many claimed hold times: long enough to see the supply fall
# through V_boot,min even where the simulation holds it a good deal longer than claimed.
HOLD_RUN = 5
DIODE_SLOW_CYCLES = 20


# What each kind of finding claims: the value keys its deck measures, one card each.
# A kind is the rule id, or "rule/kind" where one rule reports several kinds of finding.
CLAIMS: Mapping[str, tuple[str, ...]] = {
    "bootstrap-capacitor-small": ("v_boot", "droop_per_cycle", "charge_per_cycle"),
    "bootstrap-capacitor-small/fixed": ("suggested_droop_per_cycle",),
    "bootstrap-diode-slow": ("recovery_charge", "q_per_cycle"),
    "bootstrap-diode-voltage": ("diode_reverse_voltage_steady",),
    "bootstrap-no-refresh": ("sustained_boot_voltage", "sustained_boot_peak", "delta_v_per_cycle"),
    "bootstrap-no-refresh/no path": (),
    "dc-hold": ("hold_time", "i_drain"),
    "gate-overvoltage/negative": ("vgs_max_negative", "vgs_pulled_down"),
    "gate-overvoltage/turn-off supply": ("vgs_max_negative",),
    # the clamp level is the forward drop the rule takes (0.7 V by default), not the one the
    # diode law gives at the current it carries: the deck shows the failure by its limit
    "gate-overvoltage/clamp against turn-off": (),
    "gate-overvoltage/positive": ("vgs_max_positive",),
    "gate-overvoltage/output short": ("vgs_output_short",),
    "gate-overvoltage/clamp below drive": (
        "vgs_max_positive",
        "clamp_positive_level",
        "clamp_current_bound",
    ),
    "gate-overvoltage/clamp reversed": ("vgs_max_positive", "clamp_positive_level"),
    "gate-headroom": ("vgs_supply_on", "vgs_on_worst"),
    "driver-decoupling": ("first_charge", "vcc_dip"),
    "voltage-stress/switch": ("vds_off_steady",),
    "voltage-stress/part": ("v_part",),
    "voltage-stress/power": ("p_resistor",),
    "level-shift-contention/blocking": ("shifter_voltage_steady",),
    "level-shift-contention/contention": ("shifter_sink",),
    "cross-conduction/overlap": ("command_overlap", "shoot_through_bound"),
    "cross-conduction/dead time": ("t_switch_off",),
    "induced-turn-on": ("vgs_peak",),
    "switch-node-undershoot": ("undershoot_depth", "v_boot_undershoot"),
    "gate-pulldown-missing": ("vgs_induced",),
    "gate-pulldown-missing/fixed": ("vgs_induced_with_fix",),
    "gate-pulldown-missing/pulled on": ("vgs_pulled_on",),
    "switching-loss/edge": ("t_voltage_on", "t_voltage_off"),
    "switching-loss/junction": ("p_switch_cold", "t_voltage_on", "t_voltage_off"),
    "switching-loss/partner junction": ("p_switch_cold",),
}
# Kinds whose figures take the supplies at their highest (stresses); the others take the
# auxiliary rail at its lowest (hold and headroom figures). The bus is at its highest in
# every rule.
STRESS_KINDS = frozenset(
    {
        "induced-turn-on",
        "switch-node-undershoot",
        "bootstrap-diode-voltage",
        "gate-pulldown-missing",
        "gate-overvoltage/negative",
        "gate-overvoltage/turn-off supply",
        "gate-overvoltage/clamp against turn-off",
        "gate-overvoltage/positive",
        "gate-overvoltage/output short",
        "gate-overvoltage/clamp below drive",
        "gate-overvoltage/clamp reversed",
        "driver-decoupling",
        "voltage-stress/switch",
        "voltage-stress/part",
        "voltage-stress/power",
        "level-shift-contention/blocking",
        "level-shift-contention/contention",
    }
)
# What a rule's figure takes from the tolerance corner, where it is less than its side's
# inputs: the reverse voltage only the bus (the gate rail cancels); the decoupling rule of
# thumb nothing (the parts as written).
CORNER_USES: Mapping[str, frozenset[str]] = {
    "bootstrap-diode-voltage": frozenset({"bus"}),
    "driver-decoupling": frozenset(),
    "switching-loss": frozenset({"supply", "charge", "bus"}),
}
# Claims that are bounds rather than estimates (the finding says "up to").
SENSES: Mapping[str, str] = {
    "clamp_current_bound": "upper bound",
    "shoot_through_bound": "upper bound",
    # the fall's fastest point taken for all of it
    "undershoot_depth": "upper bound",
    "v_boot_undershoot": "upper bound",
}


def claim_keys(finding: Finding, stage: DriveStage) -> tuple[str, ...]:
    """The keys this finding claims (those of its values that its kind measures)."""
    return tuple(k for k in CLAIMS.get(finding_kind(finding, stage), ()) if k in finding.values)


def _claims(ctx: BenchContext) -> list[Claim]:
    """The claims of this finding, for the kind of finding it is (none on a fixed deck,
    unless the rule names claims about the fixed design)."""
    kind = finding_kind(ctx.finding, ctx.stage)
    if ctx.fix is not None:
        kind = f"{ctx.finding.rule}/fixed"
    found = (ctx.claim(key, SENSES.get(key, "estimate")) for key in CLAIMS.get(kind, ()))
    return [c for c in found if c is not None]


def _own_or_periodic(
    ctx: BenchContext, why: str, delay_floor: float = 0.0
) -> tuple[Schedule, dict[Span, Edit], tuple[str, ...]] | Declined:
    """The design's own control where it already is the rule's operating point (and no fix
    changes it), else a pulse train at the rule's period and on-time."""
    conditions = periodic_conditions(ctx)
    own = design_schedule(ctx.stage)
    if conditions is None:
        return Declined("the finding gives no switching frequency and duty to drive the stage at")
    period, on_time = conditions
    if ctx.fix is None or ctx.fix.duty is None:
        if own is not None and matches(own, period, on_time):
            source = ctx.stage.control.source if ctx.stage.control else "the control"
            return own, {}, (f"{source}: the design's own command, {why}",)
    delay = max(charge_time(ctx), delay_floor)
    schedule = Schedule.periodic(period, on_time, delay)
    made = stimulus(ctx, schedule, why)
    if isinstance(made, Declined):
        return made
    return schedule, dict(made.edits), made.notes


def _window(schedule: Schedule, index: int) -> tuple[float, float] | Declined:
    """The ``index``-th on-window of the schedule (0-based), or its last."""
    windows = [w for w in schedule.on_windows(until=MAX_STOP) if w[1] <= MAX_STOP]
    if not windows:
        return Declined("the control never commands the switch on within the bound")
    return windows[min(index, len(windows) - 1)]


def _boot(ctx: BenchContext) -> str | Declined:
    nets = boot_vector_nets(ctx.stage)
    if nets is None:
        return Declined("the stage has no boot net to measure")
    return difference(*nets)


def _vgs(ctx: BenchContext) -> str:
    return difference(ctx.stage.gate, ctx.stage.source)


def series_ammeter(
    ctx: BenchContext, device: Device, suffix: str, where: str
) -> tuple[str, dict[Span, Edit]] | Declined:
    """A 0 V source in series with the device's first terminal (``where`` names it in
    words), and the vector of its current: ngspice's way to a current that ``.meas`` and a
    ``par()`` expression may read (in batch mode ``.meas`` cannot read ``@q1[ic]``, and a
    C(V) has no ``@c[i]``). It changes nothing electrically."""
    element = ctx.design.element_of(device.name)
    first = element.fields[0] if element is not None and element.fields else None
    if element is None or not isinstance(first, Word):
        return Declined(f"{device.name}'s {where} is not a plain node name")
    local = device.name.rsplit(".", 1)[-1]
    source, node = f"{SENSE_PREFIX}{local}", f"tb_{local}_{suffix}"
    flat = f"{device.instance}.{source}" if device.instance else source
    return source_current(flat), {
        element.span: Edit(
            fields=((first, node),),
            after=(f"{source.upper()} {first.raw} {node} 0",),
            note=f"a 0 V ammeter in series with {device.name}'s {where} (probe only)",
        )
    }


def capacitor_current(ctx: BenchContext, cap: Device) -> tuple[str, dict[Span, Edit]] | Declined:
    """The vector of the current into the capacitor's first node, and the edits it needs:
    ngspice's ``@c[i]`` for a plain capacitor; a behavioural one (C(V)) is expanded by
    ngspice into other elements, so a 0 V source in series with its first node (an
    ammeter, changing nothing electrically) carries the current instead."""
    if cap.behaviour is None:
        return device_vector(cap.name, "i"), {}
    return series_ammeter(ctx, cap, "p", "first node")


# ---------------------------------------------------------------- bootstrap-capacitor-small


def capacitor_small(ctx: BenchContext) -> Bench | Declined:
    facts = ctx.facts
    boot = _boot(ctx)
    cap = facts.capacitor
    on_time, v_boot_min = ctx.value("on_time"), ctx.value("v_boot_min")
    if isinstance(boot, Declined):
        return boot
    if cap is None or on_time is None or v_boot_min is None or not math.isfinite(on_time):
        return Declined("the finding gives no hold capacitor or finite on-time")
    own = design_schedule(ctx.stage)
    edits: dict[Span, Edit] = {}
    if (
        own is not None
        and own.period is not None
        and math.isclose(own.on_time, on_time, rel_tol=1e-3)
    ):
        schedule = own
        source = ctx.stage.control.source if ctx.stage.control else "the control"
        notes: tuple[str, ...] = (
            f"{source}: the design's own command (its on-time is the rule's)",
        )
    else:
        fsw = facts.fsw.value if facts.fsw else None
        recharge = charge_time(ctx)
        period = 1 / fsw if fsw and 1 / fsw > on_time else on_time + max(recharge, on_time)
        schedule = Schedule.periodic(period, on_time, recharge)
        made = stimulus(ctx, schedule, "the longest on-time the rule used, after a full recharge")
        if isinstance(made, Declined):
            return made
        edits, notes = dict(made.edits), made.notes
    chosen = _window(schedule, 1)
    if isinstance(chosen, Declined):
        return chosen
    start, end = chosen
    probed = capacitor_current(ctx, cap)
    if isinstance(probed, Declined):
        return probed
    current, probe = probed
    edits = merge_edits(edits, probe)
    cards = [
        at("v_boot", boot, start, "V(boot) - V(sw) at the turn-on command: the recharged supply"),
        at("tb_boot_end", boot, end, "V(boot) - V(sw) at the turn-off command"),
        expression(
            "droop_per_cycle", "v_boot-tb_boot_end", "the boot supply's fall over one on-time"
        ),
        integral("tb_cap_charge", current, start, end, f"charge into {cap.name} over the on-time"),
        expression("charge_per_cycle", "-tb_cap_charge", f"charge {cap.name} gives in one on-time"),
        extreme("tb_boot_min", "MIN", boot, start, end, "lowest boot supply in the on-time"),
        expression("tb_droop", "v_boot-tb_boot_end", "the droop over the on-time"),
    ]
    if ctx.fix is not None:
        cards.append(
            expression(
                "suggested_droop_per_cycle",
                "v_boot-tb_boot_end",
                "the droop with the suggested capacitor",
            )
        )
    claims = _claims(ctx)
    off = (schedule.period or on_time) - on_time
    stop = end + min(0.1 * off, SETTLE_AFTER) if off > 0 else end + SETTLE_AFTER
    return Bench(
        edits=edits,
        stop=stop,
        step=analysis_step(ctx.design, stop, min(on_time, off) if off > 0 else on_time),
        cards=tuple(cards),
        claims=tuple(claims),
        limits=_capacitor_limits(ctx, v_boot_min),
        notes=notes,
        saves=(current,) if not probe else (),
        uic=ctx.design.uses_uic(),
    )


def _capacitor_limits(ctx: BenchContext, v_boot_min: float) -> tuple[Limit, ...]:
    """The boot supply stays above V_boot,min, and its droop within the share of the
    allowed droop the rule's requirement leaves at the deck's corner: a capacitor of the
    required nominal value, at the corner, droops ΔV_allowed·C_min/(C_req·C_low/C_nom)
    (C_min = Q_total/ΔV_allowed; the requirement is the larger of the margin at the
    nominal values and the corner met at face value)."""
    limits = [
        Limit(
            "tb_boot_min",
            v_boot_min,
            ">=",
            "the boot supply stays at or above V_boot,min through the on-time",
            "V",
        )
    ]
    allowed = ctx.value("delta_v_allowed")
    c_min, required = ctx.value("minimum_capacitance"), ctx.value("required_capacitance")
    at_corner = ctx.value("capacitance")
    nominal = ctx.value("c_hold_nominal") or at_corner
    if allowed is not None and c_min and required and at_corner and nominal:
        share = c_min / (required * at_corner / nominal)
        limits.append(
            Limit(
                "tb_droop",
                allowed * share,
                "<=",
                f"the droop per on-time stays within {share:.3g} of the allowed "
                f"{format_si(allowed, 'V')} (what the required capacitance leaves at this "
                "corner)",
                "V",
            )
        )
    return tuple(limits)


# ---------------------------------------------------------------- dc-hold


def dc_hold(ctx: BenchContext) -> Bench | Declined:
    facts = ctx.facts
    boot = _boot(ctx)
    cap = facts.capacitor
    hold, on_time = ctx.value("hold_time"), ctx.value("on_time")
    v_boot_min = ctx.value("v_boot_min")
    if isinstance(boot, Declined):
        return boot
    if cap is None or hold is None or on_time is None or v_boot_min is None:
        return Declined("the finding gives no hold time to show")
    if not (math.isfinite(hold) and hold > 0):
        return Declined(
            "no drain of the hold capacitor is known, so the simulation has no end to show"
        )
    start = charge_time(ctx)
    unbounded = not math.isfinite(on_time)
    if unbounded:
        schedule = Schedule.steps((start, True))
        end = start + min(HOLD_RUN * hold, MAX_STOP)
        stop = end
        why = "a DC command once the boot supply has charged (the unbounded on-time)"
    else:
        schedule = Schedule.steps((start, True), (start + on_time, False))
        end = start + on_time
        stop = min(end + SETTLE_AFTER, MAX_STOP)
        why = "one on-time as long as the longest the control demands"
    made = stimulus(ctx, schedule, why)
    if isinstance(made, Declined):
        return made
    probed = capacitor_current(ctx, cap)
    if isinstance(probed, Declined):
        return probed
    current, probe = probed
    cards = [
        at("tb_boot_start", boot, start, "V(boot) - V(sw) at the turn-on command"),
        time_to_fall(
            "hold_time",
            start,
            boot,
            v_boot_min,
            "time from the turn-on command until the boot supply falls through V_boot,min",
        ),
        *_drain_cards(
            ctx, cap.name, current, boot, start, end if unbounded else min(start + hold, end)
        ),
        extreme("tb_boot_min", "MIN", boot, start, end, "lowest boot supply while commanded on"),
    ]
    claims = _claims(ctx)
    return Bench(
        edits=merge_edits(made.edits, probe),
        stop=stop,
        step=analysis_step(ctx.design, stop, hold),
        cards=tuple(cards),
        claims=tuple(claims),
        limits=(
            Limit(
                "tb_boot_min",
                v_boot_min,
                ">=",
                "the boot supply stays at or above V_boot,min while the switch is commanded on",
                "V",
            ),
        ),
        notes=made.notes,
        saves=(current,) if not probe else (),
        uic=ctx.design.uses_uic(),
    )


def _drain_cards(
    ctx: BenchContext, cap: str, current: str, boot: str, start: float, end: float
) -> list[Card]:
    """The drain current with the switch on. Held on at DC, the run's last instant (the
    gate long charged): the capacitor's current there, restated at V_boot,0 with the
    finding's own slope g (1/r_drain_equivalent: the drains follow the boot voltage) from
    the boot voltage measured at the same instant. For a finite on-time, the mean current
    in the second half of the claimed hold time."""
    v0, r_eq = ctx.value("v_boot"), ctx.value("r_drain_equivalent")
    if v0 is not None and not math.isfinite(ctx.value("on_time") or math.inf):
        slope = 1 / r_eq if r_eq and math.isfinite(r_eq) else 0.0
        return [
            at("tb_cap_current", current, end, f"current into {cap} at the end of the run"),
            at("tb_boot_end", boot, end, "V(boot) - V(sw) at the same instant"),
            expression(
                "i_drain",
                f"-tb_cap_current+{number(slope)}*({number(v0)}-tb_boot_end)",
                f"current drawn from {cap} while on, restated at V_boot,0 = "
                f"{format_si(v0, 'V')} with the finding's slope ({format_si(slope, 'A')}/V)",
            ),
        ]
    return [
        average(
            "tb_cap_current",
            current,
            (start + end) / 2,
            end,
            f"mean current into {cap} in the second half of the claimed hold time",
        ),
        expression("i_drain", "-tb_cap_current", f"mean current drawn from {cap} while on"),
    ]


# ---------------------------------------------------------------- gate-overvoltage


def gate_kind(ctx: BenchContext) -> str:
    """Which of gate-overvoltage's findings this is, from its device and values."""
    return finding_kind(ctx.finding, ctx.stage).split("/", 1)[-1]


def finding_kind(finding: Finding, stage: DriveStage) -> str:
    """The kind of finding, as ``CLAIMS`` keys it: the rule id, or "rule/kind"."""
    values = finding.values
    if finding.rule == "bootstrap-no-refresh" and "sustained_boot_voltage" not in values:
        return "bootstrap-no-refresh/no path"
    if finding.rule == "voltage-stress":
        return f"voltage-stress/{stress_kind(values)}"
    if finding.rule == "level-shift-contention":
        return f"level-shift-contention/{shift_kind(values)}"
    if finding.rule == "cross-conduction":
        return "cross-conduction/" + ("overlap" if "command_overlap" in values else "dead time")
    if finding.rule == "gate-pulldown-missing" and "vgs_turn_on" in values:
        return "gate-pulldown-missing/pulled on"
    if finding.rule == "switching-loss":
        if "edge_fraction" in values:
            return "switching-loss/edge"
        partner = finding.device != stage.switch
        return "switching-loss/" + ("partner junction" if partner else "junction")
    if finding.rule != "gate-overvoltage":
        return finding.rule
    return f"gate-overvoltage/{_gate_kind(finding, stage)}"


def _gate_kind(finding: Finding, stage: DriveStage) -> str:
    values = finding.values
    clamp = next((c for c in stage.clamps if finding.device in (c.devices or (c.device,))), None)
    if "vgs_pulled_down" in values:
        return "negative"
    if "v_off_nearest" in values:
        return "clamp against turn-off"
    if "v_off_negative" in values:
        return "turn-off supply"
    if clamp is None and finding.device == stage.switch and _beyond_only_when_shorted(values):
        return "output short"
    if clamp is None:
        return "positive"
    if "clamp_positive_low" in values:
        return "clamp tolerance"
    level = values["clamp_positive_level"].value if "clamp_positive_level" in values else None
    drive = values["vgs_drive"].value if "vgs_drive" in values else None
    if clamp.orientation == "reversed":
        return "clamp reversed"
    if level is not None and drive is not None and level < drive:
        return "clamp below drive"
    return "clamp beyond rating"


def _beyond_only_when_shorted(values: Mapping[str, Value]) -> bool:
    """The positive V_GS is within the limit in normal operation and beyond it only with
    the source held low (an output short): the finding is the short's."""
    limit = values.get("vgs_limit_positive")
    short = values.get("vgs_output_short")
    normal = values.get("vgs_max_positive")
    if limit is None or short is None or short.value <= limit.value:
        return False
    return normal is None or normal.value <= limit.value


NOT_SHOWN = {
    "clamp tolerance": "the Zener conducts only at the low edge of its tolerance; a nominal "
    "simulation cannot show it (tolerance corners are not simulated yet)",
    "clamp beyond rating": "a clamp above the rating fails only in a fault that drives the "
    "gate past it; no normal operating point shows it",
}


def gate_overvoltage(ctx: BenchContext) -> Bench | Declined:
    kind = gate_kind(ctx)
    if kind in ("negative", "turn-off supply", "clamp against turn-off"):
        return _negative_vgs(ctx)
    if kind in ("clamp below drive", "clamp reversed"):
        return _clamp_in_drive(ctx)
    if kind == "positive":
        return _positive_vgs(ctx)
    if kind == "output short":
        return _output_short(ctx)
    return Declined(NOT_SHOWN[kind])


def _bench_on_time(ctx: BenchContext) -> float:
    """How long to hold the switch on before turning it off: half the hold time of the
    boot supply (the gate is still fully up), else the design's longest on-time."""
    from drivelint.physics import bootstrap as boot_physics

    # The deck holds the stress corner (the capacitor at its highest, the gate charge
    # typical, the supply high): the hold time of that supply.
    facts = ctx.facts
    c, qg, i = facts.c_hold_high, facts.qg_typical, facts.i_drain
    top = facts.v_boot_max
    dv = Value(top.value - facts.v_boot_min.value, "V", "computed") if top is not None else None
    candidates: list[float] = []
    if c is not None and dv is not None and i.value > 0:
        hold = boot_physics.hold_time(c.value, dv.value, qg.value if qg else 0.0, i.value)
        if math.isfinite(hold) and hold > 0:
            candidates.append(hold / 2)
    if facts.finite(facts.on_time) and facts.on_time is not None:
        candidates.append(facts.on_time.value)
    chosen = min(candidates) if candidates else 200e-6
    return min(max(chosen, 10e-6), 2e-3)


def _negative_vgs(ctx: BenchContext) -> Bench | Declined:
    stage = ctx.stage
    kind = gate_kind(ctx)
    limit = ctx.value("v_off_nearest" if kind == "clamp against turn-off" else "vgs_limit_negative")
    if limit is None:
        return Declined("the finding gives no negative V_GS limit")
    start = charge_time(ctx)
    turn_off = start + _bench_on_time(ctx)
    tau = ctx.value("tau_source_node")
    after = 0.2 * tau if tau is not None and math.isfinite(tau) else 200e-6
    stop = turn_off + min(max(after, 20e-6), 1e-3)
    schedule = Schedule.steps((start, True), (turn_off, False))
    made = stimulus(
        ctx, schedule, "a turn-on long enough for the source to rise, then the turn-off"
    )
    if isinstance(made, Declined):
        return made
    vgs = _vgs(ctx)
    measured = "clamp_negative_level" if kind == "clamp against turn-off" else "vgs_max_negative"
    cards = [
        at(
            "tb_source_at_turn_off",
            voltage(stage.source),
            turn_off,
            "the source voltage at the turn-off command (the rule holds it at the bus)",
        ),
        extreme(measured, "MIN", vgs, turn_off, stop, "lowest V_GS after turn-off"),
    ]
    if kind == "negative":
        cards.append(
            extreme("vgs_pulled_down", "MIN", vgs, turn_off, stop, "V_GS as the pull-down acts")
        )
    claims = _claims(ctx)
    return Bench(
        edits=made.edits,
        stop=stop,
        step=analysis_step(ctx.design, stop, min(turn_off - start, stop - turn_off)),
        cards=tuple(cards),
        claims=tuple(claims),
        limits=(
            Limit(
                measured,
                limit,
                "<=",
                "V_GS reaches the turn-off supply's level (the clamp does not hold it)",
                "V",
            )
            if kind == "clamp against turn-off"
            else Limit(
                "vgs_max_negative", limit, ">=", "V_GS stays within its negative limit", "V"
            ),
        ),
        notes=made.notes,
        uic=ctx.design.uses_uic(),
    )


def _clamp_current(ctx: BenchContext, start: float, end: float) -> tuple[list[Card], str]:
    """Cards for the clamp's current from gate to source, and the save they need."""
    device = ctx.circuit.devices.get(ctx.finding.device)
    assert device is not None
    vector = device_vector(device.name, "id")
    # Current from gate to source runs forward through a diode whose anode is on the gate.
    forward = device.net("a") == ctx.stage.gate
    formula = "tb_clamp_current" if forward else "-tb_clamp_current"
    return [
        average("tb_clamp_current", vector, start, end, f"{device.name}'s mean current"),
        expression(
            "clamp_current_bound",
            formula,
            f"mean current through {device.name} from gate to source in the steady on-state",
        ),
    ], vector


def _drive_window(
    ctx: BenchContext,
) -> tuple[Schedule, dict[Span, Edit], tuple[str, ...], float, float] | Declined:
    """The design's own command where it is a pulse train; else one long turn-on."""
    own = design_schedule(ctx.stage)
    if own is not None and own.period is not None:
        source = ctx.stage.control.source if ctx.stage.control else "the control"
        return _with_window(own, {}, (f"{source}: the design's own command",))
    start = charge_time(ctx)
    schedule = Schedule.steps((start, True), (start + ONE_SHOT_ON, False))
    made = stimulus(ctx, schedule, "one turn-on long enough for the gate to settle")
    if isinstance(made, Declined):
        return made
    return _with_window(schedule, dict(made.edits), made.notes)


def _with_window(
    schedule: Schedule, edits: dict[Span, Edit], notes: tuple[str, ...]
) -> tuple[Schedule, dict[Span, Edit], tuple[str, ...], float, float] | Declined:
    chosen = _window(schedule, 1)
    if isinstance(chosen, Declined):
        return chosen
    return schedule, edits, notes, *chosen


def _clamp_in_drive(ctx: BenchContext) -> Bench | Declined:
    drive = ctx.value("vgs_drive")
    if drive is None:
        return Declined("the finding gives no drive level")
    laid_out = _drive_window(ctx)
    if isinstance(laid_out, Declined):
        return laid_out
    schedule, edits, notes, start, end = laid_out
    settled = (start + end) / 2  # the second half of the on-time: the steady on-state
    vgs = _vgs(ctx)
    current_cards, save = _clamp_current(ctx, settled, end)
    cards = [
        extreme("vgs_max_positive", "MAX", vgs, settled, end, "highest steady on-state V_GS"),
        extreme("clamp_positive_level", "MAX", vgs, settled, end, "V_GS where the clamp holds it"),
        *current_cards,
    ]
    claims = _claims(ctx)
    stop = min(end + SETTLE_AFTER, MAX_STOP)
    return Bench(
        edits=edits,
        stop=stop,
        step=analysis_step(ctx.design, stop, end - start),
        cards=tuple(cards),
        claims=tuple(claims),
        limits=(
            Limit(
                "vgs_max_positive",
                0.95 * drive,
                ">=",
                "V_GS reaches the drive level (within 5 %): no clamp pins it lower",
                "V",
            ),
        ),
        notes=notes,
        saves=(save,),
        uic=ctx.design.uses_uic(),
    )


def _positive_vgs(ctx: BenchContext) -> Bench | Declined:
    limit = ctx.value("vgs_limit_positive")
    if limit is None:
        return Declined("the finding gives no positive V_GS limit")
    laid_out = _drive_window(ctx)
    if isinstance(laid_out, Declined):
        return laid_out
    schedule, edits, notes, start, end = laid_out
    stop = min(end + SETTLE_AFTER, MAX_STOP)
    cards = [extreme("vgs_max_positive", "MAX", _vgs(ctx), 0.0, stop, "highest V_GS")]
    return Bench(
        edits=edits,
        stop=stop,
        step=analysis_step(ctx.design, stop, end - start),
        cards=tuple(cards),
        claims=tuple(_claims(ctx)),
        limits=(Limit("vgs_max_positive", limit, "<=", "V_GS stays within its rating", "V"),),
        notes=notes,
        uic=ctx.design.uses_uic(),
    )


# Gate charging through a pull-up is followed for this many time constants R·C_g before
# the V_GS it reaches is read (e^-10: within 0.005 % of the end value).
SHORT_TIME_CONSTANTS = 10
SHORT_NAME = "s_tb_short"
# The output short: a switch from the source to ground, closed once the stage runs. Its
# on-resistance is far below the switch's own, so the source sits at 0 V as the rule takes
# it; an independent 0 V source or a milliohm resistor would read as a wire to drivelint
# (stages.wires) and make the switch's source ground, not a shorted output.
SHORT_MODEL = "VT=0.5 VH=0.1 RON=1u ROFF=1e6"
# The short closes over this long: slow enough that the edge does not kick the gate through
# its capacitances (the finding is about the sustained fault), fast against the gate's R·C.
SHORT_EDGE = 1e-6


def short_edits(ctx: BenchContext, at_time: float) -> dict[Span, Edit] | Declined:
    """A switch from the switch's source to ground that closes at ``at_time``, added after
    the switch's statement (in its scope): the output short the finding describes."""
    stage = ctx.stage
    switch = ctx.circuit.devices.get(stage.switch)
    element = ctx.design.element_of(stage.switch)
    if switch is None or element is None:
        return Declined(f"{stage.switch}'s statement cannot be found")
    source = ctx.design.local_net(stage.source, switch.instance)
    if source is None:
        return Declined("the source cannot be named where the switch is written")
    taken = {n.rsplit(".", 1)[-1] for n in ctx.design.circuit.devices}
    name = SHORT_NAME
    while name in taken or f"v{name[1:]}" in taken:
        name += "_"
    command, model, net = f"v{name[1:]}", f"{name}_model", f"{name}_cmd"
    edge = SHORT_EDGE
    return {
        element.span: Edit(
            after=(
                f"{name.upper()} {source} 0 {net} 0 {model}",
                f"{command.upper()} {net} 0 PWL(0 0 {number(at_time)} 0 "
                f"{number(at_time + edge)} 1)",
                f".model {model} SW ({SHORT_MODEL})",
            ),
            note=f"the output short: {name} closes from the source {stage.source} to ground "
            f"at {format_si(at_time, 's')}",
        )
    }


def _pullup_time_constant(ctx: BenchContext) -> float:
    """R·C of the gate charging through its rail-fed pull-up: the series resistance of the
    slowest rail-fed pull-up path and the gate's capacitance at its drive level (C_gs plus
    C_gd, as the facts take it)."""
    facts, circuit = ctx.facts, ctx.circuit
    ohms = 0.0
    for path in ctx.stage.pullups:
        if path.returns_to == "boot":
            continue
        series = 0.0
        for name in path.devices:
            device = circuit.devices.get(name)
            if device is not None and device.kind == "resistor" and device.value is not None:
                series += device.value / device.multiplier
        ohms = max(ohms, series)
    return ohms * facts.c_gate.value


def _output_short(ctx: BenchContext) -> Bench | Declined:
    """The switch commanded on, then its source shorted to ground: the gate still pulled up
    from its rail heads for the rail unless a clamp holds it."""
    limit = ctx.value("vgs_limit_positive")
    if limit is None:
        return Declined("the finding gives no positive V_GS limit")
    start = charge_time(ctx)
    shorted = short_edits(ctx, start)
    if isinstance(shorted, Declined):
        return shorted
    settle = min(max(SHORT_TIME_CONSTANTS * _pullup_time_constant(ctx), ONE_SHOT_ON), MAX_STOP / 2)
    stop = start + settle
    edits: dict[Span, Edit] = {}
    notes: tuple[str, ...]
    if ctx.stage.mode == "linear":
        # A follower's loop is the stage's own command: shorted, it lets go and the pull-up
        # takes the gate, which is the fault the finding describes.
        source = ctx.stage.control.source if ctx.stage.control else None
        notes = (
            f"the design's own control{f' ({source})' if source else ''}: with the output "
            "shorted its loop lets the gate go to the pull-up",
        )
    else:
        made = stimulus(ctx, Schedule.steps((0.0, True)), "commanded on throughout")
        if isinstance(made, Declined):
            return made
        edits, notes = dict(made.edits), made.notes
    cards = [
        extreme(
            "vgs_output_short",
            "MAX",
            _vgs(ctx),
            start + settle / 2,
            stop,
            "highest V_GS in the second half of the short (the gate has charged; the "
            "short's own edge is over)",
        ),
        extreme("tb_vgs_peak", "MAX", _vgs(ctx), start, stop, "highest V_GS, the edge included"),
        at("tb_vgs_before_short", _vgs(ctx), start, "V_GS in normal operation, before the short"),
        at("tb_source_shorted", voltage(ctx.stage.source), stop, "the source, held by the short"),
    ]
    return Bench(
        edits=merge_edits(edits, shorted),
        stop=stop,
        step=analysis_step(ctx.design, stop, settle),
        cards=tuple(cards),
        claims=tuple(_claims(ctx)),
        limits=(Limit("vgs_output_short", limit, "<=", "V_GS stays within its rating", "V"),),
        notes=(
            *notes,
            f"the source {ctx.stage.source} is shorted to ground at {format_si(start, 's')} (the "
            "fault the finding describes)",
            f"{format_si(settle, 's')} are simulated after the short: {SHORT_TIME_CONSTANTS} "
            "time constants of the gate charging through its pull-up",
        ),
        uic=ctx.design.uses_uic(),
    )


# ---------------------------------------------------------------- bootstrap-diode-voltage


def diode_voltage(ctx: BenchContext) -> Bench | Declined:
    diode = ctx.facts.diode
    limit, ringing = ctx.value("derated_limit"), ctx.value("ringing_margin")
    if diode is None or limit is None:
        return Declined("the finding gives no bootstrap diode or derated limit")
    anode, cathode = diode.net("a"), diode.net("k")
    assert anode is not None and cathode is not None
    start = charge_time(ctx)
    end = start + ONE_SHOT_ON
    stop = end + SETTLE_AFTER
    schedule = Schedule.steps((start, True), (end, False))
    made = stimulus(
        ctx,
        schedule,
        "one turn-on from a fully charged boot supply (the rule's V_boot = V_aux - V_F)",
    )
    if isinstance(made, Declined):
        return made
    reverse = difference(cathode, anode)
    allowance = ringing or 0.0
    cards = [
        extreme(
            "diode_reverse_voltage_steady",
            "MAX",
            reverse,
            (start + end) / 2,
            end,
            f"reverse voltage across {diode.name} in the second half of the on-time (the "
            "turn-on edge has settled)",
        ),
        extreme(
            "tb_reverse_peak",
            "MAX",
            reverse,
            start,
            end,
            f"highest reverse voltage across {diode.name}, the turn-on edge included",
        ),
        expression(
            "tb_reverse_with_ringing",
            f"diode_reverse_voltage_steady+{number(allowance)}",
            "the settled reverse voltage plus the rule's ringing allowance "
            f"({format_si(allowance, 'V')})",
        ),
    ]
    return Bench(
        edits=made.edits,
        stop=stop,
        step=analysis_step(ctx.design, stop, ONE_SHOT_ON),
        cards=tuple(cards),
        claims=tuple(_claims(ctx)),
        limits=(
            Limit(
                "tb_reverse_with_ringing",
                limit,
                "<=",
                f"{diode.name}'s reverse voltage, with the rule's ringing allowance, stays "
                "within its derated rating",
                "V",
            ),
        ),
        notes=made.notes,
        uic=ctx.design.uses_uic(),
    )


# ---------------------------------------------------------------- bootstrap-no-refresh


def no_refresh(ctx: BenchContext) -> Bench | Declined:
    boot = _boot(ctx)
    v_boot_min = ctx.value("v_boot_min")
    if isinstance(boot, Declined):
        return boot
    if v_boot_min is None:
        return Declined("the finding gives no V_boot,min")
    if "sustained_boot_voltage" not in ctx.finding.values:
        return _runs_down(ctx, boot, v_boot_min)
    chosen = _own_or_periodic(ctx, "the duty and frequency the rule used")
    if isinstance(chosen, Declined):
        return chosen
    schedule, edits, notes = chosen
    if schedule.period is None:
        return Declined("the control is not periodic")
    period, off = schedule.period, schedule.period - schedule.on_time
    tau = ctx.value("refresh_tau")
    if tau is not None and math.isfinite(tau) and off > 0:
        cycles = math.ceil(STEADY_TIME_CONSTANTS * tau / off) + 3
    else:
        cycles = MIN_CYCLES
    cycles = min(max(cycles, MIN_CYCLES), MAX_CYCLES, int(MAX_STOP / period) - 1)
    if cycles < 2:
        return Declined("the period is too long to simulate two cycles within the bound")
    windows = schedule.on_windows(until=schedule.delay + (cycles + 1) * period)
    start, end = windows[cycles - 1]
    previous_end = windows[cycles - 2][1]
    cards = [
        extreme(
            "sustained_boot_voltage",
            "MIN",
            boot,
            start,
            end,
            f"boot supply at the end of on-time {cycles} (cycle {cycles}, near steady state)",
        ),
        extreme(
            "sustained_boot_peak",
            "MAX",
            boot,
            previous_end,
            start,
            "boot supply at the end of the off-time before it",
        ),
        expression(
            "delta_v_per_cycle",
            "sustained_boot_peak-sustained_boot_voltage",
            "the fall over that on-time",
        ),
    ]
    claims = _claims(ctx)
    stop = end + min(off / 2, SETTLE_AFTER)
    return Bench(
        edits=edits,
        stop=stop,
        step=analysis_step(ctx.design, stop, min(schedule.on_time, off)),
        cards=tuple(cards),
        claims=tuple(claims),
        limits=(
            Limit(
                "sustained_boot_voltage",
                v_boot_min,
                ">=",
                "the sustained boot supply stays at or above V_boot,min",
                "V",
            ),
        ),
        notes=(*notes, f"{cycles} cycles run before the one measured"),
        uic=ctx.design.uses_uic(),
    )


def _runs_down(ctx: BenchContext, boot: str, v_boot_min: float) -> Bench | Declined:
    """No refresh path, or a reversed diode: the design's own command, run until the boot
    supply has had time to run down. The finding computes no quantity, so the deck has
    no claim; its limit shows the failure."""
    own = design_schedule(ctx.stage)
    if own is None or own.period is None:
        return Declined("the design's control is not a pulse train to run the stage with")
    period = own.period
    cycles = min(MIN_CYCLES * 2, int(MAX_STOP / period) - 1)
    if cycles < 1:
        return Declined("the period is too long to simulate a cycle within the bound")
    start, end = own.on_windows(until=own.delay + (cycles + 1) * period)[cycles - 1]
    source = ctx.stage.control.source if ctx.stage.control else "the control"
    stop = end + min(SETTLE_AFTER, period / 10)
    return Bench(
        edits={},
        stop=stop,
        step=analysis_step(ctx.design, stop, min(own.on_time, period - own.on_time)),
        cards=(
            extreme("tb_boot_end", "MIN", boot, start, end, f"boot supply in on-time {cycles}"),
        ),
        claims=(),
        limits=(
            Limit(
                "tb_boot_end", v_boot_min, ">=", "the boot supply stays at or above V_boot,min", "V"
            ),
        ),
        notes=(f"{source}: the design's own command, {cycles} cycles",),
        uic=ctx.design.uses_uic(),
    )


# ---------------------------------------------------------------- bootstrap-diode-slow


SENSE_PREFIX = "v_tb_"
# Reverse current counted as conduction: a small share of the mean recharge current, well
# above a bootstrap diode's leakage and brief enough edges of junction charge.
REVERSE_SHARE = 0.01
REVERSE_FLOOR = 1e-6


def _reverse_threshold(ctx: BenchContext) -> float:
    mean = ctx.value("recharge_current")
    if mean is None:
        q, off = ctx.value("q_per_cycle"), ctx.value("off_time")
        mean = q / off if q and off else None
    return max(REVERSE_SHARE * mean, REVERSE_FLOOR) if mean else 1e-4


def sense_names(ctx: BenchContext, diode: Device) -> tuple[str, str, str]:
    """(local source name, local node name, flattened source name) of the ammeter put in
    series with the diode's anode."""
    local = diode.name.rsplit(".", 1)[-1]
    source, node = f"{SENSE_PREFIX}{local}", f"tb_{local}_a"
    flat = f"{diode.instance}.{source}" if diode.instance else source
    return source, node, flat


def _ammeter(ctx: BenchContext, diode: Device) -> dict[Span, Edit] | Declined:
    """A 0 V source in series with the diode's anode (``sense_names`` names it)."""
    made = series_ammeter(ctx, diode, "a", "anode")
    return made if isinstance(made, Declined) else made[1]


def diode_slow(ctx: BenchContext) -> Bench | Declined:
    diode, cap = ctx.facts.diode, ctx.facts.capacitor
    if diode is None or cap is None:
        return Declined("the finding gives no bootstrap diode and hold capacitor")
    chosen = _own_or_periodic(ctx, "the duty and frequency the rule used")
    if isinstance(chosen, Declined):
        return chosen
    schedule, edits, notes = chosen
    if schedule.period is None:
        return Declined("the control is not periodic")
    probe = _ammeter(ctx, diode)
    if isinstance(probe, Declined):
        return probe
    period = schedule.period
    cycles = min(DIODE_SLOW_CYCLES, int(MAX_STOP / period) - 1)
    if cycles < 2:
        return Declined("the period is too long to simulate two cycles within the bound")
    windows = schedule.on_windows(until=schedule.delay + (cycles + 1) * period)
    start = windows[cycles - 1][0]
    end = start + period
    current = source_current(sense_names(ctx, diode)[2])
    probed = capacitor_current(ctx, cap)
    if isinstance(probed, Declined):
        return probed
    cap_current, cap_probe = probed
    cards = [
        integral(
            "recovery_charge",
            f"par('max(-{current},0)')",
            start,
            end,
            f"charge flowing backwards through {diode.name} in one cycle",
        ),
        integral("tb_diode_charge", current, start, end, f"net charge through {diode.name}"),
        integral("tb_cap_charge", cap_current, start, end, f"net charge into {cap.name}"),
        expression(
            "q_per_cycle",
            "tb_diode_charge-tb_cap_charge",
            "charge the boot supply delivers to its loads in one cycle (KCL at the boot net)",
        ),
    ]
    allowed = [v for v in (ctx.value("trr_max"), ctx.value("refresh_window_limit")) if v]
    threshold = _reverse_threshold(ctx)
    cards.append(
        integral(
            "tb_reverse_time",
            f"par('u(-{current}-{number(threshold)})')",
            start,
            end,
            f"time in the cycle that {diode.name} conducts backwards (beyond "
            f"{format_si(threshold, 'A')})",
        )
    )
    limits = (
        (
            Limit(
                "tb_reverse_time",
                min(allowed),
                "<=",
                f"{diode.name} conducts backwards no longer than the recovery time the rule allows",
                "s",
            ),
        )
        if allowed
        else ()
    )
    stop = end + min(SETTLE_AFTER, period / 10)
    return Bench(
        edits=merge_edits(edits, probe, cap_probe),
        stop=stop,
        # fine enough to resolve the recovery time the rule allows
        step=analysis_step(
            ctx.design, stop, min(schedule.on_time, period - schedule.on_time, *allowed)
        ),
        cards=tuple(cards),
        claims=tuple(_claims(ctx)),
        limits=limits,
        notes=(*notes, f"cycle {cycles} is measured, from its turn-on command"),
        saves=(cap_current,) if not cap_probe else (),
        uic=ctx.design.uses_uic(),
    )


# ---------------------------------------------------------------- gate-headroom


HEADROOM_CYCLES = 20  # switching cycles run before the one measured


def gate_headroom(ctx: BenchContext) -> Bench | Declined:
    """The gate drive while on: the boot supply as the recharge ends (before a dead time's
    freewheeling boost, which the rule does not count on), and that level less the droop
    of the on-time that follows."""
    stage, facts = ctx.stage, ctx.facts
    kind = stage.supply.kind
    need = ctx.value("vgs_needed")
    if need is None:
        return Declined("the finding gives no V_GS it needs")
    if kind not in ("bootstrap", "isolated"):
        return Declined(
            "without a floating supply (or with a charge pump) the rule's figure is the supply "
            "against the bus, a level the source never reaches: in a simulation the source "
            "follows the gate a threshold below it instead"
        )
    boot = _boot(ctx)
    if isinstance(boot, Declined):
        return boot
    edits: dict[Span, Edit] = {}
    notes: tuple[str, ...]
    if stage.mode == "switching":
        chosen = _own_or_periodic(ctx, "the duty and frequency the rule used")
        if isinstance(chosen, Declined):
            return chosen
        schedule, edits, notes = chosen
        window = _window(schedule, HEADROOM_CYCLES - 1)
    else:
        start = charge_time(ctx)
        schedule = Schedule.steps((start, True), (start + ONE_SHOT_ON, False))
        made = stimulus(ctx, schedule, "one turn-on from a charged supply")
        if isinstance(made, Declined):
            return made
        edits, notes = dict(made.edits), made.notes
        window = _window(schedule, 0)
    if isinstance(window, Declined):
        return window
    start, end = window
    dead = facts.dead_time.value if facts.dead_time is not None else 0.0
    recharged = max(start - dead, 0.0)
    cards = [
        at(
            "vgs_supply_on",
            boot,
            recharged,
            "V(boot) - V(sw) as the recharge ends"
            + (" (the low side's turn-off command, before the dead time)" if dead else ""),
        ),
        at("tb_boot_on", boot, start, "V(boot) - V(sw) at the turn-on command"),
        at("tb_boot_off", boot, end, "V(boot) - V(sw) at the turn-off command"),
        expression(
            "vgs_on_worst",
            "vgs_supply_on-(tb_boot_on-tb_boot_off)",
            "the recharged level less the droop over the on-time",
        ),
        at("tb_vgs_end", _vgs(ctx), end, "V_GS at the turn-off command"),
    ]
    stop = min(end + SETTLE_AFTER, MAX_STOP)
    shortest = end - start
    if schedule.period is not None:
        shortest = min(shortest, schedule.period - schedule.on_time)
    return Bench(
        edits=edits,
        stop=stop,
        step=analysis_step(ctx.design, stop, shortest),
        cards=tuple(cards),
        claims=tuple(_claims(ctx)),
        limits=(
            Limit(
                "vgs_supply_on",
                need,
                ">=",
                "the gate supply reaches the V_GS the switch (or the driver's lockout) needs",
                "V",
            ),
        ),
        notes=(*notes, *((f"on-time {HEADROOM_CYCLES} is measured",) if schedule.period else ())),
        uic=ctx.design.uses_uic(),
    )


# ---------------------------------------------------------------- voltage-stress


def _stress_limit(ctx: BenchContext, key: str, what: str, unit: str) -> tuple[Limit, ...]:
    limit = ctx.value("derated_limit")
    if limit is None:
        return ()
    return (Limit(key, limit, "<=", what, unit),)


def _one_turn_on(ctx: BenchContext, why: str) -> tuple[float, float, float, Stimulus] | Declined:
    """One turn-on from a charged boot supply, then the switch off with its partner on."""
    start = charge_time(ctx)
    end = start + ONE_SHOT_ON
    stop = end + ONE_SHOT_ON
    made = stimulus(ctx, Schedule.steps((start, True), (end, False)), why)
    if isinstance(made, Declined):
        return made
    return start, end, stop, made


def _settled_with_ringing(
    ctx: BenchContext,
    made: Stimulus,
    times: tuple[float, float, float],
    measured: tuple[str, str, str],
    holds: str,
) -> Bench:
    """A deck that measures a settled stress (``measured``: its claim key, vector and
    words, over ``times``' window) and holds it, plus the rule's ringing allowance, to the
    finding's derated limit; the run stops at ``times[2]``."""
    t0, t1, stop = times
    key, vector, what = measured
    ringing = ctx.value("ringing_margin") or 0.0
    with_ringing = f"tb_{key.removesuffix('_steady')}_with_ringing"
    cards = [
        extreme(key, "MAX", vector, t0, t1, f"{what} (the edge has settled)"),
        expression(
            with_ringing,
            f"{key}+{number(ringing)}",
            f"the settled value plus the rule's ringing allowance ({format_si(ringing, 'V')})",
        ),
    ]
    return Bench(
        edits=made.edits,
        stop=stop,
        step=analysis_step(ctx.design, stop, ONE_SHOT_ON),
        cards=tuple(cards),
        claims=tuple(_claims(ctx)),
        limits=_stress_limit(ctx, with_ringing, holds, "V"),
        notes=made.notes,
        uic=ctx.design.uses_uic(),
    )


def _switch_stress(ctx: BenchContext) -> Bench | Declined:
    device = ctx.circuit.devices.get(ctx.finding.device)
    if device is None or device.net("d") is None or device.net("s") is None:
        return Declined("the finding's switch cannot be found")
    timed = _one_turn_on(
        ctx,
        "one turn-on, then the switch off with the leg's other side on (the two states "
        "in which each switch blocks the bus)",
    )
    if isinstance(timed, Declined):
        return timed
    start, end, stop, made = timed
    # the floating switch blocks the bus once it is off, its partner while it is on
    own = device.name == ctx.stage.switch
    t0, t1 = ((end + stop) / 2, stop) if own else ((start + end) / 2, end)
    vds = difference(device.net("d") or "", device.net("s") or "")
    return _settled_with_ringing(
        ctx,
        made,
        (t0, t1, stop),
        ("vds_off_steady", vds, f"{device.name}'s V_DS in the second half of its off-state"),
        f"{device.name}'s V_DS, with the ringing allowance, stays within its derated rating",
    )


def _part_stress(ctx: BenchContext) -> Bench | Declined:
    device = ctx.circuit.devices.get(ctx.finding.device)
    if device is None or len(device.nets) != 2:
        return Declined("the finding's part cannot be found")
    timed = _one_turn_on(ctx, "one turn-on from a fully charged boot supply")
    if isinstance(timed, Declined):
        return timed
    start, end, stop, made = timed
    # the part's nets in the order that makes the held voltage positive
    stage = ctx.stage
    high = next((n for n in device.nets if n in (stage.gate, stage.supply.boot_net)), None)
    low = next((n for n in device.nets if n != high), None)
    if high is None or low is None:
        return Declined("the part is not across the boot supply or gate and source")
    cards = [
        extreme(
            "v_part",
            "MAX",
            difference(high, low),
            (start + end) / 2,
            end,
            f"voltage across {device.name} in the second half of the on-time",
        )
    ]
    return Bench(
        edits=made.edits,
        stop=stop,
        step=analysis_step(ctx.design, stop, ONE_SHOT_ON),
        cards=tuple(cards),
        claims=tuple(_claims(ctx)),
        limits=_stress_limit(
            ctx, "v_part", f"{device.name} stays within its derated voltage rating", "V"
        ),
        notes=made.notes,
        uic=ctx.design.uses_uic(),
    )


POWER_CYCLES = 20


def _power_stress(ctx: BenchContext) -> Bench | Declined:
    device = ctx.circuit.devices.get(ctx.finding.device)
    if device is None or device.kind != "resistor" or not device.value:
        return Declined("the finding's resistor cannot be found")
    conditions = periodic_conditions(ctx)
    if conditions is None:
        return Declined("the finding gives no switching frequency and duty to drive the stage at")
    period, on_time = conditions
    # a pulse train after the boot supply has charged (the design's own command may start
    # with the switch on and the supply empty)
    schedule = Schedule.periodic(period, on_time, charge_time(ctx))
    made = stimulus(ctx, schedule, "switching at the rule's frequency and on-time")
    if isinstance(made, Declined):
        return made
    edits, notes = made.edits, made.notes
    first = _window(schedule, POWER_CYCLES - 4)
    if isinstance(first, Declined):
        return first
    t0 = first[0]
    stop = t0 + 4 * period
    ohms = device.value / device.multiplier
    a, b = (voltage(net) if net != GROUND else "0" for net in device.nets)
    drop = f"({a}-{b})"
    cards = [
        average(
            "p_resistor",
            f"par('{drop}*{drop}/{number(ohms)}')",
            t0,
            stop,
            f"average power in {device.name} over four periods after {POWER_CYCLES - 4} cycles",
        )
    ]
    return Bench(
        edits=edits,
        stop=stop,
        step=analysis_step(ctx.design, stop, period / 200),
        cards=tuple(cards),
        claims=tuple(_claims(ctx)),
        limits=_stress_limit(
            ctx, "p_resistor", f"{device.name} stays within its derated power rating", "W"
        ),
        notes=notes,
        uic=ctx.design.uses_uic(),
    )


def voltage_stress(ctx: BenchContext) -> Bench | Declined:
    kind = stress_kind(ctx.finding.values)
    if kind == "switch":
        return _switch_stress(ctx)
    if kind == "part":
        return _part_stress(ctx)
    return _power_stress(ctx)


# ---------------------------------------------------------------- level-shift-contention

SHIFT_CYCLES = 10


def _shifter_blocking(ctx: BenchContext) -> Bench | Declined:
    device = ctx.circuit.devices.get(ctx.finding.device)
    pins = {"npn": ("c", "e"), "nmos": ("d", "s")}.get(device.model_type or "") if device else None
    if device is None or pins is None:
        return Declined("the finding's level shifter cannot be found")
    collector, emitter = device.net(pins[0]), device.net(pins[1])
    if collector is None or emitter is None:
        return Declined("the level shifter's nets cannot be found")
    timed = _one_turn_on(ctx, "one turn-on from a fully charged boot supply")
    if isinstance(timed, Declined):
        return timed
    start, end, stop, made = timed
    across = difference(collector, emitter)
    return _settled_with_ringing(
        ctx,
        made,
        ((start + end) / 2, end, stop),
        (
            "shifter_voltage_steady",
            across,
            f"{device.name}'s collector–emitter voltage in the second half of the on-time",
        ),
        f"{device.name}'s voltage, with the ringing allowance, stays within its derated rating",
    )


def _shifter_contention(ctx: BenchContext) -> Bench | Declined:
    device = ctx.circuit.devices.get(ctx.finding.device)
    if device is None or device.model_type != "npn":
        return Declined("the finding's level shifter cannot be found")
    found = _own_or_periodic(ctx, "the design's switching, the shifter pulling down each off-time")
    if isinstance(found, Declined):
        return found
    schedule, edits, notes = found
    conditions = periodic_conditions(ctx)
    assert conditions is not None
    period, on_time = conditions
    window = _window(schedule, SHIFT_CYCLES)
    if isinstance(window, Declined):
        return window
    # the shifter conducts in the off-time that follows the on-window
    off_start, off_end = (
        window[1] + (period - on_time) * 0.25,
        window[1] + (period - on_time) * 0.75,
    )
    probe = series_ammeter(ctx, device, "c", "collector")
    if isinstance(probe, Declined):
        return probe
    current, ammeter = probe
    edits = merge_edits(edits, ammeter)
    vth = ctx.value("vth")
    collector = device.net("c")
    if vth is None or collector is None:
        return Declined("the finding gives no threshold for the switch to stay below")
    cards = [
        average(
            "shifter_sink",
            current,
            off_start,
            off_end,
            f"{device.name}'s collector current in the middle of the off-time (it sinks what "
            "it can against the pull-up)",
        ),
        average(
            "tb_node_low",
            difference(collector, ctx.stage.source),
            off_start,
            off_end,
            f"the node {device.name} pulls down, above {ctx.stage.switch}'s source, in the "
            "middle of the off-time",
        ),
    ]
    stop = off_end + period / 4
    return Bench(
        edits=edits,
        stop=stop,
        step=analysis_step(ctx.design, stop, period / 200),
        cards=tuple(cards),
        claims=tuple(_claims(ctx)),
        limits=(
            Limit(
                "tb_node_low",
                vth,
                "<=",
                f"{device.name} pulls the node below {ctx.stage.switch}'s threshold, so the "
                "switch turns off",
                "V",
            ),
        ),
        notes=notes,
        uic=ctx.design.uses_uic(),
    )


def level_shift(ctx: BenchContext) -> Bench | Declined:
    if shift_kind(ctx.finding.values) == "blocking":
        return _shifter_blocking(ctx)
    return _shifter_contention(ctx)


# ---------------------------------------------------------------- driver-decoupling

FIRST_CHARGE_TAUS = 20


def driver_decoupling(ctx: BenchContext) -> Bench | Declined:
    """The first recharge of an empty bootstrap capacitor: the charge the diode carries,
    measured, and the dip it would give the bypass alone (the deck's supply source is
    ideal, so the dip is computed from the measured charge and the two capacitances)."""
    from drivelint.checks.decoupling import supply_of

    stage, facts = ctx.stage, ctx.facts
    diode, cap, supply = facts.diode, facts.capacitor, supply_of(stage, facts)
    c_boot, boot = facts.c_hold_nominal, stage.supply.boot_net
    if diode is None or cap is None or supply is None or c_boot is None or boot is None:
        return Declined("the finding gives no bootstrap diode, capacitor or supply")
    if cap.instance:
        return Declined(
            "the bootstrap capacitor sits in a subcircuit, where .ic cannot start it empty"
        )
    probe = _ammeter(ctx, diode)
    if isinstance(probe, Declined):
        return probe
    element = ctx.design.element_of(cap.name)
    if element is None:
        return Declined(f"{cap.name}'s statement cannot be found")
    # the switch off from the start, its partner holding the node low: the diode charges
    # the empty capacitor at once
    made = stimulus(ctx, Schedule.steps((MAX_STOP, True)), "the switch held off")
    if isinstance(made, Declined):
        return made
    low = facts.v_sw_low.value
    start_empty = {
        element.span: Edit(
            after=(f".ic v({boot})={number(low)}",),
            note=f"{cap.name} starts empty (.ic: its top at the switch node's low level)",
        )
    }
    r_path = (stage.supply.series_resistance or 0.0) + (
        diode.model.params.get("rs", 0.0) if diode.model else 0.0
    )
    tau = max(r_path, 1.0) * c_boot.value
    stop = max(FIRST_CHARGE_TAUS * tau, 5e-6)
    current = source_current(sense_names(ctx, diode)[2])
    bypass = ctx.value("bypass_capacitance") or 0.0
    if ctx.fix is not None:
        bypass = ctx.value("suggested_bypass") or bypass
    cards = [
        integral(
            "first_charge",
            current,
            0.0,
            stop,
            f"charge through {diode.name} as it fills the empty {cap.name}",
        ),
        expression(
            "vcc_dip",
            f"first_charge/{number(c_boot.value + bypass)}",
            "the dip that charge gives the bootstrap and bypass capacitors sharing it "
            f"({format_si(c_boot.value, 'F')} + {format_si(bypass, 'F')})",
        ),
    ]
    ratio = ctx.options.get("ratio", 10.0)
    dip, after = ctx.value("vcc_dip"), ctx.value("v_supply_after")
    nominal = facts.c_hold_nominal.value if facts.c_hold_nominal else c_boot.value
    if dip is None or after is None:
        return Declined("the finding gives no supply level and dip")
    # the dip a bypass of exactly ratio × the nominal bootstrap capacitor gives at this corner
    allowed = (dip + after) * c_boot.value / (c_boot.value + ratio * nominal)
    return Bench(
        edits=merge_edits(made.edits, probe, start_empty),
        stop=stop,
        step=analysis_step(ctx.design, stop, tau),
        cards=tuple(cards),
        claims=tuple(_claims(ctx)),
        limits=(
            Limit(
                "vcc_dip",
                allowed,
                "<=",
                f"the supply dips no more than a bypass of {ratio:g}× the bootstrap "
                "capacitor would let it",
                "V",
            ),
        ),
        notes=made.notes,
        uic=ctx.design.uses_uic(),
    )


LEG_STEADY_PERIODS = 3  # periods run after the supplies have charged, before the edge measured
LEG_GUARD = 100e-9  # the edge's cards start this much before its first command


@dataclass(frozen=True, slots=True)
class LegEdge:
    """The edge of a leg a cross-conduction finding is about, in a steady period of the
    deck: the switch turning off and the one turning on (device, V_GS vector, threshold)
    and their commands' times."""

    outgoing: str
    incoming: str
    out_nets: tuple[str, str]  # (gate, source)
    in_nets: tuple[str, str]
    out_vth: float
    in_vth: float
    out_command: float  # the outgoing switch's off-command (midpoint crossing)
    in_command: float  # the incoming switch's on-command
    period: float


def leg_edge(ctx: BenchContext, shift: float = 0.0) -> LegEdge | Declined:
    """The finding's edge, read off the design's commands (the fix moves the incoming
    command ``shift`` later)."""
    from drivelint.checks.leg import LegTiming, leg_timing

    stage, facts, values = ctx.stage, ctx.facts, ctx.finding.values
    partner = next((r for r in stage.refresh if r.kind == "low-side switch"), None)
    high, low = stage.control, partner.command if partner else None
    low_device = facts.device(partner.devices[0]) if partner else None
    if high is None or low is None or low_device is None:
        return Declined("the leg's two commands are not both traced")
    if high.waveform is None or low.waveform is None:
        return Declined("the leg's commands have no waveforms")
    timing = leg_timing(high.waveform, high.inverting, low.waveform, low.inverting)
    if not isinstance(timing, LegTiming):
        return Declined("the leg's commands cannot be read off their waveforms")
    overlap = "command_overlap" in values
    if overlap:
        start, end = timing.overlaps[0]
        at_turn_on = start <= 1e-9 * timing.period
    else:
        dead = values["dead_time"].value
        at_turn_on = values["dead_time_lead"].value == dead and (
            ctx.finding.device != low.source or high.source == low.source
        )
    begin = charge_time(ctx) + LEG_STEADY_PERIODS * timing.period
    cycles = math.ceil(max(begin - timing.origin, 0.0) / timing.period)
    turn_on = timing.origin + cycles * timing.period
    v_switched = facts.v_switched
    high_gate = facts.switch_gate(facts.switch, 10.0, v_switched).v_threshold
    low_gate = facts.switch_gate(low_device, 10.0, v_switched).v_threshold
    low_gate_net, low_source = low_device.net("g"), low_device.net("s")
    if high_gate is None or low_gate is None or low_gate_net is None or low_source is None:
        return Declined("a switch's threshold is not known, so its conduction cannot be timed")
    high_vgs = (stage.gate, stage.source)
    low_vgs = (low_gate_net, low_source)
    if at_turn_on:  # the low side turns off, the high side on
        off = turn_on + end if overlap else turn_on - dead
        return LegEdge(
            low_device.name,
            stage.switch,
            low_vgs,
            high_vgs,
            low_gate.value,
            high_gate.value,
            off,
            turn_on + shift,
            timing.period,
        )
    off = turn_on + timing.on_time
    on = turn_on + start if overlap else off + dead
    return LegEdge(
        stage.switch,
        low_device.name,
        high_vgs,
        low_vgs,
        high_gate.value,
        low_gate.value,
        off,
        on + shift,
        timing.period,
    )


def cross_conduction(ctx: BenchContext) -> Bench | Declined:
    """The design's own commands, one steady edge: when the outgoing switch's V_GS falls
    through its threshold and the incoming one's rises through its own (the conduction
    overlap, or the gap), the turn-off time from the outgoing command, and the peak drain
    current of the high side over the edge."""
    values = ctx.finding.values
    shift = (ctx.value("dead_time_shift") or 0.0) if ctx.fix is not None else 0.0
    edge = leg_edge(ctx, shift)
    if isinstance(edge, Declined):
        return edge
    # measured from a little before the first command: an edge crosses a switch's
    # threshold before its own midpoint when the threshold is below it
    reference = min(edge.out_command, edge.in_command) - min(LEG_GUARD, edge.period / 100)
    late = max(edge.out_command, edge.in_command)
    window_end = min(late + edge.period / 4, MAX_STOP)
    cards = [
        time_to_fall(
            "tb_out_off",
            reference,
            difference(*edge.out_nets),
            edge.out_vth,
            f"{edge.outgoing}'s V_GS falls through its threshold (from the first command)",
        ),
        time_to_fall(
            "tb_in_on",
            reference,
            difference(*edge.in_nets),
            edge.in_vth,
            f"{edge.incoming}'s V_GS rises through its threshold (from the first command)",
            falls=False,
        ),
        expression(
            "tb_conduction_gap",
            "tb_in_on-tb_out_off",
            "from the outgoing switch's turn-off to the incoming one's turn-on (< 0: both on)",
        ),
        expression(
            "t_switch_off",
            f"tb_out_off-{number(edge.out_command - reference)}",
            f"{edge.outgoing}'s off-command to its V_GS at the threshold",
        ),
    ]
    saves: tuple[str, ...] = ()
    if "command_overlap" in values:
        cards.append(
            expression(
                "command_overlap",
                "tb_out_off-tb_in_on",
                "both switches above their thresholds together (the conduction overlap)",
            )
        )
        current = device_vector(ctx.stage.switch, "id")
        saves = (current,)
        cards.append(
            extreme(
                "shoot_through_bound",
                "MAX",
                current,
                reference,
                window_end,
                f"peak drain current of {ctx.stage.switch} over the edge",
            )
        )
    needed_gap = ctx.value("t_prop_mismatch") or 0.0
    needed_gap += ctx.value("margin") or 0.0
    limit = Limit(
        "tb_conduction_gap",
        needed_gap,
        ">=",
        "the outgoing switch is off (below its threshold) before the incoming one turns on, "
        "with the driver's delay mismatch and the margin to spare",
        "s",
    )
    stop = min(window_end, MAX_STOP)
    shortest = max(min(abs(edge.in_command - edge.out_command), edge.period / 4), 20e-9)
    return Bench(
        edits={},
        stop=stop,
        step=analysis_step(ctx.design, stop, shortest),
        cards=tuple(cards),
        claims=tuple(_claims(ctx)),
        limits=(limit,),
        notes=(
            "the design's own commands"
            + (
                f", {edge.incoming}'s on-edge moved {format_si(shift, 's')} later (the fix)"
                if shift
                else ""
            ),
            f"the edge measured: {edge.outgoing} off at {format_si(edge.out_command, 's')}, "
            f"{edge.incoming} on at {format_si(edge.in_command, 's')}",
        ),
        saves=saves,
        uic=ctx.design.uses_uic(),
        traces=(
            voltage_trace(*edge.out_nets, name=f"V_GS {edge.outgoing}"),
            voltage_trace(*edge.in_nets, name=f"V_GS {edge.incoming}"),
        ),
    )


# ---------------------------------------------------------------- gate-pulldown-missing

# The bus comes up this long after the run starts (the design's initial state settles
# first), and the run goes on this many rise times after the ramp.
PULLDOWN_DELAY = 1e-6
PULLDOWN_AFTER = 3
# The switch node held at its low level through this resistance while the bus rises, as a
# discharged output or the other switch of the leg holds it at power-up; more than the
# 0.1 Ω that drivelint would merge as a wire, so the stage stays a floating one.
SOURCE_HOLD_OHMS = 0.2
# A floating gate has no DC path in a simulator; this stands in for its leakage, far above
# what the rule counts as a hold (checks.pulldown.HOLD_MAX_OHMS).
GATE_LEAK_OHMS = 1e12
OPEN_SUFFIX = "_tb_open"
# Terminal order of the elements whose gate-side terminal a testbench may open.
_TERMINAL_FIELDS = {"bjt": ("c", "b", "e"), "mosfet": ("d", "g", "s", "b")}


def _fresh(ctx: BenchContext, base: str) -> str:
    taken = {n.rsplit(".", 1)[-1] for n in (*ctx.design.circuit.nets, *ctx.design.circuit.devices)}
    name = base
    while name in taken:
        name += "_"
    return name


def _open_driver_output(ctx: BenchContext) -> tuple[dict[Span, Edit], str] | Declined:
    """The driver's high output cut from the gate network: unpowered, it is high
    impedance. Its field on the instance line is given a net of its own."""
    driver = ctx.stage.driver
    if driver is None:
        return {}, ""
    output = driver.pins.get("high_out")
    instance = ctx.circuit.instances.get(driver.device)
    element = ctx.design.element_of(driver.device)
    if output is None or instance is None or element is None:
        return Declined(f"the driver {driver.device}'s output cannot be found where it is written")
    ports = [i for i, (_, net) in enumerate(instance.ports) if net == output]
    if len(ports) != 1 or ports[0] >= len(element.fields):
        return Declined(f"the driver {driver.device}'s high output is not one field of its line")
    field = element.fields[ports[0]]
    if not isinstance(field, Word):
        return Declined(f"the driver {driver.device}'s high output is not a plain node name")
    net = _fresh(ctx, f"{field.raw}{OPEN_SUFFIX}")
    note = f"the driver {driver.device}'s high output opened (unpowered, it holds nothing)"
    return {element.span: Edit(fields=((field, net),), note=note)}, note


def _open_active_pulldowns(ctx: BenchContext) -> tuple[dict[Span, Edit], list[str]] | Declined:
    """Every transistor on the gate's pull-down paths cut from the gate side: unpowered,
    it conducts nothing."""
    from drivelint.checks.pulldown import passive_reach

    stage, circuit = ctx.stage, ctx.circuit
    near = {stage.gate, *passive_reach(stage, ctx.facts)}
    edits: dict[Span, Edit] = {}
    notes: list[str] = []
    for path in stage.pulldowns:
        for name in path.devices:
            device = circuit.devices.get(name)
            if device is None or device.kind not in _TERMINAL_FIELDS:
                continue
            element = ctx.design.element_of(name)
            order = _TERMINAL_FIELDS[device.kind]
            pins = [p for p in order if device.net(p) in near and p != order[1]]
            if element is None or not pins or element.span in edits:
                continue
            field = element.fields[order.index(pins[0])]
            if not isinstance(field, Word):
                return Declined(f"{name}'s terminal is not a plain node name")
            net = _fresh(ctx, f"{field.raw}{OPEN_SUFFIX}")
            note = f"{name} opened at its {pins[0]} terminal (unpowered, it pulls nothing)"
            edits[element.span] = Edit(fields=((field, net),), note=note)
            notes.append(note)
    if not edits:
        return Declined("no active pull-down on the gate's paths can be opened in its statement")
    return edits, notes


def _low_net(ctx: BenchContext) -> str:
    """The net the switch node is held at while it is low (ground, or the negative rail of
    a split supply), as the facts' v_sw_low takes it."""
    stage, facts = ctx.stage, ctx.facts
    for refresh in stage.refresh:
        if refresh.kind not in ("low-side switch", "freewheel diode"):
            continue
        net = refresh.reference or GROUND
        volts = 0.0 if net == GROUND else ctx.circuit.rails.get(net)
        if volts is not None and math.isclose(volts, facts.v_sw_low.value, abs_tol=1e-9):
            return net
    return GROUND


def _rail_ramp(
    ctx: BenchContext, net: str, level: Value, start: float, rise: float, base: float = 0.0
) -> tuple[dict[Span, Edit], str] | Declined:
    """The source from ``net`` to ground rewritten as a ramp from 0 V to ``level`` (the
    supplies stacked on it follow it up)."""
    found = sorted(
        (
            d
            for d in ctx.circuit.devices.values()
            if d.kind == "vsource" and {d.net("p"), d.net("n")} == {net, GROUND}
        ),
        key=lambda d: d.name,
    )
    element = ctx.design.element_of(found[0].name) if found else None
    if not found or element is None or len(element.fields) < 2:
        return Declined(f"no independent source sets the rail {net} against ground")
    device = found[0]
    first, second = element.fields[:2]
    if not isinstance(first, Word) or not isinstance(second, Word):
        return Declined(f"{device.name}'s nodes are not plain node names")
    sign = 1.0 if device.net("p") == net else -1.0
    line = (
        f"{ctx.design.raw_name(element)} {first.raw} {second.raw} PWL(0 {number(sign * base)} "
        f"{number(start)} {number(sign * base)} {number(start + rise)} "
        f"{number(sign * level.value)})"
    )
    note = (
        f"the rail {net} rises from {format_si(base, 'V')} to {level.text()} in "
        f"{format_si(rise, 's')} at {format_si(start, 's')} (power-up)"
    )
    return {element.span: Edit(lines=(line,), note=note)}, note


def _power_up(
    ctx: BenchContext, start: float, rise: float
) -> tuple[dict[Span, Edit], list[str]] | Declined:
    """The bus ramped up from the switch node's low level: the drain–source step the rule
    takes, V_bus − V_sw,low. On a split supply the negative rail stays where it is and the
    bus starts from it, the same step as both rails rising together."""
    stage, facts = ctx.stage, ctx.facts
    if stage.bus is None or facts.v_bus is None:
        return Declined("the stage has no bus whose rise can be simulated")
    made = _rail_ramp(ctx, stage.bus.net, facts.v_bus, start, rise, facts.v_sw_low.value)
    if isinstance(made, Declined):
        return made
    return made[0], [made[1]]


def _held_source(ctx: BenchContext) -> tuple[dict[Span, Edit], str] | Declined:
    """A leakage stand-in on the gate and the switch node held at its low level, added
    after the switch's statement."""
    stage, facts = ctx.stage, ctx.facts
    switch = ctx.circuit.devices.get(stage.switch)
    element = ctx.design.element_of(stage.switch)
    if switch is None or element is None:
        return Declined(f"{stage.switch}'s statement cannot be found")
    scope = switch.instance
    gate = ctx.design.local_net(stage.gate, scope)
    source = ctx.design.local_net(stage.source, scope)
    low_net = _low_net(ctx)
    low = ctx.design.local_net(low_net, scope)
    if gate is None or source is None or low is None:
        return Declined("the gate, source or low rail cannot be named where the switch is written")
    leak, hold = _fresh(ctx, "r_tb_gleak"), _fresh(ctx, "r_tb_hold")
    note = (
        f"{leak}: {format_si(GATE_LEAK_OHMS, 'Ω')} from gate to source, the gate's leakage (a "
        f"floating node needs a DC path); {hold}: {format_si(SOURCE_HOLD_OHMS, 'Ω')} holds the "
        f"source at {facts.v_sw_low.text()} while the bus rises"
    )
    lines = (
        f"{leak.upper()} {gate} {source} {number(GATE_LEAK_OHMS)}",
        f"{hold.upper()} {source} {low} {number(SOURCE_HOLD_OHMS)}",
    )
    return {element.span: Edit(after=lines, note=note)}, note


# A pulled-on gate is read over the last fifth of the run: the supply has charged by then.
PULLED_ON_WINDOW = 0.8


def _design_stop(ctx: BenchContext) -> float:
    """The stop time of the design's own transient analysis, 0 when it gives none."""
    from drivelint.netlist.values import parse_number

    tran = ctx.design.design_tran()
    if tran is None or len(tran.fields) < 2 or not isinstance(tran.fields[1], Word):
        return 0.0
    parsed = parse_number(tran.fields[1].text)
    return parsed if parsed and parsed > 0 else 0.0


def gate_pulldown(ctx: BenchContext) -> Bench | Declined:
    if "vgs_turn_on" in ctx.finding.values:
        return _pulled_on(ctx)
    vth, fraction = ctx.value("vth"), ctx.value("hold_fraction")
    rise = ctx.value("bus_rise_time")
    if vth is None or fraction is None or rise is None or "vgs_induced" not in ctx.finding.values:
        return Declined("the finding gives no induced gate voltage to simulate")
    opened = _open_driver_output(ctx)
    ramp = _power_up(ctx, PULLDOWN_DELAY, rise)
    held = _held_source(ctx)
    for made in (opened, ramp, held):
        if isinstance(made, Declined):
            return made
    assert not isinstance(opened, Declined) and not isinstance(ramp, Declined)
    assert not isinstance(held, Declined)
    stop = PULLDOWN_DELAY + (1 + PULLDOWN_AFTER) * rise
    bound = fraction * vth
    claims = [c for c in _claims(ctx)]
    key = "vgs_induced_with_fix" if ctx.fix is not None else "vgs_induced"
    cards = [
        extreme(key, "MAX", _vgs(ctx), 0.0, stop, "highest V_GS as the bus comes up"),
        extreme(
            "tb_vgs_left",
            "MAX",
            _vgs(ctx),
            PULLDOWN_DELAY + PULLDOWN_AFTER * rise,
            stop,
            "highest V_GS over the last rise time of the run: the charge left on the gate",
        ),
        extreme(
            "tb_vds_step",
            "MAX",
            difference(ctx.stage.drain, ctx.stage.source),
            0.0,
            stop,
            "the drain–source step",
        ),
    ]
    return Bench(
        edits=merge_edits(opened[0], ramp[0], held[0]),
        stop=stop,
        step=analysis_step(ctx.design, stop, rise),
        cards=tuple(cards),
        claims=tuple(claims),
        limits=(
            Limit(
                "tb_vgs_left",
                bound,
                "<=",
                f"the gate returns within {fraction:g} × V_th after the bus has come up (a "
                "floating gate keeps the charge the step put on it)",
                "V",
            ),
        ),
        notes=(
            *(n for n in (opened[1], *ramp[1], held[1]) if n),
            "no initial conditions (uic) are used: the run starts from the operating point "
            "with the bus at 0 V, as at power-up",
        ),
        uic=False,
    )


def _pulled_on(ctx: BenchContext) -> Bench | Declined:
    vth = ctx.value("vth")
    if vth is None:
        return Declined("the finding gives no threshold")
    driver = _open_driver_output(ctx)
    if isinstance(driver, Declined):
        return driver
    opened = _open_active_pulldowns(ctx)
    if isinstance(opened, Declined) and not driver[0]:
        return opened
    edits, notes = dict(driver[0]), [driver[1]] if driver[1] else []
    if not isinstance(opened, Declined):
        edits = merge_edits(edits, opened[0])
        notes += opened[1]
    settle = charge_time(ctx)
    stop = min(max(2 * settle, _design_stop(ctx)), MAX_STOP)
    start = PULLED_ON_WINDOW * stop
    name = "vgs_pulled_on" if "vgs_pulled_on" in ctx.finding.values else "tb_vgs_late"
    cards = [
        extreme(
            name,
            "MAX",
            _vgs(ctx),
            start,
            stop,
            "highest V_GS over the end of the run, the floating supply charged and the "
            "active pull-downs open",
        ),
        at("tb_vgs_window", _vgs(ctx), start, "V_GS as the measuring window opens"),
    ]
    return Bench(
        edits=edits,
        stop=stop,
        step=analysis_step(ctx.design, stop, settle / 10),
        cards=tuple(cards),
        claims=tuple(_claims(ctx)),
        limits=(Limit(name, vth, "<=", "the switch stays off uncommanded", "V"),),
        notes=(*notes, "the design's own stimulus; the supply charges as the design lets it"),
        uic=ctx.design.uses_uic(),
    )


def traces_for(ctx: BenchContext, kind: str) -> tuple[Trace, ...]:
    """The series of the waveform file, the quantity the claims are about first: the boot
    supply for hold, refresh and headroom findings, V_GS for gate findings, the diode's
    reverse voltage or its current for the diode's."""
    stage = ctx.stage
    vgs = voltage_trace(stage.gate, stage.source, "V_GS")
    boot = (
        voltage_trace(stage.supply.boot_net, stage.source, "V(boot)-V(sw)")
        if stage.supply.boot_net
        else None
    )
    rule = kind.split("/", 1)[0]
    diode = ctx.facts.diode
    if rule == "gate-overvoltage":
        return (vgs,)
    if rule == "bootstrap-diode-voltage" and diode is not None:
        anode, cathode = diode.net("a"), diode.net("k")
        if anode is not None and cathode is not None:
            return (voltage_trace(cathode, anode, "V_R"),)
    if rule == "bootstrap-diode-slow" and diode is not None:
        current = Trace("I_D", "A", source_current(sense_names(ctx, diode)[2]))
        return (current, *((boot,) if boot else ()))
    if rule == "gate-headroom" and boot is not None:
        return (boot, vgs)
    return (boot,) if boot is not None else (vgs,)


def build(ctx: BenchContext) -> Bench | Declined:
    """The rule's builder, with the supplies held at the levels the rule judged them at.

    On a fixed deck, a supply the fix itself changes keeps the fix's level.
    """
    builder = BUILDERS.get(ctx.finding.rule)
    if builder is None:
        return Declined(NOT_SIMULATED.get(ctx.finding.rule, "no testbench builder for this rule"))
    bench = builder(ctx)
    if isinstance(bench, Declined):
        return bench
    kind = finding_kind(ctx.finding, ctx.stage)
    stress = kind in STRESS_KINDS
    uses = CORNER_USES.get(ctx.finding.rule)
    held = held_supplies(ctx, stress=stress, supply_corner=uses is None or "supply" in uses)
    if isinstance(held, Declined):
        return held
    fixed = ctx.fix.edits if ctx.fix is not None else {}
    # a supply the fix or the bench itself rewrites keeps that edit (a bus ramped at power-up)
    supplies = {
        span: edit
        for span, edit in held.edits.items()
        if span not in fixed and not (span in bench.edits and bench.edits[span].lines is not None)
    }
    corner = corner_deck(ctx, STRESS if stress else HOLD, skip=fixed, uses=uses)
    if isinstance(corner, Declined):
        return corner
    return replace(
        bench,
        traces=bench.traces or traces_for(ctx, kind),
        edits=merge_edits(bench.edits, supplies, corner.edits),
        notes=(*bench.notes, *(n for n, span in zip(held.notes, held.edits) if span not in fixed)),
        corner=corner.notes,
        directives=corner.directives,
        corner_side=corner.side,
        corner_values=corner.values,
    )


# The off switch's gate is read for this long after the high side's command edge: the
# driver's delay and the edge itself, well short of any on-time worth switching.
INDUCED_WINDOW = 1e-6


def induced_turn_on(ctx: BenchContext) -> Bench | Declined:
    """The leg switching at the design's own command (or the rule's pulse train); the off
    switch's highest V_GS during its partner's turn-on edge, against its threshold: the low
    side's while the high side turns on, the high side's once the dead time after its own
    turn-off has passed and the low side turns on."""
    from drivelint.checks.induced import edges

    r_off = ctx.value("r_off")
    vth = ctx.value("vth")
    found = [
        e
        for e in edges(ctx.stage, ctx.facts)
        if r_off is not None
        and math.isclose(e.victim_off.resistance.value, r_off, rel_tol=1e-6)
        and math.isclose(e.victim.vth.value, vth or 0.0, rel_tol=1e-9)
    ]
    if len(found) != 1 or vth is None:
        return Declined("the finding's edge is not one the rule finds on this stage")
    edge = found[0]
    victim = edge.victim.device
    gate, source = victim.net("g"), victim.net("s")
    if gate is None or source is None:
        return Declined(f"{victim.name}'s gate or source cannot be probed")
    laid_out = _own_or_periodic(ctx, "the leg switching at its own command")
    if isinstance(laid_out, Declined):
        return laid_out
    schedule, edits, notes = laid_out
    window = _window(schedule, 1)
    if isinstance(window, Declined):
        return window
    start, end = window
    if victim.name == ctx.stage.switch:
        # the partner turns on a dead time after the high side's own turn-off, whose gate
        # has fallen by then; read until half-way to the next turn-on
        dead = partner_dead_time(ctx, schedule)
        if dead <= 0:
            return Declined("the low side's turn-on is not commanded apart from the high side's")
        off_time = (schedule.period or 0.0) - (end - start)
        read_from = end + dead
        read_to = read_from + min(INDUCED_WINDOW, 0.5 * (off_time - dead))
        what = f"highest V_GS of {victim.name} while {edge.aggressor.device.name} turns on"
    else:
        read_from = start
        read_to = start + min(INDUCED_WINDOW, 0.5 * (end - start))
        what = f"highest V_GS of {victim.name} while {ctx.stage.switch} turns on"
    if read_to <= read_from:
        return Declined("no time between the edges to read the off gate in")
    stop = min(max(end, read_to) + SETTLE_AFTER, MAX_STOP)
    cards = [extreme("vgs_peak", "MAX", difference(gate, source), read_from, read_to, what)]
    return Bench(
        edits=edits,
        stop=stop,
        step=analysis_step(ctx.design, stop, read_to - read_from),
        cards=tuple(cards),
        claims=tuple(_claims(ctx)),
        limits=(
            Limit("vgs_peak", vth, "<=", f"{victim.name}'s gate stays below its threshold", "V"),
        ),
        notes=notes,
        uic=ctx.design.uses_uic(),
    )


# ---------------------------------------------------------------- switching-loss

# The edges and the dissipation are read this many periods in, after the design's own start
# (its inductor and output capacitor near their steady state), over SWITCH_READ periods.
SWITCH_CYCLES = 30
SWITCH_READ = 2
# 10–90 % of the swing: the middle of the plateau, clear of the edge's corners.
EDGE_LOW, EDGE_HIGH = 0.1, 0.9


def _edge_card(
    name: str, vector: str, low: float, high: float, at_time: float, rises: bool
) -> Card:
    edge = "RISE=1" if rises else "FALL=1"
    first, second = (low, high) if rises else (high, low)
    return Card(
        name,
        f".meas tran {name} TRIG {vector} VAL={number(first)} TD={number(at_time)} {edge} "
        f"TARG {vector} VAL={number(second)} TD={number(at_time)} {edge}",
        f"the switch node's {'rise' if rises else 'fall'} from {EDGE_LOW:.0%} to "
        f"{EDGE_HIGH:.0%} of its swing",
    )


def switching_loss(ctx: BenchContext) -> Bench | Declined:
    """The leg at the design's own command (or the rule's pulse train), SWITCH_CYCLES periods
    in: the switch node's 10–90 % rise at turn-on and fall at turn-off, scaled to the whole
    swing, and the switch's average dissipation V_DS·I_D over SWITCH_READ periods."""
    stage, facts = ctx.stage, ctx.facts
    kind = finding_kind(ctx.finding, stage)
    # the junction finding's switch (the floating one or its partner); the edges' finding
    # names the gate resistor, and the floating switch is probed
    judged = ctx.finding.device if kind.endswith("junction") else stage.switch
    device = ctx.circuit.devices.get(judged)
    fsw, bus = facts.fsw, facts.v_bus
    if device is None or device.kind != "mosfet" or fsw is None or bus is None:
        return Declined("the finding's switch, frequency or bus cannot be found")
    drain, source = device.net("d"), device.net("s")
    if drain is None or source is None:
        return Declined(f"{device.name}'s drain or source cannot be probed")
    laid_out = _own_or_periodic(ctx, "the leg switching at its own command")
    if isinstance(laid_out, Declined):
        return laid_out
    schedule, edits, notes = laid_out
    window = _window(schedule, SWITCH_CYCLES)
    if isinstance(window, Declined):
        return window
    start, end = window
    period = 1.0 / fsw.value
    low, swing = facts.v_sw_low.value, facts.v_switched
    node = voltage(stage.source)
    level_low, level_high = low + EDGE_LOW * swing, low + EDGE_HIGH * swing
    share = EDGE_HIGH - EDGE_LOW
    cards = [
        _edge_card("tb_rise", node, level_low, level_high, start, True),
        _edge_card("tb_fall", node, level_low, level_high, end, False),
        expression("t_voltage_on", f"tb_rise/{share:g}", "the turn-on swing, whole"),
        expression("t_voltage_off", f"tb_fall/{share:g}", "the turn-off swing, whole"),
        expression(
            "tb_edge_fraction",
            f"(t_voltage_on+t_voltage_off)*{number(fsw.value)}",
            "the part of the period the node spends swinging (its current edges not counted)",
        ),
    ]
    limits: list[Limit] = []
    stop = end + SETTLE_AFTER
    if kind.endswith("junction"):
        probe = series_ammeter(ctx, device, "c", "drain")
        if isinstance(probe, Declined):
            return probe
        current, ammeter = probe
        edits = merge_edits(edits, ammeter)
        read_to = start + SWITCH_READ * period
        vds = f"(v({drain})-{'0' if source == GROUND else voltage(source)})"
        cards.append(
            average(
                "p_switch_cold",
                f"par('{vds}*{current}')",
                start,
                read_to,
                f"{device.name}'s average V_DS·I_D over {SWITCH_READ} periods",
            )
        )
        stop = max(stop, read_to + SETTLE_AFTER)
        limit, ambient = ctx.value("t_junction_limit"), ctx.value("ambient")
        rth = ctx.value("rth_ja")
        if limit is not None and ambient is not None and rth:
            limits.append(
                Limit(
                    "p_switch_cold",
                    (limit - ambient) / rth,
                    "<=",
                    f"{device.name} dissipates no more than its junction's limit allows "
                    "(R_DS(on) as the model gives it: its rise with T_j is not simulated)",
                    "W",
                )
            )
    else:
        allowed = ctx.value("edge_fraction_max")
        if allowed is not None:
            limits.append(
                Limit(
                    "tb_edge_fraction",
                    allowed,
                    "<=",
                    "the node's swings take no more than the allowed part of the period",
                )
            )
    return Bench(
        edits=edits,
        stop=min(stop, MAX_STOP),
        step=analysis_step(ctx.design, stop, period / 2000),
        cards=tuple(cards),
        claims=tuple(_claims(ctx)),
        limits=tuple(limits),
        notes=notes,
        uic=ctx.design.uses_uic(),
    )


# The switch pin is read for this long after the high side's turn-off command: the driver's
# delay, the gate's fall to its plateau and the current's fall, well short of an off-time.
UNDERSHOOT_WINDOW = 1e-6


def switch_node_undershoot(ctx: BenchContext) -> Bench | Declined:
    """The leg switching at the design's own command (or the rule's pulse train), the
    strays of the circuit as written in place; after the high side's turn-off, how far the
    driver's switch pin falls below its common and the boot voltage's peak."""
    from drivelint.checks.undershoot import commutation_edge

    edge = commutation_edge(ctx.stage, ctx.facts)
    if edge is None:
        return Declined("the finding's commutation edge is not one the rule finds on this stage")
    switch_pin, common = edge.pins
    if "." in switch_pin or "." in common:
        return Declined("the driver's pins are inside a subcircuit: they cannot be probed")
    laid_out = _own_or_periodic(ctx, "the leg switching at its own command")
    if isinstance(laid_out, Declined):
        return laid_out
    schedule, edits, notes = laid_out
    window = _window(schedule, 1)
    if isinstance(window, Declined):
        return window
    start, end = window
    off_time = (schedule.period or 0.0) - (end - start)
    read_to = end + min(UNDERSHOOT_WINDOW, 0.5 * off_time) if off_time > 0 else end + 1e-7
    stop = min(read_to + SETTLE_AFTER, MAX_STOP)
    driver = ctx.stage.driver.device if ctx.stage.driver else "the driver"
    cards = [
        extreme(
            "undershoot_depth",
            "MAX",
            difference(common, switch_pin),
            end,
            read_to,
            f"how far {driver}'s switch pin falls below its common after {ctx.stage.switch} "
            "turns off",
        )
    ]
    limits: list[Limit] = []
    vs_min = ctx.value("vs_min")
    if vs_min is not None:
        limits.append(
            Limit(
                "undershoot_depth",
                -vs_min,
                "<=",
                f"{driver}'s switch pin stays within its rating below the common",
                "V",
            )
        )
    boot = ctx.stage.supply.boot_net
    if boot and "v_boot_undershoot" in ctx.finding.values:
        cards.append(
            extreme(
                "v_boot_undershoot",
                "MAX",
                difference(boot, switch_pin),
                end,
                read_to,
                "the boot voltage's peak after the turn-off",
            )
        )
        v_limit = ctx.value("v_limit")
        if v_limit is not None:
            limits.append(
                Limit("v_boot_undershoot", v_limit, "<=", "the boot voltage stays rated", "V")
            )
    return Bench(
        edits=edits,
        stop=stop,
        step=analysis_step(ctx.design, stop, read_to - end),
        cards=tuple(cards),
        claims=tuple(_claims(ctx)),
        limits=tuple(limits),
        notes=notes,
        uic=ctx.design.uses_uic(),
    )


BUILDERS: Mapping[str, Builder] = {
    "switch-node-undershoot": switch_node_undershoot,
    "switching-loss": switching_loss,
    "induced-turn-on": induced_turn_on,
    "bootstrap-capacitor-small": capacitor_small,
    "bootstrap-diode-slow": diode_slow,
    "bootstrap-diode-voltage": diode_voltage,
    "bootstrap-no-refresh": no_refresh,
    "dc-hold": dc_hold,
    "gate-overvoltage": gate_overvoltage,
    "gate-headroom": gate_headroom,
    "voltage-stress": voltage_stress,
    "level-shift-contention": level_shift,
    "driver-decoupling": driver_decoupling,
    "cross-conduction": cross_conduction,
    "gate-pulldown-missing": gate_pulldown,
}

# Rules whose failure no simulation of the circuit can show, with the reason.
NOT_SIMULATED: Mapping[str, str] = {}
