"""The gate of an off switch under a drain ramp: the RC solution and its two limits.

Sources: the first-order RC response of a node to a constant current (textbook circuit
theory); the resistive limit C_gd·(dv/dt)·R and the capacitive divider ΔV·C_gd/(C_gd + C_gs)
of dv/dt-induced turn-on in power-MOSFET and gate-driver application notes (common practice,
from memory); dV_DS/dt = I_g/C_gd on the Miller plateau (Vishay Siliconix AN608A, from
memory; the gate-charge description of MOSFET switching in standard texts).
"""

# Physics functions are typed with float aliases but are called here with pint quantities
# on purpose, so attribute and argument checks on those calls are switched off.
# mypy: disable-error-code="attr-defined, arg-type, type-arg, operator"

from __future__ import annotations

import math

import pint
import pytest

from drivelint.physics import dvdt
from drivelint.physics.preferred import previous_preferred


def test_rc_solution_by_hand() -> None:
    # C_gd 100 pF, C_gs 1.9 nF, R 10 Ω, 10 V/ns for 4 ns: τ = 10·2 nF = 20 ns,
    # V = 100p·1e10·10·(1 − e^−0.2) = 10 V × 0.18127 = 1.8127 V.
    v = dvdt.induced_gate_voltage(100e-12, 1.9e-9, 10.0, 1e10, 4e-9)
    assert v == pytest.approx(10.0 * (1 - math.exp(-0.2)), rel=1e-12)
    assert dvdt.edge_time(40.0, 1e10) == pytest.approx(4e-9)
    assert dvdt.peak_induced_voltage(100e-12, 1.9e-9, 10.0, 1e10, 40.0) == pytest.approx(v)


def test_reduces_to_the_resistive_limit_for_a_long_edge() -> None:
    # t_edge ≫ τ: V → C_gd·(dv/dt)·R (2 Ω, τ = 4 ns, edge 400 ns at 0.1 V/ns)
    c_gd, c_gs, r, rate = 100e-12, 1.9e-9, 2.0, 1e8
    long = dvdt.peak_induced_voltage(c_gd, c_gs, r, rate, 40.0)
    assert long == pytest.approx(dvdt.resistive_limit(c_gd, r, rate), rel=1e-9)
    assert dvdt.resistive_limit(c_gd, r, rate) == pytest.approx(0.02)


def test_reduces_to_the_divider_for_a_weak_hold() -> None:
    # τ ≫ t_edge: V → ΔV·C_gd/(C_gd + C_gs) = 40·0.1/2 = 2 V; an open gate is exactly that
    c_gd, c_gs, rate, swing = 100e-12, 1.9e-9, 1e10, 40.0
    weak = dvdt.peak_induced_voltage(c_gd, c_gs, 1e6, rate, swing)
    assert weak == pytest.approx(dvdt.divider_limit(c_gd, c_gs, swing), rel=1e-3)
    assert dvdt.peak_induced_voltage(c_gd, c_gs, math.inf, rate, swing) == pytest.approx(2.0)
    assert dvdt.peak_induced_voltage(c_gd, c_gs, 0.0, rate, swing) == 0.0


@pytest.mark.parametrize("r", [0.5, 3.0, 10.0, 47.0, 220.0])
def test_never_above_either_limit(r: float) -> None:
    c_gd, c_gs, rate, swing = 150e-12, 2e-9, 2.5e10, 48.0
    peak = dvdt.peak_induced_voltage(c_gd, c_gs, r, rate, swing)
    assert peak <= dvdt.resistive_limit(c_gd, r, rate)
    assert peak <= dvdt.divider_limit(c_gd, c_gs, swing)


def test_plateau_slew_rate_and_charge_equivalent() -> None:
    # (12 − 4) V / 2 Ω = 4 A on the plateau into 200 pF: 20 V/ns
    assert dvdt.plateau_slew_rate(4.0, 200e-12) == pytest.approx(2e10)
    assert dvdt.charge_equivalent_capacitance(12e-9, 48.0) == pytest.approx(250e-12)


def test_largest_resistance_and_capacitor_meet_the_limit() -> None:
    c_gd, c_gs, rate, swing, allowed = 150e-12, 2e-9, 2.5e10, 48.0, 2.5
    r = dvdt.largest_off_resistance(c_gd, c_gs, rate, swing, allowed)
    assert dvdt.peak_induced_voltage(c_gd, c_gs, r, rate, swing) == pytest.approx(allowed, 1e-6)
    assert dvdt.largest_off_resistance(c_gd, c_gs, rate, swing, 5.0) == math.inf
    assert dvdt.largest_off_resistance(c_gd, c_gs, rate, swing, 0.0) == 0.0
    c = dvdt.gate_source_capacitance_needed(c_gd, c_gs, 100.0, rate, swing, allowed)
    assert c is not None and c > 0
    assert dvdt.peak_induced_voltage(c_gd, c_gs + c, 100.0, rate, swing) == pytest.approx(
        allowed, 1e-6
    )
    assert dvdt.gate_source_capacitance_needed(c_gd, c_gs, 1.0, rate, swing, allowed) == 0.0


def test_on_quantities(ureg: pint.UnitRegistry) -> None:
    u = ureg
    v = dvdt.induced_gate_voltage(100 * u.pF, 1.9 * u.nF, 10 * u.ohm, 10 * u.V / u.ns, 4 * u.ns)
    assert v.check("[electric_potential]")
    assert v.to("V").magnitude == pytest.approx(10.0 * (1 - math.exp(-0.2)))
    rate = dvdt.plateau_slew_rate(4 * u.A, 200 * u.pF)
    assert rate.to("V/ns").magnitude == pytest.approx(20.0)
    assert dvdt.edge_time(40 * u.V, rate).to("ns").magnitude == pytest.approx(2.0)
    r = dvdt.largest_off_resistance(150 * u.pF, 2 * u.nF, rate, 48 * u.V, 2.5 * u.V)
    assert r.check("[resistance]")
    c = dvdt.gate_source_capacitance_needed(
        150 * u.pF, 2 * u.nF, 100 * u.ohm, rate, 48 * u.V, 2.5 * u.V
    )
    assert c is not None and c.check("[capacitance]")
    limit = dvdt.divider_limit(100 * u.pF, 1.9 * u.nF, 40 * u.V)
    assert limit.to("V").magnitude == pytest.approx(2.0)


def test_previous_preferred() -> None:
    # IEC 60063 E12: the largest value at or below
    assert previous_preferred(1.44) == 1.2
    assert previous_preferred(4.7) == 4.7
    assert previous_preferred(0.99) == 0.82
    assert previous_preferred(120.5) == 120.0


def test_load_current_at_edges_textbook_buck(ureg: pint.UnitRegistry) -> None:
    # Erickson & Maksimović, steady state: 48 V at D = 0.25 into 22 µH and 3 Ω at 100 kHz:
    # V_avg 12 V, I_avg 4 A, ΔI = 36 V·0.25/(100 kHz·22 µH) = 4.09 A: 1.95 A and 6.05 A
    low, high = dvdt.load_current_at_edges(48.0, 0.0, 0.25, 100e3, 22e-6, 0.0, 1 / 3)
    assert low == pytest.approx(4.0 - 4.0909 / 2, rel=1e-4)
    assert high == pytest.approx(4.0 + 4.0909 / 2, rel=1e-4)
    # a half bridge at 50 % into an RL load to its midpoint: no average, ± half the ripple
    low, high = dvdt.load_current_at_edges(400.0, 0.0, 0.5, 60e3, 2e-3, 200.0, 1 / 40)
    assert low == pytest.approx(-high) and high == pytest.approx(200 * 0.5 / (60e3 * 2e-3) / 2)
    u = ureg
    low_q, high_q = dvdt.load_current_at_edges(
        48 * u.V, 0 * u.V, 0.25, 100 * u.kHz, 22 * u.uH, 0 * u.V, 1 / (3 * u.ohm)
    )
    assert low_q.to("A").magnitude == pytest.approx(4.0 - 4.0909 / 2, rel=1e-4)
    assert high_q.check("[current]")
