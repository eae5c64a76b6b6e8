"""Hold capacitor checks: the charge of one on-time, and how long the supply can hold.

Both rules use the shared account of what drains the hold capacitor while the switch is on
(``StageFacts.on_drains``, built in :mod:`drivelint.checks.drains`).
"""

from __future__ import annotations

import math
from collections.abc import Iterator
from dataclasses import dataclass

from drivelint.checks.base import CheckContext, Finding
from drivelint.checks.corners import HOLD, corner_factor, holds_corner, with_corner
from drivelint.checks.drains import OnDrains
from drivelint.checks.facts import StageFacts
from drivelint.checks.printed import at, resolution, sum_line
from drivelint.netlist.values import format_si
from drivelint.physics import bootstrap as boot_physics
from drivelint.physics import gate as gate_physics
from drivelint.physics.preferred import next_preferred
from drivelint.ratings.values import Value, computed
from drivelint.stages.model import DriveStage

PREFERRED_SERIES = "E12"
# A bootstrap hold capacitor is a ceramic beside the driver, from 100 nF to a few tens of µF
# (common practice). A hold that needs more than this is not a sizing problem: the
# bootstrap is the wrong supply for that on-time (an electrolytic large enough leaks, by
# the usual 0.01·C·V rule, about as much as the drains it would hold against).
PRACTICAL_MAX_CAPACITANCE = 100e-6
ALTERNATIVES = "a charge pump, an isolated gate supply, or periodic refresh pulses"


def outlasts_hold(facts: StageFacts) -> float | None:
    """The hold time, when a finite on-time outlasts it (dc-hold's finding, and so not
    bootstrap-capacitor-small's: one root cause, one finding); None otherwise."""
    on_time, c_hold, dv, qg = facts.on_time, facts.c_hold, facts.delta_v_allowed, facts.qg
    if on_time is None or not math.isfinite(on_time.value) or on_time.value <= 0:
        return None
    if c_hold is None or dv is None or qg is None or dv.value <= 0:
        return None
    if (c_hold.value + facts.c_gate.value) * dv.value <= qg.value:
        return None  # the gate charge alone: a sizing problem, whatever the on-time
    t_hold = _hold_time(facts, c_hold.value, dv.value, facts.on_drains.total.value)
    return t_hold if on_time.value > t_hold else None


def boot_voltage_line(facts: StageFacts, finest: float | None = None) -> str | None:
    """``V_boot,0 = V_aux − V_F − V_sw,low = …`` with V_F and where it comes from."""
    v_aux, v_boot = facts.v_aux, facts.v_boot0
    if facts.stage.supply.kind != "bootstrap" or v_aux is None or v_boot is None:
        return None
    if facts.diode is None:
        return None
    vf = facts.diode_vf
    line = sum_line([(1, v_aux.value), (-1, vf.value), (-1, facts.v_refresh)], "V", finest)
    return f"V_boot,0 = V_aux − V_F − V_sw,low = {line}  (V_F: {vf.origin})"


def _drain_list(drains: OnDrains, most: int = 3) -> str:
    named = drains.named()
    shown = [f"{name} {format_si(current, 'A')}" for name, current in named[:most]]
    if len(named) > most:
        shown.append(f"{len(named) - most} more")
    return ", ".join(shown) or "none known"


# ---------------------------------------------------------------- bootstrap-capacitor-small


@dataclass(frozen=True, slots=True)
class _Sizing:
    """The nominal hold capacitance a stage needs, and which requirement sets it.

    Two requirements, the larger wins: the design margin (``margin``, AN-978's factor 2 for
    what is not computed) applied to the charge at the nominal values, and the worst
    tolerance corner met at face value (its charge, its allowed droop, the capacitor's low
    corner). The margin is not stacked on the corner: the corner already spends what the
    margin was kept for.
    """

    required: float  # F, the nominal part to fit
    at_corner: float  # F, a nominal part whose low corner meets the worst corner's charge
    with_margin: float | None  # F, margin × the nominal charge / the nominal droop
    governs: str

    def lines(self, margin: float) -> tuple[str, ...]:
        shown = [f"  at the worst corner, 1×: {format_si(self.at_corner, 'F')} (nominal part)"]
        if self.with_margin is not None:
            shown.append(
                f"  at the nominal values, margin {margin:g}×: {format_si(self.with_margin, 'F')}"
            )
        shown.append(f"  C_req = the larger = {format_si(self.required, 'F')} ({self.governs})")
        return tuple(shown)


def _sizing(facts: StageFacts, q_total: float, dv: float, margin: float) -> _Sizing:
    corner = corner_factor(facts)
    at_corner = boot_physics.required_capacitance(q_total, dv) / corner
    if holds_corner(facts) is not None:
        # The netlist is a corner already: met at face value, no margin stacked on it.
        return _Sizing(at_corner, at_corner, None, "the corner the netlist holds, 1×")
    nominal = facts.nominal
    with_margin: float | None = None
    q_nominal, dv_nominal = nominal.q_per_cycle, nominal.delta_v_allowed
    if q_nominal is not None and dv_nominal is not None:
        if dv_nominal.value > 0 and math.isfinite(q_nominal.value):
            with_margin = margin * boot_physics.required_capacitance(
                q_nominal.value, dv_nominal.value
            )
    if with_margin is None:
        # No nominal budget to apply the margin to: the margin on these values.
        with_margin = margin * boot_physics.required_capacitance(q_total, dv)
    if with_margin >= at_corner:
        return _Sizing(with_margin, at_corner, with_margin, f"margin {margin:g} at nominal")
    return _Sizing(at_corner, at_corner, with_margin, "the worst corner")


def check_capacitor_small(stage: DriveStage, ctx: CheckContext) -> Iterator[Finding]:
    facts = ctx.facts
    if stage.supply.kind != "bootstrap" or facts.capacitor is None or facts.never_on:
        return
    c_hold, qg, dv, v_boot = facts.c_hold, facts.qg, facts.delta_v_allowed, facts.v_boot0
    on_time, q_cycle = facts.on_time, facts.q_per_cycle
    if c_hold is None or qg is None or dv is None or v_boot is None or on_time is None:
        return
    # An unbounded on-time is dc-hold's finding; a switch never commanded on takes nothing.
    if not math.isfinite(on_time.value) or on_time.value <= 0 or q_cycle is None:
        return
    # Starting below the minimum is not a sizing problem: no capacitor can fix it (the
    # supply level is gate-headroom's finding).
    if dv.value <= 0:
        return
    # An on-time the capacitor cannot even hold is dc-hold's finding, with the same
    # capacitance this rule would ask for: one root cause, one finding.
    if outlasts_hold(facts) is not None:
        return
    drains = facts.on_drains
    q_total = q_cycle.value
    q_rr = facts.recovery_charge
    margin = ctx.options["margin"]
    c_min = boot_physics.required_capacitance(q_total, dv.value)
    sizing = _sizing(facts, q_total, dv.value, margin)
    c_required = sizing.required
    nominal_c = facts.c_hold_nominal or c_hold
    if nominal_c.value >= c_required:
        return
    droop_value = facts.droop_per_cycle
    assert droop_value is not None
    droop = droop_value.value
    # The part to fit is a nominal value whose low corner meets the requirement.
    corner = corner_factor(facts)
    suggested = next_preferred(c_required, PREFERRED_SERIES)
    droop_suggested = gate_physics.shared_droop(
        v_boot.value, suggested * corner, qg.value, facts.c_gate.value, q_total - qg.value
    )
    cap = facts.capacitor.name
    drained = q_total - qg.value - facts.q_ls.value - (q_rr.value if q_rr else 0.0)
    finest = resolution([(1, v_boot.value), (-1, facts.v_boot_min.value)])
    values: dict[str, Value] = {
        "capacitance": c_hold,
        "gate_charge": qg,
        "gate_capacitance": facts.c_gate,
        "level_shift_charge": facts.q_ls,
        **drains.values(),
        "on_time": on_time,
        "charge_per_cycle": q_cycle,
        "v_boot": v_boot,
        "v_boot_min": facts.v_boot_min,
        "vgs_on": facts.vgs_on,
        "delta_v_allowed": dv,
        "margin": Value(margin, "1", "option margin"),
        "minimum_capacitance": computed(c_min, "F", "computed: Q_total/ΔV_allowed"),
        "required_capacitance": computed(
            c_required,
            "F",
            f"computed: nominal part, the larger of margin·Q_nom/ΔV_nom and "
            f"Q_worst/(ΔV_worst·C_low/C_nom) ({sizing.governs} governs)",
        ),
        "droop_per_cycle": droop_value,
        "suggested_capacitance": computed(
            suggested,
            "F",
            f"computed: next {PREFERRED_SERIES} value ≥ required (IEC 60063)",
        ),
        "suggested_droop_per_cycle": computed(
            droop_suggested, "V", "computed: Q_total/(C_suggested + C_g)"
        ),
    }
    if q_rr is not None:
        values["recovery_charge"] = q_rr
    fix = (
        f"use {format_si(suggested, 'F')} ({PREFERRED_SERIES}) or more for {cap}: "
        f"≥ {format_si(c_required, 'F')} ({sizing.governs}"
        + (
            f"; a nominal part whose low corner, {format_si(c_required * corner, 'F')}, "
            "still meets it"
            if corner < 1
            else ""
        )
        + f"); it then droops {format_si(droop_suggested, 'V')} per cycle"
    )
    if q_rr is not None and q_rr.value > 0.5 * q_total and facts.diode is not None:
        # Most of the budget is the diode's recovery: a faster diode is the better fix.
        without = q_total - q_rr.value
        c_fast = _sizing(facts, without, dv.value, margin).required
        fix = (
            f"most of the {format_si(q_total, 'C')} is {facts.diode.name}'s recovery charge "
            f"({q_rr.text()}): with a fast-recovery or Schottky bootstrap diode the budget is "
            f"{format_si(without, 'C')} and {cap} needs only ≥ {format_si(c_fast, 'F')}; "
            f"keeping the diode, {fix}"
        )
    nominal = nominal_c
    found = ctx.finding(
        cap,
        f"{cap} = {nominal.text()} is too small for {stage.switch}: each on-time "
        f"({on_time.text()}) takes {format_si(q_total, 'C')} (Q_g {qg.text()}"
        + (f", Q_ls {facts.q_ls.text()}" if facts.q_ls.value else "")
        + (f", Q_rr {q_rr.text()}" if q_rr else "")
        + f", {format_si(drained, 'C')} drained), a droop of {format_si(droop, 'V')} per cycle "
        f"against {dv.text()} allowed ({at(v_boot.value, 'V', finest)} → "
        f"{at(facts.v_boot_min.value, 'V', finest)}); needs ≥ {format_si(c_required, 'F')}",
        values,
        fix=fix,
        derivation=_budget_lines(facts, drains, q_rr)
        + (
            f"Q_total/ΔV_allowed = {_c4(q_total)} / {_v4(dv.value)} = {format_si(c_min, 'F')}",
            *sizing.lines(margin),
            f"ΔV per cycle = Q_total/(C + C_g) = {_c4(q_total)} / ({c_hold.text()} + "
            f"{facts.c_gate.text()}) = {format_si(droop, 'V')}",
            f"next {PREFERRED_SERIES} value ≥ {format_si(c_required, 'F')}: "
            f"{format_si(suggested, 'F')} (droop {format_si(droop_suggested, 'V')})",
        ),
    )
    yield with_corner(found, facts, HOLD)


def _c4(coulombs: float) -> str:
    return format_si(coulombs, "C", digits=4)


def _v4(volts: float) -> str:
    return format_si(volts, "V", digits=4)


def _budget_lines(
    facts: StageFacts, drains: OnDrains, q_rr: Value | None, supply: bool = True
) -> tuple[str, ...]:
    """Q_total (and with ``supply``, the drains, V_boot,0 and ΔV_allowed) as sums that add
    up as printed, V_F among the inputs."""
    assert facts.qg is not None and facts.on_time is not None
    assert facts.v_boot0 is not None and facts.delta_v_allowed is not None
    on_time, i_drain = facts.on_time, drains.total
    drained = i_drain.value * on_time.value
    terms = [(1, facts.qg.value), (1, facts.q_ls.value), (1, drained)]
    if q_rr is not None:
        terms.append((1, q_rr.value))
    dv_terms = [(1, facts.v_boot0.value), (-1, facts.v_boot_min.value)]
    finest = resolution(dv_terms)
    lines = [
        "Q_total = Q_g + Q_ls + I_drain·t_on" + (" + Q_rr" if q_rr is not None else ""),
        f"        = {sum_line(terms, 'C')}",
        f"  I_drain·t_on = ({drains.quiescent.text()} + {drains.i_leak.text()} + "
        f"{drains.i_resistive.text()}) × {on_time.text()} = {i_drain.text()} × "
        f"{on_time.text()} = {format_si(drained, 'C')}",
        f"  Q_g: {facts.qg.origin}",
    ]
    if q_rr is not None:
        lines.append(f"  Q_rr: {q_rr.origin}")
    if not supply:
        return tuple(lines)
    lines.append(f"  drains: {_drain_list(drains, most=6)}")
    boot = boot_voltage_line(facts, finest)
    if boot is not None:
        lines.append(boot)
    lines += [
        f"ΔV_allowed = V_boot,0 − V_boot,min = {sum_line(dv_terms, 'V')}"
        f"  (V_boot,min: {facts.v_boot_min.origin})",
    ]
    return tuple(lines)


# ---------------------------------------------------------------- dc-hold


def _demanding_device(stage: DriveStage, facts: StageFacts) -> str:
    """Where the finding belongs: the control source that demands the on-time, if the
    on-time comes from its waveform; else the hold capacitor; else the switch."""
    control = stage.control.source if stage.control else None
    from_waveform = facts.condition("on_time_max") is None
    if control and from_waveform and facts.device(control) is not None:
        return control
    if facts.capacitor is not None:
        return facts.capacitor.name
    return stage.switch


def check_dc_hold(stage: DriveStage, ctx: CheckContext) -> Iterator[Finding]:
    facts = ctx.facts
    if stage.supply.kind != "bootstrap" or facts.never_on:
        return
    on_time = facts.on_time
    if on_time is None or on_time.value <= 0:
        return
    c_hold, dv = facts.c_hold, facts.delta_v_allowed
    drains = facts.on_drains
    if math.isfinite(on_time.value):
        # Below the minimum from the start, or a gate charge alone beyond the allowed
        # droop: the supply voltage or the capacitor is the problem, reported elsewhere.
        t_hold = outlasts_hold(facts)
        if t_hold is None:
            return
    else:
        t_hold = None
        if c_hold is not None and dv is not None:
            t_hold = _hold_time(facts, c_hold.value, dv.value, drains.total.value)
    yield _dc_hold_finding(stage, ctx, drains, t_hold)


def _hold_time(facts: StageFacts, c_hold: float, dv: float, i_drain: float) -> float:
    """The card's t_hold: C + C_g (the gate shares the capacitor's charge) discharged by a
    drain linear in the boot voltage, from V_boot,0 less the gate's charge down to
    V_boot,min. An unknown gate charge is taken as none: the hold time is then an upper
    bound."""
    qg = facts.qg.value if facts.qg else 0.0
    c_total = c_hold + facts.c_gate.value
    v_min = facts.v_boot_min.value
    return boot_physics.hold_time_linear(
        c_total, v_min + dv, v_min, qg, i_drain, facts.drain_slope.value
    )


def _dc_hold_finding(
    stage: DriveStage, ctx: CheckContext, drains: OnDrains, t_hold: float | None
) -> Finding:
    facts = ctx.facts
    on_time = facts.on_time
    assert on_time is not None
    c_hold, dv, qg, v_boot = facts.c_hold, facts.delta_v_allowed, facts.qg, facts.v_boot0
    switch = stage.switch
    i_drain = drains.total
    cap_name = facts.capacitor.name if facts.capacitor else "the hold capacitor"
    device = _demanding_device(stage, facts)
    values: dict[str, Value] = {"on_time": on_time, **drains.values()}
    if c_hold is not None:
        values["capacitance"] = c_hold
        values["gate_capacitance"] = facts.c_gate
    if qg is not None:
        values["gate_charge"] = qg
    if v_boot is not None and dv is not None:
        values["v_boot"] = v_boot
        values["v_boot_min"] = facts.v_boot_min
        values["delta_v_allowed"] = dv
        if facts.diode is not None:
            values["diode_vf"] = facts.diode_vf
        if facts.v_aux is not None:
            values["v_aux"] = facts.v_aux
    derivation: list[str] = []
    if t_hold is not None and c_hold is not None and dv is not None:
        origin = (
            "computed: ((C + C_g)/g)·ln(I(V_1)/I(V_min)), V_1 = V_boot,0 − Q_g/(C + C_g), "
            "I(V) = I_drain + g·(V − V_boot,0)"
            if facts.drain_slope.value
            else "computed: ((C + C_g)·ΔV_allowed − Q_g)/I_drain"
        )
        if qg is None:
            origin += " with Q_g unknown (taken as 0: an upper bound)"
        values["hold_time"] = computed(t_hold, "s", origin)
        q_text = qg.text() if qg else "0 C (unknown)"
        slope = facts.drain_slope
        values["r_drain_equivalent"] = computed(
            1.0 / slope.value if slope.value > 0 else math.inf,
            "Ohm",
            "computed: 1/g, the resistance the drains behave like as the boot voltage sags",
        )
        dv_terms = [(1, dv.value + facts.v_boot_min.value), (-1, facts.v_boot_min.value)]
        boot = boot_voltage_line(facts, resolution(dv_terms))
        derivation += [
            "t_hold = ((C + C_g)/g)·ln(I(V_1)/I(V_min)) with I(V) = I_drain,on + g·(V − V_boot,0), "
            f"g = {format_si(slope.value, 'A')}/V ({slope.origin}); for g = 0: "
            "((C + C_g)·ΔV_allowed − Q_g)/I_drain",
            f"       with C + C_g = {c_hold.text()} + {facts.c_gate.text()}, ΔV_allowed = "
            f"{dv.text()}, Q_g = {q_text}, I_drain,on = {i_drain.text()}: "
            f"t_hold = {format_si(t_hold, 's')}",
            "  I_drain,on = I_q + I_leak + I_R = "
            + sum_line(
                [
                    (1, drains.quiescent.value),
                    (1, drains.i_leak.value),
                    (1, drains.i_resistive.value),
                ],
                "A",
            ),
            f"  drains: {_drain_list(drains, most=8)}",
            *((f"  {boot}",) if boot else ()),
            f"  ΔV_allowed = V_boot,0 − V_boot,min = {sum_line(dv_terms, 'V')}",
        ]
    unbounded = not math.isfinite(on_time.value)
    derivation.append(f"t_on = {'unbounded' if unbounded else on_time.text()} ({on_time.origin})")
    if t_hold is not None and not t_hold > 0 and v_boot is not None and c_hold is not None:
        # the boot supply starts at or below the level it must hold: no on-time is short
        # enough, and "refresh every 0 s" would be no advice
        hold_part = (
            f"{cap_name} charges only to {v_boot.text()}, already at or below the "
            f"{facts.v_boot_min.text()} it must stay above, so it holds {switch} on for no "
            "time at all"
        )
        refresh = "first raise the boot supply above that level, as gate-headroom says"
        largest = "as built, no on-time works"
    elif t_hold is not None and math.isfinite(t_hold) and c_hold is not None:
        held = format_si(t_hold, "s")
        hold_part = (
            f"{cap_name} ({(facts.c_hold_nominal or c_hold).text()}) keeps the boot supply above "
            f"{facts.v_boot_min.text()} for only {held}: {i_drain.text()} drains it "
            f"({_drain_list(drains)})"
        )
        refresh = f"turn {switch} off briefly at least every {held}"
        largest = f"the largest on-time that works as built is {held}"
    elif t_hold is not None:
        hold_part = (
            f"no steady drain of {cap_name} is known, but the leakage of its diode, "
            "capacitor and gate will still empty it"
        )
        refresh = f"turn {switch} off briefly at regular intervals"
        largest = "give the diode's ir_leak and the driver's iq_boot to get a hold time"
    else:
        hold_part = f"{cap_name} is recharged only while {switch} is off"
        refresh = f"turn {switch} off briefly at regular intervals"
        largest = "give the hold capacitor's value to get a hold time"
    if unbounded:
        by = f" by {device}" if stage.control and device == stage.control.source else ""
        message = f"{switch} is held on without limit{by} from a bootstrap supply; {hold_part}"
        fix = (
            f"a bootstrap supply recharges only while {switch} is off, so it cannot hold it on "
            f"at DC: use {ALTERNATIVES} ({refresh}); {largest}"
        )
        return with_corner(
            ctx.finding(device, message, values, fix=fix, derivation=tuple(derivation)),
            facts,
            HOLD,
        )
    assert t_hold is not None and qg is not None and dv is not None
    q_cycle = facts.q_per_cycle
    assert q_cycle is not None
    margin = ctx.options["margin"]
    c_min = boot_physics.required_capacitance(q_cycle.value, dv.value)
    sizing = _sizing(facts, q_cycle.value, dv.value, margin)
    needed = sizing.required
    values["charge_per_cycle"] = q_cycle
    values["margin"] = Value(margin, "1", "option margin")
    values["minimum_capacitance"] = computed(c_min, "F", "computed: Q_total/ΔV_allowed")
    derivation += _budget_lines(facts, drains, facts.recovery_charge, supply=False)
    derivation.append(
        f"C for t_on: Q_total/ΔV_allowed = {_c4(q_cycle.value)} / {_v4(dv.value)} = "
        f"{format_si(c_min, 'F')}"
    )
    derivation += sizing.lines(margin)
    if needed > PRACTICAL_MAX_CAPACITANCE:
        # Not a capacitor to fit: a bootstrap is the wrong supply for this on-time.
        values["capacitance_needed"] = computed(
            needed, "F", f"computed: nominal part, {sizing.governs} (beyond a bootstrap capacitor)"
        )
        values["practical_max_capacitance"] = Value(
            PRACTICAL_MAX_CAPACITANCE,
            "F",
            "common practice: bootstrap hold capacitors are ceramics up to tens of µF",
        )
        by = f" as {device} commands" if stage.control and device == stage.control.source else ""
        message = (
            f"a bootstrap supply cannot hold {switch} on for {on_time.text()}{by}: {hold_part}, "
            f"and holding {on_time.text()} would take {format_si(needed, 'F')} of hold "
            f"capacitance, far beyond a bootstrap capacitor"
        )
        fix = f"use {ALTERNATIVES} ({refresh}); the largest on-time that works as built is {held}"
        return with_corner(
            ctx.finding(device, message, values, fix=fix, derivation=tuple(derivation)),
            facts,
            HOLD,
        )
    suggested = next_preferred(needed, PREFERRED_SERIES)
    values["capacitance_for_on_time"] = computed(
        needed,
        "F",
        f"computed: nominal part, {sizing.governs} (as bootstrap-capacitor-small sizes it)",
    )
    values["suggested_capacitance"] = computed(
        suggested, "F", f"computed: next {PREFERRED_SERIES} value ≥ required (IEC 60063)"
    )
    by = f" by {device}" if stage.control and device == stage.control.source else ""
    message = (
        f"{switch} is commanded on{by} for {on_time.text()} at a time, longer than its "
        f"bootstrap supply can hold: {hold_part}; holding {on_time.text()} takes "
        f"≥ {format_si(needed, 'F')}"
    )
    fix = (
        f"use {format_si(suggested, 'F')} ({PREFERRED_SERIES}) or more for {cap_name} "
        f"(≥ {format_si(needed, 'F')}, {sizing.governs}), or keep on-times within {held}, "
        f"or use {ALTERNATIVES} ({refresh})"
    )
    return with_corner(
        ctx.finding(device, message, values, fix=fix, derivation=tuple(derivation)), facts, HOLD
    )


CHECKS = {
    "bootstrap-capacitor-small": check_capacitor_small,
    "dc-hold": check_dc_hold,
}
