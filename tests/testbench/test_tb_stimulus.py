"""Control waveforms written by the testbench, read back by drivelint's own reader: the
on-time, duty and edges the rule used must be what the waveform commands."""

from __future__ import annotations

import math
from pathlib import Path

import pytest
from testbench_support import EXAMPLES

from drivelint.netlist.waveforms import Dc, Pulse, Waveform
from drivelint.pipeline import load_circuit, load_stages
from drivelint.testbench.bench import design_schedule
from drivelint.testbench.stimulus import (
    DEAD_MIN,
    Drive,
    Schedule,
    dead_time,
    drive_of,
    partner_source,
    waveform_text,
)


def _read_back(text: str, tmp_path: Path) -> Waveform:
    netlist = tmp_path / "w.cir"
    netlist.write_text(f"waveform\nV1 a 0 {text}\nR1 a 0 1k\n.end\n", encoding="utf-8")
    waveform = load_circuit(netlist).devices["v1"].waveform
    assert waveform is not None
    return waveform


@pytest.mark.parametrize(
    ("period", "on_time", "delay"),
    [(50e-6, 49.61e-6, 1e-6), (2.5e-6, 1.08e-6, 2.5e-6), (1e-3, 1e-4, 50e-6)],
)
def test_pulse_train_commands_the_on_time_and_duty(
    period: float, on_time: float, delay: float, tmp_path: Path
) -> None:
    drive = Drive(on=5.0, off=0.0, rise=20e-9, fall=10e-9)
    waveform = _read_back(waveform_text(Schedule.periodic(period, on_time, delay), drive), tmp_path)
    # drivelint measures at the midpoint of the two levels
    assert waveform.longest_time_above(2.5) == pytest.approx(on_time, rel=1e-6)
    assert waveform.duty_above(2.5) == pytest.approx(on_time / period, rel=1e-6)
    assert waveform.value_at(delay) == pytest.approx(2.5, abs=1e-6)


def test_an_inverting_drive_commands_on_with_its_low_level(tmp_path: Path) -> None:
    drive = drive_of(Pulse(5.0, 0.0, 0.0, 50e-9, 50e-9, 37.5e-6, 125e-6), inverting=True)
    assert drive == Drive(on=0.0, off=5.0, rise=50e-9, fall=50e-9)
    waveform = _read_back(waveform_text(Schedule.periodic(125e-6, 40e-6, 5e-6), drive), tmp_path)
    assert waveform.longest_time_below(2.5) == pytest.approx(40e-6, rel=1e-6)


def test_steps_cross_the_midpoint_at_their_times(tmp_path: Path) -> None:
    drive = Drive(on=5.0, off=0.0)
    schedule = Schedule.steps((100e-6, True), (350e-6, False))
    waveform = _read_back(waveform_text(schedule, drive), tmp_path)
    assert waveform.value_at(0.0) == 0.0
    assert waveform.value_at(100e-6) == pytest.approx(2.5)
    assert waveform.value_at(350e-6) == pytest.approx(2.5)
    assert waveform.longest_time_above(2.5) == pytest.approx(250e-6)
    assert schedule.on_windows(1.0) == [(100e-6, 350e-6)]
    assert Schedule.steps((1e-3, True)).on_windows(1.0) == [(1e-3, math.inf)]


def test_the_partner_is_on_whenever_the_switch_is_off(tmp_path: Path) -> None:
    main = Schedule.periodic(50e-6, 48e-6, 2e-6)
    partner = main.complement(100e-9)
    assert partner.on_time == pytest.approx(50e-6 - 48e-6 - 200e-9)
    waveform = _read_back(
        waveform_text(partner, Drive(on=5.0, off=0.0), initially_on=True), tmp_path
    )
    assert waveform.value_at(0.0) == 5.0  # the partner charges the boot supply first
    # off from 100 ns before the switch turns on until 100 ns after it turns off
    assert waveform.value_at(2e-6 - 100e-9) == pytest.approx(2.5, abs=1e-6)
    assert waveform.value_at(25e-6) == 0.0  # the switch is on
    assert waveform.value_at(50e-6 + 100e-9) == pytest.approx(2.5, abs=1e-6)
    assert waveform.value_at(51e-6) == 5.0  # the switch is off: the partner refreshes
    steps = Schedule.steps((10e-6, True), (30e-6, False)).complement(200e-9)
    assert steps.edges == ((10e-6 - 200e-9, False), (30e-6 + 200e-9, True))


def test_a_dc_command_borrows_its_logic_levels() -> None:
    # Leg B of the mower bridge: high side held at 0 V, low side at 5 V.
    assert drive_of(Dc(0.0), False, [Dc(5.0)]) == Drive(on=5.0, off=0.0)
    assert drive_of(Dc(5.0), False) == Drive(on=5.0, off=0.0)
    assert drive_of(Dc(0.0), False) is None  # no level but the resting one is known


def test_dead_time_is_read_off_the_designs_own_commands() -> None:
    circuit = load_circuit(EXAMPLES / "mower48v_hbridge_wrapped_fets.cir")
    high, low = circuit.devices["vhia"].waveform, circuit.devices["vlia"].waveform
    # TDT = 100 ns in the netlist
    assert dead_time(high, low, 50e-6) == pytest.approx(100e-9, rel=1e-3)
    assert dead_time(None, None, 1e-6) == DEAD_MIN


def test_the_designs_schedule_is_read_from_its_control() -> None:
    _, stages = load_stages(EXAMPLES / "lev48_phase_leg_npn_shifter.cir")
    # VHIN is active low: the 37.5 us at 0 V every 125 us is the on-time
    schedule = design_schedule(next(s for s in stages if s.floating))
    assert schedule is not None and schedule.period == pytest.approx(125e-6)
    assert schedule.on_time == pytest.approx(37.5e-6 + 50e-9)
    _, stages = load_stages(EXAMPLES / "loadswitch24v_dc_enable.cir")
    schedule = design_schedule(next(s for s in stages if s.floating))
    assert schedule is not None and schedule.period is None
    assert schedule.edges == ((pytest.approx(200.5e-6), True),)


TOTEM_LEG = """leg whose low side is driven by a switch totem
VBUS bus 0 DC 48
VAUX aux 0 DC 12
D1 aux boot dfast
C1 boot sw 220n
S_HUP boot ho hin 0 son
S_HDN ho sw 0 hin soff
R_GH ho g 4.7
M1 bus g sw nfet
S_LUP aux lo {control}
S_LDN lo 0 {other}
R_GL lo gl 2.2
R_GSL gl 0 10k
M2 sw gl 0 nfet
L1 sw out 10u
R_LD out 0 2.4
V_HIN hin 0 PULSE(0 5 0 20n 20n 2u 5u)
V_LIN lin 0 PULSE(0 5 2.5u 20n 20n 2u 5u)
.model son SW (VT=2.5 VH=0.2 RON=2 ROFF=100meg)
.model soff SW (VT=-2.5 VH=0.2 RON=1 ROFF=100meg)
.model dfast D (IS=1n N=1.5 RS=0.2 BV=100 TT=20n)
.model nfet NMOS (LEVEL=1 VTO=3 KP=20 CGSO=2n CGDO=0.5n)
.end
"""


@pytest.mark.parametrize(
    ("control", "other", "inverting"),
    [("lin 0 son", "0 lin soff", False), ("0 lin soff", "lin 0 son", True)],
)
def test_a_totem_driven_partner_is_traced_to_its_command(
    control: str, other: str, inverting: bool, tmp_path: Path
) -> None:
    netlist = tmp_path / "totem.cir"
    netlist.write_text(TOTEM_LEG.format(control=control, other=other), encoding="utf-8")
    circuit, stages = load_stages(netlist)
    stage = next(s for s in stages if s.floating)
    from drivelint.checks.facts import devices_by_net

    found = partner_source(circuit, stage, devices_by_net(circuit))
    assert found is not None
    partner, source, inverted = found
    assert (partner.name, source.name, inverted) == ("m2", "v_lin", inverting)
