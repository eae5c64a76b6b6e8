"""Bootstrap diode checks: reverse voltage rating (and, beside it, recovery speed)."""

from __future__ import annotations

from collections.abc import Iterator

from drivelint.checks.base import CheckContext, Finding
from drivelint.checks.corners import STRESS, with_corner
from drivelint.checks.facts import StageFacts
from drivelint.physics import diode as diode_physics
from drivelint.physics import stress
from drivelint.ratings.values import Value, computed
from drivelint.stages.model import DriveStage


def reverse_voltage(facts: StageFacts) -> Value | None:
    """What the bootstrap diode blocks with the switch on, at the supplies' highest:
    V_bus + V_boot − V_aux (the cathode rides at V_bus + V_boot, the anode stays at V_aux;
    for a split rail V_boot already counts from the negative rail, so this is the whole
    rail-to-rail swing less a diode drop). Ringing is the rule's margin, not included."""
    if facts.v_bus is None or facts.v_aux_max is None or facts.v_boot_max is None:
        return None
    volts = diode_physics.diode_reverse_voltage(
        facts.v_bus.value, facts.v_boot_max.value, facts.v_aux_max.value
    )
    return computed(volts, "V", "computed: V_bus + V_boot − V_aux (supplies at their highest)")


def check_diode_voltage(stage: DriveStage, ctx: CheckContext) -> Iterator[Finding]:
    facts = ctx.facts
    diode = facts.diode
    # Blocking the bus is a while-on stress: a switch never commanded on does not load it.
    if stage.supply.kind != "bootstrap" or diode is None or facts.never_on:
        return
    base = reverse_voltage(facts)
    if base is None or facts.v_bus is None or facts.v_aux_max is None:
        return
    assert facts.v_boot_max is not None
    rating = facts.ratings.get(diode, "vrrm")
    if rating is None:
        return
    swing = facts.v_switched
    ringing = ctx.options["ringing"] * swing
    v_reverse = base.value + ringing
    factor = ctx.options["derating"]
    limit = stress.derated_limit(rating.value, factor)
    if v_reverse <= limit:
        return
    from drivelint.checks.printed import sum_line
    from drivelint.netlist.values import format_si

    needed = v_reverse / factor
    values = {
        "diode_reverse_voltage": computed(
            v_reverse, "V", "computed: V_bus + V_boot − V_aux + ringing"
        ),
        "diode_reverse_voltage_steady": base,
        "v_bus": facts.v_bus,
        "v_boot": facts.v_boot_max,
        "v_aux": facts.v_aux_max,
        "v_sw_low": facts.v_sw_low,
        "ringing_margin": computed(ringing, "V", "option ringing × (V_bus − V_sw,low)"),
        "diode_rating": rating,
        "derating": Value(factor, "1", "option derating"),
        "derated_limit": computed(limit, "V", "computed: rating × derating"),
    }
    found = ctx.finding(
        diode.name,
        f"{diode.name} blocks {format_si(v_reverse, 'V')} while {stage.switch} is on, "
        f"above {format_si(limit, 'V')} "
        f"({factor:.0%} of its {format_si(rating.value, 'V')} rating)",
        values,
        fix=f"use a bootstrap diode rated at least {format_si(needed, 'V')} "
        f"(so that {format_si(v_reverse, 'V')} is within {factor:.0%} of its rating)",
        derivation=(
            "V_R = V_bus + V_boot − V_aux + k_ring·(V_bus − V_sw,low)",
            "    = "
            + sum_line(
                [
                    (1, facts.v_bus.value),
                    (1, facts.v_boot_max.value),
                    (-1, facts.v_aux_max.value),
                    (1, ringing),
                ],
                "V",
            ),
            f"  k_ring·(V_bus − V_sw,low) = {ctx.options['ringing']:g} × "
            f"({sum_line([(1, facts.v_bus.value), (-1, facts.v_sw_low.value)], 'V')}) "
            f"= {format_si(ringing, 'V')}",
            "  V_boot = V_aux,max − V_F − V_sw,low"
            + (" + dead-time boost" if facts.dead_time_boost.value else "")
            + " = "
            + sum_line(
                [
                    (1, facts.v_aux_max.value),
                    (-1, facts.diode_vf.value),
                    (-1, facts.v_sw_low.value),
                    *([(1, facts.dead_time_boost.value)] if facts.dead_time_boost.value else []),
                ],
                "V",
            )
            + f"  (V_F: {facts.diode_vf.origin}; V_sw,low: {facts.v_sw_low.origin})",
            f"limit = V_RRM × derating = {rating.text()} × {factor:g} = {format_si(limit, 'V')}",
        ),
    )
    # V_R = V_bus − V_F: the gate supply's tolerance cancels, only the bus's moves it
    yield with_corner(found, facts, STRESS, frozenset({"bus"}))


CHECKS = {"bootstrap-diode-voltage": check_diode_voltage}
