"""One registry keyed by rule id: every rule has a testbench builder or says why none is
possible, every builder a fix applier and declared claims; the rule cards' bad examples
get decks too (circuits written for the cards, not for the testbench)."""

from __future__ import annotations

import re
from pathlib import Path

import pytest
from testbench_support import NGSPICE, build

from drivelint.checks.registry import registry
from drivelint.testbench.builders import BUILDERS, CLAIMS, NOT_SIMULATED
from drivelint.testbench.fixes import APPLIERS

RULES = sorted(registry())


def test_every_rule_has_a_builder_or_a_reason() -> None:
    for rule in RULES:
        assert (rule in BUILDERS) != (rule in NOT_SIMULATED), rule
        assert NOT_SIMULATED.get(rule, "x").strip(), f"{rule}: a reason must say why"
    # and nothing is registered for a rule that does not exist
    assert set(BUILDERS) | set(NOT_SIMULATED) <= set(RULES)


def test_every_builder_has_a_fix_applier_and_declared_claims() -> None:
    assert set(APPLIERS) == set(BUILDERS)
    kinds = {kind.split("/")[0] for kind in CLAIMS}
    assert set(BUILDERS) <= kinds


@pytest.mark.parametrize("rule", RULES)
def test_card_bad_example_gets_a_deck(rule: str, tmp_path: Path) -> None:
    project = tmp_path / "project"
    project.mkdir()
    (project / "drivelint.toml").write_text("", encoding="utf-8")
    netlist = project / "bad.cir"
    netlist.write_text(registry()[rule].bad, encoding="utf-8")
    outcome = build([netlist], tmp_path / "out", run=NGSPICE is not None)
    assert not outcome.diagnostics
    own = [r for r in outcome.records if r.finding.rule == rule]
    assert own, f"the card's bad example raises {rule}"
    for record in outcome.records:
        if record.deck is None:
            assert record.reason, "a finding without a deck says why"
            continue
        text = record.deck.path.read_text(encoding="utf-8")
        for claim in record.deck.claims:
            assert re.search(rf"^\.meas tran {claim.key} ", text, re.M)
        for deck in (record.deck, record.fixed):
            if deck is not None and deck.result is not None:
                # The run completes; whether a card example's idealised driver shows the
                # failure is not asserted (its output is an ideal source, not fed by VB).
                # A card's idealised circuit (an ideal ternary driver, a switch node with
                # no load) can also fail to converge in ngspice as its corner moves a
                # capacitance; that is reported as the run's error, never lost.
                if deck.result.error is not None:
                    assert any("timestep too small" in t.lower() for t in deck.result.trouble)
                    continue
                assert deck.result.error is None, deck.result.log_tail
    assert any(r.deck for r in own)
