"""Physics that tracks the circuit: charge sharing, gate charge at the drive level, the
VDMOS capacitance model, the diode's drop and end-of-recharge current, the cycle map of a
bootstrap whose charge follows its voltage, and a hold time with a resistive drain.

Each check names its outside reference: textbook charge conservation and RC circuits, the
SPICE3 / ngspice diode and VDMOS models, and ngspice itself (run through the fixture of
conftest.py). Every function is run on floats and on pint quantities.
"""

# Physics functions are typed with float aliases but are called here with pint quantities
# on purpose, so attribute and argument checks on those calls are switched off.
# mypy: disable-error-code="attr-defined, arg-type, type-arg"

from __future__ import annotations

import math
from collections.abc import Callable
from pathlib import Path

import pint
import pytest

from drivelint.physics.bootstrap import (
    boot_cycle,
    boot_voltage_after,
    boot_voltage_max,
    hold_time,
    hold_time_linear,
    max_charge_resistance,
    min_off_time_linear,
    sustained_boot_voltage,
    sustained_boot_voltage_linear,
)
from drivelint.physics.diode import (
    diode_drop,
    forward_voltage,
    recharge_end_current,
    stored_charge_after_step,
    thermal_voltage,
)
from drivelint.physics.gate import (
    gate_capacitance_above_plateau,
    gate_charge_at_drive,
    shared_droop,
    vdmos_gate_charge,
    vdmos_gate_drain_capacitance,
    vdmos_gate_drain_charge,
)

NgspiceRunner = Callable[[str, str, list[str]], dict[str, list[float]]]


# ---------------------------------------------------------------- charge sharing


def test_charge_sharing_of_two_capacitors(ureg: pint.UnitRegistry) -> None:
    # Charge conservation (textbook): C1 at V0 joined to an empty C2 settles at
    # V0·C1/(C1 + C2), a droop of V0·C2/(C1 + C2). A linear gate (Q_g(V) = C2·V) is that C2.
    c1, c2, v0 = 10e-9, 8.4e-9, 12.0
    droop = shared_droop(v0, c1, c2 * v0, c2)
    assert droop == pytest.approx(v0 * c2 / (c1 + c2))
    # Never more than the capacitor held: an enormous gate takes at most all of it.
    assert shared_droop(v0, 1e-9, 1e-3, 1e-6) == v0
    u = ureg
    q = shared_droop(v0 * u.V, c1 * u.F, c2 * v0 * u.C, c2 * u.F, 0 * u.C)
    assert q.to("V").magnitude == pytest.approx(droop)


def test_charge_sharing_against_ngspice(run_ngspice: NgspiceRunner) -> None:
    # A 10 nF capacitor at 12 V switched onto an 8.4 nF one: the simulator's final voltage.
    deck = """
    C1 a 0 10n IC=12
    C2 b 0 8.4n IC=0
    S1 a b ctl 0 sw
    VCTL ctl 0 PULSE(0 1 1u 1n 1n 1 2)
    .model sw SW(VT=0.5 VH=0.1 RON=1 ROFF=1e12)
    """
    w = run_ngspice(deck, "tran 1n 3u uic", ["v(a)"])
    assert 12 - w["v(a)"][-1] == pytest.approx(
        shared_droop(12.0, 10e-9, 8.4e-9 * 12, 8.4e-9), rel=1e-3
    )


# ---------------------------------------------------------------- gate charge


def test_gate_charge_curve_through_the_rated_point(ureg: pint.UnitRegistry) -> None:
    # The equal-slopes curve passes through the datasheet point and rises by C·ΔV beyond
    # it, C = (Q_g − Q_gd)/V_qg; without Q_gd it scales in proportion.
    assert gate_charge_at_drive(45e-9, 10.0, 10.0, 7e-9) == pytest.approx(45e-9)
    assert gate_charge_at_drive(45e-9, 10.0, 12.0, 7e-9) == pytest.approx(45e-9 + 3.8e-9 * 2)
    assert gate_capacitance_above_plateau(45e-9, 10.0, 7e-9) == pytest.approx(3.8e-9)
    assert gate_charge_at_drive(45e-9, 10.0, 5.0) == pytest.approx(22.5e-9)
    u = ureg
    q = gate_charge_at_drive(45 * u.nC, 10 * u.V, 12 * u.V, 7 * u.nC)
    assert q.to("nC").magnitude == pytest.approx(52.6)
    assert gate_capacitance_above_plateau(45 * u.nC, 10 * u.V, 7 * u.nC).to("nF").magnitude == (
        pytest.approx(3.8)
    )


GATE_CHARGE_DECK = """
VDD dd 0 {vdd}
IL dd d 5
DCL d dd dclamp
.model dclamp D (IS=1n N=1 RS=1m)
M1 d g 0 nvert
IG 0 g PULSE(0 2m 1u 1n 1n 1 2)
RGG g 0 1G
.model nvert VDMOS (VTO=3.2 KP=45 CGS=2.1n CGDMAX=1.6n CGDMIN=60p A=0.4)
"""


def _charge_to(w: dict[str, list[float]], volts: float) -> float:
    """Q = I_G·t to reach ``volts`` (constant gate current, the datasheet test circuit)."""
    crossing = next(t for t, v in zip(w["time"], w["v(g)"], strict=True) if v >= volts)
    return 2e-3 * (crossing - 1e-6)


def test_vdmos_gate_charge_against_ngspice(run_ngspice: NgspiceRunner) -> None:
    # The datasheet gate-charge circuit (constant gate current, drain held by a current
    # source clamped to V_DD; common practice) on ngspice's VDMOS: the charge to reach 10 V
    # and 14 V from off with 50 V across the switch, against C_gs·V + Q_gd(V) − Q_gd(−V_DS)
    # with the VDMOS capacitance function.
    w = run_ngspice(GATE_CHARGE_DECK.format(vdd=50), "tran 5n 120u", ["v(g)"])
    for volts in (10.0, 14.0):
        expected = vdmos_gate_charge(2.1e-9, 60e-12, 1.6e-9, 0.4, volts, 50.0)
        assert _charge_to(w, volts) == pytest.approx(expected, rel=0.05)


def test_equal_slopes_curve_against_the_simulated_curve(run_ngspice: NgspiceRunner) -> None:
    # Build the datasheet-style curve from what a datasheet gives (Q_g at 10 V and Q_gd,
    # here read off the simulated curve: the charge across the plateau) and predict the
    # charge at 14 V, where the simulated curve says otherwise only by its curvature.
    w = run_ngspice(GATE_CHARGE_DECK.format(vdd=50), "tran 5n 120u", ["v(g)"])
    q10 = _charge_to(w, 10.0)
    times, volts = w["time"], w["v(g)"]
    slopes = [
        (volts[i + 1] - volts[i]) / (times[i + 1] - times[i])
        for i in range(len(times) - 1)
        if times[i] > 1e-6 and 3.0 < volts[i] < 8.0
    ]
    flat = sum(
        t1 - t0 for (t0, t1), s in zip(zip(times, times[1:]), slopes) if s < 0.05 * max(slopes)
    )
    q_gd = 2e-3 * flat
    assert q_gd > 0
    assert gate_charge_at_drive(q10, 10.0, 14.0, q_gd) == pytest.approx(
        _charge_to(w, 14.0), rel=0.1
    )


def test_vdmos_gate_drain_capacitance_limits(ureg: pint.UnitRegistry) -> None:
    # The VDMOS model's C_gd runs from CGDMIN (drain far above the gate) to CGDMAX (gate
    # above the drain), continuously through 0 V; its charge's derivative is itself.
    lo, hi, a = 60e-12, 1.6e-9, 0.4
    assert vdmos_gate_drain_capacitance(-1e4, lo, hi, a) == pytest.approx(lo, rel=1e-3)
    assert vdmos_gate_drain_capacitance(1e4, lo, hi, a) == pytest.approx(hi)
    below = vdmos_gate_drain_capacitance(-1e-9, lo, hi, a)
    above = vdmos_gate_drain_capacitance(1e-9, lo, hi, a)
    assert below == pytest.approx(above)
    for v in (-40.0, -3.0, 0.5, 7.0):
        h = 1e-4
        numeric = (
            vdmos_gate_drain_charge(v + h, lo, hi, a) - vdmos_gate_drain_charge(v - h, lo, hi, a)
        ) / (2 * h)
        assert numeric == pytest.approx(vdmos_gate_drain_capacitance(v, lo, hi, a), rel=1e-5)
    u = ureg
    q = vdmos_gate_charge(2.1 * u.nF, 60 * u.pF, 1.6 * u.nF, 0.4 / u.V, 10 * u.V, 50 * u.V)
    assert q.check("[charge]")


# ---------------------------------------------------------------- the diode


def test_diode_drop_against_the_operating_point(run_ngspice: NgspiceRunner) -> None:
    # ngspice's DC operating point of a diode at a fixed current, at 27 °C and at 85 °C
    # (SPICE3 diode: Shockley law with IS, N, RS and the IS temperature law).
    deck = """
    I1 0 a DC 10m
    D1 a 0 dfast
    .model dfast D(IS=2n N=1.6 RS=0.25 BV=100)
    """
    for celsius in (27.0, 85.0):
        w = run_ngspice(deck + f".temp {celsius:g}\n", "op", ["v(a)"])
        expected = diode_drop(10e-3, 2e-9, 1.6, 0.25, celsius + 273.15)
        assert w["v(a)"][0] == pytest.approx(expected, abs=2e-3)


def test_recharge_end_current_without_transit_time(ureg: pint.UnitRegistry) -> None:
    # The diode charging a capacitor (Shockley law into C): with no TT the current left at
    # the end is C·n·V_T·(1 − exp(−Q/(C·n·V_T)))/t — the mean Q/t for a shallow recharge,
    # C·n·V_T/t for a deep one (derived in the function's docstring).
    c, n_vt, t = 470e-9, 1.6 * thermal_voltage(300.15), 4e-6
    for q in (1e-12, 40e-9, 2e-6):
        closed = c * n_vt * (-math.expm1(-q / (c * n_vt))) / t
        assert recharge_end_current(c, n_vt, 0.0, q, t) == pytest.approx(closed, rel=1e-6)
    assert recharge_end_current(c, n_vt, 0.0, 1e-12, t) == pytest.approx(1e-12 / t, rel=1e-3)
    assert recharge_end_current(c, n_vt, 0.0, 2e-6, t) == pytest.approx(c * n_vt / t, rel=1e-3)


def test_recharge_end_current_against_ngspice(run_ngspice: NgspiceRunner) -> None:
    # An ideal 12 V source charging 470 nF through a fast diode (TT 20 ns), from a start
    # that leaves the capacitor short of the source by a diode drop at 1 A and 0.2 V more:
    # the current still flowing after 4 µs, C·dV/dt at the end of the run, against the law
    # given the charge delivered meanwhile (the capacitor's rise; with so small a TT the
    # diffusion charge left in the diode is negligible).
    deck = """
    VS s 0 DC 12
    D1 s c dx
    C1 c 0 470n IC={start}
    .model dx D(IS=2n N=1.6 TT=20n)
    """
    n_vt = 1.6 * thermal_voltage(300.15)
    start = 12.0 - forward_voltage(1.0, 2e-9, 1.6) - 0.2
    w = run_ngspice(deck.format(start=start), "tran 1n 4u uic", ["v(c)"])
    times, volts = w["time"], w["v(c)"]
    back = next(i for i in range(len(times) - 1, 0, -1) if times[i] <= times[-1] - 0.2e-6)
    current = 470e-9 * (volts[-1] - volts[back]) / (times[-1] - times[back])
    # the current 0.1 µs before the end (the middle of the differencing window)
    delivered = 470e-9 * (volts[-1] - start)
    expected = recharge_end_current(470e-9, n_vt, 20e-9, delivered, 3.9e-6)
    assert current == pytest.approx(expected, rel=0.1)


# ---------------------------------------------------------------- the cycle map


def test_linear_cycle_map_reduces_to_the_fixed_charge_formula(ureg: pint.UnitRegistry) -> None:
    fixed = sustained_boot_voltage(11.5, 100e-9, 470e-9, 22.0, 0.4e-6)
    linear = sustained_boot_voltage_linear(11.5, 100e-9, 0.0, 470e-9, 22.0, 0.4e-6)
    assert linear.valley == pytest.approx(fixed.valley)
    assert linear.peak == pytest.approx(fixed.peak)
    u = ureg
    q = sustained_boot_voltage_linear(
        11.5 * u.V, 100 * u.nC, 8 * u.nF, 470 * u.nF, 22 * u.ohm, 0.4 * u.us, 3 * u.nF
    )
    assert q.valley.check("[electric_potential]")


def test_linear_cycle_map_fixed_point_against_iteration() -> None:
    # The closed form against running the map itself (textbook RC recharge each off-time,
    # V(t) = V_t − (V_t − V_0)·exp(−t/RC), and a charge that follows the voltage).
    v_t, q_t, k, c, r, t, c_g = 11.5, 116e-9, 8.2e-9, 470e-9, 22.1, 0.19e-6, 3.2e-9
    peak = v_t
    for _ in range(20_000):
        step = boot_cycle(peak, v_t, q_t, k, c, r, t, c_g)
        peak = step.peak
    closed = sustained_boot_voltage_linear(v_t, q_t, k, c, r, t, c_g)
    assert step.valley == pytest.approx(closed.valley, abs=1e-9)
    assert peak == pytest.approx(closed.peak, abs=1e-9)
    # A charge that falls with the voltage settles higher than a fixed one.
    assert closed.valley > sustained_boot_voltage(v_t, q_t, c + c_g, r * c / (c + c_g), t).valley


def test_boundaries_of_the_linear_map() -> None:
    v_t, v_min, q_t, k, c, c_g = 11.5, 10.0, 60e-9, 4e-9, 470e-9, 3e-9
    t_min = min_off_time_linear(v_t, v_min, q_t, k, c, 22.0, c_g)
    at = sustained_boot_voltage_linear(v_t, q_t, k, c, 22.0, t_min, c_g)
    assert at.valley == pytest.approx(v_min, abs=1e-6)
    r_max = max_charge_resistance(v_t, v_min, q_t, k, c, 0.4e-6, c_g)
    edge = sustained_boot_voltage_linear(v_t, q_t, k, c, r_max, 0.4e-6, c_g)
    assert edge.valley == pytest.approx(v_min, abs=1e-6)
    assert math.isinf(min_off_time_linear(v_t, v_min, 1e-6, k, c, 22.0, c_g))
    assert min_off_time_linear(v_t, v_min, q_t, k, c, 0.0, c_g) == 0


# ---------------------------------------------------------------- hold time and boot maximum


def test_hold_time_with_a_resistive_drain_against_the_rc_discharge(ureg: pint.UnitRegistry) -> None:
    # A drain I_q + V/R (textbook RC discharge, boot_voltage_after): the time to V_min.
    c, v0, v_min, qg, i_q, r = 470e-9, 12.0, 10.0, 30e-9, 200e-6, 47e3
    t = hold_time_linear(c, v0, v_min, qg, i_q + v0 / r, 1 / r)
    assert boot_voltage_after(t, v0, c, qg, i_q, r) == pytest.approx(v_min, abs=1e-9)
    # With no resistive part it is the published constant-current relation.
    assert hold_time_linear(c, v0, v_min, qg, i_q, 0.0) == pytest.approx(hold_time(c, 2.0, qg, i_q))
    u = ureg
    tq = hold_time_linear(
        c * u.F, v0 * u.V, v_min * u.V, qg * u.C, (i_q + v0 / r) * u.A, (1 / r) * u.A / u.V
    )
    assert tq.to("s").magnitude == pytest.approx(t)


def test_boot_voltage_maximum(ureg: pint.UnitRegistry) -> None:
    # A split rail: the capacitor charges from the negative rail the low side returns to;
    # an undershoot of the node below it charges it that much higher.
    assert boot_voltage_max(-33.0, 0.7, -45.0) == pytest.approx(11.3)
    assert boot_voltage_max(12.0, 0.7, 0.0, 2.0) == pytest.approx(13.3)
    u = ureg
    assert boot_voltage_max(12 * u.V, 0.7 * u.V, 0 * u.V, 2 * u.V).to("V").magnitude == (
        pytest.approx(13.3)
    )


def test_stored_charge_after_a_step_against_ngspice(tmp_path: Path) -> None:
    # A slow diode (TT 4 µs, RS 0.05 Ω) keeping 100 nF topped up from 5 V: the source
    # steps 0.6 V higher for 30 ns (the node under the capacitor dropping in a dead time),
    # then falls to 0 V; the charge that flows back through the diode is what it stored
    # (SPICE3 diode: diffusion charge TT·I; no junction capacitance on this card).
    from simulator import run_transient

    deck = """stored charge after a step
VS s 0 PWL(0 5 20u 5 20.0001u 5.6 20.03u 5.6 20.0301u 0)
D1 s c dslow
C1 c 0 100n IC=4.2
R1 c 0 1k
.model dslow D(IS=10n N=1.9 RS=0.05 TT=4u)
.tran 1n 21u uic
.end
"""
    saves = ["@d1[id]"]
    w = run_transient(deck, ["v(c)", "@d1[id]"], tmp_path, saves)
    before = w.at("@d1[id]", 19.99e-6)
    # only the negative part is the recovery
    lo, hi = w.index(20.03e-6), w.index(21e-6)
    returned = -sum(
        (w.time[i + 1] - w.time[i]) * min(0.0, (w["@d1[id]"][i] + w["@d1[id]"][i + 1]) / 2)
        for i in range(lo, hi)
    )
    assert returned > 10e-9
    n_vt = 1.9 * thermal_voltage(300.15)
    expected = stored_charge_after_step(100e-9, 10e-9, n_vt, 0.05, 4e-6, before, 0.6, 30e-9)
    assert returned == pytest.approx(expected, rel=0.2)
    # without the step the stored charge is TT·I before it
    assert stored_charge_after_step(100e-9, 10e-9, n_vt, 0.05, 4e-6, before, 0.0, 30e-9) == (
        pytest.approx(4e-6 * before)
    )
