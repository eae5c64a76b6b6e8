"""One fix applier per rule: the finding's own suggested fix, as changes to the design.

An applier reads the fix from the finding's values (``suggested_capacitance``, the t_rr
or rating limit, ``max_duty``, the drive level and limit that bound a Zener) and writes it
as edits at the statements' spans: a new value, a copy of a model card with one parameter
changed (so that no other device using the old model changes), a part turned round, a
clamp added. A new part's ratings go in ``* drivelint: part`` directives, carrying the old
part's other ratings, so that drivelint checks the fixed deck with the part it now holds.
Where the fix is a different circuit rather than a value or a part (an isolated supply, a
new refresh path), the applier declines and says why; no fixed deck is written then.
"""

from __future__ import annotations

import math
from collections.abc import Callable, Mapping

from drivelint.checks.corners import HOLD, aux_low, nominal_for
from drivelint.diagnostics import Span
from drivelint.netlist.statements import Element, Word
from drivelint.netlist.values import format_si
from drivelint.netlist.waveforms import Pulse
from drivelint.physics.preferred import next_preferred, preferred_values
from drivelint.ratings.values import Value
from drivelint.testbench.bench import BenchContext, Declined, Fix, partner_dead_time
from drivelint.testbench.builders import gate_kind
from drivelint.testbench.corners import capacitance_text, capacitor_field
from drivelint.testbench.design import Edit, merge_edits
from drivelint.testbench.edits import element as _element
from drivelint.testbench.edits import model_copy
from drivelint.testbench.stimulus import Schedule, number
from drivelint.testbench.supplies import Level, hold_rails

Applier = Callable[[BenchContext], Fix | Declined]

CAPACITOR_SERIES = "E12"
RATING_SERIES = "E12"
ZENER_SERIES = "E24"  # Zener voltages come in E24 steps (common practice)
# A faster diode is given half the recovery time the finding allows: inside the limit with
# room for the estimate from TT.
RECOVERY_SHARE = 0.5
DIODE_KEYS = ("vrrm", "trr", "qrr", "ir_leak", "vf", "vz")
CLAMP_NAME = "d_tb_clamp"
# A generic small-signal Zener for an added clamp (invented for the testbench; the
# breakdown voltage is the finding's, the rest a typical small Zener's).
CLAMP_MODEL = "IS=1n N=1.2 RS=2 IBV=5m CJO=100p"


# -- helpers ---------------------------------------------------------------------------------


def _shared(ctx: BenchContext, element: Element) -> str:
    devices = ctx.design.produced_by(element)
    return f" (one statement for {', '.join(devices)})" if len(devices) > 1 else ""


def _set_capacitance(ctx: BenchContext, name: str, farads: float, why: str) -> Fix | Declined:
    """The capacitor's nominal value set to ``farads``; the deck holds it at the hold
    corner the finding was judged at (testbench.corners)."""
    device = ctx.circuit.devices.get(name)
    element = _element(ctx, name)
    if isinstance(element, Declined) or device is None:
        return Declined(f"capacitor {name} cannot be found")
    made = capacitance_text(ctx, device, farads, HOLD)
    if isinstance(made, Declined):
        return made
    value_field, text, simulated = made
    old = (device.value or 0.0) * device.multiplier
    corner = (
        f", simulated at its low corner, {format_si(simulated, 'F')}"
        if abs(simulated - farads) > 1e-12 * farads
        else ""
    )
    return Fix(
        f"{name}: {format_si(old, 'F')} -> {format_si(farads, 'F')} ({why}){corner}"
        + _shared(ctx, element),
        {element.span: Edit(fields=((value_field, text),), note=f"fix: {name} = {text}")},
    )


def _set_resistance(ctx: BenchContext, name: str, ohms: float, why: str) -> Fix | Declined:
    """The resistor's value set to ``ohms`` (its written value, so that m= still divides)."""
    device = ctx.circuit.devices.get(name)
    element = _element(ctx, name)
    if isinstance(element, Declined) or device is None or not device.value:
        return Declined(f"resistor {name} cannot be found")
    value_field = capacitor_field(element)
    if value_field is None:
        return Declined(f"{name}'s value is not written as a plain field")
    old = device.value / device.multiplier
    text = number(ohms * device.multiplier)
    return Fix(
        f"{name}: {format_si(old, 'Ω')} -> {format_si(ohms, 'Ω')} ({why})" + _shared(ctx, element),
        {element.span: Edit(fields=((value_field, text),), note=f"fix: {name} = {text}")},
    )


def _part_directives(
    ctx: BenchContext, element: Element, keys: tuple[str, ...], given: Mapping[str, float]
) -> tuple[str, ...]:
    """``part`` directives for every device of ``element``: ``given``, plus the ratings in
    ``keys`` it had from the parts library or a directive (a model card's go with it)."""
    out = []
    for name in ctx.design.produced_by(element):
        device = ctx.circuit.devices.get(name)
        items: dict[str, float] = {}
        for key in keys:
            if key in given:
                continue
            rated = ctx.facts.ratings.get(device, key)
            if rated is not None and not rated.origin.startswith("model"):
                items[key] = rated.value
        items.update(given)
        out.append(f"part {name} " + " ".join(f"{k}={number(v)}" for k, v in sorted(items.items())))
    return tuple(out)


def _swap_nodes(ctx: BenchContext, name: str, why: str) -> Fix | Declined:
    element = _element(ctx, name)
    if isinstance(element, Declined):
        return element
    nodes = element.fields[:2]
    if len(nodes) < 2 or not all(isinstance(n, Word) for n in nodes):
        return Declined(f"{name}'s nodes are not plain node names")
    first, second = nodes
    assert isinstance(first, Word) and isinstance(second, Word)
    return Fix(
        f"{name} turned round: anode {second.raw}, cathode {first.raw} ({why})"
        + _shared(ctx, element),
        {
            element.span: Edit(
                fields=((first, second.raw), (second, first.raw)), note=f"fix: {name} turned round"
            )
        },
    )


def zener_choice(drive: float | None, limit: float, tolerance: float) -> float | None:
    """The lowest standard Zener that stays off at the drive level and clamps strictly
    within the limit, both with its tolerance: what gate-overvoltage's fix text names.
    With no drive level (a gate pulled up from a rail, no floating supply), the highest
    one that clamps within the limit."""
    if not 0 <= tolerance < 1:
        return None
    if drive is None or drive <= 0:
        ceiling = limit / (1.0 + tolerance) * (1 - 1e-9)
        below = [v for v in _zener_values(ceiling) if v <= ceiling * (1 + 1e-9)]
        choice = max(below, default=None)
        return choice if choice is not None and choice * (1.0 + tolerance) < limit else None
    choice = next_preferred(drive / (1.0 - tolerance) * (1 + 1e-9), ZENER_SERIES)
    return choice if choice * (1.0 + tolerance) < limit else None


def _zener_values(near: float) -> list[float]:
    """E24 values in the decades around ``near``."""
    if not (near > 0 and math.isfinite(near)):
        return []
    decade = math.floor(math.log10(near))
    return [
        float(f"{step!r}e{power}")
        for power in (decade - 1, decade, decade + 1)
        for step in preferred_values(ZENER_SERIES)
    ]


def clamp_drive(ctx: BenchContext) -> float | None:
    """The on-state drive a gate–source Zener must stay off at, as gate-overvoltage takes
    it: the floating supply's pull-up after charge sharing, or none for a rail-fed gate."""
    from drivelint.checks.gate_levels import gate_extremes

    found = gate_extremes(ctx.stage, ctx.facts, ctx.options)
    return found.boot_drive.on_level if found.boot_drive is not None else None


# -- per rule ----------------------------------------------------------------------------------


def capacitor_small(ctx: BenchContext) -> Fix | Declined:
    suggested = ctx.value("suggested_capacitance")
    cap = ctx.facts.capacitor
    if suggested is None or cap is None:
        return Declined("the finding suggests no capacitance")
    return _set_capacitance(ctx, cap.name, suggested, "the finding's suggested_capacitance")


def dc_hold(ctx: BenchContext) -> Fix | Declined:
    needed = ctx.value("capacitance_for_on_time")
    cap = ctx.facts.capacitor
    if needed is None or cap is None:
        return Declined(
            "a bootstrap cannot hold a switch on at DC: the fix is a charge pump, an isolated "
            "gate supply or periodic refresh pulses, a different circuit rather than a value "
            "or a part"
        )
    farads = next_preferred(needed, CAPACITOR_SERIES)
    return _set_capacitance(
        ctx, cap.name, farads, f"the finding's capacitance_for_on_time, next {CAPACITOR_SERIES}"
    )


def diode_slow(ctx: BenchContext) -> Fix | Declined:
    diode = ctx.facts.diode
    limits = [v for v in (ctx.value("trr_max"), ctx.value("refresh_window_limit")) if v]
    if diode is None or not limits:
        return Declined("the finding gives no recovery limit")
    allowed = min(limits)
    tt = RECOVERY_SHARE * allowed
    element = _element(ctx, diode.name)
    if isinstance(element, Declined):
        return element
    copied = model_copy(ctx, diode, {"tt": tt}, "fast")
    if isinstance(copied, Declined):
        return copied
    name, edits = copied
    directives = _part_directives(
        ctx, element, tuple(k for k in DIODE_KEYS if k != "qrr"), {"trr": tt}
    )
    return Fix(
        f"{diode.name}: model {diode.model_name} -> {name}, the same card with TT = "
        f"{format_si(tt, 's')} (half the finding's limit t_rr <= {format_si(allowed, 's')})"
        + _shared(ctx, element),
        edits,
        directives,
    )


def diode_voltage(ctx: BenchContext) -> Fix | Declined:
    diode = ctx.facts.diode
    reverse, derating = ctx.value("diode_reverse_voltage"), ctx.value("derating")
    if diode is None or reverse is None or not derating:
        return Declined("the finding gives no reverse voltage and derating")
    rating = next_preferred(reverse / derating, RATING_SERIES)
    element = _element(ctx, diode.name)
    if isinstance(element, Declined):
        return element
    model = diode.model
    old_bv = model.params.get("bv", 0.0) if model else 0.0
    copied = model_copy(ctx, diode, {"bv": max(old_bv, rating)}, f"{number(rating)}v")
    if isinstance(copied, Declined):
        return copied
    name, edits = copied
    directives = _part_directives(ctx, element, DIODE_KEYS, {"vrrm": rating})
    return Fix(
        f"{diode.name}: model {diode.model_name} -> {name}, rated {format_si(rating, 'V')} "
        f"(next {RATING_SERIES} value >= {format_si(reverse, 'V')} / {derating:g})"
        + _shared(ctx, element),
        edits,
        directives,
        bounds={"tb_reverse_with_ringing": rating * derating},
    )


def no_refresh(ctx: BenchContext) -> Fix | Declined:
    stage = ctx.stage
    if stage.supply.diode_orientation == "reversed" and stage.supply.diode:
        return _swap_nodes(ctx, stage.supply.diode, "the finding's fix: turn it round")
    max_duty = ctx.value("max_duty")
    if max_duty is None:
        return Declined(
            "nothing pulls the switch node low: the fix is a refresh path (a low-side switch "
            "or freewheel diode) or an isolated supply, a different circuit rather than a "
            "value or a part"
        )
    fsw, min_off = ctx.value("fsw"), ctx.value("min_off_time")
    why = "the finding's max_duty"
    if fsw and min_off is not None:
        # The deck's commands keep a dead time on each side of the off-time; where the
        # finding saw none, they take it out of the refresh window, so it is left over.
        period = 1 / fsw
        dead = partner_dead_time(ctx, Schedule.periodic(period, max_duty * period, 0.0))
        kept = 1.0 - (min_off + 2 * dead) * fsw
        if kept < max_duty:
            max_duty = kept
            why = (
                f"the finding's min_off_time plus the {format_si(dead, 's')} dead time the "
                "deck's commands keep at each edge"
            )
    duty = math.floor(max_duty * 1000) / 1000
    if duty <= 0:
        return Declined("the finding leaves no duty that sustains the boot supply")
    return Fix(f"control duty limited to {duty:.1%} ({why})", duty=duty)


def gate_overvoltage(ctx: BenchContext) -> Fix | Declined:
    kind = gate_kind(ctx)
    tolerance = ctx.options.get("zener_tolerance", 0.05)
    limit = ctx.value("vgs_limit_positive")
    drive = clamp_drive(ctx)
    if kind == "clamp reversed":
        return _turn_clamp_round(ctx, drive, limit, tolerance)
    if kind == "clamp below drive":
        zener = zener_choice(drive, limit, tolerance) if limit is not None else None
        device = ctx.circuit.devices.get(ctx.finding.device)
        if zener is None or device is None:
            return Declined("no standard Zener stays off at the drive level within the rating")
        element = _element(ctx, device.name)
        if isinstance(element, Declined):
            return element
        copied = model_copy(ctx, device, {"bv": zener}, f"{number(zener)}v")
        if isinstance(copied, Declined):
            return copied
        name, edits = copied
        return Fix(
            f"{device.name}: model {device.model_name} -> {name}, a {format_si(zener, 'V')} "
            f"Zener (the lowest {ZENER_SERIES} value that stays off at the "
            f"{format_si(drive or 0.0, 'V')} drive with ±{tolerance:.0%} and clamps within "
            f"{format_si(limit or 0.0, 'V')})" + _shared(ctx, element),
            edits,
            _part_directives(ctx, element, ("ir_leak", "vf"), {"vz": zener}),
        )
    if kind in ("negative", "output short"):
        return _added_clamp(ctx, drive, limit, tolerance)
    if kind == "positive":
        return Declined(
            "the fix is a lower gate supply or a resistor-fed Zener from a rail, a change of "
            "the supply design rather than a value or a part"
        )
    if kind == "clamp against turn-off":
        return Declined(
            "the fix adds a Zener in series with the clamp (a new part and a new node), not a "
            "value or a part change"
        )
    if kind == "turn-off supply":
        return Declined(
            "the fix sets the isolated turn-off supply's output, which the deck already holds "
            "at the level the rule judged; the fixed level is the finding's own arithmetic "
            "(V_neg × (1 + tolerance) within the rating)"
        )
    return Declined("the finding has no testbench, so no fixed deck either")


def _turn_clamp_round(
    ctx: BenchContext, drive: float | None, limit: float | None, tolerance: float
) -> Fix | Declined:
    """Turn the clamp round; a Zener that would then conduct within its tolerance at the
    drive level is also replaced by the one the finding names ("clamps both ways")."""
    turned = _swap_nodes(ctx, ctx.finding.device, "the finding's fix: turn it round")
    device = ctx.circuit.devices.get(ctx.finding.device)
    vz = ctx.value(f"{ctx.finding.device}_vz")
    if isinstance(turned, Declined) or device is None or vz is None or drive is None:
        return turned
    if vz * (1 - tolerance) >= drive:
        return turned
    zener = zener_choice(drive, limit, tolerance) if limit is not None else None
    if zener is None:
        return turned
    copied = model_copy(ctx, device, {"bv": zener}, f"{number(zener)}v")
    element = _element(ctx, device.name)
    if isinstance(copied, Declined) or isinstance(element, Declined):
        return turned
    name, edits = copied
    return Fix(
        f"{turned.description}; and {name}, a {format_si(zener, 'V')} Zener, since "
        f"{format_si(vz, 'V')} would conduct within ±{tolerance:.0%} at the "
        f"{format_si(drive, 'V')} drive (the Zener the finding names)",
        merge_edits(turned.edits, edits),
        _part_directives(ctx, element, ("ir_leak", "vf"), {"vz": zener}),
    )


def _added_clamp(
    ctx: BenchContext, drive: float | None, limit: float | None, tolerance: float
) -> Fix | Declined:
    """A Zener (or, with no drive level known, a plain diode) from source to gate."""
    stage = ctx.stage
    switch = ctx.circuit.devices.get(stage.switch)
    element = _element(ctx, stage.switch)
    if switch is None or isinstance(element, Declined):
        return Declined(f"{stage.switch}'s statement cannot be found")
    scope = switch.instance
    gate = ctx.design.local_net(stage.gate, scope)
    source = ctx.design.local_net(stage.source, scope)
    if gate is None or source is None:
        return Declined("the gate and source cannot be named where the switch is written")
    zener = zener_choice(drive, limit, tolerance) if limit is not None else None
    name = CLAMP_NAME
    existing = {n.rsplit(".", 1)[-1] for n in ctx.design.circuit.devices}
    while name in existing:
        name += "_"
    model = f"{name}_model"
    breakdown = f" BV={number(zener)}" if zener else ""
    lines = (
        f"{name.upper()} {source} {gate} {model}",
        f".model {model} D ({CLAMP_MODEL}{breakdown})",
    )
    devices = [f"{p}.{name}" if p else name for p in _instances_of(ctx, element)]
    what = f"a {format_si(zener, 'V')} Zener" if zener else "a diode"
    role = (
        "the finding's suggested clamp (the existing pull-up is its series resistor)"
        if gate_kind(ctx) == "output short"
        else "the finding's suggested clamp"
    )
    directives = tuple(f"part {d} vz={number(zener)}" for d in devices) if zener else ()
    return Fix(
        f"{what} {name} added from the source {stage.source} (anode) to the gate {stage.gate} "
        f"(cathode), {role}" + _shared(ctx, element),
        {element.span: Edit(after=lines, note=f"fix: {what} clamp from source to gate")},
        directives,
    )


def _instances_of(ctx: BenchContext, element: Element) -> list[str]:
    """The instance prefix of every device the statement produced ("" at the top level)."""
    out = []
    for name in ctx.design.produced_by(element):
        device = ctx.circuit.devices.get(name)
        out.append(device.instance if device else "")
    return out


# A raised gate rail clears the shortfall by this much, rounded up to the next step: the
# fix must not land on the boundary the rule compares with.
RAIL_ROOM = 0.05  # V
RAIL_STEP = 0.1  # V


def raised_rail(present: float, shortfall: float) -> float:
    """The rail ``shortfall`` higher, with ``RAIL_ROOM`` to spare, rounded up to a step."""
    steps = math.ceil((present + max(shortfall, 0.0) + RAIL_ROOM) / RAIL_STEP - 1e-9)
    return round(steps * RAIL_STEP, 6)


def gate_headroom(ctx: BenchContext) -> Fix | Declined:
    """The finding's first fix: the gate supply raised by the shortfall (the auxiliary rail
    of a bootstrap, the isolated source's level), as a nominal value whose low corner
    clears the need; the deck holds that corner."""
    stage, facts = ctx.stage, ctx.facts
    supply = stage.supply
    level, need = ctx.value("vgs_supply_on"), ctx.value("vgs_needed")
    if level is None or need is None:
        return Declined("the finding gives no drive level and need")
    shortfall = need - level
    if supply.kind == "bootstrap" and supply.aux is not None:
        present = ctx.value("v_aux")
        nominal = facts.v_aux_nominal.value if facts.v_aux_nominal else present
        if present is None or nominal is None:
            return Declined("the finding gives no auxiliary rail level")
        target = raised_rail(nominal, nominal_for(facts, present + shortfall) - nominal)
        at_corner = aux_low(facts, target)
        held = hold_rails(
            ctx.design,
            ctx.circuit,
            [Level(supply.aux.net, Value(at_corner, "V", "the fix, at its low corner"))],
            "the finding's fix",
        )
        if isinstance(held, str):
            return Declined(f"the auxiliary rail cannot be raised: {held}")
        return Fix(
            f"auxiliary rail {supply.aux.net} raised from {format_si(nominal, 'V')} to "
            f"{format_si(target, 'V')} (the finding's fix: its low corner at least "
            f"{format_si(shortfall, 'V')} higher; {format_si(RAIL_ROOM, 'V')} more, rounded "
            f"up to the next {format_si(RAIL_STEP, 'V')}); the deck holds its low corner, "
            f"{format_si(at_corner, 'V')}",
            held.edits,
        )
    if supply.kind == "isolated" and supply.source:
        return _raised_isolated(ctx, supply.source, level, shortfall)
    return Declined(
        "the fix is a floating gate supply, a pump fed from the bus or a different switch: a "
        "different circuit rather than a value or a part"
    )


def _raised_isolated(
    ctx: BenchContext, name: str, level: float, shortfall: float
) -> Fix | Declined:
    device = ctx.circuit.devices.get(name)
    element = _element(ctx, name)
    if isinstance(element, Declined) or device is None or device.kind != "vsource":
        return Declined(f"the isolated supply {name} is not an independent source to raise")
    nodes = element.fields[:2]
    wave = device.waveform
    if wave is None or wave.kind != "dc" or not all(isinstance(n, Word) for n in nodes):
        return Declined(f"{name} is not a DC source written with plain nodes")
    first, second = nodes
    assert isinstance(first, Word) and isinstance(second, Word)
    spread = ctx.facts.corners.supply_tolerance.value
    nominal = abs(wave.dc_level())
    target = raised_rail(nominal, (level + shortfall) / (1 - spread) - nominal)
    at_corner = target * (1 - spread)
    positive = device.net("p") == ctx.stage.supply.boot_net
    value = at_corner if positive else -at_corner
    line = f"{ctx.design.raw_name(element)} {first.raw} {second.raw} DC {number(value)}"
    return Fix(
        f"{name} raised from {format_si(nominal, 'V')} to {format_si(target, 'V')} (the "
        f"finding's fix: its low corner at least {format_si(shortfall, 'V')} higher); the deck "
        f"holds its low corner, {format_si(at_corner, 'V')}",
        {element.span: Edit(lines=(line,), note=f"fix: {name} at {format_si(at_corner, 'V')}")},
    )


# What a voltage-stress finding rates, by its kind: the key of the new rating and its unit.
_STRESS_RATINGS = {"switch": ("vds_max", "V"), "part": ("v_max", "V"), "power": ("p_max", "W")}
_STRESS_APPLIED = {"switch": "vds_off", "part": "v_part", "power": "p_resistor"}
_STRESS_BOUNDS = {"switch": "tb_vds_off_with_ringing", "part": "v_part", "power": "p_resistor"}


def voltage_stress(ctx: BenchContext) -> Fix | Declined:
    from drivelint.checks.stress import (
        CAPACITOR_VOLTAGES,
        RESISTOR_POWERS,
        SWITCH_VOLTAGES,
        finding_kind,
        next_rating,
    )

    kind = finding_kind(ctx.finding.values)
    key, unit = _STRESS_RATINGS[kind]
    applied, derating = ctx.value(_STRESS_APPLIED[kind]), ctx.value("derating")
    if applied is None or not derating:
        return Declined("the finding gives no stress and derating")
    element = _element(ctx, ctx.finding.device)
    if isinstance(element, Declined):
        return element
    steps = {"switch": SWITCH_VOLTAGES, "power": RESISTOR_POWERS}.get(kind, CAPACITOR_VOLTAGES)
    device = ctx.circuit.devices.get(ctx.finding.device)
    usual = steps if kind != "part" or (device and device.kind == "capacitor") else ()
    rating = next_rating(applied / derating, usual) or next_preferred(
        applied / derating * (1 + 1e-6), RATING_SERIES
    )
    # Both switches of a leg block the same bus: one of the same part is replaced with it.
    names = [ctx.finding.device]
    if kind == "switch" and device is not None:
        names += sorted(
            name
            for name in (ctx.stage.switch, *(r.devices[0] for r in ctx.stage.refresh if r.devices))
            if name != device.name
            and (other := ctx.circuit.devices.get(name)) is not None
            and other.kind == "mosfet"
            and other.model_name == device.model_name
        )
    directives: list[str] = []
    for name in names:
        found = _element(ctx, name)
        if isinstance(found, Declined):
            return found
        directives += _part_directives(ctx, found, (key,), {key: rating})
    also = f"; also {', '.join(names[1:])}, the same part in the leg" if names[1:] else ""
    return Fix(
        f"{ctx.finding.device}: a part rated {format_si(rating, unit)} (the next usual rating "
        f"above {format_si(applied, unit)} / {derating:g}){also}; the stress itself is "
        "unchanged" + _shared(ctx, element),
        {},
        tuple(dict.fromkeys(directives)),
        bounds={_STRESS_BOUNDS[kind]: rating * derating},
    )


def level_shift(ctx: BenchContext) -> Fix | Declined:
    from drivelint.checks.levelshift import finding_kind

    name = ctx.finding.device
    element = _element(ctx, name)
    if isinstance(element, Declined):
        return element
    if finding_kind(ctx.finding.values) == "blocking":
        applied, derating = ctx.value("shifter_voltage"), ctx.value("derating")
        device = ctx.circuit.devices.get(name)
        if applied is None or not derating or device is None:
            return Declined("the finding gives no voltage and derating")
        key = "vceo_max" if device.model_type == "npn" else "vds_max"
        rating = next_preferred(applied / derating * (1 + 1e-6), RATING_SERIES)
        return Fix(
            f"{name}: a transistor rated {format_si(rating, 'V')} (next {RATING_SERIES} value "
            f"above {format_si(applied, 'V')} / {derating:g}); the voltage itself is unchanged"
            + _shared(ctx, element),
            {},
            _part_directives(ctx, element, (key,), {key: rating}),
            bounds={"tb_shifter_voltage_with_ringing": rating * derating},
        )
    from drivelint.checks.levelshift import base_resistor, pull_up_resistors

    suggested = ctx.value("suggested_base_resistor")
    resistor = base_resistor(ctx.stage, ctx.facts)
    if suggested is not None and resistor is not None:
        return _set_resistance(ctx, resistor, suggested, "the finding's suggested base resistor")
    # the emitter resistor alone caps the sink: the finding's other fix, a weaker pull-up
    pull_up, ups = ctx.value("suggested_pull_up"), pull_up_resistors(ctx.stage, ctx.facts)
    if pull_up is None or len(ups) != 1:
        return Declined("the finding suggests neither a base resistor nor a single pull-up")
    return _set_resistance(ctx, ups[0], pull_up, "the finding's suggested pull-up")


def driver_decoupling(ctx: BenchContext) -> Fix | Declined:
    name, farads = ctx.finding.device, ctx.value("suggested_bypass")
    device = ctx.circuit.devices.get(name)
    element = _element(ctx, name)
    if isinstance(element, Declined) or device is None or farads is None:
        return Declined("the finding gives no bypass capacitor to change")
    if ctx.value("bypass_capacitance") == 0.0:
        return Declined(
            "the bypass sits behind a resistor: the fix moves a capacitor to the driver's "
            "pins, a change of layout rather than of a value"
        )
    value_field = capacitor_field(element)
    if value_field is None:
        return Declined(f"{name}'s value is not written as a plain field")
    text = number(farads / device.multiplier)
    old = (device.value or 0.0) * device.multiplier
    return Fix(
        f"{name}: {format_si(old, 'F')} -> {format_si(farads, 'F')} (the finding's bypass)"
        + _shared(ctx, element),
        {element.span: Edit(fields=((value_field, text),), note=f"fix: {name} = {text}")},
    )


def cross_conduction(ctx: BenchContext) -> Fix | Declined:
    """The finding's fix: the named command's on-edge moved ``dead_time_shift`` later (and
    the other command's ``other_dead_time_shift`` where both edges are short): its PULSE
    delayed and shortened where the pulse is its on-window, lengthened where the pulse is
    its off-window, the other edge left where it was."""
    stage = ctx.stage
    shift = ctx.value("dead_time_shift")
    name = ctx.finding.device
    partner = next((r for r in stage.refresh if r.kind == "low-side switch"), None)
    controls = [c for c in (stage.control, partner.command if partner else None) if c]
    if shift is None or not any(c.source == name for c in controls):
        return Declined("the finding names no command source whose edge can be moved")
    moves = [(name, shift)]
    other_shift = ctx.value("other_dead_time_shift")
    other = next((c.source for c in controls if c.source and c.source != name), None)
    if other_shift is not None:
        if other is None:
            return Declined("both edges are short and the leg has one command source")
        moves.append((other, other_shift))
    edits: dict[Span, Edit] = {}
    words = []
    for source, amount in moves:
        control = next(c for c in controls if c.source == source)
        made = _moved_on_edge(ctx, source, control.inverting, amount)
        if isinstance(made, Declined):
            return made
        span, edit = made
        edits[span] = edit
        words.append(f"{source}'s turn-on edge moved {format_si(amount, 's')} later")
    return Fix(" and ".join(words) + " (the finding's dead-time shifts)", edits)


def _moved_on_edge(
    ctx: BenchContext, name: str, inverting: bool, shift: float
) -> tuple[Span, Edit] | Declined:
    design = ctx.design
    device = ctx.circuit.devices.get(name)
    element = design.element_of(name) if device is not None else None
    if device is None or element is None:
        return Declined(f"{name} is not a statement of the design")
    wave = device.waveform
    if not isinstance(wave, Pulse) or wave.per is None:
        return Declined(f"{name} is not a PULSE train: its edges are not rewritten")
    on_window = (wave.v2 > wave.v1) != inverting
    td, pw = wave.td, wave.pw
    if on_window:
        td, pw = td + shift, pw - shift
    else:
        pw = pw + shift
    if pw <= 0 or wave.tr + pw + wave.tf > wave.per:
        return Declined(f"moving {name}'s edge by {format_si(shift, 's')} leaves no pulse")
    nodes = element.fields[:2]
    if len(nodes) < 2 or not all(isinstance(n, Word) for n in nodes):
        return Declined(f"{name}'s nodes are not plain node names")
    first, second = nodes
    assert isinstance(first, Word) and isinstance(second, Word)
    fields = (wave.v1, wave.v2, td, wave.tr, wave.tf, pw, wave.per)
    text = " ".join(number(x) for x in fields)
    if wave.pulses is not None:
        text += f" {wave.pulses}"
    line = f"{design.raw_name(element)} {first.raw} {second.raw} PULSE({text})"
    note = f"fix: {name}'s on-edge {format_si(shift, 's')} later" + _shared(ctx, element)
    return element.span, Edit(lines=(line,), note=note)


def induced_turn_on(ctx: BenchContext) -> Fix | Declined:
    """The off switch's gate resistor set to the finding's suggested value."""
    return _suggested_gate_resistor(ctx, ctx.finding.device)


def switching_loss(ctx: BenchContext) -> Fix | Declined:
    """The switch's gate resistor (the one its turn-on and turn-off share) set to the
    finding's suggested value."""
    from drivelint.checks.induced import partner_paths
    from drivelint.checks.switching import gate_paths

    name = ctx.finding.device
    device = ctx.circuit.devices.get(name)
    if device is not None and device.kind == "resistor":
        return _suggested_gate_resistor(ctx, name)  # the edges' finding names it
    if device is None or name == ctx.stage.switch:
        paths = gate_paths(ctx.stage, ctx.facts)
    else:
        paths = partner_paths(ctx.stage, ctx.facts, device)
    if ctx.value("suggested_gate_resistor") is None:
        return Declined(
            "the fix is another part (a lower R_DS(on)) or a heatsink, not a value in the netlist"
        )
    if paths is None or not paths[0].resistors:
        return Declined("the finding's gate path has no resistor to change")
    return _suggested_gate_resistor(ctx, paths[0].resistors[0])


def _suggested_gate_resistor(ctx: BenchContext, name: str) -> Fix | Declined:
    """The resistor ``name`` set to the finding's suggested_gate_resistor."""
    suggested = ctx.value("suggested_gate_resistor")
    device = ctx.circuit.devices.get(name)
    if suggested is None or device is None or device.kind != "resistor":
        return Declined("the finding suggests no gate resistor value")
    element = _element(ctx, name)
    if isinstance(element, Declined):
        return element
    if len(element.fields) < 3 or not isinstance(element.fields[2], Word):
        return Declined(f"{name}'s value is not written as a plain number")
    text = number(suggested * device.multiplier)
    old = (device.value or 0.0) / device.multiplier
    return Fix(
        f"{name}: {format_si(old, 'Ω')} -> {format_si(suggested, 'Ω')} (the finding's "
        "suggested_gate_resistor)" + _shared(ctx, element),
        {element.span: Edit(fields=((element.fields[2], text),), note=f"fix: {name} = {text}")},
    )


def gate_pulldown(ctx: BenchContext) -> Fix | Declined:
    """The suggested gate–source resistor, added after the switch's statement, between the
    gate and the source as they are named there."""
    stage = ctx.stage
    if "vgs_turn_on" in ctx.finding.values:
        return Declined(
            "the fix is a default-off drive (the pull-up made active, the gate tied to its "
            "source): a different circuit rather than a value or a part"
        )
    ohms = ctx.value("suggested_r_gs")
    if ohms is None:
        return Declined("the finding suggests no resistor value")
    switch = ctx.circuit.devices.get(stage.switch)
    element = _element(ctx, stage.switch)
    if isinstance(element, Declined) or switch is None:
        return Declined(f"{stage.switch}'s statement cannot be found")
    gate = ctx.design.local_net(stage.gate, switch.instance)
    source = ctx.design.local_net(stage.source, switch.instance)
    if gate is None or source is None:
        return Declined("the gate or the source cannot be named where the switch is written")
    taken = {n.rsplit(".", 1)[-1] for n in ctx.design.circuit.devices}
    name = "r_gs_fix"
    while name in taken:
        name += "_"
    text = format_si(ohms, "Ω")
    return Fix(
        f"{name}: {text} from {stage.switch}'s gate to its source (the finding's suggested "
        "gate–source resistor)" + _shared(ctx, element),
        {
            element.span: Edit(
                after=(f"{name.upper()} {gate} {source} {number(ohms)}",),
                note=f"fix: {name} = {text} from gate to source",
            )
        },
    )


def switch_node_undershoot(ctx: BenchContext) -> Fix | Declined:
    """The strays of the commutation loop scaled down to the finding's largest loop
    inductance (the layout fix, written as the same inductors at smaller values)."""
    from drivelint.checks.undershoot import commutation_edge

    l_max, l_s = ctx.value("l_s_max"), ctx.value("l_s")
    edge = commutation_edge(ctx.stage, ctx.facts)
    if l_max is None or l_s is None or edge is None or not 0 < l_max < l_s:
        return Declined("the finding suggests no loop inductance to cut to")
    original = ctx.circuit.unmerged or ctx.circuit
    scale = l_max / l_s
    edits: dict[Span, Edit] = {}
    changed: list[str] = []
    for name in edge.strays:
        device = original.devices.get(name)
        if device is None or device.kind != "inductor":
            continue
        element = _element(ctx, name)
        if isinstance(element, Declined):
            return element
        if len(element.fields) < 3 or not isinstance(element.fields[2], Word):
            return Declined(f"{name}'s value is not written as a plain number")
        text = number((device.value or 0.0) * scale)
        edits[element.span] = Edit(
            fields=((element.fields[2], text),), note=f"fix: {name} = {text}"
        )
        changed.append(
            f"{name} -> {format_si((device.value or 0.0) * scale / device.multiplier, 'H')}"
        )
    if not edits:
        return Declined("no stray inductor on the loop to change")
    return Fix(
        f"the loop's strays cut to {format_si(l_max, 'H')} in all (the finding's l_s_max): "
        + ", ".join(changed),
        edits,
    )


APPLIERS: Mapping[str, Applier] = {
    "switching-loss": switching_loss,
    "switch-node-undershoot": switch_node_undershoot,
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
