"""Tolerance corners as plain functions, on floats and on pint quantities.

Sources: EIA-198 (class-2 ceramic temperature codes, tolerance letters also in IEC 60062);
the doubling of junction leakage about every 10 K (common practice); supply and gate-charge
spreads (common practice).
"""

# Physics functions are typed with float aliases but are called here with pint quantities
# on purpose, so attribute and argument checks on those calls are switched off.
# mypy: disable-error-code="attr-defined, arg-type, type-arg"

from __future__ import annotations

import pint
import pytest

from drivelint.physics.tolerance import (
    capacitance_high,
    capacitance_low,
    charge_with_spread,
    leakage_at,
    supply_high,
    supply_low,
    temperature_change,
)


def test_class2_temperature_codes() -> None:
    # EIA-198: X7R and X5R ±15 %, X6S and X7S ±22 %, Y5V +22/−82 %, Z5U +22/−56 %;
    # C0G (class 1) 0 ± 30 ppm/K, taken as no change.
    assert temperature_change("X7R") == (0.15, 0.15)
    assert temperature_change("x5r") == (0.15, 0.15)
    assert temperature_change("X7S") == (0.22, 0.22)
    assert temperature_change("Y5V") == (0.82, 0.22)
    assert temperature_change("Z5U") == (0.56, 0.22)
    assert temperature_change("C0G") == (0.0, 0.0)
    with pytest.raises(KeyError):
        temperature_change("X9Q")


def test_a_k_tolerance_x7r_capacitor_at_its_corners(ureg: pint.UnitRegistry) -> None:
    # 470 nF, K (±10 %), X7R (±15 %): 470 nF · 0.9 · 0.85 = 359.55 nF at its lowest,
    # 470 nF · 1.1 · 1.15 = 594.55 nF at its highest.
    assert capacitance_low(470e-9, 0.10, 0.15) == pytest.approx(359.55e-9)
    assert capacitance_high(470e-9, 0.10, 0.15) == pytest.approx(594.55e-9)
    low = capacitance_low(470 * ureg.nF, 0.10, 0.15)
    assert low.to("nF").magnitude == pytest.approx(359.55)
    # a DC bias that leaves 60 % of the capacitance applies at both corners
    assert capacitance_low(1e-6, 0.1, 0.0, 0.6) == pytest.approx(0.54e-6)
    assert capacitance_high(1e-6, 0.1, 0.0, 0.6) == pytest.approx(0.66e-6)
    with pytest.raises(ValueError):
        capacitance_low(1e-6, 1.0)
    with pytest.raises(ValueError):
        capacitance_low(1e-6, 0.1, 0.0, 1.5)


def test_leakage_doubles_every_ten_kelvin(ureg: pint.UnitRegistry) -> None:
    # Common practice: I_R doubles about every 10 K. From 25 °C to 85 °C is 60 K: 2^6 = 64.
    assert leakage_at(1e-6, 358.15) == pytest.approx(64e-6)
    assert leakage_at(1e-6, 298.15) == pytest.approx(1e-6)
    assert leakage_at(1e-6, 288.15) == pytest.approx(0.5e-6)
    hot = leakage_at(100 * ureg.uA, 358.15 * ureg.K, 298.15 * ureg.K, 10 * ureg.K)
    assert hot.to("mA").magnitude == pytest.approx(6.4)


def test_supply_tolerance_is_taken_from_the_rail_it_is_stacked_on(
    ureg: pint.UnitRegistry,
) -> None:
    # A 12 V gate rail stacked on −45 V (VCC = −33 V) at ±5 %: 12 V · 0.95 above −45 V.
    assert supply_low(-33.0, -45.0, 0.05) == pytest.approx(-33.6)
    assert supply_high(-33.0, -45.0, 0.05) == pytest.approx(-32.4)
    assert supply_low(12.0, 0.0, 0.05) == pytest.approx(11.4)
    assert supply_high(12 * ureg.V, 0 * ureg.V, 0.05).to("V").magnitude == pytest.approx(12.6)


def test_gate_charge_spread(ureg: pint.UnitRegistry) -> None:
    assert charge_with_spread(45e-9, 0.2) == pytest.approx(54e-9)
    assert charge_with_spread(45 * ureg.nC, 0.2).to("nC").magnitude == pytest.approx(54)
    with pytest.raises(ValueError):
        charge_with_spread(45e-9, -0.1)
