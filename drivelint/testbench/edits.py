"""Edits that fixes and tolerance corners share: finding a device's statement, and a copy
of its model card with some parameters changed (so that no other device using the model
changes), the device pointed at the copy.

A switch recognised inside a wrapper subcircuit (a maker-style MOSFET with its gate
resistor, body diode and leads) is edited at the MOSFET statement inside the wrapper,
where its model is used; that statement serves every instance of the wrapper.
"""

from __future__ import annotations

from collections.abc import Mapping

from drivelint.circuit.model import Device
from drivelint.diagnostics import Span
from drivelint.netlist.statements import Element, Field, Word
from drivelint.testbench.bench import BenchContext, Declined
from drivelint.testbench.design import Edit
from drivelint.testbench.stimulus import number


def element(ctx: BenchContext, name: str) -> Element | Declined:
    """The statement that produced the flattened device ``name``."""
    found = ctx.design.element_of(name)
    return found if found is not None else Declined(f"{name}'s statement cannot be found")


def model_element(ctx: BenchContext, device: Device) -> Element | Declined:
    """The statement that uses ``device``'s model: its own, or for a wrapped MOSFET the
    MOSFET statement inside the wrapper subcircuit."""
    wrapper = device.wrapper
    if wrapper is None:
        return element(ctx, device.name)
    subckt = ctx.design.subckts.get(wrapper.subckt)
    local = wrapper.inner_device.rsplit(".", 1)[-1]
    inner = (
        next((s for s in subckt.body if isinstance(s, Element) and s.name == local), None)
        if subckt is not None
        else None
    )
    if inner is None:
        return Declined(f"{device.name}'s MOSFET inside {wrapper.subckt} cannot be found")
    return inner


def _model_field(statement: Element, model: str) -> Field | None:
    wanted = model.lower()
    return next(
        (f for f in statement.fields if isinstance(f, Word) and f.text == wanted and wanted), None
    )


def model_copy(
    ctx: BenchContext,
    device: Device,
    changes: Mapping[str, float],
    suffix: str,
    why: str = "fix",
) -> tuple[str, dict[Span, Edit]] | Declined:
    """A copy of the device's model card with ``changes``, named ``<model>_<suffix>``,
    written right after the original (in its scope); the device is pointed at it."""
    statement = model_element(ctx, device)
    model = device.model
    if isinstance(statement, Declined):
        return statement
    card = ctx.design.model_card(model.name, statement.span) if model else None
    field = _model_field(statement, model.name) if model else None
    if model is None or card is None or field is None:
        return Declined(f"{device.name}'s model card cannot be found where it is used")
    name = f"{model.name}_{suffix}"
    while ctx.design.model_card(name, statement.span) is not None:
        name += "_"
    keys = [a.key for a in card.params]
    keys += sorted(set(model.params) - set(keys))
    values = {**model.params, **changes}
    keys += [k for k in changes if k not in keys]
    items = [k if k in ("pchan", "nchan") else f"{k}={number(values[k])}" for k in keys]
    line = f".model {name} {card.type} ({' '.join(items)})"
    edits = {
        card.span: Edit(
            after=(line,), note=f"{why}: a copy of {model.name} with {changes_text(changes)}"
        ),
        statement.span: Edit(fields=((field, name),), note=f"{why}: {device.name} uses {name}"),
    }
    return name, edits


def changes_text(changes: Mapping[str, float]) -> str:
    return ", ".join(f"{k.upper()}={number(v)}" for k, v in changes.items())
