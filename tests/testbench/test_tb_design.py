"""The design's statements written out again: what is kept, what is dropped, and edits
made at the spans the reader recorded."""

from __future__ import annotations

from pathlib import Path

import pytest
from testbench_support import DECKS, EXAMPLES

from drivelint.circuit.elaborate import elaborate
from drivelint.circuit.model import Circuit
from drivelint.netlist.reader import ReadOptions, read_deck
from drivelint.netlist.statements import Element, Word
from drivelint.pipeline import load_circuit
from drivelint.testbench.design import Design, DesignError, Edit, merge_edits

ALL_EXAMPLES = sorted(EXAMPLES.glob("*.cir"))


def _design(path: Path) -> Design:
    deck = read_deck(path, ReadOptions(root=path.parent))
    return Design(deck, elaborate(deck))


def _reread(text: str, tmp_path: Path, name: str = "again.cir") -> Circuit:
    target = tmp_path / name
    target.write_text(".title again\n" + text + "\n.end\n", encoding="utf-8")
    return load_circuit(target)


@pytest.mark.parametrize("netlist", ALL_EXAMPLES, ids=lambda p: p.name)
def test_written_out_unedited_it_is_the_same_circuit(netlist: Path, tmp_path: Path) -> None:
    design = _design(netlist)
    circuit = design.circuit
    again = _reread("\n".join(design.render({})), tmp_path)
    # every flattened device, with the same nodes, model and value
    assert again.diagnostics == ()
    mine = {n: (d.pins, d.model_name, d.value) for n, d in circuit.devices.items()}
    theirs = {n: (d.pins, d.model_name, d.value) for n, d in again.devices.items()}
    assert theirs == mine


def test_includes_are_inlined_and_the_designs_analysis_dropped() -> None:
    design = _design(DECKS / "include_control" / "heater24.cir")
    lines = [line.lower() for line in design.render({})]
    assert not any(
        line.startswith((".include", ".tran", ".meas", ".control", "print", "run"))
        for line in lines
    )
    assert ".subckt tbdrv vb ho vs in com" in lines
    assert any(line.startswith(".model dfast") for line in lines)
    # where the inlined statements came from is said once, where they start
    assert any(
        line.startswith("* (statements from") and line.endswith("lib/drv.lib)") for line in lines
    )


def test_continuation_lines_stay_with_their_statement() -> None:
    design = _design(EXAMPLES / "tool36_leg_totem_pole.cir")
    text = "\n".join(design.render({}))
    assert ".model NFET_60V_B VDMOS (Vto=2.9" in text
    assert "+ TT=50n BV=66)" in text


def test_a_field_is_replaced_where_it_is_written() -> None:
    design = _design(EXAMPLES / "tool36_leg_totem_pole.cir")
    cap = design.element_of("c1")
    assert isinstance(cap, Element)
    value = cap.fields[2]
    assert isinstance(value, Word) and value.raw == "10n"
    edits = {cap.span: Edit(fields=((value, "150n"),), note="bigger")}
    lines = design.render(edits)
    assert "C1    BOOT SW 150n" in lines
    assert "* was: C1    BOOT SW 10n" in lines and "* testbench: bigger" in lines


def test_an_expression_field_is_replaced_with_its_braces() -> None:
    design = _design(EXAMPLES / "mower48v_hbridge_wrapped_fets.cir")
    source = design.element_of("vbus")
    assert isinstance(source, Element)
    value = source.fields[3]
    lines = design.render({source.span: Edit(fields=((value, "48"),))})
    assert "VBUS  BUS 0 DC 48" in lines


def test_a_field_that_is_not_where_its_span_says_is_refused() -> None:
    design = _design(EXAMPLES / "tool36_leg_totem_pole.cir")
    cap = design.element_of("c1")
    resistor = design.element_of("r2")
    assert isinstance(cap, Element) and isinstance(resistor, Element)
    with pytest.raises(DesignError):
        design.with_fields(cap, ((resistor.fields[2], "1"),))


def test_edits_of_one_statement_merge_and_whole_replacements_clash() -> None:
    design = _design(EXAMPLES / "buck12v_5v_400k_sync.cir")
    diode = design.element_of("d_bst")
    assert isinstance(diode, Element)
    anode, model = diode.fields[0], diode.fields[2]
    merged = merge_edits(
        {diode.span: Edit(fields=((anode, "x_a"),), after=("VX VDD x_a 0",))},
        {diode.span: Edit(fields=((model, "dfast"),))},
    )
    lines = design.render(merged)
    assert "D_BST x_a BST dfast" in lines and "VX VDD x_a 0" in lines
    with pytest.raises(DesignError):
        Edit(lines=("a",)).merged(Edit(lines=("b",)))


def test_subcircuit_statements_map_to_every_instance() -> None:
    design = _design(EXAMPLES / "mower48v_hbridge_wrapped_fets.cir")
    statement = design.statement_of("xlega.d_bt")
    assert statement is design.statement_of("xlegb.d_bt")
    assert statement is not None
    assert design.produced_by(statement) == ("xlega.d_bt", "xlegb.d_bt")
    # nets named where the statement is written: internal, port, outside the scope
    assert design.local_net("xlega.gh", "xlega") == "gh"
    assert design.local_net("outa", "xlega") == "out"
    assert design.local_net("outb", "xlega") is None
    assert design.local_net("0", "xlega") == "0"


def test_cards_the_reader_does_not_keep_are_named(tmp_path: Path) -> None:
    netlist = tmp_path / "ic.cir"
    netlist.write_text("ic card\nV1 a 0 DC 1\nR1 a 0 1k\n.ic v(a)=1\n.end\n", encoding="utf-8")
    assert _design(netlist).uncarried() == (".ic",)
    assert _design(EXAMPLES / "lev48_phase_leg_npn_shifter.cir").uncarried() == ()
