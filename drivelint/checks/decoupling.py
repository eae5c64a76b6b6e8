"""The gate supply's bypass capacitor against the bootstrap capacitor it recharges.

Each recharge of the bootstrap capacitor draws its charge from the capacitor across the
gate supply faster than any regulator responds. An empty bootstrap capacitor (start-up, or
after the boot supply has run down) takes the most: the two capacitors share charge, and
the supply dips by (V − V_F)·C_boot/(C_boot + C_bypass). The usual rule is a bypass of at
least ten times the bootstrap capacitor, directly across the supply and its return at the
driver; one behind a series resistance cannot give the charge at the speed it is drawn.
"""

from __future__ import annotations

from collections.abc import Iterator
from dataclasses import dataclass

from drivelint.checks.base import CheckContext, Finding
from drivelint.checks.corners import STRESS, with_corner
from drivelint.checks.facts import StageFacts
from drivelint.circuit.model import GROUND, Device
from drivelint.diagnostics import Severity
from drivelint.netlist.values import format_si
from drivelint.physics import bootstrap as boot_physics
from drivelint.physics.preferred import next_preferred
from drivelint.ratings.values import Value, computed
from drivelint.stages.model import DriveStage

# what the figures take from the tolerance corners: nothing (the parts as written)
NOMINAL: frozenset[str] = frozenset()


def _f(value: float) -> str:
    return format_si(value, "F")


def _v_rel(value: float) -> str:
    return format_si(value, "V")


def _other(device: Device, net: str) -> str | None:
    return next((n for n in device.nets if n != net), None)


def _capacitance(device: Device) -> float | None:
    if device.kind != "capacitor" or not device.value:
        return None
    return device.value * device.multiplier


@dataclass(frozen=True, slots=True)
class Supply:
    """The net the bootstrap recharges from, its return, and the capacitors across them."""

    net: str
    ret: str
    direct: tuple[Device, ...]  # straight across the supply and its return
    behind: tuple[tuple[Device, Device], ...]  # (series resistor, capacitor) one step away

    @property
    def capacitance(self) -> float:
        return sum(_capacitance(c) or 0.0 for c in self.direct)


def _return_net(stage: DriveStage, facts: StageFacts) -> str:
    """The driver's ground pin, else where the low side returns the switch node."""
    if stage.driver is not None and stage.driver.pins.get("ground"):
        return stage.driver.pins["ground"]
    for refresh in stage.refresh:
        if refresh.kind in ("low-side switch", "freewheel diode") and refresh.reference:
            return refresh.reference
    return GROUND


def _across(facts: StageFacts, a: str, b: str) -> list[Device]:
    return [d for d in facts.between(a, b) if _capacitance(d) is not None]


def _inside_driver(stage: DriveStage, device: Device) -> bool:
    """A part of the driver IC's own model (its internal supply current, say)."""
    return stage.driver is not None and device.name.startswith(stage.driver.device + ".")


def supply_of(stage: DriveStage, facts: StageFacts) -> Supply | None:
    aux = stage.supply.aux
    if stage.supply.kind != "bootstrap" or aux is None:
        return None
    net, ret = aux.net, _return_net(stage, facts)
    if net == ret:
        return None
    direct = tuple(sorted(_across(facts, net, ret), key=lambda d: d.name))
    behind: list[tuple[Device, Device]] = []
    for resistor in facts.of_kind(net, "resistor"):
        if not resistor.value or _inside_driver(stage, resistor):
            continue
        far = _other(resistor, net)
        if far is None or far == ret or far == stage.supply.boot_net:
            continue
        behind.extend((resistor, c) for c in _across(facts, far, ret))
    return Supply(net, ret, direct, tuple(sorted(behind, key=lambda p: p[1].name)))


def _level(facts: StageFacts, net: str) -> float:
    return 0.0 if net == GROUND else float(facts.circuit.rails.get(net) or 0.0)


def _source_on(facts: StageFacts, supply: Supply) -> bool:
    """An independent voltage source from the supply net to ground or a rail: the netlist
    models the supply as stiff there."""
    held = {supply.ret, GROUND, *facts.circuit.rails}
    for device in facts.of_kind(supply.net, "vsource"):
        if set(device.nets) - {supply.net} <= held:
            return True
    return False


def check_decoupling(stage: DriveStage, ctx: CheckContext) -> Iterator[Finding]:
    facts = ctx.facts
    supply = supply_of(stage, facts)
    # The rule of thumb is stated for the parts as written, and so is the dip it keeps
    # small: both are judged at the nominal values (no tolerance corner).
    c_boot, v_aux = facts.c_hold_nominal, facts.v_aux_nominal
    if supply is None or c_boot is None or v_aux is None or not c_boot.value:
        return
    if not supply.direct and (not supply.behind or _source_on(facts, supply)):
        return  # an ideal source with no capacitor at all: the netlist's model of a stiff one
    ratio_needed = ctx.options["ratio"]
    c_boot_nominal = c_boot.value
    # the usual rule compares the parts as written; the dip takes both at their corners
    if supply.direct and supply.capacitance >= ratio_needed * c_boot_nominal:
        return
    needed = ratio_needed * c_boot_nominal
    bypass = (
        Value(supply.capacitance, "F", f"{', '.join(c.name for c in supply.direct)} as written")
        if supply.direct
        else None
    )
    # the supply above its return, less the boot diode's drop and the switch node's low
    # level above that return
    ret_level = _level(facts, supply.ret)
    v_supply = v_aux.value - ret_level
    drop = facts.diode_vf.value + max(facts.v_sw_low.value - ret_level, 0.0)
    c_bypass = bypass.value if bypass is not None else 0.0
    dip = boot_physics.first_charge_dip(v_supply, drop, c_boot.value, c_bypass)
    uvlo = facts._driver_value("uvlo", "V")
    margin = ctx.options["uvlo_margin"]
    v_after = v_supply - dip
    below_uvlo = uvlo is not None and v_after < uvlo.value + margin
    severity = Severity.ERROR if below_uvlo else Severity.WARNING
    suggested = next_preferred(needed * (1 - 1e-9))
    names = ", ".join(c.name for c in supply.direct) or "none"
    q_first = (v_supply - drop) * c_boot.value
    values: dict[str, Value] = {
        "first_charge": computed(q_first, "C", "computed: C_boot·(V_aux − V_F − V_sw,low,rel)"),
        "bypass_capacitance": bypass or Value(0.0, "F", "no capacitor directly across the supply"),
        "bypass_needed": computed(needed, "F", "computed: option ratio × C_boot, as written"),
        "c_boot": c_boot,
        "vcc_dip": computed(dip, "V", "computed: (V_aux − V_F)·C_boot/(C_boot + C_bypass)"),
        "v_aux": v_aux,
        "v_supply_after": computed(v_after, "V", "computed: V_aux − ΔV, above the return"),
        "suggested_bypass": computed(suggested, "F", "computed: ratio × C_boot, E12 above"),
    }
    if uvlo is not None:
        values["uvlo"] = uvlo
    device = supply.direct[0].name if supply.direct else supply.behind[0][1].name
    ret = "ground" if supply.ret == GROUND else supply.ret
    where = f"across {supply.net} and {ret}"
    if supply.direct:
        state = f"the bypass {names} ({_f(supply.capacitance)}) {where}"
    else:
        resistor, cap = supply.behind[0]
        state = (
            f"no capacitor directly {where}: {cap.name} sits behind {resistor.name}, which "
            "limits the current it can give at the speed the recharge draws it"
        )
    consequence = (
        f"below the driver's {uvlo.text()} supply lockout (+{format_si(margin, 'V')})"
        if below_uvlo and uvlo is not None
        else "a dip the driver's supply pin sees at every start-up"
    )
    found = ctx.finding(
        device,
        f"{state} is less than {ratio_needed:g}× the bootstrap capacitor "
        f"{stage.supply.capacitor} ({_f(c_boot.value)}): charging it from empty "
        f"takes the supply down by {format_si(dip, 'V')}, to {format_si(v_after, 'V')}, "
        f"{consequence}",
        values,
        fix=f"put {_f(suggested)} or more (E12; ≥ {ratio_needed:g} × {_f(c_boot_nominal)}) "
        f"directly across {supply.net} and {ret}, at the driver's pins",
        derivation=(
            "ΔV = (V_aux − V_F)·C_boot/(C_boot + C_bypass)",
            f"   = ({_v_rel(v_supply)} − {format_si(drop, 'V')}) × {_f(c_boot.value)}/"
            f"({_f(c_boot.value)} + {_f(c_bypass)}) = {format_si(dip, 'V')}",
            f"need C_bypass ≥ {ratio_needed:g} × C_boot = {_f(needed)} (the parts as written)",
        ),
        severity=severity,
    )
    yield with_corner(found, facts, STRESS, NOMINAL)


CHECKS = {"driver-decoupling": check_decoupling}
