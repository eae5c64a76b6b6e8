"""Bootstrap diode relations against the charge-control model, CODATA constants and ngspice."""

# Physics functions are typed with float aliases but are called here with pint quantities
# on purpose, so attribute and argument checks on those calls are switched off.
# mypy: disable-error-code="attr-defined, arg-type, type-arg"

from __future__ import annotations

import math
from collections.abc import Callable

import pint
import pytest

from drivelint.physics.diode import (
    BOLTZMANN,
    ELEMENTARY_CHARGE,
    diode_reverse_voltage,
    forward_voltage,
    recovery_charge,
    reverse_leakage,
    storage_time,
    thermal_voltage,
)

# The ``run_ngspice`` fixture of conftest.py: (circuit, analysis, vectors) -> traces by name.
NgspiceRunner = Callable[[str, str, list[str]], dict[str, list[float]]]


def test_codata_constants() -> None:
    # CODATA 2018 / SI 2019: k and e are exact by definition.
    assert BOLTZMANN == 1.380649e-23
    assert ELEMENTARY_CHARGE == 1.602176634e-19


def test_reverse_voltage_on_a_24_v_bus(ureg: pint.UnitRegistry) -> None:
    # Common practice: with 12 V across the hold capacitor on a 24 V bus the cathode rides
    # at about 36 V while the anode sits on the 12 V rail: 24 V reverse, plus any ringing.
    u = ureg
    v = diode_reverse_voltage(24 * u.V, 12 * u.V, 12 * u.V)
    assert v.check("[electric_potential]") and v.to("V").magnitude == pytest.approx(24.0)
    assert diode_reverse_voltage(24.0, 12.0, 12.0, ringing_margin=5.0) == pytest.approx(29.0)
    # 400 V bus, 15 V aux, boot charged to 14.3 V: 399.3 V.
    assert diode_reverse_voltage(400.0, 14.3, 15.0) == pytest.approx(399.3)


def test_recovery_charge_charge_control(ureg: pint.UnitRegistry) -> None:
    # Lauritzen and Ma, IEEE Trans. Power Electronics 1991: stored charge τ·I_F.
    # 100 ns × 2 A = 200 nC.
    q = recovery_charge(100 * ureg.ns, 2 * ureg.A)
    assert q.check("[charge]") and q.to("nC").magnitude == pytest.approx(200.0)
    assert recovery_charge(100e-9, 2.0) == pytest.approx(200e-9)


def test_storage_time_charge_control(ureg: pint.UnitRegistry) -> None:
    # t_s = TT·ln(1 + I_F/I_R) (charge-control model, standard semiconductor texts):
    # equal forward and reverse currents give TT·ln 2; I_R = 4·I_F gives TT·ln 1.25.
    t = storage_time(1 * ureg.us, 10 * ureg.mA, 10 * ureg.mA)
    assert t.check("[time]") and t.to("ns").magnitude == pytest.approx(1000 * math.log(2))
    assert storage_time(1e-6, 1.0, 4.0) == pytest.approx(1e-6 * math.log(1.25))
    assert storage_time(1e-6, 0.0, 1.0) == 0.0


def test_thermal_voltage(ureg: pint.UnitRegistry) -> None:
    # k·T/q at 300.15 K: 8.617333e-5 V/K × 300.15 K = 25.8649 mV (CODATA 2018 k and e).
    vt = thermal_voltage(300.15 * ureg.K)
    assert vt.check("[electric_potential]") and vt.to("mV").magnitude == pytest.approx(
        25.8649, rel=1e-5
    )
    assert thermal_voltage(ureg.Quantity(27, "degC").to("K")).to("mV").magnitude == (
        pytest.approx(25.8649, rel=1e-5)
    )
    assert thermal_voltage(300.15) == pytest.approx(0.0258649, rel=1e-5)


def test_forward_voltage_shockley(ureg: pint.UnitRegistry) -> None:
    # Shockley diode equation: n·V_T·ln(1 + I/I_S); 1 mA, IS = 10 fA, n = 1 at 300.15 K:
    # 25.8649 mV × ln(1 + 1e11) = 655.12 mV.
    v = forward_voltage(1 * ureg.mA, 10 * ureg.fA, 1.0)
    assert v.check("[electric_potential]")
    assert v.to("mV").magnitude == pytest.approx(25.8649 * math.log1p(1e11), rel=1e-5)
    assert forward_voltage(1e-3, 1e-14, 1.0) == pytest.approx(0.6551, abs=1e-4)
    hotter = forward_voltage(1e-3, 1e-14, 1.0, t_kelvin=400.0)
    assert hotter == pytest.approx(400 / 300.15 * forward_voltage(1e-3, 1e-14, 1.0))


def test_reverse_leakage_at_nominal_is_is(ureg: pint.UnitRegistry) -> None:
    # At the model's nominal temperature the SPICE saturation current is IS itself.
    i = reverse_leakage(1 * ureg.nA)
    assert i.check("[current]") and i.to("nA").magnitude == pytest.approx(1.0)
    assert reverse_leakage(1e-9, t_kelvin=300.15) == pytest.approx(1e-9)
    # It rises steeply with temperature.
    assert reverse_leakage(1e-9, t_kelvin=398.15) > 100 * reverse_leakage(1e-9)
    warm = reverse_leakage(1 * ureg.nA, ureg.Quantity(125, "degC"), 1.05, 0.69 * ureg.V, 2.0)
    assert warm.check("[current]")
    assert warm.to("A").magnitude == pytest.approx(reverse_leakage(1e-9, 398.15, 1.05, 0.69, 2.0))


def test_diode_against_ngspice(run_ngspice: NgspiceRunner) -> None:
    # ngspice (SPICE3 diode model): forward drop at 1 mA and 27 °C, and reverse current at
    # −5 V and 125 °C for a Schottky-like model (IS = 1 nA, N = 1.05, EG = 0.69 V, XTI = 2),
    # large enough that GMIN·5 V (5 pA) is negligible. No RS, no CJO.
    circuit = """
Iforward 0 a 1m
Dforward a 0 dm
Vreverse 0 b 5
Dreverse b 0 dm temp=125
.model dm d(is=1e-9 n=1.05 eg=0.69 xti=2 rs=0 cjo=0)
"""
    sim = run_ngspice(circuit, "op", ["v(a)", "i(vreverse)"])
    v_forward = sim["v(a)"][0]
    i_reverse = -sim["i(vreverse)"][0]
    assert v_forward == pytest.approx(forward_voltage(1e-3, 1e-9, 1.05), rel=1e-4)
    assert i_reverse == pytest.approx(reverse_leakage(1e-9, 398.15, 1.05, 0.69, 2.0), rel=1e-4)


def test_storage_time_against_ngspice(run_ngspice: NgspiceRunner) -> None:
    # ngspice: a diode with TT = 1 µs carries ≈ 10 mA from +100.5 V through 10 kΩ; at 2 µs
    # the source steps to −100 V, driving ≈ 10 mA backwards. The junction voltage crosses
    # zero when the stored charge is gone: the storage time. I_R drifts by under 1 % as the
    # junction drop (≈ 0.7 V) collapses against 100 V, which moves t_s by under 0.5 %.
    circuit = """
Vdrive in 0 PWL(0 100.5 2u 100.5 2.001u -100 6u -100)
R1 in a 10k
D1 a 0 dslow
.model dslow d(is=1e-14 n=1 tt=1u rs=0 cjo=0)
"""
    sim = run_ngspice(circuit, "tran 1n 6u", ["v(a)", "i(vdrive)"])
    times, v, i = sim["time"], sim["v(a)"], sim["i(vdrive)"]
    before = max(k for k, t in enumerate(times) if t < 1.99e-6)
    after = min(k for k, t in enumerate(times) if t > 2.01e-6)
    i_forward, i_reverse = -i[before], i[after]
    crossing = next(
        times[k] + (times[k + 1] - times[k]) * v[k] / (v[k] - v[k + 1])
        for k in range(after, len(times) - 1)
        if v[k] > 0 >= v[k + 1]
    )
    t_s = crossing - 2.0005e-6  # from the middle of the 1 ns source step
    assert t_s == pytest.approx(storage_time(1e-6, i_forward, i_reverse), rel=0.01)
