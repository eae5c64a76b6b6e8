"""switch-node-undershoot's testbench on the rule's own decks (tests/checks/undershoot): the
switch pin's depth below the driver's common and the boot voltage's peak after the high
side's turn-off, confirmed in ngspice as the upper bounds the rule claims, the failure shown
and the fix (the loop's strays cut to the finding's l_s_max) removing it."""

from __future__ import annotations

from pathlib import Path

import pytest
from testbench_support import NGSPICE, build, needs_ngspice, record_of

from drivelint.pipeline import check_path
from drivelint.testbench.command import Outcome, Record

RULE = "switch-node-undershoot"
OWN = Path(__file__).resolve().parents[1] / "checks" / "undershoot"


@pytest.fixture(scope="module")
def built(tmp_path_factory: pytest.TempPathFactory) -> Outcome:
    return build([OWN], tmp_path_factory.mktemp("undershoot"), run=NGSPICE is not None)


def _record(built: Outcome, netlist: str, device: str) -> Record:
    return record_of(built, netlist, RULE, device)


def test_the_clean_leg_has_no_deck(built: Outcome) -> None:
    assert not built.diagnostics and not built.failed
    assert not [
        r
        for r in built.records
        if r.finding.span.path.endswith("leg48_kelvin_common.cir") and r.finding.rule == RULE
    ]


@pytest.mark.parametrize(
    ("netlist", "device", "keys"),
    [
        ("leg48_source_lead_fast_off.cir", "xu", ("undershoot_depth",)),
        ("leg48_stiff_boot_path.cir", "c1", ("undershoot_depth", "v_boot_undershoot")),
    ],
)
def test_claims_confirmed_failure_shown_and_fixed(
    built: Outcome, netlist: str, device: str, keys: tuple[str, ...]
) -> None:
    record = _record(built, netlist, device)
    assert record.deck is not None
    assert tuple(c.key for c in record.deck.claims) == keys
    text = record.deck.path.read_text(encoding="utf-8")
    assert ".meas tran undershoot_depth MAX " in text
    assert record.fixed is not None, record.fixed_reason
    assert "the loop's strays cut to" in (record.fix or "")
    again = check_path(record.fixed.path)
    assert not [f for f in again.findings if f.rule == RULE and f.device == device]
    needs_ngspice()
    for claim in record.deck.claims:
        measured = record.deck.measured(claim.key)
        assert claim.verdict(measured) == "confirmed", (claim.key, claim.value, measured)
    assert record.deck.limits_hold() is False  # the failure is shown
    assert record.fixed.limits_hold() is True  # and gone with the fix
