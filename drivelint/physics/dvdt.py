"""Switch-node dv/dt coupled through C_gd into the gate of the switch that is off.

While one switch of a leg turns on, the switch node slews and the other switch's drain–source
voltage changes at dv/dt. Its gate–drain capacitance pushes a current C_gd·dv/dt into the gate
node, which the off-path resistance (driver sink, gate resistors, the internal gate
resistance) and C_gs must absorb. The gate node is a first-order RC circuit driven by that
current:

    (C_gs + C_gd)·dV/dt + V/R = C_gd·dv/dt

so V(t) = C_gd·(dv/dt)·R·(1 − exp(−t/(R·(C_gs + C_gd)))) during a ramp that starts with the
gate held at its off level (textbook RC step response to a constant current). Its two limits,
the resistive C_gd·dv/dt·R and the capacitive divider ΔV·C_gd/(C_gd + C_gs), are the ones
power-MOSFET and gate-driver application notes give for dv/dt-induced turn-on (common
practice; from memory).
"""

from __future__ import annotations

import math
from typing import Any, cast

from drivelint.physics._units import (
    Amps,
    Farads,
    Ohms,
    Seconds,
    Volts,
    _coerce,
    _ratio,
    _unit_of,
)

# Volts per second: a unit alias like the others in _units (a float at run time).
VoltsPerSecond = float


def edge_time(v_swing: Volts, dv_dt: VoltsPerSecond) -> Seconds:
    """How long the switch node takes to slew ``v_swing`` at a steady rate: t = ΔV/(dv/dt).

    v_swing: the swing of the switch node (the voltage the turning-on switch switches) [V];
    dv_dt: its slew rate [V/s].
    """
    return v_swing / dv_dt


def plateau_slew_rate(i_gate: Amps, c_gd: Farads) -> VoltsPerSecond:
    """dv/dt of the switch node while the turning-on switch sits on its Miller plateau: I_g/C_gd.

    On the plateau V_GS stays put, so all the gate current flows into C_gd and moves the
    drain: dV_DS/dt = I_g/C_gd (gate-charge description of MOSFET switching, standard texts;
    power-MOSFET application notes, from memory). With a C_gd that changes with V_DS, use
    the charge-equivalent value over the swing (:func:`charge_equivalent_capacitance`), so
    that ΔV/(dv/dt) is the plateau's length Q_gd/I_g.

    i_gate: gate current on the plateau [A]; c_gd: gate–drain capacitance [F].
    """
    return i_gate / c_gd


def charge_equivalent_capacitance(q_swing: float, v_swing: Volts) -> Farads:
    """The constant capacitance that takes the same charge over the swing: C = Q/ΔV [F].

    q_swing: charge that moves over the swing [C]; v_swing: the swing [V].
    """
    return q_swing / v_swing


def induced_gate_voltage(
    c_gd: Farads, c_gs: Farads, r_off: Ohms, dv_dt: VoltsPerSecond, t: Seconds
) -> Volts:
    """Gate voltage above its off level after ``t`` of a drain ramp at ``dv_dt``.

    V(t) = C_gd·(dv/dt)·R·(1 − exp(−t/τ)), τ = R·(C_gs + C_gd): the RC gate node charged by
    the Miller current C_gd·dv/dt (module docstring). ``r_off`` = 0 (a perfect hold) gives 0;
    an infinite ``r_off`` (a gate with no hold at all) gives the divider
    C_gd·(dv/dt)·t/(C_gs + C_gd).

    c_gd, c_gs: the off switch's gate–drain and gate–source capacitances [F] (C_gs with any
    capacitor across the gate); r_off: the path that holds the gate at its off level [Ω];
    dv_dt: rate of rise of its drain–source voltage [V/s]; t: time into the ramp [s].
    """
    c_total = c_gs + c_gd
    if math.isinf(_magnitude_of(r_off)):
        return c_gd * dv_dt * t / c_total
    if _magnitude_of(r_off) == 0:
        return 0.0 * dv_dt * t * c_gd / c_total
    x = _ratio(t, r_off * c_total)
    # 1 − exp(−x) without cancellation for a small x (a strong hold)
    return c_gd * dv_dt * r_off * -math.expm1(-x)


def resistive_limit(c_gd: Farads, r_off: Ohms, dv_dt: VoltsPerSecond) -> Volts:
    """V ≈ C_gd·(dv/dt)·R: the level a long edge settles at (the Miller current through R).

    c_gd: gate–drain capacitance [F]; r_off: off-path resistance [Ω]; dv_dt: [V/s].
    """
    return c_gd * dv_dt * r_off


def divider_limit(c_gd: Farads, c_gs: Farads, v_swing: Volts) -> Volts:
    """ΔV·C_gd/(C_gd + C_gs): the gate of an unheld switch, a capacitive divider of the swing.

    c_gd, c_gs: gate–drain and gate–source capacitances [F]; v_swing: the drain's swing [V].
    """
    return v_swing * c_gd / (c_gd + c_gs)


def peak_induced_voltage(
    c_gd: Farads, c_gs: Farads, r_off: Ohms, dv_dt: VoltsPerSecond, v_swing: Volts
) -> Volts:
    """The highest gate voltage of the edge, reached as it ends: V(t_edge), t_edge = ΔV/(dv/dt).

    Never above either limit: :func:`resistive_limit` (the edge long against τ) and
    :func:`divider_limit` (τ long against the edge).
    """
    return induced_gate_voltage(c_gd, c_gs, r_off, dv_dt, edge_time(v_swing, dv_dt))


def load_current_at_edges(
    v_bus: Volts,
    v_low: Volts,
    duty: float,
    f_sw: float,
    inductance: float,
    v_ref: Volts,
    conductance: float,
) -> tuple[Amps, Amps]:
    """The inductor current out of the switch node at the two edges of a leg, in steady state.

    The node is at V_bus for D of each period and at V_low for the rest, so it averages
    V_avg = D·V_bus + (1 − D)·V_low; the inductor into a load of conductance G to V_ref then
    carries I_avg = (V_avg − V_ref)·G (a load of capacitors only carries none), rising by
    ΔI = (V_bus − V_avg)·D/(f·L) while the high side conducts (textbook steady-state relations,
    Erickson & Maksimović, Fundamentals of Power Electronics). Returns (I_avg − ΔI/2,
    I_avg + ΔI/2): the current as the high side turns on (end of the off-time) and as the low
    side turns on (end of the on-time).

    v_bus, v_low: the node's two levels [V]; duty: D; f_sw: [Hz]; inductance: L [H];
    v_ref: the level the load returns to [V]; conductance: G [S].
    """
    average = duty * v_bus + (1.0 - duty) * v_low
    i_avg = (average - v_ref) * conductance
    ripple = (v_bus - average) * duty / (f_sw * inductance)
    return i_avg - ripple / 2, i_avg + ripple / 2


def largest_off_resistance(
    c_gd: Farads,
    c_gs: Farads,
    dv_dt: VoltsPerSecond,
    v_swing: Volts,
    v_allowed: Volts,
) -> Ohms:
    """The largest off-path resistance whose peak stays at or below ``v_allowed``.

    The peak rises monotonically with R (from 0 towards the divider limit), so it is found
    by bisection on a logarithmic scale; infinite when even an unheld gate stays below
    ``v_allowed`` (the divider limit), 0 when ``v_allowed`` ≤ 0.
    """
    unit_r = _unit_of(v_allowed) / (_unit_of(c_gd) * _unit_of(dv_dt))
    if _magnitude_of(v_allowed) <= 0:
        return 0.0 * unit_r
    if _ratio(divider_limit(c_gd, c_gs, v_swing), v_allowed) <= 1.0:
        return math.inf * unit_r
    # plain floats in SI from here: the result is scaled back by the unit
    cgd, cgs = _si(c_gd, "F"), _si(c_gs, "F")
    rate, swing, allowed = _si(dv_dt, "V/s"), _si(v_swing, "V"), _si(v_allowed, "V")
    t = swing / rate
    low, high = 1e-6, 1e9
    for _ in range(200):
        middle = math.sqrt(low * high)
        if induced_gate_voltage(cgd, cgs, middle, rate, t) > allowed:
            high = middle
        else:
            low = middle
        if high / low < 1 + 1e-9:
            break
    return low * _si_unit(v_allowed, "ohm")


def gate_source_capacitance_needed(
    c_gd: Farads,
    c_gs: Farads,
    r_off: Ohms,
    dv_dt: VoltsPerSecond,
    v_swing: Volts,
    v_allowed: Volts,
) -> Farads | None:
    """The extra capacitance across gate and source that brings the peak to ``v_allowed``.

    A capacitor across the gate adds to C_gs: τ grows and the peak falls towards the divider
    limit, which falls with it, so the peak decreases steadily to zero as C grows and a
    capacitance is always found (bisection). 0 when the peak is already low enough; None when
    ``v_allowed`` ≤ 0 (no capacitor can hold the gate below its off level).
    """
    if _magnitude_of(v_allowed) <= 0:
        return None
    if _ratio(peak_induced_voltage(c_gd, c_gs, r_off, dv_dt, v_swing), v_allowed) <= 1.0:
        return 0.0 * c_gs
    cgd, cgs, r = _si(c_gd, "F"), _si(c_gs, "F"), _si(r_off, "ohm")
    rate, swing, allowed = _si(dv_dt, "V/s"), _si(v_swing, "V"), _si(v_allowed, "V")
    t = swing / rate

    def peak(extra: float) -> float:
        if math.isinf(r):
            return divider_limit(cgd, cgs + extra, swing)
        return induced_gate_voltage(cgd, cgs + extra, r, rate, t)

    low, high = 0.0, max(cgs, cgd)
    while peak(high) > allowed:
        high *= 2.0
    for _ in range(200):
        middle = (low + high) / 2
        if peak(middle) > allowed:
            low = middle
        else:
            high = middle
        if high - low <= 1e-9 * high:
            break
    return high * _si_unit(c_gs, "F")


def _magnitude_of(value: float) -> float:
    if hasattr(value, "magnitude") and hasattr(value, "to"):
        return float(cast(Any, value).magnitude)
    return float(value)


def _si(value: float, unit: str) -> float:
    if hasattr(value, "units") and hasattr(value, "to"):
        return float(cast(Any, value).to(unit).magnitude)
    return float(value)


def _si_unit(like: float, unit: str) -> float:
    """1 ``unit`` as a quantity of ``like``'s registry, or 1.0 for a float."""
    return _coerce(1.0, 1.0, unit, like)
