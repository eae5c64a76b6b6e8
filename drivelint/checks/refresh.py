"""Bootstrap refresh: a path that pulls the switch node low, and enough off-time to use it."""

from __future__ import annotations

import math
from collections.abc import Iterator
from dataclasses import dataclass

from drivelint.checks.base import CheckContext, Finding
from drivelint.checks.corners import HOLD, with_corner
from drivelint.checks.facts import StageFacts
from drivelint.checks.printed import sum_line
from drivelint.netlist.values import format_si
from drivelint.physics import bootstrap as boot_physics
from drivelint.physics.preferred import preferred_at_most
from drivelint.ratings.values import Value, computed
from drivelint.stages.model import DriveStage, Refresh

# Refresh paths that switch the node to ground actively; a load to ground only leaks it
# there, so it counts only when nothing active is fitted.
_ACTIVE = ("low-side switch", "freewheel diode")


@dataclass(frozen=True, slots=True)
class _Path:
    """A refresh path with the resistance the bootstrap recharges through."""

    refresh: Refresh
    resistance: Value


def check_no_refresh(stage: DriveStage, ctx: CheckContext) -> Iterator[Finding]:
    supply = stage.supply
    # An isolated or pumped supply does not depend on the switch node going low; a switch
    # never commanded on needs no gate supply in this scenario.
    if supply.kind != "bootstrap" or ctx.facts.never_on:
        return
    if supply.diode is not None and supply.diode_orientation == "reversed":
        yield _reversed_diode(stage, ctx)
        return
    if not stage.refresh:
        yield _no_path(stage, ctx)
        return
    yield from _not_sustained(stage, ctx)


def _common_values(ctx: CheckContext) -> dict[str, Value]:
    facts = ctx.facts
    values: dict[str, Value] = {"v_boot_min": facts.v_boot_min}
    for name, value in (("v_aux", facts.v_aux), ("c_hold", facts.c_hold)):
        if value is not None:
            values[name] = value
    return values


def _reversed_diode(stage: DriveStage, ctx: CheckContext) -> Finding:
    supply = stage.supply
    diode = supply.diode or ""
    aux = supply.aux.net if supply.aux else "the auxiliary rail"
    boot = supply.boot_net or "the boot net"
    cap = supply.capacitor or "the hold capacitor"
    return ctx.finding(
        diode,
        f"{diode} is reversed: its cathode faces {aux} and its anode {boot}, so {cap} can "
        f"never charge while {stage.source} is pulled low and {stage.switch} gets no gate supply",
        _common_values(ctx),
        fix=f"turn {diode} round: anode toward {aux}, cathode on {boot}",
        derivation=(f"{diode}: anode on the boot side, cathode on the {aux} side",),
    )


def _no_path(stage: DriveStage, ctx: CheckContext) -> Finding:
    supply = stage.supply
    cap = supply.capacitor or "the hold capacitor"
    return ctx.finding(
        stage.switch,
        f"nothing pulls switch node {stage.source} low while {stage.switch} is off "
        f"(no low-side switch, freewheel diode or load to ground), so {cap} is never "
        "recharged and the gate supply runs down",
        _common_values(ctx),
        fix=f"give {stage.source} a path to ground during the off-time: a low-side switch or "
        "freewheel diode from it to ground (a load to ground also refreshes, more slowly), "
        "or use an isolated gate supply",
        derivation=(f"refresh paths found at {stage.source}: none",),
    )


def _path_resistance(facts: StageFacts, refresh: Refresh) -> Value | None:
    """Resistance the recharge current meets in one refresh path; None when unknown.

    An active path whose resistance is not known counts as 0 Ω, which errs toward a higher
    sustained voltage: the rule then stays quiet rather than guess.
    """
    device = facts.device(refresh.devices[0]) if refresh.devices else None
    names = "+".join(refresh.devices)
    if refresh.kind == "low-side switch":
        rated = facts.ratings.get(device, "rds_on")
        if rated is not None and device is not None:
            return Value(
                rated.value / device.multiplier, "Ohm", f"{names} R_DS(on): {rated.origin}"
            )
        return Value(0.0, "Ohm", f"{names} R_DS(on) unknown, taken as 0")
    if refresh.kind == "freewheel diode":
        model = device.model if device else None
        if model is not None and device is not None and model.params.get("rs"):
            return Value(
                model.params["rs"] / device.multiplier, "Ohm", f"{names} model {model.name} RS"
            )
        return Value(0.0, "Ohm", f"{names} series resistance unknown, taken as 0")
    if refresh.resistance is not None and math.isfinite(refresh.resistance):
        return Value(refresh.resistance, "Ohm", f"{refresh.kind} {names}")
    return None


def _refresh_path(facts: StageFacts, stage: DriveStage) -> _Path | None:
    """The path that recharges best: the lowest-resistance active one, else a load."""
    known = [
        _Path(refresh, resistance)
        for refresh in stage.refresh
        if (resistance := _path_resistance(facts, refresh)) is not None
    ]
    active = [p for p in known if p.refresh.kind in _ACTIVE]
    pool = active or known
    return min(pool, key=lambda p: p.resistance.value) if pool else None


def _diode_resistance(facts: StageFacts) -> Value:
    diode = facts.diode
    model = diode.model if diode else None
    if diode is not None and model is not None and model.params.get("rs"):
        return Value(
            model.params["rs"] / diode.multiplier,
            "Ohm",
            f"model {model.name} RS ({model.span.path}:{model.span.line})",
        )
    return Value(0.0, "Ohm", "diode series resistance unknown, taken as 0")


def _recharge_drop(facts: StageFacts, i_mean: float) -> Value:
    """The diode's forward drop while it recharges, at the mean current Q_cycle/t_off.

    With t_off ≪ τ the diode conducts through the whole off-time, so its drop is taken at
    the mean current of a partial recharge, not at the small one that ends a full one.
    """
    return facts.diode_vf_at(i_mean, "the mean recharge current")


@dataclass(frozen=True, slots=True)
class Sustained:
    """The steady state of a bootstrap supply refreshed in each off-time."""

    path: _Path
    r_series: Value
    r_diode: Value
    r_charge: float
    c: float
    q_cycle: Value
    on_time: Value
    v_f: Value
    v_target: Value
    t_off_min: float
    valley: float
    peak: float
    dq_dv: float


def sustained_boot(stage: DriveStage, facts: StageFacts) -> Sustained | None:
    """The boot voltage a switching stage settles at, or None where it is not defined
    (no switching conditions, no refresh path, a hold rather than a refresh problem)."""
    fsw, duty, off_time, on_time = facts.fsw, facts.duty_max, facts.off_time, facts.on_time
    c_hold, qg, v_aux = facts.c_hold, facts.qg, facts.v_aux
    if fsw is None or duty is None or off_time is None:
        return None
    if on_time is None:
        # Conditions without a waveform give no longest on-time; one period's share stands in.
        on_time = computed(duty.value / fsw.value, "s", "computed: D/f_sw")
    q_per_cycle = facts.q_per_cycle
    if c_hold is None or qg is None or v_aux is None or facts.diode is None:
        return None
    if q_per_cycle is None:
        return None
    # A zero off-time or an unbounded on-time is a hold problem, not a refresh one.
    if not (off_time.value > 0 and math.isfinite(on_time.value)) or c_hold.value <= 0:
        return None
    path = _refresh_path(facts, stage)
    if path is None:
        return None
    supply = stage.supply
    r_series = Value(
        supply.series_resistance or 0.0,
        "Ohm",
        "+".join(supply.series_resistors) if supply.series_resistors else "no series resistor",
    )
    r_diode = _diode_resistance(facts)
    r_charge = r_series.value + r_diode.value + path.resistance.value
    c = c_hold.value
    q_cycle = q_per_cycle.value
    # In steady state the diode puts back Q_cycle in each off-time.
    v_f = _recharge_drop(facts, q_cycle / off_time.value)
    v_target = computed(
        boot_physics.bootstrap_voltage(v_aux.value, v_f.value, v_refresh=facts.v_refresh),
        "V",
        "computed: V_aux − V_F − V_sw,low"
        + (
            f" + {facts.dead_time_boost.text()} dead-time boost"
            if facts.dead_time_boost.value
            else ""
        ),
    )
    # a Zener across the capacitor stops the recharge at V_Z: the budget is taken there
    level = facts.regulated(v_target).value
    v_min = facts.v_boot_min.value
    at_target = facts.q_cycle_at(level)
    if at_target is not None:
        q_cycle = at_target
    # what the path puts back before the node rises never leaves the capacitor for good
    q_cycle -= facts.refilled_charge.value
    # The charge each cycle takes follows the boot voltage (the gate charge and the resistive
    # drains grow with it): its slope from the budget at V_target and at 80 % of it.
    low = facts.q_cycle_at(0.8 * level)
    slope = (q_cycle - low) / (0.2 * level) if low is not None else 0.0
    k = max(slope, 0.0)
    sustained = boot_physics.sustained_boot_voltage_linear(
        v_target.value, q_cycle, k, c, r_charge, off_time.value, facts.c_gate.value
    )
    if sustained.peak > level:
        # the Zener holds the peak at V_Z; each on-time still takes the same droop from it
        droop = sustained.peak - sustained.valley
        sustained = boot_physics.SustainedBoot(peak=level, valley=level - droop)
    t_off_min = boot_physics.min_off_time_linear(
        v_target.value, v_min, q_cycle, k, c, r_charge, facts.c_gate.value
    )
    return Sustained(
        path,
        r_series,
        r_diode,
        r_charge,
        c,
        computed(q_cycle, "C", "computed: Q_g + Q_ls + I_drain·t_on + Q_rr at V_target"),
        on_time,
        v_f,
        v_target,
        t_off_min,
        sustained.valley,
        sustained.peak,
        max(slope, 0.0),
    )


def _not_sustained(stage: DriveStage, ctx: CheckContext) -> Iterator[Finding]:
    facts = ctx.facts
    found = sustained_boot(stage, facts)
    if found is None:
        return
    # Even a full recharge every cycle falls short: the capacitor or the boot level is the
    # problem (other rules), not the refresh.
    if not math.isfinite(found.t_off_min) or found.valley >= facts.v_boot_min.value:
        return
    fsw, duty, off_time, c_hold, qg, v_aux = (
        facts.fsw,
        facts.duty_max,
        facts.off_time,
        facts.c_hold,
        facts.qg,
        facts.v_aux,
    )
    assert fsw and duty and off_time and c_hold and qg and v_aux
    path, r_series, r_diode, r_charge, c = (
        found.path,
        found.r_series,
        found.r_diode,
        found.r_charge,
        found.c,
    )
    on_time, q_per_cycle, v_f, v_target, t_off_min = (
        found.on_time,
        found.q_cycle,
        found.v_f,
        found.v_target,
        found.t_off_min,
    )
    q_cycle = q_per_cycle.value
    v_sw_low = facts.v_sw_low
    v_min = facts.v_boot_min.value
    sustained = boot_physics.SustainedBoot(found.peak, found.valley)
    supply = stage.supply
    tau = boot_physics.refresh_time_constant(r_charge, c)
    # The window is the off-time less the dead times around it, where the netlist shows them.
    dead = 2 * facts.dead_time.value if facts.dead_time else 0.0
    max_duty = min(1.0, max(0.0, 1.0 - (t_off_min + dead) * fsw.value))
    delta_v = boot_physics.droop_per_cycle(q_cycle, c)
    one_minus_a = -math.expm1(-off_time.value / tau) if tau > 0 else 1.0
    # τ scales with R, so the resistance that just makes t_off,min equal t_off is R·t_off/t_off,min.
    r_max = boot_physics.max_charge_resistance(
        v_target.value, v_min, q_cycle, found.dq_dv, c, off_time.value, facts.c_gate.value
    )

    values: dict[str, Value] = {
        **_common_values(ctx),
        "fsw": fsw,
        "duty_max": duty,
        "on_time": on_time,
        "off_time": off_time,
        "diode_vf": v_f,
        "v_target": v_target,
        "qg": qg,
        "q_ls": facts.q_ls,
        "i_drain": facts.i_drain,
        "q_per_cycle": q_per_cycle,
        "v_sw_low": v_sw_low,
        "delta_v_per_cycle": computed(delta_v, "V", "computed: Q_cycle / C"),
        "r_series": r_series,
        "r_diode": r_diode,
        "r_refresh": path.resistance,
        "r_charge": computed(r_charge, "Ohm", "computed: R_series + R_D + R_refresh"),
        "refresh_tau": computed(tau, "s", "computed: τ = R_charge·C"),
        "sustained_boot_voltage": computed(
            sustained.valley,
            "V",
            "computed: V_target − u − (Q − k·u)/C with u = a·Q/(C·(1 − a + a·k/C)) (end of "
            "on-time)",
        ),
        "sustained_boot_peak": computed(
            sustained.peak, "V", "computed: V_target − u (end of off-time)"
        ),
        "dq_dv": computed(
            found.dq_dv, "F", "computed: slope k of the charge per cycle with V_boot"
        ),
        "min_off_time": computed(
            t_off_min, "s", "computed: shortest off-time whose sustained valley is V_boot,min"
        ),
        "max_duty": computed(max_duty, "1", "computed: 1 − (t_off,min + 2·t_dead)·f_sw"),
        "max_r_charge": computed(
            r_max, "Ohm", "computed: largest R_charge whose sustained valley is V_boot,min"
        ),
    }
    duty_text = f"{math.floor(max_duty * 1000) / 10:.1f}%"
    device = (stage.control.source if stage.control else None) or supply.capacitor or stage.switch
    cap = supply.capacitor or "the hold capacitor"
    message = (
        f"{cap} is not refreshed at {duty.value * 100:.1f}% duty: the {off_time.text()} off-time "
        f"is short against τ = {format_si(r_charge, 'Ω')} × {c_hold.text()} = "
        f"{format_si(tau, 's')}, so the boot supply settles at {format_si(sustained.valley, 'V')} "
        f"at the end of each on-time, below V_boot,min {facts.v_boot_min.text()}; the largest "
        f"duty that keeps it above is {duty_text} (off-time ≥ {format_si(t_off_min, 's')} "
        f"at {fsw.text()})"
    )
    fix = f"limit the duty to {duty_text} (off-time ≥ {format_si(t_off_min, 's')})"
    fixed_part = r_diode.value + path.resistance.value
    if supply.series_resistors and r_max > fixed_part:
        allowed = r_max - fixed_part
        chosen = preferred_at_most(allowed)
        names = "+".join(supply.series_resistors)
        fix += f", or lower {names} from {r_series.text()} to ≤ {format_si(allowed, 'Ω')}" + (
            f" (e.g. {format_si(chosen, 'Ω')})" if chosen else ""
        )
    if off_time.value < 0.3 * tau:
        # With t_off ≪ τ the charge put back per cycle tends to V·t_off/R whatever C is.
        fix += "; a larger capacitor helps little while the off-time is much shorter than τ"
    derivation = (
        "R_charge = R_series + R_D + R_refresh = "
        + sum_line([(1, r_series.value), (1, r_diode.value), (1, path.resistance.value)], "Ω")
        + f" ({'+'.join(path.refresh.devices)})",
        f"τ = R_charge·C = {format_si(r_charge, 'Ω')} × {c_hold.text()} = {format_si(tau, 's')}",
        f"Q = Q_g + Q_ls + I_drain·t_on + Q_rr at V_target = {format_si(q_cycle, 'C')} "
        f"(at V_boot,0: {qg.text()} + {facts.q_ls.text()} + {facts.i_drain.text()} × "
        f"{on_time.text()}"
        + (f" + {facts.recovery_charge.text()}" if facts.recovery_charge else "")
        + f"); ΔV = Q/C = {format_si(delta_v, 'V')}",
        "V_target = V_aux − V_F − V_sw,low = "
        + sum_line(
            [(1, v_aux.value), (-1, v_f.value), (-1, v_sw_low.value)],
            "V",
        )
        + f"  (V_F: {v_f.origin})",
        f"1 − a = 1 − exp(−t_off/τ) = 1 − exp(−{off_time.text()} / {format_si(tau, 's')}) "
        f"= {one_minus_a:.4g}",
        f"k = dQ/dV = {format_si(found.dq_dv, 'F')}; u = a·Q/(C·(1 − a + a·k/C)); "
        f"V_valley = V_target − u − (Q − k·u)/C = {format_si(sustained.valley, 'V')} "
        f"< V_boot,min = {facts.v_boot_min.text()}",
        "t_off,min = "
        f"{format_si(t_off_min, 's')} (the valley at V_boot,min); D_max = 1 − (t_off,min + "
        f"2·t_dead)·f_sw = {max_duty:.4g}",
    )
    yield with_corner(
        ctx.finding(device, message, values, fix=fix, derivation=derivation), facts, HOLD
    )


CHECKS = {"bootstrap-no-refresh": check_no_refresh}
