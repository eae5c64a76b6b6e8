"""Recognition of the topologies real boards and simulation decks use.

Each deck in tests/checks/outside is one of our own, written the way decks from outside the
project are written (ammeters, strays, shunts, split rails, pumps, modulators, behavioural
drivers); the small inline decks isolate one feature each.
"""

from __future__ import annotations

from pathlib import Path

import pytest

from drivelint.netlist.waveforms import Pulse, Pwl
from drivelint.pipeline import load_circuit, load_stages
from drivelint.stages.model import DriveStage
from drivelint.stages.recognise import recognise, supply_range
from drivelint.stages.wires import (
    FILTER_MIN_CAPACITANCE,
    STRAY_MAX_INDUCTANCE,
    collapse_wires,
    find_wires,
)

OUTSIDE = Path(__file__).resolve().parents[1] / "checks" / "outside"


def stage_of(deck: str, switch: str) -> DriveStage:
    _, stages = load_stages(OUTSIDE / deck)
    return next(s for s in stages if s.switch == switch)


def stages_of_text(text: str, tmp_path: Path) -> tuple[DriveStage, ...]:
    path = tmp_path / "deck.cir"
    path.write_text(text, encoding="utf-8")
    return recognise(load_circuit(path))


# ---------------------------------------------------------------- wires


def test_ammeters_strays_and_milliohms_are_wires() -> None:
    stage = stage_of("o01_sync_buck_ammeters.cir", "m_hs")
    # the low side behind V_ISW and L_LP refreshes the switch node, its return through
    # V_ILS is ground; the 4 mΩ ESR puts C_BOOT straight across boot and switch node
    assert [r.kind for r in stage.refresh][0] == "low-side switch"
    assert stage.refresh[0].devices == ("m_ls",) and stage.refresh[0].reference == "0"
    assert stage.supply.capacitor == "c_boot"
    notes = " ".join(stage.notes)
    for name in ("v_isw", "l_lp", "r_esr", "v_ils"):
        assert name in notes


def test_a_shunt_in_the_low_sides_return_keeps_it_a_refresh_path() -> None:
    # DC-link shunt R_SHUNT (5 mΩ) under the low side, per-leg shunt R_LEG in the drain
    stage = stage_of("o02_motor_leg_shunts.cir", "m_h")
    assert stage.bus is not None and stage.bus.net == "bat"
    assert any(r.kind == "low-side switch" for r in stage.refresh)


def test_filter_inductors_and_zero_volt_commands_are_not_wires(tmp_path: Path) -> None:
    text = """filter inductor and a command held at 0 V
VIN vin 0 DC 24
VH hin 0 DC 0
L1 sw out 470n
C1 out 0 10u
L2 vin d 5n
RB out 0 10
.end
"""
    path = tmp_path / "deck.cir"
    path.write_text(text, encoding="utf-8")
    circuit = load_circuit(path)
    names = {w.device for w in find_wires(circuit)}
    # 470 nH onto 10 µF is an LC filter (the capacitor is over FILTER_MIN_CAPACITANCE);
    # 5 nH in the drain is a stray; VH only sets an input, it measures nothing.
    assert 10e-6 > FILTER_MIN_CAPACITANCE
    assert names == {"l2"}
    merged = collapse_wires(circuit)
    assert merged.net("d") == "vin"


def test_a_package_stray_is_never_a_filter(tmp_path: Path) -> None:
    # 2 nH into a 220 µF bulk capacitor is still a lead: no filter is built of a few nH.
    # 50 nH into the same capacitor is a supply filter (the capacitor holds the far net,
    # which nothing else holds), and is kept.
    text = """strays and leads into bulk capacitors
VA a 0 DC 12
L1 a a2 2n
C1 a2 0 220u
VB b 0 DC 12
L2 b b2 50n
C2 b2 0 220u
RL1 a2 0 100
RL2 b2 0 100
.end
"""
    path = tmp_path / "deck.cir"
    path.write_text(text, encoding="utf-8")
    assert STRAY_MAX_INDUCTANCE < 50e-9
    assert {w.device for w in find_wires(load_circuit(path))} == {"l1"}


def test_a_capacitor_between_two_held_nets_decouples_and_filters_nothing(tmp_path: Path) -> None:
    # A DC-link ceramic from the bus to the top of a shunt: the shunt (and its nH) holds
    # that net at ground, so the 30 nH loop inductance beside it is a stray. Without the
    # shunt the same capacitor holds the net alone: then 30 nH and it are a filter.
    text = """a loop inductance beside a DC-link ceramic
VBUS bus 0 DC 36
C1 bus isns 2.2u
R1 isns sh 5m
L1 sh 0 0.5n
L2 ls isns 30n
M1 sw g ls ls NMOD
.model NMOD NMOS (VTO=2)
.end
"""
    path = tmp_path / "deck.cir"
    path.write_text(text, encoding="utf-8")
    assert {w.device for w in find_wires(load_circuit(path))} == {"l1", "l2", "r1"}
    unshunted = tmp_path / "unshunted.cir"
    unshunted.write_text(text.replace("R1 isns sh 5m", "R1 isns sh 5"), encoding="utf-8")
    assert {w.device for w in find_wires(load_circuit(unshunted))} == {"l1"}


def test_a_supply_behind_its_lead_is_that_supply_at_dc(tmp_path: Path) -> None:
    # -24 V through a 220 nH lead into 100 µF, then a 68 nH board filter into 1 µF: both
    # nets are -24 V at DC, and a 15 V source stacked on the second is -9 V.
    text = """a rail behind two leads, a source stacked on it
VN vns 0 DC -24
L1 vns n1 220n
C1 n1 0 100u
L2 n1 n2 68n
C2 n2 0 1u
V15 vcc n2 DC 15
RL vcc n2 1k
.end
"""
    path = tmp_path / "deck.cir"
    path.write_text(text, encoding="utf-8")
    merged = collapse_wires(load_circuit(path))
    assert {h.net: (h.volts, h.kind) for h in merged.held} == {
        "n1": (-24.0, "lead"),
        "n2": (-24.0, "lead"),
        "vcc": (-9.0, "stacked"),
    }
    assert merged.circuit.rails["vcc"] == pytest.approx(-9.0)
    assert [h.net for h in merged.held_at(["vcc"])] == ["n1", "n2", "vcc"]


def test_a_switch_node_is_never_taken_as_a_rail(tmp_path: Path) -> None:
    # A boost inductor from the input rail to the switch's drain, even with a (wrongly
    # large) capacitor on the node; a high side's source, held by its output capacitor,
    # behind an inductor from a rail; and an undecoupled net behind a lead.
    text = """switch nodes behind inductors
VIN vin 0 DC 12
L1 vin sw 470n
C1 sw 0 220n
M1 sw g 0 0 NMOD
VB bus 0 DC 48
M2 bus g2 out out NMOD
L2 vin out 1u
C2 out 0 10u
L3 vin x 100n
RX x 0 10
.model NMOD NMOS (VTO=2)
.end
"""
    path = tmp_path / "deck.cir"
    path.write_text(text, encoding="utf-8")
    assert collapse_wires(load_circuit(path)).held == ()


BOOT_THROUGH_A_NODE = """boot diode fed through a node between two resistors
VB bus 0 DC 48
V12 v12 0 DC 12
R1 v12 mid 1
R2 mid a 10
D1 a boot DFAST
C1 boot sw 470n
RG boot g 22
M1 bus g sw sw NMOD
M2 sw gl 0 0 NMOD
VL gl 0 PULSE(0 10 0 10n 10n 5u 10u)
LL sw 0 100u
.model NMOD NMOS (VTO=2)
.model DFAST D (IS=1n TT=20n BV=100)
.end
"""


def test_a_boot_diode_is_fed_through_a_decoupled_supply_node_only(tmp_path: Path) -> None:
    # Through the node between R1 and R2 only when a capacitor holds it (a supply pin
    # behind its RC filter), never through any two resistors in a row.
    (stage,) = [s for s in stages_of_text(BOOT_THROUGH_A_NODE, tmp_path) if s.floating]
    assert stage.supply.aux is None
    decoupled = BOOT_THROUGH_A_NODE.replace("R2 mid a 10", "R2 mid a 10\nCM mid 0 1u")
    (stage,) = [s for s in stages_of_text(decoupled, tmp_path) if s.floating]
    assert stage.supply.aux is not None and stage.supply.aux.net == "v12"
    assert stage.supply.series_resistors == ("r2", "r1")
    assert stage.supply.series_resistance == pytest.approx(11.0)


def test_two_rails_at_different_voltages_are_never_merged(tmp_path: Path) -> None:
    text = """a milliohm between two supplies
V1 a 0 DC 12
V2 b 0 DC 5
R1 a b 10m
.end
"""
    path = tmp_path / "deck.cir"
    path.write_text(text, encoding="utf-8")
    merged = collapse_wires(load_circuit(path))
    assert merged.wires == ()


# ---------------------------------------------------------------- supplies and rails


def test_supply_range_skips_the_start_up() -> None:
    surge = Pwl(points=((0, 48), (150e-6, 48), (160e-6, 72), (360e-6, 72), (370e-6, 48)))
    assert supply_range(surge) == (48, 72)
    soft_start = Pwl(points=((0, 0), (30e-6, 12)))
    assert supply_range(soft_start) == (12, 12)
    dip = Pwl(points=((0, 24), (1e-3, 24), (1.1e-3, 16), (2e-3, 16), (2.1e-3, 24)))
    assert supply_range(dip) == (16, 24)
    pulsed = Pulse(v1=0, v2=12, td=0, tr=1e-9, tf=1e-9, pw=1e-6, per=2e-6)
    assert supply_range(pulsed) == (0, 12)


def test_a_surge_and_a_soft_start_are_supplies() -> None:
    stage = stage_of("o09_surge_pwl_bootstrap.cir", "m_h")
    assert stage.floating
    assert stage.bus is not None and (stage.bus.volts, stage.bus.low) == (72, 48)
    assert stage.bus.source == "vbus"
    aux = stage.supply.aux
    assert aux is not None and aux.volts == 12 and aux.net == "v12"


def test_split_rails_refresh_to_the_negative_rail() -> None:
    stage = stage_of("o03_classd_split_rails.cir", "m_h")
    low = next(r for r in stage.refresh if r.kind == "low-side switch")
    assert low.reference == "vn"
    assert stage.supply.aux is not None and stage.supply.aux.volts == pytest.approx(-33.0)


# ---------------------------------------------------------------- commands


def test_a_closed_loop_modulator_is_not_a_dc_command() -> None:
    stage = stage_of("o06_closed_loop_buck.cir", "m_hs")
    control = stage.control
    assert control is not None and control.kind == "modulator" and control.source == "b_pwm"
    assert control.waveform is not None and control.waveform.frequency() == pytest.approx(300e3)
    assert "vramp" in control.inputs
    assert stage.mode == "switching"
    assert any("modulator" in n for n in stage.notes)


def test_dead_time_logic_on_one_modulator_is_that_modulator() -> None:
    # B_HIN reads PWM and its RC-delayed copy PWMD: one signal, from the comparator B_CMP
    # of the audio sine against the 400 kHz triangle (the carrier: the faster input).
    stage = stage_of("o03_classd_split_rails.cir", "m_h")
    control = stage.control
    assert control is not None and control.kind == "modulator" and control.source == "b_cmp"
    assert control.waveform is not None and control.waveform.frequency() == pytest.approx(400e3)
    assert set(control.inputs) == {"vaud", "vtri"}


def test_a_command_held_at_zero_never_turns_the_switch_on() -> None:
    stage = stage_of("o10_hbridge_leg_held_off.cir", "m_hb")
    assert stage.control is not None and stage.control.source == "vhib"
    assert stage.mode == "static"


def test_the_low_sides_own_command_is_traced() -> None:
    stage = stage_of("o10_hbridge_leg_held_off.cir", "m_ha")
    low = next(r for r in stage.refresh if r.kind == "low-side switch")
    assert low.command is not None and low.command.source == "vlia"


# ---------------------------------------------------------------- gate supplies


def test_charge_pump_riding_on_the_output() -> None:
    stage = stage_of("o04_pump_loadswitch.cir", "m1")
    supply = stage.supply
    assert supply.kind == "charge-pump" and supply.riding
    assert (supply.capacitor, supply.diode, supply.feed_diode, supply.source) == (
        "c_res",
        "d_p2",
        "d_p1",
        "c_p",
    )
    assert supply.aux is not None and supply.aux.net == "vbus"
    assert supply.clock is not None and supply.clock.volts == 12 and supply.clock.source == "vclk"


def test_charge_pump_to_ground_found_from_the_gate() -> None:
    stage = stage_of("o05_pump_ground_reservoir.cir", "m1")
    supply = stage.supply
    assert supply.kind == "charge-pump" and not supply.riding
    assert supply.capacitor == "c_res" and supply.aux is not None and supply.aux.net == "v12"
    assert [p.devices for p in stage.pullups] == [("r_gu",)]


def test_behavioural_source_that_follows_the_switch_node_is_a_driver() -> None:
    stage = stage_of("o12_behavioural_gate_drive.cir", "m_h")
    supply = stage.supply
    assert supply.kind == "isolated" and supply.source == "b_hd"
    assert supply.aux is not None and supply.aux.volts == pytest.approx(12.0)
    assert stage.control is not None and stage.control.source == "vph"
    assert any("ideal floating driver" in n for n in stage.notes)


def test_behavioural_source_against_ground_that_does_not_follow_is_not(tmp_path: Path) -> None:
    text = """gate driven from ground by a behavioural source
VIN vin 0 DC 48
VPH pwm 0 PULSE(0 5 0 10n 10n 2u 10u)
B_HD hd 0 V = V(pwm) > 2.5 ? 12 : 0
R_GH hd gh 4.7
M_H vin gh sw nfet
L_O sw vo 33u
C_O vo 0 47u
.model nfet VDMOS(VTO=3 KP=20 Cgs=2n Cgdmax=1n)
.end
"""
    (stage,) = [s for s in stages_of_text(text, tmp_path) if s.floating]
    assert stage.supply.kind == "none"


def test_a_pulse_riding_on_the_switch_node_is_its_command(tmp_path: Path) -> None:
    text = """ideal floating gate command
VBUS bus 0 DC 60
VHS hcmd sw PULSE(0 12 0 20n 20n 2.3u 5u)
RHG hcmd hg 4.7
M1 bus hg sw nfet
D1 0 sw dfw
L1 sw out 22u
C1 out 0 47u
.model dfw D(IS=1n BV=100)
.model nfet VDMOS(VTO=3 KP=20 Cgs=2n Cgdmax=1n)
.end
"""
    (stage,) = [s for s in stages_of_text(text, tmp_path) if s.floating]
    assert stage.supply.kind == "isolated" and stage.supply.aux is not None
    assert stage.supply.aux.volts == 12
    assert stage.control is not None and stage.control.source == "vhs" and stage.mode == "switching"


def test_source_followers_are_linear() -> None:
    for deck, switch in (
        ("o07_audio_follower_stage.cir", "m_n"),
        ("o08_linreg_high_gate_rail.cir", "m_pass"),
    ):
        stage = stage_of(deck, switch)
        assert stage.mode == "linear", deck
        assert any("linear stage" in n for n in stage.notes)


def test_a_filter_capacitor_behind_its_esr_still_makes_a_filter(tmp_path: Path) -> None:
    text = """470 nH output inductor onto 22 µF with 5 mΩ of ESR
VIN vin 0 DC 12
L1 sw out 470n
C1 out esr 22u
R1 esr 0 5m
RB out 0 1
.end
"""
    path = tmp_path / "deck.cir"
    path.write_text(text, encoding="utf-8")
    names = {w.device for w in find_wires(load_circuit(path))}
    assert names == {"r1"}


def test_a_subcircuit_of_behavioural_sources_and_switches_with_driver_pins(
    tmp_path: Path,
) -> None:
    # Not in any parts library: its ports (VDD HB HO HS LI) say "driver", its inside is
    # behavioural sources and voltage-controlled switches; the stage says what was assumed.
    text = """behavioural half-bridge driver with driver-like ports
VIN vin 0 DC 48
V12 v12 0 DC 12
VHI hi 0 PULSE(0 5 0 10n 10n 2u 5u)
VLI li 0 PULSE(5 0 0 10n 10n 2.2u 5u)
XD v12 hb ho sw lo 0 hi li BDRV
D_B v12 hb dfast
C_B hb sw 220n
M_H vin ho sw nfet
M_L sw lo 0 nfet
L_O sw vo 22u
C_O vo 0 47u
R_L vo 0 4
.subckt BDRV VDD HB HO HS LO VSS HI LI
B_H hc VSS V = V(HI,VSS) > 2.5 ? 1 : 0
S_HU HB HO hc VSS SWM
S_HD HO HS VSS hc SWM
B_L lc VSS V = V(LI,VSS) > 2.5 ? 1 : 0
S_LU VDD LO lc VSS SWM
S_LD LO VSS VSS lc SWM
.model SWM SW(VT=0.5 VH=0.1 RON=3 ROFF=1e8)
.ends BDRV
.model dfast D(IS=1n N=1.5 RS=0.2 BV=100 TT=20n)
.model nfet VDMOS(VTO=3 KP=20 Cgs=2n Cgdmax=1n)
.end
"""
    (stage,) = [s for s in stages_of_text(text, tmp_path) if s.floating]
    assert stage.driver is not None and stage.driver.device == "xd"
    assert stage.driver.origin == "pin names"
    assert stage.supply.kind == "bootstrap" and stage.supply.diode == "d_b"
    assert stage.control is not None and stage.control.source == "vhi"
    assert stage.mode == "switching"
    assert any(
        "xd (subcircuit bdrv) taken as a driver IC by its pin names" in n for n in stage.notes
    )


# ---------------------------------------------------------------- converter outputs

SYNC_BOOST = """12 V to 24 V synchronous boost
VIN vin 0 DC 12
VCC vcc 0 DC 12
L1 vin sw 10u
M1 out g1 sw nfet
M2 sw g2 0 nfet
D1 vcc vb dboot
C1 vb sw 100n
R1 g1 sw 10k
R2 g2 0 10k
COUT out 0 {cout}
RLD out 0 24
.model nfet VDMOS (Vto=3 Kp=10)
.model dboot D (IS=1n)
.end
"""


def test_a_synchronous_boosts_rectifier_floats_on_its_output(tmp_path: Path) -> None:
    # the high side's drain is the converter's output: held by COUT, at no DC rail
    stages = stages_of_text(SYNC_BOOST.format(cout="220u"), tmp_path)
    (high,) = [s for s in stages if s.switch == "m1"]
    assert high.floating
    assert high.bus is not None and high.bus.net == "out" and high.bus.volts is None
    assert "converter's output" in high.floating_reason and "cout" in high.floating_reason
    assert high.supply.kind == "bootstrap" and high.supply.capacitor == "c1"


def test_a_drain_on_no_rail_and_no_filter_capacitor_is_not_a_high_side(tmp_path: Path) -> None:
    # a 1 nF snubber does not hold a rail: not recognised, as before
    stages = stages_of_text(SYNC_BOOST.format(cout="1n"), tmp_path)
    (high,) = [s for s in stages if s.switch == "m1"]
    assert not high.floating
    assert "reaches no positive rail" in high.floating_reason
    # the output leg of o22's buck-boost, driven by its own half-bridge driver
    leg = stage_of("o22_buck_boost_held_input_leg.cir", "mb1")
    assert leg.floating and leg.bus is not None and leg.bus.volts is None
