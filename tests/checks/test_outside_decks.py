"""The test decks written the way outside decks are (tests/checks/outside): every planted
mistake is found on the right part, and a clean deck draws nothing at all.

Each deck's header says what it is and whether it carries a mistake; each also simulates in
ngspice (test_against_ngspice.py holds drivelint's numbers to those runs).
"""

from __future__ import annotations

from pathlib import Path

import pytest

from drivelint.pipeline import check_path

OUTSIDE = Path(__file__).resolve().parent / "outside"

# deck -> {(rule, device, severity)}: the planted mistakes, and nothing else.
EXPECTED: dict[str, set[tuple[str, str, str]]] = {
    # class-D on ±45 V: the boot diode blocks the whole rail-to-rail swing plus V_boot
    "o03_classd_split_rails.cir": {("bootstrap-diode-voltage", "d_bs", "error")},
    # a ground-referenced pump below the bus: no enhancement; and with the output shorted
    # the gate would see the pump's whole output
    "o05_pump_ground_reservoir.cir": {
        ("gate-headroom", "c_p", "error"),
        ("gate-overvoltage", "m1", "warning"),
    },
    # a pass device's gate pulled up from 36 V with no gate–source Zener: an output short
    # (and the output held up while the error amplifier pulls the gate down)
    "o08_linreg_high_gate_rail.cir": {
        ("gate-overvoltage", "m_pass", "warning"),
        ("gate-overvoltage", "q_ea", "warning"),
    },
    # the 72 V surge, given as PWL, over the boot diode's derated rating
    "o09_surge_pwl_bootstrap.cir": {("bootstrap-diode-voltage", "d_bt", "error")},
    # a 12 V Zener behind a 0 V ammeter, below the 15 V isolated drive
    "o11_isolated_clamp_ammeter.cir": {("gate-overvoltage", "d_z", "error")},
    # 10 V and 5 V gate rails on standard-level switches
    "o13_bootstrap_10v_rail.cir": {("gate-headroom", "d_bt", "warning")},
    "o14_bootstrap_5v_rail.cir": {("gate-headroom", "d_bt", "error")},
}
CLEAN = [
    "o01_sync_buck_ammeters.cir",
    "o02_motor_leg_shunts.cir",
    "o04_pump_loadswitch.cir",
    "o06_closed_loop_buck.cir",
    "o07_audio_follower_stage.cir",
    "o10_hbridge_leg_held_off.cir",
    "o12_behavioural_gate_drive.cir",
    # two legs (subcircuits) on one DC-link shunt, each low side behind a 2 nH stray, the
    # bridge's ceramic from the bus to the shunt's top: both legs refresh (ngspice: both
    # boot supplies hold at 11.3-11.5 V)
    "o15_hbridge_shared_shunt.cir",
]


def test_every_deck_is_listed() -> None:
    assert {p.name for p in OUTSIDE.glob("*.cir")} == set(EXPECTED) | set(CLEAN)


def _found(deck: str) -> set[tuple[str, str, str]]:
    result = check_path(OUTSIDE / deck)
    assert not [d for d in result.diagnostics if d.severity.label == "error"], result.diagnostics
    return {(f.rule, f.device, f.severity.label) for f in result.findings}


@pytest.mark.parametrize("deck", sorted(EXPECTED))
def test_planted_mistakes_are_found_on_the_right_part(deck: str) -> None:
    assert _found(deck) == EXPECTED[deck]


@pytest.mark.parametrize("deck", CLEAN)
def test_clean_decks_draw_nothing(deck: str) -> None:
    assert _found(deck) == set()


def test_no_false_hold_on_a_closed_loop_modulator() -> None:
    # The PWM comparator's duty is the loop's: never "held on without limit" by the DC
    # reference behind the error amplifier.
    result = check_path(OUTSIDE / "o06_closed_loop_buck.cir")
    assert not [f for f in result.findings if f.rule == "dc-hold"]
    (stage,) = [s for s in result.stages if s.floating]
    assert stage.control is not None and stage.control.modulated


def test_findings_name_real_devices() -> None:
    # every finding sits on a device of the deck, with a non-empty name in its message
    for deck in EXPECTED:
        result = check_path(OUTSIDE / deck)
        for finding in result.findings:
            assert finding.device and finding.device in finding.message
            assert " by :" not in finding.message


def test_a_shared_shunt_behind_strays_refreshes_both_legs() -> None:
    # The 2 nH strays, the shunt and its 0.5 nH are wires; the ceramic from the bus to the
    # shunt's top decouples two held nets and makes no filter of the strays.
    result = check_path(OUTSIDE / "o15_hbridge_shared_shunt.cir")
    floating = {s.switch: s for s in result.stages if s.floating}
    assert set(floating) == {"xla.m_h", "xlb.m_h"}
    for leg in ("a", "b"):
        stage = floating[f"xl{leg}.m_h"]
        (refresh,) = stage.refresh
        assert refresh.kind == "low-side switch" and refresh.devices == (f"xl{leg}.m_l",)
        assert refresh.reference == "0"
        assert any(f"xl{leg}.l_ls (2 nH inductance) taken as a wire" in n for n in stage.notes)
