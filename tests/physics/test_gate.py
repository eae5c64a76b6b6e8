"""Gate charge, worst-case V_GS and level-shifter currents."""

# Physics functions are typed with float aliases but are called here with pint quantities
# on purpose, so attribute and argument checks on those calls are switched off.
# mypy: disable-error-code="attr-defined, arg-type, type-arg"

from __future__ import annotations

import pint
import pytest

from drivelint.physics.bootstrap import boot_rail_peak
from drivelint.physics.gate import (
    base_resistor_for,
    bjt_sink_capability,
    gate_charge_at,
    gate_charge_estimate,
    level_shift_margin,
    level_shift_sink_current,
    negative_vgs_when_pulled_to_ground,
    node_against_pull_up,
    pullup_current,
    worst_negative_vgs,
    worst_positive_vgs,
)

# Common practice: power MOSFETs are typically rated V_GS(max) = ±20 V.
VGS_MAX_TYPICAL = 20.0


def test_gate_charge_estimate_linear_capacitances(ureg: pint.UnitRegistry) -> None:
    # Q = C·V on each linear capacitance (textbook); C_gd swings through V_bus + V_drive
    # across the Miller plateau (common practice). By hand: 1 nF·10 V + 100 pF·58 V
    # = 10 nC + 5.8 nC = 15.8 nC.
    q = gate_charge_estimate(1 * ureg.nF, 100 * ureg.pF, 10 * ureg.V, 48 * ureg.V)
    assert q.check("[charge]")
    assert q.to("nC").magnitude == pytest.approx(15.8)
    assert gate_charge_estimate(1e-9, 100e-12, 10.0, 48.0) == pytest.approx(15.8e-9)


def test_gate_charge_at_proportional(ureg: pint.UnitRegistry) -> None:
    # First-order scaling: 50 nC at 10 V is 60 nC at 12 V and exact at the rated point.
    q = gate_charge_at(50 * ureg.nC, 10 * ureg.V, 12 * ureg.V)
    assert q.check("[charge]") and q.to("nC").magnitude == pytest.approx(60.0)
    assert gate_charge_at(50e-9, 10.0, 10.0) == pytest.approx(50e-9)


def test_gate_charge_at_linear_beyond_plateau(ureg: pint.UnitRegistry) -> None:
    # Line through the plateau end (4.5 V, 25 nC) and the rated point (10 V, 50 nC):
    # slope 25 nC / 5.5 V; at 12 V, 25 + 25·7.5/5.5 = 59.0909 nC.
    q = gate_charge_at(50 * ureg.nC, 10 * ureg.V, 12 * ureg.V, 4.5 * ureg.V, 25 * ureg.nC)
    assert q.check("[charge]") and q.to("nC").magnitude == pytest.approx(25 + 25 * 7.5 / 5.5)
    assert gate_charge_at(50e-9, 10.0, 10.0, 4.5, 25e-9) == pytest.approx(50e-9)
    assert gate_charge_at(50e-9, 10.0, 4.5, 4.5, 25e-9) == pytest.approx(25e-9)
    with pytest.raises(ValueError, match="plateau"):
        gate_charge_at(50e-9, 10.0, 3.0, 4.5, 25e-9)


def test_bootstrap_on_24_v_bus_keeps_vgs_at_the_boot_voltage(ureg: pint.UnitRegistry) -> None:
    # Common practice: a 12 V bootstrap on a 24 V bus puts the gate at about 36 V to ground
    # while V_GS stays 12 V, inside the typical ±20 V rating.
    gate_top = boot_rail_peak(24 * ureg.V, 12 * ureg.V)
    vgs = worst_positive_vgs(gate_top, 24 * ureg.V)
    assert vgs.check("[electric_potential]") and vgs.to("V").magnitude == pytest.approx(12.0)
    assert worst_positive_vgs(36.0, 24.0) == pytest.approx(12.0)
    assert abs(worst_positive_vgs(36.0, 24.0)) < VGS_MAX_TYPICAL
    # With the source dragged to ground while the gate stays at the boot rail, V_GS is 36 V.
    assert worst_positive_vgs(36.0, 0.0) > VGS_MAX_TYPICAL


def test_worst_negative_vgs(ureg: pint.UnitRegistry) -> None:
    vgs = worst_negative_vgs(0 * ureg.V, 48 * ureg.V)
    assert vgs.check("[electric_potential]") and vgs.to("V").magnitude == pytest.approx(-48.0)
    assert worst_negative_vgs(2.0, 1.0) == pytest.approx(1.0)


def test_pulled_to_ground_with_source_held_reaches_minus_bus(ureg: pint.UnitRegistry) -> None:
    # Common practice: a pull-down returned to ground while the switch node is held at the
    # 48 V bus drives V_GS to −48 V, far beyond the typical −20 V rating.
    held = negative_vgs_when_pulled_to_ground(48 * ureg.V, 0 * ureg.V, 3 * ureg.V, False)
    assert held.check("[electric_potential]") and held.to("V").magnitude == pytest.approx(-48.0)
    assert negative_vgs_when_pulled_to_ground(48.0, 0.0, 3.0, False) < -VGS_MAX_TYPICAL


def test_pulled_to_ground_with_source_following_stays_near_threshold(
    ureg: pint.UnitRegistry,
) -> None:
    follows = negative_vgs_when_pulled_to_ground(48 * ureg.V, 0 * ureg.V, 3 * ureg.V, True)
    assert follows.to("V").magnitude == pytest.approx(-3.0)
    # Never more negative than the held value: a source only 1 V up gives −1 V.
    assert negative_vgs_when_pulled_to_ground(1.0, 0.0, 3.0, True) == pytest.approx(-1.0)
    assert negative_vgs_when_pulled_to_ground(48.0, 0.0, 3.0, True) > -VGS_MAX_TYPICAL


def test_level_shifter_currents(ureg: pint.UnitRegistry) -> None:
    # Common practice check values: 5 V logic, 0.6 V V_BE, 220 Ω emitter → 20 mA;
    # 12 V across a 1 kΩ pull-up → 12 mA; the shifter wins by 20/12.
    sink = level_shift_sink_current(5 * ureg.V, 0.6 * ureg.V, 220 * ureg.ohm)
    pull = pullup_current(12 * ureg.V, 1 * ureg.kohm)
    assert sink.check("[current]") and sink.to("mA").magnitude == pytest.approx(20.0)
    assert pull.check("[current]") and pull.to("mA").magnitude == pytest.approx(12.0)
    margin = level_shift_margin(sink, pull)
    assert isinstance(margin, float) and margin == pytest.approx(20 / 12)
    assert level_shift_sink_current(5.0, 0.6, 220.0) == pytest.approx(0.020)
    assert pullup_current(12.0, 1000.0) == pytest.approx(0.012)
    assert level_shift_margin(0.020, 0.012) == pytest.approx(20 / 12)
    # A 470 Ω pull-up from 12 V (25.5 mA) beats the 20 mA shifter.
    assert level_shift_margin(0.020, pullup_current(12.0, 470.0)) < 1.0


def test_bjt_sink_capability_emitter_degeneration(ureg: pint.UnitRegistry) -> None:
    """The base loop V_drive = I_B·R_B + V_BE + (β+1)·I_B·R_E (Sedra & Smith, BJT DC
    bias; from memory), I_C = β·I_B: solved by hand for 5 V through 2.2 k with 100 Ω
    under the emitter and β = 120."""
    u = ureg
    i_b = (5.0 - 0.7) / (2200 + 121 * 100)
    assert bjt_sink_capability(5.0, 0.7, 2200, 100, 120) == pytest.approx(120 * i_b)
    # no emitter resistor: β·(V − V_BE)/R_B
    assert bjt_sink_capability(5.0, 0.7, 47e3, 0.0, 100) == pytest.approx(100 * 4.3 / 47e3)
    # below V_BE it sinks nothing
    assert bjt_sink_capability(0.5, 0.7, 1e3, 0.0, 100) == 0.0
    got = bjt_sink_capability(5 * u.V, 0.7 * u.V, 2.2 * u.kohm, 100 * u.ohm, 120)
    assert got.to("mA").magnitude == pytest.approx(120 * i_b * 1e3)
    # the same relation solved for R_B gives the resistor back
    r_b = base_resistor_for(120 * i_b, 5.0, 0.7, 100.0, 120)
    assert r_b == pytest.approx(2200)
    r_q = base_resistor_for(20 * u.mA, 5 * u.V, 0.7 * u.V, 0 * u.ohm, 100)
    assert r_q.to("ohm").magnitude == pytest.approx(100 * 4.3 / 0.02)


def test_node_against_pull_up_is_ohms_law() -> None:
    # 12 V through 330 Ω with 8.73 mA sunk: 12 − 2.88 V
    assert node_against_pull_up(12.0, 8.73e-3, 330.0, 0.2) == pytest.approx(12 - 8.73e-3 * 330)
    # a sink that wins is floored at its saturation level
    assert node_against_pull_up(12.0, 1.0, 330.0, 0.2) == pytest.approx(0.2)
