"""Textbook gate-drive, switching-loss and junction-temperature relations with worked numbers."""

# Physics functions are typed with float aliases but are called here with pint quantities
# on purpose, so attribute and argument checks on those calls are switched off.
# mypy: disable-error-code="attr-defined, arg-type, type-arg"

from __future__ import annotations

import pint
import pytest

from drivelint.physics.switching import (
    conduction_loss,
    gate_current_turn_off,
    gate_current_turn_on,
    gate_drive_power,
    junction_temperature,
    resistor_share,
    switching_loss,
    transition_time,
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
