"""A testbench deck as text: title, header, the design with its edits, the analysis."""

from __future__ import annotations

import math
import re
import textwrap
from collections.abc import Iterable, Mapping

from drivelint.checks.base import Finding
from drivelint.netlist.values import format_si
from drivelint.ratings.values import Value
from drivelint.testbench.bench import Bench, Fix
from drivelint.testbench.design import Design, merge_edits
from drivelint.testbench.stimulus import number

WIDTH = 88
CAUTION = (
    "A simulation is evidence, not a guarantee: it holds for these models, this operating "
    "point and this simulator only. drivelint is a review aid, not a substitute for a "
    "qualified engineer, the parts' datasheets, or local codes and licensed practice."
)
# Symbols drivelint's messages use, spelled so that any SPICE reader takes the deck.
_ASCII = {
    "µ": "u",
    "Ω": "Ohm",
    "−": "-",
    "–": "-",
    "—": "-",
    "×": "x",
    "·": "*",
    "≥": ">=",
    "≤": "<=",
    "→": "->",
    "≈": "~",
    "τ": "tau",
    "Δ": "d",
    "°": "deg ",
    "±": "+/-",
    "’": "'",
}


def ascii_text(text: str) -> str:
    for symbol, spelled in _ASCII.items():
        text = text.replace(symbol, spelled)
    return text.encode("ascii", "replace").decode("ascii")


def _comment(text: str, indent: str = "") -> list[str]:
    wrapped = textwrap.wrap(
        ascii_text(text), WIDTH - 2 - len(indent), subsequent_indent="  ", break_on_hyphens=False
    )
    return [f"* {indent}{line}" for line in wrapped] or ["*"]


def _quantity(value: float, unit: str) -> str:
    if unit == "1":
        return f"{value:.4g}"
    return f"{format_si(value, 'Ohm' if unit == 'Ohm' else unit)} ({number(value)})"


def condition_text(key: str, value: Value) -> str:
    """A condition as a directive writes it (temperatures in degrees Celsius)."""
    amount = value.value - 273.15 if key == "ambient" else value.value
    return f"{key}={number(amount)}"


def render(
    *,
    finding: Finding,
    design: Design,
    bench: Bench,
    file_name: str,
    conditions: Mapping[str, Value],
    fix: Fix | None = None,
    fixed_file: str | None = None,
    fix_reason: str | None = None,
) -> str:
    """The whole deck; the same inputs always give the same bytes."""
    title = ascii_text(
        f"drivelint testbench: {finding.rule} on {finding.device} ({finding.switch})"
        + (" with the fix applied" if fix else "")
    )
    head = [title, "* " + "-" * (WIDTH - 2)]
    what = "with its suggested fix applied" if fix else "reproducing"
    head += _comment(
        f"drivelint testbench {what}: finding {finding.rule} on {finding.device} "
        f"(switch {finding.switch}) in {finding.span}."
    )
    if design.circuit.title:
        head += _comment(f"design: {design.circuit.title}")
    head += _comment(f"finding: {finding.message}")
    if bench.claims:
        head.append("* claimed (each has a .meas card of the same name):")
        for claim in bench.claims:
            sense = "" if claim.sense == "estimate" else f" [{claim.sense}]"
            head += _comment(f"{claim.key} = {_quantity(claim.value, claim.unit)}{sense}", "  ")
    else:
        head += _comment(
            "no claimed value is measured in this deck; the limit below shows "
            "whether the failure is there"
        )
    for limit in bench.limits:
        head += _comment(
            f"{'fixed when' if fix else 'the failure shows when this does not hold'}: "
            f"{limit.what} ({limit.measure} {limit.holds_when} "
            f"{format_si(limit.bound, limit.unit) if limit.unit else number(limit.bound)})"
        )
    for note in bench.notes:
        head += _comment(f"stimulus: {note}")
    for note in bench.corner:
        head += _comment(f"corner: {note}")
    if bench.directives:
        head += _comment(
            "corner: the deck holds the corner's values; its 'conditions as_corner=1' directive "
            "makes drivelint judge them as written"
        )
    if fix is not None:
        head += _comment(f"fix: {fix.description}")
    elif fixed_file is not None:
        head += _comment(f"the same bench with the finding's fix applied: {fixed_file}")
    elif fix_reason is not None:
        head += _comment(f"no fixed deck: {fix_reason}")
    uncarried = design.uncarried()
    if uncarried:
        head += _comment(
            f"not carried over from the design: {', '.join(uncarried)} cards (drivelint's "
            "reader does not keep them)"
        )
    head += _comment(f"run: ngspice -b {file_name}   (prints 'name = value' for each .meas card)")
    head += _comment(CAUTION)
    head.append("* " + "-" * (WIDTH - 2))
    head += list(_directives(design, conditions, fix))
    head += [f"* drivelint: {text}" for text in bench.directives]
    body = design.render(merge_edits(bench.edits, fix.edits if fix else {}))
    tail = ["", "* ---- testbench analysis (written by drivelint)"]

    saved = _saved(bench)
    if saved:
        tail.append(".save " + " ".join(saved))
    tail.append(
        f".tran {number(bench.step)} {number(bench.stop)} 0 {number(bench.step)}"
        + (" uic" if bench.uic else "")
    )
    for card in bench.cards:
        tail += _comment(f"{card.name}: {card.what}")
        tail.append(card.text)
    tail.append(".end")
    return "\n".join([*head, *body, *tail]) + "\n"


_VECTOR = re.compile(r"\b([vi])\(([^()']+)\)")


def _saved(bench: Bench) -> list[str]:
    """Every vector the cards and the waveform file use. ngspice then keeps only what
    ``.save`` names (with ``all`` as well, it warns about the vectors behind ``par()``), so
    the node voltages and source currents the cards read are named, and device currents
    (``@c1[i]``) where a card asks for them."""
    found = set(bench.saves)
    for card in bench.cards:
        found.update(f"{kind}({name})" for kind, name in _VECTOR.findall(card.text))
    for trace in bench.traces:
        found.update(trace.vectors)
    return sorted(found)


def _directives(design: Design, conditions: Mapping[str, Value], fix: Fix | None) -> Iterable[str]:
    """Conditions the rule used from configuration, then the design's own directives, then
    the fix's; later ones win, as drivelint reads them."""
    if conditions:
        items = " ".join(condition_text(k, v) for k, v in sorted(conditions.items()))
        yield f"* drivelint: conditions {items}"
    for directive in design.circuit.directives:
        yield ascii_text(f"* drivelint: {directive.text}")
    if fix is None:
        return
    for text in fix.directives:
        yield f"* drivelint: {text}"
    if fix.duty is not None:
        yield f"* drivelint: conditions duty_max={number(fix.duty)}"


def is_finite(value: float | None) -> bool:
    return value is not None and math.isfinite(value)
