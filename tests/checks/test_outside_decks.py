"""The test decks written the way outside decks are (tests/checks/outside): every planted
mistake is found on the right part, and a clean deck draws nothing at all.

Each deck's header says what it is and whether it carries a mistake; each also simulates in
ngspice (test_against_ngspice.py holds drivelint's numbers to those runs).
"""

from __future__ import annotations

from pathlib import Path

import pytest

from drivelint.pipeline import check_path, check_text

OUTSIDE = Path(__file__).resolve().parent / "outside"

# deck -> {(rule, device, severity)}: the planted mistakes, and nothing else.
EXPECTED: dict[str, set[tuple[str, str, str]]] = {
    # class-D on ±45 V: the boot diode blocks the whole rail-to-rail swing plus V_boot
    # and both edges of the ±45 V swing lift the off gate to within 0.5 V of V_th 3.3 V
    # (rule 2.9 V; ngspice: 19.4 V/ns rising, 2.5 V at the low side's gate pin)
    "o03_classd_split_rails.cir": {
        ("bootstrap-diode-voltage", "d_bs", "error"),
        ("induced-turn-on", "r_gl", "warning"),
        ("induced-turn-on", "r_gh", "warning"),
        ("gate-pulldown-missing", "m_h", "error"),
    },
    # a ground-referenced pump below the bus: no enhancement; and with the output shorted
    # the gate would see the pump's whole output
    "o05_pump_ground_reservoir.cir": {
        ("gate-headroom", "c_p", "error"),
        ("gate-overvoltage", "m1", "warning"),
        # the pull-up from the pump is the gate's only passive path, Q_OFF the only
        # pull-down: with the controller unpowered the switch follows the pump up
        ("gate-pulldown-missing", "m1", "error"),
    },
    # a pass device's gate pulled up from 36 V with no gate–source Zener: an output short
    # (and the output held up while the error amplifier pulls the gate down)
    "o08_linreg_high_gate_rail.cir": {
        ("gate-overvoltage", "m_pass", "warning"),
        ("gate-overvoltage", "q_ea", "warning"),
    },
    # the 72 V surge, given as PWL, over the boot diode's derated rating
    "o09_surge_pwl_bootstrap.cir": {
        ("bootstrap-diode-voltage", "d_bt", "error"),
        ("gate-pulldown-missing", "m_h", "error"),
    },
    # a buck-boost in boost mode: the input leg's high side held on from a bootstrap that
    # nothing refreshes (ngspice: 11 V to 6.2 V in 250 us); the output leg's high side,
    # whose drain is the converter's output at no rail, is recognised and draws nothing
    "o22_buck_boost_held_input_leg.cir": {("dc-hold", "vca", "error")},
    # a synchronous boost's rectifier: its drain is the output, at no rail; V_out taken as
    # V_in/D of its command (26.2 V against 24.0 V in ngspice: the dead times' share), so
    # the 28 V boot diode blocks ≈ 26 V against its derated 22.4 V
    "o23_sync_boost_28v_boot_diode.cir": {("bootstrap-diode-voltage", "d_bt", "error")},
    # a 12 V Zener behind a 0 V ammeter, below the 15 V isolated drive
    "o11_isolated_clamp_ammeter.cir": {("gate-overvoltage", "d_z", "error")},
    # 10 V and 5 V gate rails on standard-level switches
    "o13_bootstrap_10v_rail.cir": {
        ("gate-headroom", "d_bt", "warning"),
        ("gate-pulldown-missing", "m_h", "warning"),
    },
    "o14_bootstrap_5v_rail.cir": {
        ("gate-headroom", "d_bt", "error"),
        ("gate-pulldown-missing", "m_h", "warning"),
    },
    # ±45 V rails behind 50 nH leads into the board's capacitors, VCC stacked on the
    # negative one: the 75 V boot diode blocks ≈ 89 V (ngspice: 90.0 V)
    # (idling at 50 %: the ripple current reverses at both edges, so neither switch slews
    # the node and induced-turn-on judges neither)
    "o16_classd_rails_behind_leads.cir": {
        ("bootstrap-diode-voltage", "d_bs", "error"),
        ("gate-pulldown-missing", "m_h", "error"),
    },
    # a general-purpose rectifier (TT 4 µs) fed from the driver's RC-filtered VCC, at
    # 60 kHz (ngspice: -0.43 A back through it at every rising edge, 23 nC)
    "o17_inverter400v_filtered_vcc.cir": {
        ("bootstrap-diode-slow", "d_bt", "error"),
        ("gate-pulldown-missing", "m_h", "error"),
    },
    # a load switch pulled up from 60 V, pulled off by an NPN to ground against 100 µF:
    # V_GS -48 V at every turn-off (ngspice: -48.2 V, still -38.8 V 10 ms later), an
    # error; and the output-short case, a warning
    "o18_loadswitch48v_high_gate_rail.cir": {
        ("gate-overvoltage", "q_off", "error"),
        ("gate-overvoltage", "m1", "warning"),
        ("gate-pulldown-missing", "m1", "error"),
    },
    # a bootstrap enabled for 150 ms that holds about 10 ms (ngspice: 10.3 ms): one finding
    # for the one cause, dc-hold's (never bootstrap-capacitor-small's as well)
    "o19_heater24v_long_enable.cir": {("dc-hold", "ven", "error")},
    # clean at the nominal corner; at the worst corner (checks/corners.py) its 5 V rail
    # less 5 % and the Schottky's drop leaves 56 mV above the logic-level 4.5 V, which one
    # on-time's droop on 100 nF less its tolerance uses up
    "o06_closed_loop_buck.cir": {
        ("bootstrap-capacitor-small", "c_bst", "error"),
        ("gate-pulldown-missing", "m_hs", "error"),
    },
}
# Decks whose only finding is gate-pulldown-missing: none ties its high side's gate to its
# own source with a passive part (their behavioural drivers' sinks, which a simulator keeps
# on without supply, stand for outputs that are high impedance unpowered); the pump load
# switch's only passive path is its pull-up from the pump, which charges from the bus.
# Everything else about them is clean.
EXPECTED.update(
    {
        "o01_sync_buck_ammeters.cir": {("gate-pulldown-missing", "m_hs", "error")},
        "o02_motor_leg_shunts.cir": {("gate-pulldown-missing", "m_h", "warning")},
        "o04_pump_loadswitch.cir": {("gate-pulldown-missing", "m1", "error")},
        "o10_hbridge_leg_held_off.cir": {
            ("gate-pulldown-missing", "m_ha", "warning"),
            ("gate-pulldown-missing", "m_hb", "warning"),
        },
        # two legs (subcircuits) on one DC-link shunt, each low side behind a 2 nH stray,
        # the bridge's ceramic from the bus to the shunt's top: both legs refresh (ngspice:
        # both boot supplies hold at 11.3-11.5 V)
        "o15_hbridge_shared_shunt.cir": {
            ("gate-pulldown-missing", "xla.m_h", "warning"),
            ("gate-pulldown-missing", "xlb.m_h", "warning"),
        },
    }
)
CLEAN = [
    "o07_audio_follower_stage.cir",
    # an ideal behavioural floating driver: no unpowered state to judge
    "o12_behavioural_gate_drive.cir",
    # a two-switch forward: the top switch's bootstrap refreshes through the reset diode
    "o20_two_switch_forward_reset_refresh.cir",
    # both gates of a half bridge from one gate-drive transformer, Zener pairs at ±15 V
    "o21_gate_transformer_half_bridge.cir",
    # a bootstrap fed from the 24 V bus and held at 12 V by a Zener across its capacitor
    "o24_buck24v_zener_held_bootstrap.cir",
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


def test_a_rail_behind_its_lead_is_still_that_rail() -> None:
    # -45 V through 10 mΩ and 50 nH into 220 µF and 2.2 µF is -45 V at DC; the driver's
    # VCC, a 12 V source on it, is -33 V; the boot diode is fed from there through 4.7 Ω
    # and an ammeter. The positive rail's board net carries the high side's drain: it stays
    # a net, and the bus is found behind its lead.
    result = check_path(OUTSIDE / "o16_classd_rails_behind_leads.cir")
    (stage,) = [s for s in result.stages if s.floating]
    assert stage.bus is not None and (stage.bus.net, stage.bus.volts) == ("vps", 45.0)
    supply = stage.supply
    assert supply.diode == "d_bs" and supply.series_resistors == ("r_bs",)
    assert supply.aux is not None and supply.aux.net == "vcc"
    assert supply.aux.volts == pytest.approx(-33.0)
    assert [r.reference for r in stage.refresh if r.kind == "low-side switch"] == ["vn"]
    notes = " ".join(stage.notes)
    assert "vn taken as the rail vns (-45 V) at DC" in notes and "v_vcc stacks it on vn" in notes
    (finding,) = [f for f in result.findings if f.rule == "bootstrap-diode-voltage"]
    assert finding.values["diode_reverse_voltage_steady"].value == pytest.approx(90.0, rel=0.05)


def test_a_boot_diode_fed_through_a_filtered_supply_pin_has_its_rail() -> None:
    # 15 V → 0.2 Ω → the driver's VCC pin (10 µF) → 10 Ω → ammeter → diode: the aux rail
    # is the 15 V supply, both resistors are in the charge path.
    result = check_path(OUTSIDE / "o17_inverter400v_filtered_vcc.cir")
    (stage,) = [s for s in result.stages if s.floating]
    supply = stage.supply
    assert supply.diode == "d_bt" and supply.aux is not None
    assert (supply.aux.net, supply.aux.volts) == ("a15", 15.0)
    assert supply.series_resistors == ("r_bt", "r_vf")
    assert supply.series_resistance == pytest.approx(10.2)
    assert any("through the decoupled supply node vdd" in n for n in stage.notes)


def test_a_turn_off_against_a_held_output_is_an_error_and_says_why() -> None:
    # The enable commands the turn-off (a state of normal operation, not a fault) and the
    # output capacitor holds the source far longer than the gate takes to fall.
    result = check_path(OUTSIDE / "o18_loadswitch48v_high_gate_rail.cir")
    (stage,) = [s for s in result.stages if s.floating]
    assert stage.mode == "static"
    (finding,) = [f for f in result.findings if f.device == "q_off"]
    assert finding.values["tau_source_node"].value == pytest.approx(47e-3)
    assert finding.values["tau_source_node"].value > finding.values["pulldown_fall_time"].value
    assert "τ = 47 ms, longer than the ≈ 1 us the gate takes to fall" in finding.message
    assert finding.values["vgs_pulled_down"].value == pytest.approx(-48.0)
    # the same pull-down under a regulator's loop is a transient or fault: a warning
    loop = check_path(OUTSIDE / "o08_linreg_high_gate_rail.cir")
    (warning,) = [f for f in loop.findings if f.device == "q_ea"]
    assert (
        warning.severity.label == "warning" and "only in a transient or a fault" in warning.message
    )


def test_a_zener_across_the_boot_capacitor_holds_the_boot_supply() -> None:
    # o24: 24 V − V_F would put 23 V on the gate; DZB (BV 12 V) holds it at 12 V (ngspice:
    # 11.94–12.03 V); without the Zener gate-overvoltage fires, as it should
    from crosscheck import facts_of

    deck = OUTSIDE / "o24_buck24v_zener_held_bootstrap.cir"
    _, facts = facts_of(deck, "mh")
    assert facts.v_boot_max is not None and facts.v_boot0 is not None
    assert facts.v_boot_max.value == pytest.approx(12.0)
    assert facts.v_boot0.value == pytest.approx(12.0)
    assert "dzb" in facts.v_boot_max.origin
    text = deck.read_text(encoding="utf-8").replace("DZB SW VB DZ12\n", "")
    rules = {f.rule for f in check_text(text).findings}
    assert "gate-overvoltage" in rules
