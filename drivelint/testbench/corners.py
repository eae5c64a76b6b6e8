"""The tolerance corner a finding was judged at, as deck edits (checks/corners.py).

A finding's figures are the stage at its worst corner; the deck that reproduces it holds
the corner's values, each change named in its header:

- the hold capacitor's value at its corner (a voltage-dependent C keeps its expression,
  scaled by the tolerance and temperature part; its DC bias is the simulator's own);
- the supplies at their corner levels (``bench.held_supplies`` holds the levels the facts
  give, which already are the corner's);
- leakage at the junction's highest temperature as a current source across each leaky
  junction (the boot diode, a gate–source clamp), the part the simulator's own diode model
  does not already draw;
- the gate charge at the top of its spread: a copy of the switch's model with its gate
  capacitances scaled, and for a gate charge from the parts library a ``part`` directive
  with the scaled charge.

The deck also carries ``* drivelint: conditions as_corner=1`` (and ``part`` directives
for the leakage), so that drivelint checking the deck judges the values it holds, which
are the corner, as written: the same figures as the finding, and the corner met at face
value, as the rules meet a computed corner (no nominal margin stacked on it).
"""

from __future__ import annotations

from collections.abc import Iterable
from dataclasses import dataclass, field

from drivelint.checks import corners as corner_layer
from drivelint.circuit.model import Device
from drivelint.diagnostics import Span
from drivelint.netlist.statements import Assign, Element, Expr, Field, Word
from drivelint.netlist.values import format_si
from drivelint.testbench.bench import BenchContext, Declined
from drivelint.testbench.design import Edit, merge_edits
from drivelint.testbench.edits import model_copy, model_element
from drivelint.testbench.stimulus import number

# The directive that makes drivelint judge a corner deck as written.
AS_WRITTEN = "conditions as_corner=1"
LEAK_PREFIX = "i_tb_leak_"
# Gate-capacitance parameters of the MOSFET models a switch can carry (VDMOS; the SPICE3
# level 1–3 overlap capacitances).
GATE_CAPACITANCES = ("cgs", "cgdmax", "cgdmin", "cgso", "cgdo", "cgbo")


@dataclass(frozen=True, slots=True)
class CornerDeck:
    """The corner as edits, directives and words for the header and the record."""

    side: str
    edits: dict[Span, Edit] = field(default_factory=dict)
    directives: tuple[str, ...] = ()
    notes: tuple[str, ...] = ()
    values: dict[str, float] = field(default_factory=dict)


def capacitor_field(statement: Element) -> Field | None:
    """The field that holds a capacitor's value (a number, an expression, or C=…)."""
    if len(statement.fields) < 3:
        return None
    value = statement.fields[2]
    if isinstance(value, Assign) and isinstance(value.value, Expr):
        return value.value
    return value if isinstance(value, (Word, Expr)) else None


def capacitance_text(
    ctx: BenchContext, device: Device, nominal: float, side: str
) -> tuple[Field, str, float] | Declined:
    """The hold capacitor's field, written for the nominal value ``nominal`` at the
    finding's corner, and the capacitance that gives at its operating voltage."""
    statement = ctx.design.element_of(device.name)
    value_field = capacitor_field(statement) if statement is not None else None
    if statement is None or value_field is None:
        return Declined(f"{device.name}'s value is not written as a plain field")
    facts = ctx.facts
    at_corner = facts.c_hold if side == corner_layer.HOLD else facts.c_hold_high
    written = facts.c_hold_nominal
    if at_corner is None or written is None or not written.value:
        return Declined(f"{device.name} has no value")
    corner = at_corner.value / written.value  # tolerance, temperature and DC bias
    if device.behaviour is not None and isinstance(value_field, Expr):
        # The simulator applies the DC bias through the expression itself: scale it by
        # the rest of the corner (and by a new nominal value, for a fix).
        factor, _ = corner_layer.bias_factor(facts, facts._c_hold_volts)
        scale = corner / factor * nominal / written.value
        return value_field, f"'({value_field.text})*{number(scale)}'", nominal * corner
    return value_field, number(nominal * corner / device.multiplier), nominal * corner


def _leak_sources(
    ctx: BenchContext, devices: Iterable[tuple[Device, float]]
) -> tuple[dict[Span, Edit], list[str], list[str]]:
    """A current source across each junction (cathode to anode) for the leakage the
    corner adds beyond what the simulator's model already draws (its IS)."""
    edits: dict[Span, Edit] = {}
    notes: list[str] = []
    directives: list[str] = []
    taken = {n.rsplit(".", 1)[-1] for n in ctx.design.circuit.devices}
    for device, corner_leak in devices:
        statement = ctx.design.element_of(device.name)
        nodes = statement.fields[:2] if statement is not None else ()
        if statement is None or len(nodes) < 2 or not all(isinstance(n, Word) for n in nodes):
            continue
        anode, cathode = nodes
        assert isinstance(anode, Word) and isinstance(cathode, Word)
        model = device.model
        simulated = (model.params.get("is", 0.0) if model else 0.0) * device.multiplier
        extra = corner_leak - simulated
        directives.append(f"part {device.name} ir_leak={number(corner_leak)}")
        if extra <= 0:
            continue
        name = f"{LEAK_PREFIX}{device.name.rsplit('.', 1)[-1]}"
        while name in taken:
            name += "_"
        taken.add(name)
        edits = merge_edits(
            edits,
            {
                statement.span: Edit(
                    after=(f"{name.upper()} {cathode.raw} {anode.raw} DC {number(extra)}",),
                    note=f"corner: {device.name}'s leakage at the junction's highest temperature",
                )
            },
        )
        notes.append(
            f"{device.name} leaks {format_si(corner_leak, 'A')} at "
            f"{ctx.facts.corners.junction_max.text()}: {name} adds "
            f"{format_si(extra, 'A')} beside the {format_si(simulated, 'A')} its model draws"
        )
    return edits, notes, directives


def _gate_charge(ctx: BenchContext) -> tuple[dict[Span, Edit], list[str], list[str]] | Declined:
    """The switch's gate charge at the top of its spread."""
    facts = ctx.facts
    factor = corner_layer.charge_spread(facts)
    if factor == 1.0:
        return {}, [], []
    switch = facts.switch
    model = switch.model
    changes = {
        key: value * factor
        for key, value in (model.params.items() if model else ())
        if key in GATE_CAPACITANCES and value
    }
    edits: dict[Span, Edit] = {}
    notes: list[str] = []
    if changes:
        copied = model_copy(ctx, switch, changes, "qg_corner", why="corner")
        if isinstance(copied, Declined):
            return copied
        name, edits = copied
        where = model_element(ctx, switch)
        shared = ctx.design.produced_by(where) if isinstance(where, Element) else ()
        notes.append(
            f"{switch.name}'s gate capacitances × {factor:g} (model {name}), the gate charge "
            "at the top of its spread"
            + (f"; the statement serves {', '.join(shared)}" if len(shared) > 1 else "")
        )
    directives: list[str] = []
    rated = {key: facts.ratings.get(switch, key) for key in ("qg", "qgd")}
    given = {k: v.value * factor for k, v in rated.items() if v is not None}
    if given:
        # given together with its test voltage, so that drivelint scales it to the drive
        # level as it scaled the rated one (a directive's charge goes with a directive's
        # test voltage)
        tested = facts.ratings.get(switch, "vgs_qg")
        items = " ".join(f"{k}={number(v)}" for k, v in sorted(given.items()))
        directives.append(
            f"part {switch.name} {items}"
            + (f" vgs_qg={number(tested.value)}" if tested is not None else "")
        )
        notes.append(f"{switch.name}'s rated gate charge × {factor:g} ({items})")
    if not changes and not given:
        return Declined("the switch's gate charge has no model capacitances to scale")
    return edits, notes, directives


def corner_deck(
    ctx: BenchContext,
    side: str,
    skip: Iterable[Span] = (),
    uses: frozenset[str] | None = None,
) -> CornerDeck | Declined:
    """The finding's corner as edits (none at statements in ``skip``, which a fix edits);
    ``uses`` is what the finding's figure takes from the corner, for the header's words."""
    facts = ctx.facts
    skipped = set(skip)
    edits: dict[Span, Edit] = {}
    notes: list[str] = []
    directives: list[str] = [AS_WRITTEN]
    values: dict[str, float] = {key: value.value for key, value in facts.corners.values().items()}
    cap = facts.capacitor
    nominal = facts.c_hold_nominal
    where = "low" if side == corner_layer.HOLD else "high"
    moves_cap = uses is None or "capacitor" in uses
    if cap is not None and nominal is not None and moves_cap:
        statement = ctx.design.element_of(cap.name)
        made = capacitance_text(ctx, cap, nominal.value, side)
        if statement is not None and not isinstance(made, Declined):
            value_field, text, farads = made
            values["c_hold"] = farads
            if statement.span not in skipped and abs(farads - nominal.value) > 1e-12 * farads:
                edits[statement.span] = Edit(
                    fields=((value_field, text),),
                    note=f"corner: {cap.name} at its {where} corner, {format_si(farads, 'F')}",
                )
                at = format_si(farads, "F")
                notes.append(f"{cap.name} = {at} ({nominal.text()} at its {where} corner)")
    if side == corner_layer.HOLD:
        leaky: list[tuple[Device, float]] = []
        if facts.diode is not None and facts.i_leak.value > 0:
            leaky.append((facts.diode, facts.i_leak.value))
        for clamp in ctx.stage.clamps:
            for name in clamp.devices or (clamp.device,):
                device = facts.device(name)
                rated = facts.ratings.get(device, "ir_leak") if device else None
                if device is not None and rated is not None and rated.value > 0:
                    leaky.append((device, corner_layer.leakage(facts, rated).value))
        leak_edits, leak_notes, leak_directives = _leak_sources(ctx, leaky)
        edits = merge_edits(edits, leak_edits)
        notes += leak_notes
        directives += leak_directives
        charge = _gate_charge(ctx)
        if isinstance(charge, Declined):
            notes.append(f"gate charge at its typical value: {charge.reason}")
        else:
            charge_edits, charge_notes, charge_directives = charge
            edits = merge_edits(edits, {s: e for s, e in charge_edits.items() if s not in skipped})
            notes += charge_notes
            directives += charge_directives
    corner_text = corner_layer.corner_text(facts, side, uses)
    return CornerDeck(side, edits, tuple(directives), (corner_text, *notes), values)
