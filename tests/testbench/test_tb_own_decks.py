"""Testbenches of circuits written for these tests (tests/testbench/decks), each stretching
one thing the bundled examples do not: an included library and the design's own analysis
and control cards, operating conditions from the configuration, a clamp fitted the wrong
way round, an over-driven gate with no fix that is a part change."""

from __future__ import annotations

import re
from pathlib import Path

import pytest
from testbench_support import DECKS, NGSPICE, build, needs_ngspice

from drivelint.pipeline import check_path
from drivelint.testbench.command import Outcome, Record


@pytest.fixture(scope="module")
def built(tmp_path_factory: pytest.TempPathFactory) -> Outcome:
    return build([DECKS], tmp_path_factory.mktemp("own"), run=NGSPICE is not None)


def _record(built: Outcome, netlist: str, rule: str) -> Record:
    (record,) = [
        r for r in built.records if r.finding.span.path.endswith(netlist) and r.finding.rule == rule
    ]
    assert record.deck is not None, record.reason
    return record


def _confirmed(record: Record, *keys: str) -> None:
    needs_ngspice()
    assert record.deck is not None
    claims = {c.key: c for c in record.deck.claims}
    assert set(keys) <= set(claims)
    for key in keys:
        measured = record.deck.measured(key)
        assert claims[key].verdict(measured) == "confirmed", (key, claims[key].value, measured)


def _fixed_in_both(record: Record) -> None:
    assert record.fixed is not None, record.fixed_reason
    again = check_path(record.fixed.path)
    assert not [
        f
        for f in again.findings
        if (f.rule, f.switch) == (record.finding.rule, record.finding.switch)
    ]
    needs_ngspice()
    assert record.deck is not None and record.deck.limits_hold() is False
    assert record.fixed.limits_hold() is True


def test_every_finding_of_the_own_decks_has_a_deck(built: Outcome) -> None:
    assert not built.failed and not built.diagnostics
    assert len(built.records) == 4 and all(r.deck for r in built.records)


def test_every_own_deck_runs_cleanly(built: Outcome) -> None:
    needs_ngspice()
    for record in built.records:
        for deck in (record.deck, record.fixed):
            if deck is None:
                continue
            assert deck.result is not None and deck.result.error is None, deck.path
            assert deck.result.trouble == (), (deck.path, deck.result.trouble)
            # a fixed deck may never reach an event the design's deck times (hold_time)
            wanted = deck.cards if deck is record.deck else [x.measure for x in deck.limits]
            assert set(wanted) <= set(deck.result.values), (deck.path, deck.result.failed)


def test_included_library_inlined_and_own_analysis_dropped(built: Outcome) -> None:
    record = _record(built, "heater24.cir", "dc-hold")
    assert record.deck is not None
    text = record.deck.path.read_text(encoding="utf-8").lower()
    assert ".include" not in text and ".control" not in text and "print vmin" not in text
    assert ".meas tran vmin" not in text and ".subckt tbdrv" in text
    assert len(re.findall(r"^\.tran ", text, re.M)) == 1


def test_hold_time_and_its_capacitor_fix(built: Outcome) -> None:
    # The driver's output switch draws the gate charge from VB, so the hold capacitor's
    # balance is what the rule computes: C·ΔV − Q_g against R_GS and R_Q.
    # (the capacitance with the sizing rule's margin of 2, so the fixed deck passes both)
    record = _record(built, "heater24.cir", "dc-hold")
    assert record.fix and "5.6 uF" in record.fix
    _confirmed(record, "hold_time", "i_drain")
    _fixed_in_both(record)
    assert record.fixed is not None
    again = check_path(record.fixed.path)
    assert not [f for f in again.findings if f.rule == "bootstrap-capacitor-small"]


def test_charge_per_cycle_and_the_suggested_capacitor(built: Outcome) -> None:
    # The 10 ms on-time outlasts what 1 µF holds: one cause, one finding (dc-hold's); the
    # sizing rule stays quiet on it.
    assert not [
        r
        for r in built.records
        if r.finding.span.path.endswith("heater24.cir")
        and r.finding.rule == "bootstrap-capacitor-small"
    ]


def test_conditions_from_the_configuration_drive_the_stimulus(built: Outcome) -> None:
    # drivelint.toml says duty_max = 0.98; the design's own waveforms run at 50 %.
    record = _record(built, "leg48.cir", "bootstrap-no-refresh")
    assert record.deck is not None
    text = record.deck.path.read_text(encoding="utf-8")
    assert "* drivelint: conditions duty_max=0.98" in text
    pulse = re.search(r"^VHIN hin 0 PULSE\(0 5 \S+ (\S+) (\S+) (\S+) (\S+)\)$", text, re.M)
    assert pulse is not None
    rise, fall, width, period = (float(x) for x in pulse.groups())
    assert (width + (rise + fall) / 2) / period == pytest.approx(0.98, rel=1e-6)
    # the partner gets the complement, so the refresh window is the 2 % that is left
    assert re.search(r"^VLIN lin 0 PULSE\(5 0 ", text, re.M)
    assert record.fix and "80.3%" in record.fix
    _fixed_in_both(record)


def test_a_reversed_clamp_is_turned_round(built: Outcome) -> None:
    record = _record(built, "reversed_zener.cir", "gate-overvoltage")
    assert record.fixed is not None
    fixed = record.fixed.path.read_text(encoding="utf-8")
    # turned round, and a Zener that stays off at the 15 V drive with its tolerance
    assert re.search(r"^D_Z\s+sw g zener15_16v$", fixed, re.M)
    assert "* drivelint: part d_z" in fixed and "vz=16" in fixed
    _fixed_in_both(record)


def test_an_over_driven_gate_has_no_part_change_to_fix_it(built: Outcome) -> None:
    record = _record(built, "overdrive24.cir", "gate-overvoltage")
    _confirmed(record, "vgs_max_positive")
    assert record.fixed is None and record.fixed_reason and "supply" in record.fixed_reason
    needs_ngspice()
    assert record.deck is not None and record.deck.limits_hold() is False


def test_own_decks_are_the_same_bytes_again(built: Outcome, tmp_path: Path) -> None:
    first = next(r.deck.path for r in built.records if r.deck).parents[1]
    build([DECKS], tmp_path)

    def files(root: Path) -> dict[str, bytes]:
        return {
            str(p.relative_to(root)): p.read_bytes() for p in sorted(root.rglob("*")) if p.is_file()
        }

    assert files(first) == files(tmp_path)
