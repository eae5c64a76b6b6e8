"""Testbenches of circuits written for these tests (tests/testbench/decks), each stretching
one thing the bundled examples do not: an included library and the design's own analysis
and control cards, operating conditions from the configuration, a clamp fitted the wrong
way round, an over-driven gate with no fix that is a part change, a command that comes out
of a behavioural comparator (a modulator) at a duty only the configuration gives, a hold
capacitor written as its DC-bias curve C(V) beside a leaky Schottky, clean only at the
nominal corner, and a discrete level shifter that blocks too much or sinks too little."""

from __future__ import annotations

import re
from pathlib import Path

import pytest
from testbench_support import DECKS, NGSPICE, build, needs_ngspice, record_of

from drivelint.netlist.values import format_si
from drivelint.pipeline import check_path
from drivelint.testbench.command import Outcome, Record

RULE_CAP = "bootstrap-capacitor-small"


@pytest.fixture(scope="module")
def built(tmp_path_factory: pytest.TempPathFactory) -> Outcome:
    return build([DECKS], tmp_path_factory.mktemp("own"), run=NGSPICE is not None)


def _record(built: Outcome, netlist: str, rule: str) -> Record:
    return record_of(built, netlist, rule)


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
    # eight planted findings; pwm_buck's high side, whose gate nothing ties to its source
    # while its driver is unpowered (gate-pulldown-missing, a warning); and the three
    # level-shifter legs, whose pull-up to the boot net turns the high side on while the
    # command is absent (gate-pulldown-missing, errors)
    assert len(built.records) == 12 and all(r.deck for r in built.records)


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
    # the next E12 value at or above the capacitance the finding asks for (a nominal value
    # whose low corner holds the on-time)
    needed = record.finding.values["capacitance_for_on_time"].value
    e12 = [
        m * 10.0**e
        for e in range(-9, -3)
        for m in (1, 1.2, 1.5, 1.8, 2.2, 2.7, 3.3, 3.9, 4.7, 5.6, 6.8, 8.2)
    ]
    chosen = min(v for v in e12 if v >= needed * (1 - 1e-9))
    assert record.fix and f"-> {format_si(chosen, 'F')}" in record.fix
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
    # the finding's off-time, and the dead time the deck's commands keep on each side of it
    values = record.finding.values
    assert record.fix and "min_off_time" in record.fix and "dead time" in record.fix
    duty = float(re.search(r"limited to ([\d.]+)%", record.fix).group(1)) / 100
    assert duty < values["max_duty"].value
    period = 1 / values["fsw"].value
    assert (1 - duty) * period > values["min_off_time"].value
    _fixed_in_both(record)


def test_a_reversed_clamp_is_turned_round(built: Outcome) -> None:
    record = _record(built, "reversed_zener.cir", "gate-overvoltage")
    assert record.fixed is not None
    fixed = record.fixed.path.read_text(encoding="utf-8")
    # turned round, and the Zener the finding names: it stays off at the drive (15 V at
    # the gate supply's high corner) with its own tolerance
    named = re.search(r"a Zener of (\d+) V", record.finding.fix)
    assert named is not None
    volts = named.group(1)
    assert re.search(rf"^D_Z\s+sw g zener15_{volts}v$", fixed, re.M)
    assert "* drivelint: part d_z" in fixed and f"vz={volts}" in fixed
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
        # the decks and their parts (the index and waveform files hold what a run measured;
        # their own determinism is tested on a run of its own)
        return {
            str(p.relative_to(root)): p.read_bytes()
            for p in sorted(root.rglob("*"))
            if p.is_file() and p.suffix in (".cir", ".toml")
        }

    assert files(first) == files(tmp_path)


def test_a_modulator_is_driven_at_the_configured_duty(built: Outcome) -> None:
    # The comparator B_PWM's statement becomes an independent source between the same
    # nodes, at its own levels (0 V and 5 V, read from its expression) and the 90 % the
    # configuration gives; the low side follows it through the design's own logic.
    record = _record(built, "pwm_buck.cir", "bootstrap-capacitor-small")
    assert record.deck is not None
    text = record.deck.path.read_text(encoding="utf-8")
    pulse = re.search(r"^V_TB_B_PWM pwm 0 PULSE\(0 5 \S+ (\S+) (\S+) (\S+) (\S+)\)$", text, re.M)
    assert pulse is not None
    rise, fall, width, period = (float(x) for x in pulse.groups())
    assert (width + (rise + fall) / 2) / period == pytest.approx(0.9, rel=1e-6)
    assert "* was: B_PWM pwm 0 V = V(ea) > V(ramp) ? 5 : 0" in text
    assert "follows the same command" in text and "B_LO  gl 0" in text
    # drivelint reads the rewritten command as an independent source and finds the same
    again = [f for f in check_path(record.deck.path).findings if f.rule == record.finding.rule]
    assert len(again) == 1
    for claim in record.deck.claims:
        assert again[0].values[claim.key].value == pytest.approx(claim.value, rel=1e-2)
    # The supply as the recharge ends is confirmed. The droop and charge are not asserted:
    # with the low side switched off the instant the high side turns on, the diode refills
    # the gate's charge before the node rises, which the rule counts only where it can time
    # a dead time (the cross-check tests allow a modulated stage's droop a quarter low).
    _confirmed(record, "v_boot")
    _fixed_in_both(record)


def test_the_deck_holds_the_corner_the_finding_was_judged_at(built: Outcome) -> None:
    # ceramic_bias.cir is clean at the nominal corner and fails at the worst one: its C(V)
    # at the working voltage less its tolerance and X7R's fall, the gate rail at 11.4 V,
    # the Schottky's 120 uA doubling every 10 K up to 85 °C. At the corner the 18 us
    # on-time outlasts the hold time at face value: dc-hold's finding.
    from nominal import check_nominal

    netlist = DECKS / "corners" / "ceramic_bias.cir"
    assert not [f for f in check_nominal(netlist).findings if f.rule in ("dc-hold", RULE_CAP)]
    record = _record(built, "ceramic_bias.cir", "dc-hold")
    assert record.deck is not None
    text = record.deck.path.read_text(encoding="utf-8")
    # the C(V) keeps its expression, scaled by tolerance and temperature (0.9 × 0.85)
    assert re.search(
        r"^C1 +tb_c1_p sw C='\(470n/\(1\+\(V\(boot,sw\)/10\)\*\*2\)\)\*0\.765'$", text, re.M
    )
    assert re.search(r"^V_TB_C1 boot tb_c1_p 0$", text, re.M)  # an ammeter: C(V) has no @c[i]
    leak = re.search(r"^I_TB_LEAK_D1 boot ba DC (\S+)$", text, re.M)
    assert leak is not None and float(leak.group(1)) == pytest.approx(120e-6 * 64 - 2e-6)
    assert re.search(r"^VAUX aux 0 DC 11\.4$", text, re.M)  # the gate rail at its low corner
    assert "* drivelint: conditions as_corner=1" in text and "* drivelint: part d1 ir_leak=" in text
    corner = record.to_json()["corner"]
    assert isinstance(corner, dict) and corner["side"] == "hold"
    _confirmed(record, "i_drain")
    # The hold time is on the safe side, not within ±20 %: the rule takes C at the working
    # voltage, and a ceramic's C(V) grows as the supply falls (ngspice: about 1.4× longer).
    claimed = next(c.value for c in record.deck.claims if c.key == "hold_time")
    measured = record.deck.measured("hold_time")
    assert measured is not None and claimed < measured < 1.6 * claimed
    _fixed_in_both(record)


def test_level_shifter_decks_confirmed_and_fixed(built: Outcome) -> None:
    blocking = _record(built, "shifter_40v.cir", "level-shift-contention")
    _confirmed(blocking, "shifter_voltage_steady")
    _fixed_in_both(blocking)
    weak = _record(built, "weak_base.cir", "level-shift-contention")
    _confirmed(weak, "shifter_sink")
    # the emitter resistor alone caps the sink: the fix is the weaker pull-up
    assert weak.fix is not None and "r4" in weak.fix
    _fixed_in_both(weak)
