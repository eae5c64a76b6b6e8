"""Textbook gate-drive, switching-loss and junction-temperature relations with worked numbers."""

# Physics functions are typed with float aliases but are called here with pint quantities
# on purpose, so attribute and argument checks on those calls are switched off.
# mypy: disable-error-code="attr-defined, arg-type, type-arg"

from __future__ import annotations

import math

import pint
import pytest

from drivelint.physics.switching import (
    conduction_loss,
    current_rise_charge,
    edge_fraction,
    gate_current_turn_off,
    gate_current_turn_on,
    gate_drive_power,
    heatsink_resistance_needed,
    junction_temperature,
    rds_on_at_temperature,
    resistor_share,
    shoot_through_current,
    switching_loss,
    transition_time,
    turn_off_time,
)


def test_gate_currents_and_transition_time(ureg: pint.UnitRegistry) -> None:
    # Plateau currents (common practice): (12 − 5) V / 3.5 Ω = 2 A on, 5 V / 2.5 Ω = 2 A off;
    # 20 nC at 2 A takes t = Q/I = 10 ns.
    u = ureg
    i_on = gate_current_turn_on(12 * u.V, 5 * u.V, 3.5 * u.ohm)
    i_off = gate_current_turn_off(5 * u.V, 2.5 * u.ohm)
    assert i_on.check("[current]") and i_on.to("A").magnitude == pytest.approx(2.0)
    assert i_off.check("[current]") and i_off.to("A").magnitude == pytest.approx(2.0)
    t = transition_time(20 * u.nC, i_on)
    assert t.check("[time]") and t.to("ns").magnitude == pytest.approx(10.0)
    assert gate_current_turn_on(12.0, 5.0, 3.5) == pytest.approx(2.0)
    # A −5 V turn-off bias adds to the plateau: 10 V / 2.5 Ω = 4 A.
    assert gate_current_turn_off(5.0, 2.5, v_off=-5.0) == pytest.approx(4.0)
    assert transition_time(20e-9, 2.0) == pytest.approx(10e-9)


def test_switching_loss_textbook(ureg: pint.UnitRegistry) -> None:
    # Erickson & Maksimović, Fundamentals of Power Electronics: P = ½·V·I·(t_r + t_f)·f.
    # 48 V, 10 A, 50 ns + 50 ns, 100 kHz: ½·48·10·100e-9·1e5 = 2.4 W.
    u = ureg
    p = switching_loss(48 * u.V, 10 * u.A, 50 * u.ns, 50 * u.ns, 100 * u.kHz)
    assert p.check("[power]") and p.to("W").magnitude == pytest.approx(2.4)
    assert switching_loss(48.0, 10.0, 50e-9, 50e-9, 100e3) == pytest.approx(2.4)


def test_conduction_loss(ureg: pint.UnitRegistry) -> None:
    # I²·R·D: (10 A)²·10 mΩ·0.5 = 0.5 W.
    p = conduction_loss(10 * ureg.A, 10 * ureg.mohm, 0.5)
    assert p.check("[power]") and p.to("W").magnitude == pytest.approx(0.5)
    assert conduction_loss(10.0, 0.010, 0.5) == pytest.approx(0.5)


def test_junction_temperature(ureg: pint.UnitRegistry) -> None:
    # T_j = T_a + P·R_thJA (steady-state thermal Ohm's law, standard texts):
    # 25 °C + (2.4 + 0.5) W · 40 K/W = 141 °C.
    u = ureg
    t = junction_temperature(u.Quantity(25, "degC"), 2.9 * u.W, 40 * u.K / u.W)
    assert t.check("[temperature]") and t.to("degC").magnitude == pytest.approx(141.0)
    assert junction_temperature(298.15, 2.9, 40.0) == pytest.approx(414.15)


def test_gate_drive_power_is_twice_the_rc_charging_loss(ureg: pint.UnitRegistry) -> None:
    """Charging a linear capacitor C to V through any resistance loses ½·C·V² in it, and
    discharging loses the other ½·C·V² (textbook RC energy relation): with Q = C·V the two
    edges together are Q·V per cycle, half in each edge's path."""
    u = ureg
    c, v, f = 5e-9, 12.0, 100e3
    p_gate = gate_drive_power(c * v, v, f)
    assert p_gate == pytest.approx(c * v * v * f)
    per_edge = 0.5 * c * v * v * f
    assert resistor_share(p_gate / 2, 4.7, 4.7) == pytest.approx(per_edge)
    # in series with the driver's 2 Ω the resistor takes its proportion of the edge
    assert resistor_share(p_gate / 2, 4.7, 6.7) == pytest.approx(per_edge * 4.7 / 6.7)
    got = gate_drive_power(60 * u.nC, 12 * u.V, 100 * u.kHz)
    assert got.to("W").magnitude == pytest.approx(0.072)
    share = resistor_share(36 * u.mW, 4.7 * u.ohm, 6.7 * u.ohm)
    assert share.to("mW").magnitude == pytest.approx(36 * 4.7 / 6.7)


def test_turn_off_time_worked_example(ureg: pint.UnitRegistry) -> None:
    # The gate-charge turn-off intervals (standard gate-drive texts): 10 Ω and 2 nF decay
    # from 12 V to a 4 V plateau, t1 = 20 ns·ln 3 = 21.97 ns; 10 nC at 4 V/10 Ω = 0.4 A,
    # t2 = 25 ns; then to a 3 V threshold, t3 = 20 ns·ln(4/3) = 5.75 ns: 52.73 ns.
    t = turn_off_time(10.0, 2e-9, 12.0, 4.0, 10e-9, 3.0)
    assert t == pytest.approx(20e-9 * math.log(3) + 25e-9 + 20e-9 * math.log(4 / 3))
    assert t == pytest.approx(52.73e-9, rel=1e-3)
    # without a threshold the current fall is left out
    assert turn_off_time(10.0, 2e-9, 12.0, 4.0, 10e-9) == pytest.approx(46.97e-9, rel=1e-3)
    # an ideal driver and no resistance: nothing to wait for
    assert turn_off_time(0.0, 2e-9, 12.0, 4.0, 10e-9, 3.0) == 0.0
    u = ureg
    q = turn_off_time(10 * u.ohm, 2 * u.nF, 12 * u.V, 4 * u.V, 10 * u.nC, 3 * u.V)
    assert q.check("[time]") and q.to("ns").magnitude == pytest.approx(52.73, rel=1e-3)


def test_shoot_through_bound(ureg: pint.UnitRegistry) -> None:
    # Ohm's law: 60 V over 18 mΩ + 18 mΩ + 4 mΩ = 1.5 kA.
    assert shoot_through_current(60.0, 0.018, 0.018, 0.004) == pytest.approx(1500.0)
    u = ureg
    i = shoot_through_current(60 * u.V, 18 * u.mohm, 18 * u.mohm, 4 * u.mohm)
    assert i.check("[current]") and i.to("A").magnitude == pytest.approx(1500.0)


def test_edge_fraction_and_current_rise_charge(ureg: pint.UnitRegistry) -> None:
    # (t_on + t_off)·f: 100 ns + 150 ns at 80 kHz = 2 % of the period (numbers of our own)
    u = ureg
    share = edge_fraction(100 * u.ns, 150 * u.ns, 80 * u.kHz)
    assert share.to("dimensionless").magnitude == pytest.approx(0.02)
    assert edge_fraction(100e-9, 150e-9, 80e3) == pytest.approx(0.02)
    # Q_gs2 ≈ ½·Q_gs (common practice): 12 nC → 6 nC
    assert current_rise_charge(12 * u.nC).to("nC").magnitude == pytest.approx(6.0)


def test_rds_on_at_temperature(ureg: pint.UnitRegistry) -> None:
    # 0.7 %/K above 25 °C: 1.7× at 125 °C, inside the usual 1.5–2× (common practice)
    u = ureg
    hot = rds_on_at_temperature(10 * u.mohm, u.Quantity(125, "degC"), 0.007 / u.K)
    assert hot.to("mohm").magnitude == pytest.approx(17.0)
    assert rds_on_at_temperature(0.010, 398.15, 0.007) == pytest.approx(0.017)
    # never negative, far below the rating temperature
    assert rds_on_at_temperature(0.010, 0.0, 0.007) == 0.0


def test_heatsink_resistance_needed(ureg: pint.UnitRegistry) -> None:
    # the series thermal path (textbook): 110 °C allowed, 40 °C ambient, 5 W, R_thJC 2 K/W
    # → (110 − 40)/5 − 2 = 12 K/W from case to ambient (numbers of our own)
    u = ureg
    r = heatsink_resistance_needed(
        u.Quantity(110, "degC"), u.Quantity(40, "degC"), 5 * u.W, 2 * u.K / u.W
    )
    assert r.to("K/W").magnitude == pytest.approx(12.0)
    assert heatsink_resistance_needed(383.15, 313.15, 5.0, 2.0) == pytest.approx(12.0)


def test_buck_switching_and_conduction_worked_through() -> None:
    """The gate-charge intervals and the overlap loss worked through by hand for a
    100 kHz, 48 V, 5 A hard-switched leg (textbook relations: Erickson & Maksimović, P_sw
    and I²·R·D; the gate-charge intervals of power-MOSFET application notes, from memory;
    numbers of our own): a 12 V drive through 10 Ω total, plateau 5 V, V_th 3 V,
    Q_gs2 = 4 nC, Q_gd = 14 nC."""
    i_on = gate_current_turn_on(12.0, 5.0, 10.0)  # 0.7 A
    i_rise = gate_current_turn_on(12.0, 4.0, 10.0)  # 0.8 A, mid-way from V_th to V_pl
    i_off = gate_current_turn_off(5.0, 10.0)  # 0.5 A
    i_fall = gate_current_turn_off(4.0, 10.0)  # 0.4 A
    t_on = transition_time(4e-9, i_rise) + transition_time(14e-9, i_on)  # 5 + 20 ns
    t_off = transition_time(14e-9, i_off) + transition_time(4e-9, i_fall)  # 28 + 10 ns
    assert t_on == pytest.approx(25e-9) and t_off == pytest.approx(38e-9)
    # ½·48·5·63 ns·100 kHz = 0.756 W; (5 A)²·20 mΩ·0.25 = 0.125 W
    p = switching_loss(48.0, 5.0, t_on, t_off, 100e3) + conduction_loss(5.0, 0.020, 0.25)
    assert p == pytest.approx(0.881)
    # 62 K/W from 27 °C: 27 + 0.881·62 = 81.6 °C
    assert junction_temperature(300.15, p, 62.0) - 273.15 == pytest.approx(81.62, abs=0.01)


def test_junction_temperature_with_self_heating(ureg: pint.UnitRegistry) -> None:
    # 1 W switching + 0.5 W conduction at 25 °C, 50 K/W, 0.7 %/K, from 25 °C: the gain is
    # 50 × 0.5 × 0.007 = 0.175, and T_j − 25 °C = 50 × 1.5/(1 − 0.175) = 90.9 K. The fixed
    # point holds: 25 °C + 50 × (1 + 0.5 × (1 + 0.007 × 90.9)) = 115.9 °C.
    from drivelint.physics.switching import junction_temperature_self_heating as heating

    t = heating(298.15, 1.0, 0.5, 50.0, 0.007)
    assert t - 298.15 == pytest.approx(75.0 / 0.825)
    assert t == pytest.approx(298.15 + 50 * (1 + 0.5 * (1 + 0.007 * (t - 298.15))))
    u = ureg
    q = heating(u.Quantity(25, "degC"), 1 * u.W, 0.5 * u.W, 50 * u.K / u.W, 0.007 / u.K)
    assert q.to("K").magnitude == pytest.approx(t)
    # each kelvin bringing a kelvin back: no steady temperature
    assert math.isinf(heating(298.15, 0.0, 2.0, 100.0, 0.005))
