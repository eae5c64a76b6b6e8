"""Bootstrap diode checks: reverse voltage rating (and, beside it, recovery speed)."""

from __future__ import annotations

from collections.abc import Iterator

from drivelint.checks.base import CheckContext, Finding
from drivelint.physics import diode as diode_physics
from drivelint.physics import stress
from drivelint.ratings.values import Value, computed
from drivelint.stages.model import DriveStage


def check_diode_voltage(stage: DriveStage, ctx: CheckContext) -> Iterator[Finding]:
    facts = ctx.facts
    diode = facts.diode
    if stage.supply.kind != "bootstrap" or diode is None:
        return
    if facts.v_bus is None or facts.v_aux is None or facts.v_boot0 is None:
        return
    rating = facts.ratings.get(diode, "vrrm")
    if rating is None:
        return
    ringing = ctx.options["ringing"] * facts.v_bus.value
    v_reverse = diode_physics.diode_reverse_voltage(
        facts.v_bus.value, facts.v_boot0.value, facts.v_aux.value, ringing
    )
    factor = ctx.options["derating"]
    limit = stress.derated_limit(rating.value, factor)
    if v_reverse <= limit:
        return
    from drivelint.netlist.values import format_si

    needed = v_reverse / factor
    values = {
        "diode_reverse_voltage": computed(
            v_reverse, "V", "computed: V_bus + V_boot − V_aux + ringing"
        ),
        "v_bus": facts.v_bus,
        "v_boot": facts.v_boot0,
        "v_aux": facts.v_aux,
        "ringing_margin": computed(ringing, "V", "option ringing × V_bus"),
        "diode_rating": rating,
        "derating": Value(factor, "1", "option derating"),
        "derated_limit": computed(limit, "V", "computed: rating × derating"),
    }
    yield ctx.finding(
        diode.name,
        f"{diode.name} blocks {format_si(v_reverse, 'V')} while {stage.switch} is on, "
        f"above {format_si(limit, 'V')} "
        f"({factor:.0%} of its {format_si(rating.value, 'V')} rating)",
        values,
        fix=f"use a bootstrap diode rated at least {format_si(needed, 'V')} "
        f"(so that {format_si(v_reverse, 'V')} is within {factor:.0%} of its rating)",
        derivation=(
            "V_R = V_bus + V_boot − V_aux + k_ring·V_bus",
            f"    = {facts.v_bus.text()} + {facts.v_boot0.text()} − {facts.v_aux.text()} "
            f"+ {format_si(ringing, 'V')} = {format_si(v_reverse, 'V')}",
            f"limit = V_RRM × derating = {rating.text()} × {factor:g} = {format_si(limit, 'V')}",
        ),
    )


CHECKS = {"bootstrap-diode-voltage": check_diode_voltage}
