"""Bootstrap diode recovery: a slow diode against the refresh window and the switch-node edges."""

from __future__ import annotations

import math
from collections.abc import Iterator

from drivelint.checks.base import CheckContext, Finding
from drivelint.diagnostics import Severity
from drivelint.netlist.values import format_si
from drivelint.physics import bootstrap as boot_physics
from drivelint.physics import diode as diode_physics
from drivelint.ratings.values import Value, computed
from drivelint.stages.model import DriveStage


def _carrier_lifetime(ctx: CheckContext, trr: Value) -> Value:
    """τ for Q_rr = τ·I_F: the model's TT (the SPICE charge-control lifetime), else t_rr.

    t_rr stands in for τ when no TT is known: with the reverse current equal to the forward
    current the charge-control model recovers in about TT (the same estimate the ratings use
    the other way round).
    """
    diode = ctx.facts.diode
    model = diode.model if diode else None
    if model is not None and model.params.get("tt"):
        return Value(
            model.params["tt"], "s", f"model {model.name} TT ({model.span.path}:{model.span.line})"
        )
    return Value(trr.value, "s", f"t_rr taken as the carrier lifetime ({trr.origin})")


def check_diode_slow(stage: DriveStage, ctx: CheckContext) -> Iterator[Finding]:
    facts = ctx.facts
    diode = facts.diode
    supply = stage.supply
    if supply.kind != "bootstrap" or diode is None or supply.diode_orientation == "reversed":
        return
    # Recovery matters only where the switch node keeps swinging; a DC-commanded stage
    # recovers once. A switching frequency given as a condition says it swings.
    if stage.mode != "switching" and facts.fsw is None:
        return
    trr = facts.ratings.get(diode, "trr")
    if trr is None:
        return
    trr_max = ctx.options["trr_max"]
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
        "trr_max": Value(trr_max, "s", "option trr_max"),
    }
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
            f"t_off = (1 − D)/f_sw = {off_time.text()}; "
            f"limit = k·t_off = {fraction:g} × {off_time.text()} = {format_si(window_limit, 's')}"
        )
    derivation.append(f"ceiling t_rr,max = {format_si(trr_max, 's')} (option trr_max)")
    derivation.append(f"t_rr = {trr.text()} ({trr.origin})")

    lost = _recovery_charge(ctx, trr, off_time, values, derivation)

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
    yield ctx.finding(
        diode.name,
        message,
        values,
        fix=f"use an ultrafast-recovery or Schottky bootstrap diode with t_rr ≤ "
        f"{format_si(allowed, 's')}, keeping its reverse rating",
        derivation=tuple(derivation),
        severity=severity,
    )


def _recovery_charge(
    ctx: CheckContext,
    trr: Value,
    off_time: Value | None,
    values: dict[str, Value],
    derivation: list[str],
) -> float | None:
    """Q_rr = τ·I_F with I_F the mean recharge current Q_cycle/t_off; None when unknown.

    Adds every input and result to ``values`` and the formula lines to ``derivation``.
    """
    facts = ctx.facts
    rated = facts.ratings.get(facts.diode, "qrr")
    if rated is not None:
        values["recovery_charge"] = rated
        derivation.append(f"Q_rr = {rated.text()} ({rated.origin})")
        return rated.value
    if off_time is None or off_time.value <= 0 or facts.qg is None:
        return None
    on_time = facts.on_time
    if on_time is None and facts.fsw is not None and facts.duty_max is not None:
        # Conditions without a waveform give no longest on-time; one period's share stands in.
        on_time = computed(facts.duty_max.value / facts.fsw.value, "s", "computed: D/f_sw")
    if on_time is None or not math.isfinite(on_time.value):
        return None
    q_cycle = boot_physics.charge_budget(
        facts.qg.value,
        facts.q_ls.value,
        facts.i_quiescent.value,
        facts.i_leak.value,
        facts.i_resistive.value,
        on_time.value,
    )
    i_forward = q_cycle / off_time.value
    tau = _carrier_lifetime(ctx, trr)
    q_rr = diode_physics.recovery_charge(tau.value, i_forward)
    if not math.isfinite(q_rr):
        return None
    values.update(
        {
            "qg": facts.qg,
            "q_ls": facts.q_ls,
            "i_drain": facts.i_drain,
            "on_time": on_time,
            "q_per_cycle": computed(q_cycle, "C", "computed: Q_g + Q_ls + I_drain·t_on"),
            "recharge_current": computed(i_forward, "A", "computed: Q_cycle / t_off (mean)"),
            "carrier_lifetime": tau,
            "recovery_charge": computed(q_rr, "C", "computed: τ·I_F (charge-control model)"),
        }
    )
    derivation.extend(
        (
            f"Q_cycle = Q_g + Q_ls + I_drain·t_on = {facts.qg.text()} + {facts.q_ls.text()} "
            f"+ {facts.i_drain.text()} × {on_time.text()} = {format_si(q_cycle, 'C')}",
            f"I_F = Q_cycle / t_off = {format_si(i_forward, 'A')}",
            f"Q_rr = τ·I_F = {tau.text()} × {format_si(i_forward, 'A')} = {format_si(q_rr, 'C')}",
        )
    )
    return q_rr


CHECKS = {"bootstrap-diode-slow": check_diode_slow}
