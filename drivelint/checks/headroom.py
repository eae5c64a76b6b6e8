"""Gate headroom: does the gate supply enhance the switch fully, and clear the driver's lockout?

A stage whose supply sits at or below what the switch needs must not be skipped by the
sizing rules and left silent: this rule reports it, with the drive level it computed, what
the switch and the driver need, and where each number came from.
"""

from __future__ import annotations

from collections.abc import Iterator
from dataclasses import dataclass

from drivelint.checks.base import CheckContext, Finding
from drivelint.checks.corners import HOLD, nominal_for, with_corner
from drivelint.checks.facts import StageFacts
from drivelint.checks.hold import boot_voltage_line
from drivelint.checks.printed import sum_line
from drivelint.diagnostics import Severity
from drivelint.netlist.values import format_si
from drivelint.ratings.values import Value, computed
from drivelint.stages.model import DriveStage


def _v(value: float) -> str:
    return format_si(value, "V")


@dataclass(frozen=True, slots=True)
class Headroom:
    """The on-state drive of a stage against what it needs."""

    supply_level: Value  # V_GS the supply gives with the switch on, before droop
    droop: Value | None  # the hold capacitor's droop per on-time (bootstrap, switching)
    vgs_on_worst: Value  # supply level less the droop
    need: Value  # max(vgs_on, UVLO + margin)
    lockout: Value | None  # the driver's boot UVLO plus its margin
    full_on: Value | None  # below this the switch stays in its linear region


def _supply_level(stage: DriveStage, facts: StageFacts) -> Value | None:
    """V_GS the gate supply gives with the switch on and its source up at the bus."""
    supply = stage.supply
    if supply.kind != "none":
        return facts.v_boot0
    # No floating supply: a gate pulled up from a ground-referenced rail, the source at the
    # bus when on. Only a stage that switches is meant to be fully on (a linear stage is a
    # follower on purpose).
    if stage.mode == "linear" or facts.v_bus is None:
        return None
    rails = [
        facts.circuit.rails.get(p.end_net)
        for p in stage.pullups
        if p.returns_to != "boot" and facts.circuit.rails.get(p.end_net) is not None
    ]
    if not rails:
        return None
    highest = max(r for r in rails if r is not None)
    return computed(
        highest - facts.v_bus.value,
        "V",
        f"computed: the highest pull-up rail {_v(highest)} − the bus {facts.v_bus.text()} "
        "(no floating supply: the source cannot rise above the gate)",
    )


def _full_on_level(facts: StageFacts) -> Value | None:
    """The Miller plateau (parts vgs_plateau), else the threshold: the switch cannot be
    fully on with its gate below it."""
    plateau = facts.ratings.get(facts.switch, "vgs_plateau")
    if plateau is not None:
        return Value(plateau.value, "V", f"Miller plateau ({plateau.origin})")
    vth = facts.ratings.get(facts.switch, "vth")
    if vth is not None:
        return Value(vth.value, "V", f"threshold ({vth.origin})")
    return None


def headroom(
    stage: DriveStage, facts: StageFacts, uvlo_margin: float, margin: float
) -> Headroom | None:
    level = _supply_level(stage, facts)
    if level is None:
        return None
    droop = (
        facts.droop_per_cycle
        if stage.supply.kind == "bootstrap" and stage.mode == "switching"
        else None
    )
    worst = level.value - (droop.value if droop else 0.0)
    worst_value = computed(
        worst, "V", "computed: supply level − droop per cycle" if droop else level.origin
    )
    lockout = None
    if facts.uvlo is not None:
        lockout = computed(
            facts.uvlo.value + uvlo_margin,
            "V",
            f"computed: driver boot UVLO {facts.uvlo.text()} ({facts.uvlo.origin}) + margin "
            f"{_v(uvlo_margin)}",
        )
    need_value = facts.vgs_on.value + margin
    need = computed(
        need_value,
        "V",
        f"computed: vgs_on {facts.vgs_on.text()} ({facts.vgs_on.origin})"
        + (f" + margin {_v(margin)}" if margin else ""),
    )
    if lockout is not None and lockout.value > need.value:
        need = lockout
    return Headroom(level, droop, worst_value, need, lockout, _full_on_level(facts))


def check_gate_headroom(stage: DriveStage, ctx: CheckContext) -> Iterator[Finding]:
    facts = ctx.facts
    if stage.channel != "nmos" or facts.never_on:
        return
    found = headroom(stage, facts, ctx.options["uvlo_margin"], ctx.options["margin"])
    if found is None:
        return
    level, need = found.supply_level, found.need
    # Droop that pushes a sufficient supply below the need is the capacitor's problem
    # (bootstrap-capacitor-small); this rule is about the supply level itself.
    if level.value > need.value:
        return
    # The supply level itself decides the severity; what one on-time's droop adds is the
    # capacitor's share and is reported beside it.
    vgs = level.value
    after = found.vgs_on_worst.value
    locked = found.lockout is not None and vgs < found.lockout.value
    not_on = vgs <= 0 or (found.full_on is not None and vgs <= found.full_on.value)
    droop_locks = not locked and found.lockout is not None and after < found.lockout.value
    severity = ctx.severity if (locked or not_on) else Severity.WARNING
    values: dict[str, Value] = {
        "vgs_supply_on": level,
        "vgs_on_worst": found.vgs_on_worst,
        "vgs_needed": need,
        "vgs_on": facts.vgs_on,
        "uvlo_margin": Value(ctx.options["uvlo_margin"], "V", "option uvlo_margin"),
        "margin": Value(ctx.options["margin"], "V", "option margin"),
    }
    if found.droop is not None:
        values["droop_per_cycle"] = found.droop
    if facts.uvlo is not None:
        values["uvlo"] = facts.uvlo
    if found.full_on is not None:
        values["vgs_full_on"] = found.full_on
    for key, value in (
        ("v_aux", facts.v_aux),
        ("diode_vf", facts.diode_vf if facts.diode is not None else None),
        ("v_sw_low", facts.v_sw_low if stage.supply.kind == "bootstrap" else None),
        ("v_bus", facts.v_bus),
    ):
        if value is not None:
            values[key] = value
    supply = stage.supply
    what = {
        "bootstrap": (
            f"the bootstrap supply ({supply.capacitor or 'hold capacitor'} charged through "
            f"{supply.diode or 'its diode'} from {supply.aux.net if supply.aux else 'its rail'})"
        ),
        "isolated": f"the isolated supply {supply.source}",
        "charge-pump": f"the charge pump {supply.source}",
        "none": "the gate's pull-up rail",
    }.get(supply.kind, "the gate supply")
    if vgs <= 0 or (supply.kind in ("none", "charge-pump") and not_on):
        consequence = (
            "the switch cannot be enhanced: its source follows the gate up to about a "
            "threshold below it, so it conducts as a source follower with most of the bus "
            "across it"
        )
    elif locked:
        consequence = f"{_near_lockout(facts, vgs)}, so the driver may turn the switch off unasked"
    elif not_on:
        consequence = (
            f"at or below {found.full_on.text()} ({found.full_on.origin}): the switch never "  # type: ignore[union-attr]
            "leaves its linear region at load"
        )
    else:
        rated = "V_CE(sat)" if stage.technology == "igbt" else "R_DS(on)"
        consequence = (
            f"short of the {facts.vgs_on.text()} its {rated} is rated at, so it conducts "
            f"with a higher {'saturation voltage' if stage.technology == 'igbt' else 'resistance'} "
            "and heats"
        )
    device = _device(stage, facts)
    droop_text = (
        f", {found.vgs_on_worst.text()} after a {found.droop.text()} droop" if found.droop else ""
    )
    if droop_locks:
        consequence += (
            f"; after one on-time's droop it is {found.vgs_on_worst.text()}, "
            f"{_near_lockout(facts, after)}"
        )
    message = (
        f"{what} gives {stage.switch} only {level.text()} of gate drive{droop_text}, at or "
        f"below the {need.text()} it needs: {consequence}"
    )
    fix = _fix(stage, facts, found)
    boot = boot_voltage_line(facts) if supply.kind == "bootstrap" else None
    derivation = [
        boot.replace("V_boot,0 =", "V_GS,on = V_boot,0 =", 1)
        if boot
        else f"V_GS,on = {level.text()} ({level.origin})",
        f"need = max(vgs_on + margin, UVLO + uvlo_margin) = {need.text()} ({need.origin})",
    ]
    if found.droop is not None:
        derivation.insert(
            1,
            "after one on-time: " + sum_line([(1, level.value), (-1, found.droop.value)], "V"),
        )
    if found.full_on is not None:
        derivation.append(f"fully on only above {found.full_on.text()} ({found.full_on.origin})")
    finding = ctx.finding(
        device, message, values, fix=fix, derivation=tuple(derivation), severity=severity
    )
    yield with_corner(finding, facts, HOLD)


def _near_lockout(facts: StageFacts, vgs: float) -> str:
    """How a level stands against the driver's boot lockout and its part-to-part margin."""
    uvlo = facts.uvlo
    assert uvlo is not None
    if vgs < uvlo.value:
        return f"below the driver's boot lockout {uvlo.text()}"
    return f"within {_v(vgs - uvlo.value)} of the driver's boot lockout {uvlo.text()}"


def _device(stage: DriveStage, facts: StageFacts) -> str:
    supply = stage.supply
    if supply.kind == "bootstrap" and supply.diode:
        return supply.diode
    if supply.source and facts.device(supply.source) is not None:
        return supply.source
    return stage.switch


def _fix(stage: DriveStage, facts: StageFacts, found: Headroom) -> str:
    supply = stage.supply
    need = found.need.value
    if supply.kind == "bootstrap":
        # the nominal rail whose low corner clears the need
        aux = facts.v_aux.value if facts.v_aux else 0.0
        target = nominal_for(facts, aux + need - found.supply_level.value)
        aux = facts.v_aux_nominal.value if facts.v_aux_nominal else aux
        short = target - aux
        return (
            f"raise the auxiliary rail by at least {_v(max(short, 0.0))} (to "
            f"{_v(aux + max(short, 0.0))} or more; a 12 V or 15 V gate rail is usual), or use a "
            "lower-drop (Schottky) bootstrap diode, or a switch rated for logic-level drive"
        )
    if supply.kind == "charge-pump":
        return (
            f"feed the pump from the bus (or stack it on the switch's source) so that its output "
            f"rides at least {_v(need)} above the source, or use a bootstrap or isolated supply"
        )
    if supply.kind == "none":
        return (
            "a high-side N-channel switch needs a gate supply that rides on its source: a "
            "bootstrap, charge pump or isolated supply, or a gate rail at least "
            f"{_v(need)} above the bus"
        )
    return f"use a supply of at least {_v(need)}, or a switch rated for the drive available"


CHECKS = {"gate-headroom": check_gate_headroom}
