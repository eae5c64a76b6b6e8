"""Gate–source voltage of a floating switch against its rating, and the clamps meant to hold it.

Three questions per stage, each answered from the stage's paths and the shared facts:

- how high can V_GS go (the floating supply, or a ground-referenced rail with the source
  down at ground while the switch is off)?
- how low can V_GS go (a pull-down returned to ground while something holds the source up)?
- does a gate–source clamp hold V_GS inside the rating without conducting in normal drive?
"""

from __future__ import annotations

import math
from collections.abc import Iterator, Mapping

from drivelint.checks.base import CheckContext, Finding
from drivelint.checks.corners import STRESS, with_corner
from drivelint.checks.facts import StageFacts
from drivelint.checks.gate_levels import (
    ZENER_SERIES,
    ClampLevels,
    GateDrive,
    GateRating,
    Pulldown,
    SourceHold,
    gate_extremes,
    zener_between,
)
from drivelint.diagnostics import Severity
from drivelint.netlist.values import format_si
from drivelint.physics.preferred import next_preferred
from drivelint.ratings.values import Value, computed
from drivelint.stages.model import DriveStage


def _v(value: float) -> str:
    return format_si(value, "V")


def check_gate_overvoltage(stage: DriveStage, ctx: CheckContext) -> Iterator[Finding]:
    """V_GS beyond the rating either way with no clamp holding it; clamps that misbehave;
    each at the corner where V_GS is highest (corners.STRESS)."""
    for found in _check_gate_overvoltage(stage, ctx):
        yield with_corner(found, ctx.facts, STRESS)


def _check_gate_overvoltage(stage: DriveStage, ctx: CheckContext) -> Iterator[Finding]:
    if stage.channel != "nmos":
        return  # a P-channel switch's on-state V_GS is negative; not this rule's model
    facts = ctx.facts
    if facts.never_on:
        return  # never commanded on: its gate stays low in this scenario
    found = gate_extremes(stage, facts, ctx.options)
    rating, clamps, drive, boot_drive, worst = (
        found.rating,
        found.clamps,
        found.drive,
        found.boot_drive,
        found.worst,
    )
    limit_pos, limit_neg = rating.limit_positive, rating.limit_negative
    linear = stage.mode == "linear"

    summary: dict[str, Value] = dict(rating.values())
    if found.vgs_pos is not None:
        summary["vgs_max_positive"] = computed(
            found.vgs_pos,
            "V",
            "computed: highest V_GS of the pull-ups in normal operation, after any clamp "
            "within the limit",
        )
    if found.vgs_short is not None:
        summary["vgs_output_short"] = computed(
            found.vgs_short,
            "V",
            "computed: V_GS with the source held at its low level (output short), after any "
            "clamp within the limit",
        )
    if found.vgs_neg is not None:
        summary["vgs_max_negative"] = computed(
            found.vgs_neg,
            "V",
            "computed: lowest V_GS of the pull-downs, after any clamp within the limit"
            if worst is not None
            else "computed: no pull-down returns anywhere but the source",
        )
    if drive is not None:
        summary["vgs_drive"] = computed(drive.level, "V", f"computed: {drive.note}")
        summary["v_gate_supply"] = drive.origin
    undershoot = ctx.options.get("undershoot", 0.0)
    if undershoot and stage.supply.kind == "bootstrap":
        summary["undershoot"] = Value(undershoot, "V", "option undershoot")

    clear_pos = not found.holding_pos and not found.unknown_pos
    positive_fired = drive is not None and drive.level > limit_pos and clear_pos
    short_fired = (
        not positive_fired
        and found.short is not None
        and found.short.short is not None
        and found.short.short > limit_pos
        and clear_pos
    )
    negative_fired = (
        worst is not None
        and worst.vgs < limit_neg
        and not found.holding_neg
        and not found.unknown_neg
    )

    off_supply = next((p for p in found.pulls if p.path.returns_to == "negative"), None)
    for levels in clamps:
        if off_supply is not None and _conducts_off(levels, ctx.facts):
            yield _clamp_against_turn_off(stage, ctx, summary, rating, levels, off_supply)
            continue
        yield from _clamp_findings(
            levels,
            stage,
            ctx,
            summary,
            rating,
            boot_drive,
            found.tolerance,
            positive_fired or short_fired,
            negative_fired,
        )
    if positive_fired:
        assert drive is not None
        yield _positive_finding(stage, ctx, summary, rating, drive, clamps, found.tolerance, linear)
    if short_fired:
        assert found.short is not None
        yield _short_finding(stage, ctx, summary, rating, found.short, clamps, found.tolerance)
    if negative_fired and worst is not None and worst.path.returns_to == "negative":
        yield _turn_off_supply_finding(stage, ctx, summary, rating, worst, clamps)
    elif negative_fired:
        assert worst is not None and facts.v_bus is not None
        yield _negative_finding(
            stage,
            ctx,
            summary,
            rating,
            worst,
            found.hold,
            found.vth,
            clamps,
            boot_drive,
            found.tolerance,
            linear,
        )


def _conducts_off(levels: ClampLevels, facts: StageFacts) -> bool:
    """A gate–source clamp that conducts before the gate reaches the turn-off supply's
    level (its nearest to the source): it conducts every off-time."""
    nearest = facts.v_off_nearest
    return (
        nearest is not None
        and levels.negative is not None
        and math.isfinite(levels.negative)
        and levels.negative > nearest.value
    )


def _clamp_against_turn_off(
    stage: DriveStage,
    ctx: CheckContext,
    summary: Mapping[str, Value],
    rating: GateRating,
    levels: ClampLevels,
    pull: Pulldown,
) -> Finding:
    """A clamp that conducts against the turn-off supply below the source: it holds V_GS at
    its own level every off-time and draws the supply through the pull-down."""
    facts = ctx.facts
    nearest = facts.v_off_nearest
    assert nearest is not None and levels.negative is not None
    clamp = levels.clamp
    device = (clamp.devices or (clamp.device,))[0]
    ohms = sum(
        d.value
        for d in (facts.device(n) for n in pull.path.devices)
        if d is not None and d.kind == "resistor" and d.value
    )
    values: dict[str, Value] = {
        **summary,
        **levels.inputs,
        "clamp_negative_level": computed(
            levels.negative, "V", "computed: Zener voltages plus forward drops, source above gate"
        ),
        "v_off_negative": pull.v_return,
        "v_off_nearest": nearest,
    }
    current = ""
    if ohms > 0:
        amps = (levels.negative - pull.v_return.value) / ohms
        values["clamp_current_bound"] = computed(
            amps, "A", f"computed: (V_clamp− − V_neg)/R, R = {format_si(ohms, 'Ohm')} on the path"
        )
        current = f", drawing up to {format_si(amps, 'A')} through {'+'.join(pull.path.devices)}"
    # a Zener in series, anode to anode, so the pair conducts only beyond the turn-off level
    tolerance = ctx.options["zener_tolerance"]
    vf = 0.7
    low = (abs(pull.v_return.value) - vf) / (1.0 - tolerance) * (1 + 1e-9)
    zener = next_preferred(low, ZENER_SERIES) if low > 0 else None
    if zener is not None and zener * (1.0 + tolerance) + vf >= abs(rating.limit_negative):
        zener = None
    fix = (
        f"add a {_v(zener)} Zener in series with {device}, anode to anode, so the pair conducts "
        f"only at about {_v(-(zener + vf))}, beyond the turn-off level and within the "
        f"{_v(rating.limit_negative)} limit, or remove the clamp"
        if zener is not None
        else f"remove {device}, or use a clamp that conducts only beyond the turn-off level"
    )
    return ctx.finding(
        device,
        f"{levels.describe()} conducts at {_v(levels.negative)} against the turn-off supply "
        f"{stage.supply.negative.source if stage.supply.negative else ''} "
        f"({nearest.text()} at its nearest): every off-time it holds {stage.switch}'s V_GS at "
        f"{_v(levels.negative)} instead of the negative bias{current}",
        values,
        fix=fix,
        derivation=(
            f"V_clamp− = {_v(levels.negative)} > V_neg = {nearest.text()} ({nearest.origin})",
        ),
    )


def _clamp_findings(
    levels: ClampLevels,
    stage: DriveStage,
    ctx: CheckContext,
    summary: Mapping[str, Value],
    rating: GateRating,
    boot_drive: GateDrive | None,
    tolerance: float,
    positive_fired: bool,
    negative_fired: bool,
) -> Iterator[Finding]:
    clamp = levels.clamp
    device = (clamp.devices or (clamp.device,))[0]
    vth = ctx.facts.ratings.get(ctx.facts.switch, "vth")
    what = levels.describe()
    values: dict[str, Value] = {**summary, **levels.inputs}
    if levels.positive is not None:
        values["clamp_positive_level"] = computed(
            levels.positive, "V", "computed: Zener voltages plus forward drops, gate above source"
        )
    if levels.negative is not None:
        values["clamp_negative_level"] = computed(
            levels.negative, "V", "computed: Zener voltages plus forward drops, source above gate"
        )
    limit_pos, limit_neg = rating.limit_positive, rating.limit_negative
    drive_level = boot_drive.on_level if boot_drive else None
    zener = zener_between(drive_level, limit_pos, tolerance)
    zener_text = (
        f"a Zener of {_v(zener)} (cathode at the gate {stage.gate}, "
        f"anode at the source {stage.source})"
        if zener
        else None
    )

    if levels.forward_only_positive:
        assert levels.positive is not None
        yield ctx.finding(
            device,
            f"{what} across {stage.switch} gate–source is reversed: it conducts forward at "
            f"{_v(levels.positive)} as the gate rises, so V_GS cannot reach the "
            f"{_v(drive_level) + ' ' if drive_level else ''}drive and the supply is shorted "
            "through it",
            values,
            fix=f"turn {device} round: cathode at the gate {stage.gate}, anode at the source "
            f"{stage.source}" + (f"; {zener_text} clamps both ways" if zener_text else ""),
            derivation=(
                "V_clamp+ = Σ V_F (forward conduction only)",
                f"         = {_v(levels.positive)}"
                + (
                    f" < V_th = {vth.text()} ({vth.origin}): the switch cannot turn on"
                    if vth is not None and levels.positive < vth.value
                    else ": V_GS is held there"
                ),
            ),
        )
        return

    if levels.positive is not None and math.isfinite(levels.positive) and levels.positive_zener:
        tolerance_low = levels.positive - tolerance * levels.positive_zener
        if boot_drive is not None and levels.positive < boot_drive.on_level:
            current = (
                (boot_drive.on_level - levels.positive) / boot_drive.resistance
                if boot_drive.resistance
                else None
            )
            if current is not None:
                values["clamp_current_bound"] = computed(
                    current,
                    "A",
                    "computed: (V_drive − V_clamp) / series resistance of the pull-up "
                    "(an upper bound: the driver's own resistance is not counted)",
                )
            drain = (
                f", draws up to {format_si(current, 'A')} from the floating supply"
                if current is not None
                else ", draws from the floating supply"
            )
            fix = (
                f"use {zener_text} — it stays off at the {_v(boot_drive.on_level)} drive "
                f"(±{tolerance:.0%}) and clamps within the {_v(limit_pos)} limit — "
                f"or remove {device}"
                if zener_text
                else f"remove {device}, or lower the drive below {_v(levels.positive)}"
            )
            yield ctx.finding(
                device,
                f"{what} clamps {stage.switch} V_GS at {_v(levels.positive)}, below the "
                f"{_v(boot_drive.on_level)} drive level: it conducts every on-time{drain} and pins "
                f"V_GS at about {_v(levels.positive)}",
                values,
                fix=fix,
                derivation=(
                    f"V_drive = {boot_drive.origin.text()} ({boot_drive.origin.origin})",
                    f"V_clamp+ = {_v(levels.positive)} < V_drive = {_v(boot_drive.on_level)}",
                    *(
                        (
                            f"I ≤ (V_drive − V_clamp+)/R_series = ({_v(boot_drive.on_level)} − "
                            f"{_v(levels.positive)})/{format_si(boot_drive.resistance or 0, 'Ω')} "
                            f"= {format_si(current, 'A')}",
                        )
                        if current is not None
                        else ()
                    ),
                ),
            )
        elif boot_drive is not None and tolerance_low < boot_drive.on_level:
            values["clamp_positive_low"] = computed(
                tolerance_low, "V", "computed: V_clamp+ − tolerance × V_Z"
            )
            values["zener_tolerance"] = Value(tolerance, "1", "option zener_tolerance")
            yield ctx.finding(
                device,
                f"{what} may conduct at the {_v(boot_drive.on_level)} drive level: with "
                f"±{tolerance:.0%} tolerance it clamps from {_v(tolerance_low)}, "
                f"so it can draw from the floating supply every on-time",
                values,
                fix=(
                    f"use {zener_text}"
                    if zener_text
                    else f"lower the drive below {_v(tolerance_low)}"
                ),
                derivation=(
                    f"V_clamp+,low = V_clamp+ − tol·V_Z = {_v(levels.positive)} − "
                    f"{tolerance:g}·{_v(levels.positive_zener)} = {_v(tolerance_low)}",
                    f"V_drive = {_v(boot_drive.on_level)} > V_clamp+,low",
                ),
                severity=Severity.WARNING,
            )
        elif levels.positive > limit_pos and not positive_fired:
            yield ctx.finding(
                device,
                f"{what} clamps {stage.switch} V_GS only at {_v(levels.positive)}, above "
                f"the {_v(limit_pos)} limit: it protects nothing",
                values,
                fix=(
                    f"use {zener_text}" if zener_text else f"use a Zener of at most {_v(limit_pos)}"
                ),
                derivation=(
                    f"V_clamp+ = {_v(levels.positive)} > limit = V_GS(max) × derating = "
                    f"{rating.positive.text()} × {rating.derating:g} = {_v(limit_pos)}",
                ),
                severity=Severity.WARNING,
            )

    if (
        levels.negative is not None
        and math.isfinite(levels.negative)
        and levels.negative_zener
        and levels.negative < limit_neg
        and not negative_fired
    ):
        yield ctx.finding(
            device,
            f"{what} clamps {stage.switch} V_GS only at {_v(levels.negative)}, beyond "
            f"the {_v(limit_neg)} limit: it protects nothing on the negative side",
            values,
            fix=f"use Zeners whose sum with a forward drop stays within {_v(limit_neg)}",
            derivation=(
                f"V_clamp− = {_v(levels.negative)} < limit = V_GS(min) × derating = "
                f"{rating.negative.text()} × {rating.derating:g} = {_v(limit_neg)}",
            ),
            severity=Severity.WARNING,
        )


def _not_holding(clamps: list[ClampLevels], side: str) -> str:
    """Clause naming clamps that exist but do not hold this side, for the message."""
    if not clamps:
        return "and no gate–source clamp holds it"
    parts = []
    for c in clamps:
        level = c.positive if side == "positive" else c.negative
        if level is None or not math.isfinite(level):
            parts.append(f"{c.describe()} does not conduct this way")
        else:
            parts.append(f"{c.describe()} conducts only at {_v(level)}")
    return "and " + "; ".join(parts)


def _clamp_fix(stage: DriveStage, limit: float, tolerance: float) -> str:
    zener = zener_between(None, limit, tolerance)
    if zener is None:
        return f"drive the gate from a rail of at most {_v(limit)}"
    return (
        f"clamp it with a Zener of {_v(zener)} (cathode at the gate {stage.gate}, anode at "
        f"the source {stage.source}) behind a series resistor from the supply"
    )


def _positive_finding(
    stage: DriveStage,
    ctx: CheckContext,
    summary: Mapping[str, Value],
    rating: GateRating,
    drive: GateDrive,
    clamps: list[ClampLevels],
    tolerance: float,
    linear: bool,
) -> Finding:
    limit = rating.limit_positive
    values = dict(summary)
    supply = stage.supply
    if drive.from_boot and not (supply.kind == "charge-pump" and supply.riding):
        fix = (
            f"lower the floating supply to at most {_v(limit)} (a lower auxiliary or isolated "
            "rail); a Zener clamp here would conduct every on-time and drain it"
        )
    elif drive.from_boot:
        fix = _clamp_fix(stage, limit, tolerance) + (
            f", or return the reservoir {supply.capacitor} to ground instead of the source"
        )
    else:
        fix = (
            _clamp_fix(stage, limit, tolerance)
            + f", or drive it from a rail of at most {_v(limit)} above the bus"
        )
    return ctx.finding(
        stage.switch,
        f"{stage.switch} V_GS reaches {_v(drive.level)} from {drive.note}, above the "
        f"{_v(limit)} limit{rating.derated_text(rating.positive)}, "
        f"{_not_holding(clamps, 'positive')}",
        values,
        fix=fix,
        derivation=(
            "V_GS,max = V_gate,max − V_source (normal operation)",
            f"         = {drive.origin.text()} ({drive.origin.origin}) → {_v(drive.level)}",
            f"limit = V_GS(max) × derating = {rating.positive.text()} × {rating.derating:g} "
            f"= {_v(limit)}",
        ),
        severity=Severity.WARNING if linear else None,
    )


def _short_finding(
    stage: DriveStage,
    ctx: CheckContext,
    summary: Mapping[str, Value],
    rating: GateRating,
    drive: GateDrive,
    clamps: list[ClampLevels],
    tolerance: float,
) -> Finding:
    """The output-short case: the gate pulled up while the source cannot follow."""
    assert drive.short is not None
    limit = rating.limit_positive
    facts = ctx.facts
    where = "the source" if stage.mode == "linear" else "the output"
    return ctx.finding(
        stage.switch,
        f"with {where} {stage.source} shorted to {facts.v_sw_low.text()}, {stage.switch}'s "
        f"gate is still pulled up from {drive.short_note.split(' with ')[0]}: V_GS reaches "
        f"{_v(drive.short)}, above the {_v(limit)} limit{rating.derated_text(rating.positive)}, "
        f"{_not_holding(clamps, 'positive')} (in normal operation the source follows the "
        f"gate and V_GS stays at {_v(drive.level)})",
        dict(summary),
        fix=_clamp_fix(stage, limit, tolerance) + ", so that an output short cannot break the gate",
        derivation=(
            "V_GS,short = V_gate,max − V_source,low (the source held down by a short)",
            f"           = {drive.short_note} → {_v(drive.short)}",
            f"limit = V_GS(max) × derating = {rating.positive.text()} × {rating.derating:g} "
            f"= {_v(limit)}",
        ),
        severity=Severity.WARNING,
    )


def _turn_off_supply_finding(
    stage: DriveStage,
    ctx: CheckContext,
    summary: Mapping[str, Value],
    rating: GateRating,
    pull: Pulldown,
    clamps: list[ClampLevels],
) -> Finding:
    """The turn-off supply below the source holds V_GS beyond the negative rating."""
    limit = rating.limit_negative
    negative = stage.supply.negative
    assert negative is not None and negative.volts is not None
    values: dict[str, Value] = {**summary, "v_off_negative": pull.v_return}
    # the largest standard step within the limit, with the supply's own tolerance
    spread = ctx.facts.corners.supply_tolerance.value
    allowed = abs(limit) / (1.0 + spread)
    suggested = math.floor(allowed * 2.0 + 1e-9) / 2.0  # to 0.5 V, as supplies are set
    fix = (
        f"set the turn-off supply {negative.source} to {_v(suggested)} (within the "
        f"{_v(limit)} limit at its +{spread:.0%} tolerance)"
        if suggested > 0
        else f"return the pull-down to the source {stage.source}"
    )
    return ctx.finding(
        negative.source or pull.device,
        f"the turn-off supply {negative.source} holds {stage.switch}'s gate at "
        f"{pull.v_return.text()} against its source through {pull.device}: V_GS "
        f"stays beyond the {_v(limit)} limit{rating.derated_text(rating.negative)} for "
        f"every off-time, {_not_holding(clamps, 'negative')}",
        values,
        fix=fix + f", or use a part rated for {_v(-pull.v_return.value)} below its source",
        derivation=(
            f"V_GS,off = V_neg = {pull.v_return.text()} ({pull.v_return.origin})",
            f"limit = V_GS(min) × derating = {rating.negative.text()} × {rating.derating:g} "
            f"= {_v(limit)}",
        ),
    )


def _negative_finding(
    stage: DriveStage,
    ctx: CheckContext,
    summary: Mapping[str, Value],
    rating: GateRating,
    pull: Pulldown,
    hold: SourceHold,
    vth: Value | None,
    clamps: list[ClampLevels],
    boot_drive: GateDrive | None,
    tolerance: float,
    linear: bool = False,
) -> Finding:
    facts = ctx.facts
    assert facts.v_bus is not None
    limit = rating.limit_negative
    values: dict[str, Value] = {**summary, **hold.values}
    values["v_bus"] = facts.v_bus
    values["v_return"] = pull.v_return
    values["vgs_pulled_down"] = computed(pull.vgs, "V", "computed: V_return − V_source,held")
    if vth is not None:
        values["v_threshold"] = vth
    where = "ground" if pull.path.returns_to == "ground" else f"rail {pull.path.end_net}"
    zener = zener_between(
        boot_drive.on_level if boot_drive else None, rating.limit_positive, tolerance
    )
    held_by = " and ".join(r for r in hold.reasons if r) or "what holds the switch node up"
    clamp_fix = (
        f"clamp it with a Zener of {_v(zener)} from the source {stage.source} (anode) to the "
        f"gate {stage.gate} (cathode), which holds V_GS at about -0.7 V and stays off at the "
        f"drive level"
        if zener
        else f"clamp it with a diode from the source {stage.source} (anode) to the gate "
        f"{stage.gate} (cathode), which holds V_GS at about -0.7 V"
    )
    return ctx.finding(
        pull.device,
        f"{pull.device} pulls {stage.switch}'s gate to {where} while the source is held at "
        f"{facts.v_bus.text()} by {held_by}: V_GS reaches {_v(pull.vgs)} "
        f"at turn-off, beyond the {_v(limit)} limit{rating.derated_text(rating.negative)}, "
        f"{_not_holding(clamps, 'negative')}"
        + (
            " (a linear stage: its loop pulls the gate this far only in a transient or a "
            "fault, with the output above its set point)"
            if linear
            else ""
        ),
        values,
        fix=f"return {pull.device} to the source {stage.source} instead of {where}, or {clamp_fix}",
        derivation=(
            "V_GS,min = V_return − V_source,held (the source is held up, it cannot follow)",
            f"         = {pull.v_return.text()} − {facts.v_bus.text()} = {_v(pull.vgs)}",
            *(
                (
                    f"τ = R_discharge·C = {values['tau_source_node'].text()} ≥ τ_fall = "
                    f"{values['pulldown_fall_time'].text()} "
                    f"({values['pulldown_fall_time'].origin}): the source stays up while the "
                    "gate falls",
                )
                if "tau_source_node" in values and math.isfinite(values["tau_source_node"].value)
                else ()
            ),
            f"limit = V_GS(min) × derating = {rating.negative.text()} × {rating.derating:g} "
            f"= {_v(limit)}",
        ),
        severity=Severity.WARNING if linear else None,
    )


CHECKS = {"gate-overvoltage": check_gate_overvoltage}
