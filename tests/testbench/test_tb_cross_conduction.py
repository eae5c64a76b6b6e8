"""cross-conduction's testbench on the rule's own decks (tests/checks/cross_conduction): the
conduction overlap, the turn-off time and the shoot-through bound confirmed in ngspice, the
failure shown and the fix (the named command's on-edge moved later) removing it."""

from __future__ import annotations

from pathlib import Path

import pytest
from testbench_support import NGSPICE, build, needs_ngspice, record_of

from drivelint.pipeline import check_path
from drivelint.testbench.command import Outcome, Record

RULE = "cross-conduction"
OWN = Path(__file__).resolve().parents[1] / "checks" / "cross_conduction"


@pytest.fixture(scope="module")
def built(tmp_path_factory: pytest.TempPathFactory) -> Outcome:
    return build([OWN], tmp_path_factory.mktemp("legs"), run=NGSPICE is not None)


def _record(built: Outcome, netlist: str) -> Record:
    return record_of(built, netlist, RULE)


def test_the_clean_leg_has_no_deck(built: Outcome) -> None:
    assert not built.diagnostics and not built.failed
    assert not [r for r in built.records if r.finding.span.path.endswith("c3_leg_clean.cir")]


@pytest.mark.parametrize(
    ("netlist", "keys"),
    [
        ("c1_leg_overlap.cir", ("command_overlap", "shoot_through_bound")),
        ("c2_leg_short_dead.cir", ("t_switch_off",)),
    ],
)
def test_claims_confirmed_failure_shown_and_fixed(
    built: Outcome, netlist: str, keys: tuple[str, ...]
) -> None:
    record = _record(built, netlist)
    assert record.deck is not None
    assert tuple(c.key for c in record.deck.claims) == keys
    text = record.deck.path.read_text(encoding="utf-8")
    assert ".meas tran tb_conduction_gap " in text
    # the fixed deck moves the named command's on-edge and drivelint no longer flags it
    assert record.fixed is not None, record.fixed_reason
    assert f"{record.finding.device}'s turn-on edge moved" in (record.fix or "")
    again = check_path(record.fixed.path)
    assert not [f for f in again.findings if f.rule == RULE]
    needs_ngspice()
    for claim in record.deck.claims:
        measured = record.deck.measured(claim.key)
        assert claim.verdict(measured) == "confirmed", (claim.key, claim.value, measured)
    assert record.deck.limits_hold() is False
    assert record.fixed.limits_hold() is True
