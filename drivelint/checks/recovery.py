"""Bootstrap diode recovery: a slow diode against the refresh window and the switch-node edges."""

from __future__ import annotations

from collections.abc import Iterator

from drivelint.checks.base import CheckContext, Finding
from drivelint.checks.corners import HOLD, with_corner
from drivelint.checks.facts import StageFacts
from drivelint.diagnostics import Severity
from drivelint.netlist.values import format_si
from drivelint.ratings.values import Value, computed
from drivelint.stages.model import DriveStage


def _gate_resistance(stage: DriveStage, facts: StageFacts) -> Value | None:
    """Series resistance of the pull-up path to the gate, plus the switch's internal gate
    resistance (parts rg_internal, else the model's RG)."""
    path = next((p for p in stage.pullups if p.returns_to == "boot"), None)
    if path is None:
        return None
    ohms = 0.0
    names = []
    for name in path.devices:
        device = facts.device(name)
        if device is not None and device.kind == "resistor" and device.value is not None:
            ohms += device.value / device.multiplier
            names.append(name)
    internal = facts.ratings.get(facts.switch, "rg_internal")
    model = facts.switch.model
    if internal is not None:
        ohms += internal.value
        names.append(f"R_G,int {internal.text()}")
    elif model is not None and model.params.get("rg"):
        ohms += model.params["rg"]
        names.append(f"model RG {format_si(model.params['rg'], 'Ω')}")
    if ohms <= 0:
        return None
    return computed(ohms, "Ohm", f"computed: {' + '.join(names)}")


def switch_node_rise_time(stage: DriveStage, facts: StageFacts) -> Value | None:
    """How long the switch node takes to rise: the Miller charge over the gate current.

    t_rise = Q_gd/I_G with I_G = (V_drive − V_plateau)/R_G, limited by the driver's source
    current where the parts library gives it (gate-charge switching-time estimate of
    power MOSFET application notes; textbook). None when the Miller charge, the plateau or
    the gate resistance is not known.
    """
    qgd = facts.ratings.get(facts.switch, "qgd")
    plateau = facts.ratings.get(facts.switch, "vgs_plateau")
    drive = facts.v_boot0
    resistance = _gate_resistance(stage, facts)
    if qgd is None or plateau is None or drive is None or resistance is None:
        return None
    if drive.value <= plateau.value:
        return None
    current = (drive.value - plateau.value) / resistance.value
    source = facts._driver_value("i_source", "A")
    if source is not None:
        current = min(current, source.value)
    return computed(
        qgd.value * facts.switch.multiplier / current,
        "s",
        f"computed: Q_gd/I_G, I_G = (V_drive − V_plateau)/R_G = ({drive.text()} − "
        f"{plateau.text()})/{resistance.text()}"
        + (f", at most the driver's {source.text()}" if source else ""),
    )


def check_diode_slow(stage: DriveStage, ctx: CheckContext) -> Iterator[Finding]:
    facts = ctx.facts
    diode = facts.diode
    supply = stage.supply
    if supply.kind != "bootstrap" or diode is None or supply.diode_orientation == "reversed":
        return
    # Recovery matters only where the switch node keeps swinging; a DC-commanded stage
    # recovers once. A switching frequency given as a condition says it swings.
    if (stage.mode != "switching" and facts.fsw is None) or facts.never_on:
        return
    trr = facts.ratings.get(diode, "trr")
    if trr is None:
        return
    rise = switch_node_rise_time(stage, facts)
    option_ceiling = ctx.options["trr_max"]
    # A diode that recovers within the switch node's rise stops conducting backwards before
    # the node is high: the ceiling is the longer of the option and the rise time.
    trr_max = max(option_ceiling, rise.value) if rise is not None else option_ceiling
    fraction = ctx.options["off_time_fraction"]
    off_time = facts.off_time if facts.finite(facts.off_time) else None
    window_limit = (
        fraction * off_time.value if off_time is not None and off_time.value > 0 else None
    )
    over_window = window_limit is not None and trr.value > window_limit
    over_ceiling = trr.value > trr_max
    if not (over_window or over_ceiling):
        return

    values: dict[str, Value] = {
        "trr": trr,
        "trr_max": computed(
            trr_max,
            "s",
            "option trr_max" if trr_max == option_ceiling else "switch-node rise time",
        ),
    }
    if rise is not None:
        values["switch_node_rise_time"] = rise
    derivation: list[str] = []
    if off_time is not None and window_limit is not None:
        values["off_time"] = off_time
        values["off_time_fraction"] = Value(fraction, "1", "option off_time_fraction")
        values["refresh_window_limit"] = computed(
            window_limit, "s", "computed: off_time_fraction × t_off"
        )
        if facts.fsw is not None:
            values["fsw"] = facts.fsw
        if facts.duty_max is not None:
            values["duty_max"] = facts.duty_max
        derivation.append(
            f"t_off = {off_time.text()} ({off_time.origin}); "
            f"limit = k·t_off = {fraction:g} × {off_time.text()} = {format_si(window_limit, 's')}"
        )
    derivation.append(
        f"ceiling t_rr,max = max(option trr_max {format_si(option_ceiling, 's')}, "
        f"switch-node rise {rise.text() if rise else 'unknown'}) = {format_si(trr_max, 's')}"
    )
    derivation.append(f"t_rr = {trr.text()} ({trr.origin})")

    lost = _recovery_charge(ctx, values, derivation)

    allowed = min(trr_max, window_limit) if window_limit is not None else trr_max
    parts: list[str] = []
    if over_window and off_time is not None:
        parts.append(
            f"{trr.value / off_time.value:.0%} of the {off_time.text()} off-time "
            f"(limit {fraction * 100:g}%, {format_si(window_limit or 0.0, 's')})"
        )
    if over_ceiling:
        parts.append(f"{trr.value / trr_max:.3g}× the {format_si(trr_max, 's')} ceiling")
    message = (
        f"{diode.name} recovers in {trr.text()}, "
        + " and ".join(parts)
        + f": it keeps conducting backwards from {supply.boot_net or 'the boot net'} into "
        f"{supply.aux.net if supply.aux else 'the auxiliary rail'} as the switch node rises"
    )
    if lost is not None:
        message += f" (≈ {format_si(lost, 'C')} back per cycle"
        q_cycle = values.get("q_per_cycle")
        if q_cycle is not None and q_cycle.value > 0:
            message += f", {lost / q_cycle.value:.2g}× the {q_cycle.text()} the supply delivers"
        message += ")"
    severity = ctx.severity if over_window else Severity.WARNING
    found = ctx.finding(
        diode.name,
        message,
        values,
        fix=f"use an ultrafast-recovery or Schottky bootstrap diode with t_rr ≤ "
        f"{format_si(allowed, 's')}, keeping its reverse rating",
        derivation=tuple(derivation),
        severity=severity,
    )
    yield with_corner(found, facts, HOLD)


def _recovery_charge(
    ctx: CheckContext,
    values: dict[str, Value],
    derivation: list[str],
) -> float | None:
    """Q_rr per cycle from the shared facts (rated qrr, else TT·I_F at the end of the
    recharge); None when unknown. Adds its inputs to ``values`` and ``derivation``."""
    facts = ctx.facts
    q_rr = facts.recovery_charge
    if q_rr is None:
        return None
    values["recovery_charge"] = q_rr
    derivation.append(f"Q_rr = {q_rr.text()} ({q_rr.origin})")
    current = facts.recharge_end_current
    values["recharge_end_current"] = current
    q_cycle = facts.q_per_cycle
    if q_cycle is not None:
        gate_side = q_cycle.value - q_rr.value
        values["q_per_cycle"] = computed(
            gate_side, "C", "computed: Q_g + Q_ls + I_drain·t_on (without the recovery)"
        )
        derivation.append(
            f"the supply delivers {format_si(gate_side, 'C')} per cycle besides the recovery; "
            f"I_F as the recharge ends: {current.text()} ({current.origin})"
        )
    return q_rr.value


CHECKS = {"bootstrap-diode-slow": check_diode_slow}
