"""Bootstrap supply: initial voltage, charge budget, droop, hold time and sustained voltage."""

from __future__ import annotations

import math
from dataclasses import dataclass

from drivelint.physics._units import (
    Amps,
    Coulombs,
    Farads,
    Hertz,
    Ohms,
    Ratio,
    Seconds,
    Volts,
    _infinite,
    _ratio,
    _unit_of,
    _zero_like,
)


def bootstrap_voltage(
    v_aux: Volts,
    v_f_diode: Volts,
    i_charge: Amps = 0.0,
    r_series: Ohms = 0.0,
    v_refresh: Volts = 0.0,
) -> Volts:
    """Voltage the hold capacitor charges to: V_boot,0 = V_aux − V_F − I·R − V_refresh.

    v_aux: auxiliary rail feeding the diode [V]; v_f_diode: diode forward drop [V];
    i_charge: charging current through the series resistor [A]; r_series: series resistor
    [Ohm]; v_refresh: drop across what pulls the switch node low while charging (low-side
    switch on-state, freewheel diode forward drop) [V].
    """
    return v_aux - v_f_diode - i_charge * r_series - v_refresh


def boot_rail_peak(v_switch_node_high: Volts, v_boot: Volts) -> Volts:
    """Voltage of the boot rail to ground while the switch node is high: V_sw,high + V_boot.

    v_switch_node_high: switch-node voltage with the high-side switch on (≈ V_bus) [V];
    v_boot: voltage across the hold capacitor [V].
    """
    return v_switch_node_high + v_boot


def charge_budget(
    qg: Coulombs,
    q_ls: Coulombs,
    i_quiescent: Amps,
    i_leak: Amps,
    i_resistive: Amps,
    t_on: Seconds,
    q_rr: Coulombs = 0.0,
) -> Coulombs:
    """Charge the hold capacitor delivers in one on-time.

    Q_total = Q_g + Q_ls + (I_q + I_leak + I_R)·t_on + Q_rr.

    qg: gate charge of the switch at the drive level [C]; q_ls: level-shifter charge per
    cycle [C]; i_quiescent: driver quiescent current from the boot rail [A]; i_leak:
    leakage of the diode, capacitor and clamps [A]; i_resistive: current of resistive loads
    on the boot rail (gate–source resistors, pull-ups) [A]; t_on: on-time [s];
    q_rr: charge lost to the bootstrap diode's reverse recovery [C].
    """
    return qg + q_ls + (i_quiescent + i_leak + i_resistive) * t_on + q_rr


def allowed_droop(v_boot_initial: Volts, v_boot_min: Volts) -> Volts:
    """Droop the supply may take before it falls below its minimum: V_boot,0 − V_boot,min.

    v_boot_initial: voltage after recharge [V]; v_boot_min: lowest acceptable boot voltage
    (driver undervoltage lockout, or the V_GS needed for full enhancement) [V].
    """
    return v_boot_initial - v_boot_min


def required_capacitance(q_total: Coulombs, delta_v: Volts) -> Farads:
    """Smallest hold capacitor that delivers ``q_total`` within ``delta_v`` of droop: Q/ΔV.

    q_total: charge per on-time [C]; delta_v: allowed droop [V]. Infinite when no droop
    is allowed (``delta_v`` ≤ 0): no capacitor is large enough.
    """
    if delta_v <= 0:
        return _infinite(q_total, delta_v)
    return q_total / delta_v


def droop_per_cycle(q_total: Coulombs, c: Farads) -> Volts:
    """Droop of a capacitor ``c`` that delivers ``q_total``: ΔV = Q/C.

    q_total: charge delivered [C]; c: hold capacitance [F].
    """
    return q_total / c


def droop_under_current(i: Amps, t: Seconds, c: Farads) -> Volts:
    """Droop of a capacitor ``c`` feeding a steady current ``i`` for ``t``: ΔV = I·t/C.

    i: load current [A]; t: duration [s]; c: capacitance [F].
    """
    return i * t / c


def hold_time(c: Farads, delta_v_allowed: Volts, qg: Coulombs, i_drain: Amps) -> Seconds:
    """How long the supply can hold the switch on: t_hold = (C·ΔV_allowed − Q_g)/I_drain.

    The gate charge is taken at turn-on; every steady drain on the boot rail is summed in
    ``i_drain``. Zero when the gate charge alone uses up the allowed droop; infinite only
    when nothing drains the capacitor — any real drain makes the hold time finite, which is
    why a bootstrap supply cannot hold a switch on at DC.

    c: hold capacitance [F]; delta_v_allowed: allowed droop [V]; qg: gate charge [C];
    i_drain: total steady current drawn from the capacitor while on [A].
    """
    spare = c * delta_v_allowed - qg
    if spare <= 0:
        return _zero_like(spare) / _unit_of(i_drain)
    if i_drain == 0:
        return _infinite(spare, i_drain)
    return spare / i_drain


def boot_voltage_after(
    t: Seconds,
    v0: Volts,
    c: Farads,
    qg: Coulombs,
    i_drain: Amps,
    r_load: Ohms | None = None,
) -> Volts:
    """Boot voltage ``t`` after turn-on (t ≥ 0), for plots and simulator cross-checks.

    At turn-on the gate takes Q_g at once: V(0⁺) = V0 − Q_g/C. Then a constant drain
    gives a linear fall, V(t) = V(0⁺) − I·t/C; with a resistive load R as well,
    C·dV/dt = −V/R − I gives V(t) = (V(0⁺) + I·R)·exp(−t/RC) − I·R. The result is not
    clipped: below the driver's undervoltage lockout the real supply stops being drawn.

    t: time since turn-on [s]; v0: boot voltage just before turn-on [V]; c: hold
    capacitance [F]; qg: gate charge [C]; i_drain: constant drain current [A];
    r_load: resistive load across the capacitor, None for none [Ohm].
    """
    v_start = v0 - qg / c
    if r_load is None:
        return v_start - i_drain * t / c
    v_floor = i_drain * r_load
    return (v_start + v_floor) * math.exp(-_ratio(t, r_load * c)) - v_floor


def refresh_time_constant(r_charge: Ohms, c: Farads) -> Seconds:
    """Time constant of the recharge path: τ = R·C.

    r_charge: total resistance of the charge path (series resistor, diode and refresh
    switch resistances) [Ohm]; c: hold capacitance [F].
    """
    return r_charge * c


@dataclass(frozen=True, slots=True)
class SustainedBoot:
    """Steady-state boot voltage with partial recharge: highest and lowest point of a cycle.

    ``peak`` is reached at the end of each off-time (recharge), ``valley`` at the end of
    each on-time; the valley is what must stay above the minimum.
    """

    peak: Volts
    valley: Volts


def sustained_boot_voltage(
    v_target: Volts,
    q_per_cycle: Coulombs,
    c: Farads,
    r_charge: Ohms,
    t_off: Seconds,
) -> SustainedBoot:
    """Boot voltage once each off-time puts back the charge each on-time takes.

    Model: each on-time removes Q (ΔV = Q/C); each off-time charges the capacitor
    exponentially toward V_target with τ = R·C. With a = exp(−t_off/τ), the peak V_ss at the
    end of an off-time satisfies

        V_ss = V_target − (V_target − (V_ss − ΔV))·a
        V_ss·(1 − a) = V_target·(1 − a) − ΔV·a
        V_ss = V_target − ΔV·a/(1 − a)

    and the valley, one on-time later, is V_ss − ΔV = V_target − ΔV/(1 − a). As t_off → ∞
    (a → 0) the valley tends to V_target − ΔV; as ΔV → 0 both tend to V_target. With no
    recharge at all (a = 1) there is no steady state above zero: both are −∞.

    v_target: voltage the recharge tends to, V_aux − V_F − V_refresh [V]; q_per_cycle:
    charge taken per on-time [C]; c: hold capacitance [F]; r_charge: charge-path
    resistance [Ohm]; t_off: time per cycle the switch node is held low [s].
    """
    delta_v = q_per_cycle / c
    if q_per_cycle == 0:
        return SustainedBoot(peak=v_target, valley=v_target)
    tau = r_charge * c
    # expm1 keeps 1 − a accurate when t_off ≪ τ, where 1 − exp(−x) would cancel.
    x = math.inf if tau == 0 else _ratio(t_off, tau)
    one_minus_a = -math.expm1(-x)
    if one_minus_a == 0:
        gone = -_infinite(v_target)
        return SustainedBoot(peak=gone, valley=gone)
    a = 1.0 - one_minus_a
    return SustainedBoot(
        peak=v_target - delta_v * (a / one_minus_a),
        valley=v_target - delta_v / one_minus_a,
    )


def min_off_time_for_boot_min(
    v_target: Volts,
    v_boot_min: Volts,
    q_per_cycle: Coulombs,
    c: Farads,
    r_charge: Ohms,
) -> Seconds:
    """Shortest off-time per cycle that keeps the sustained valley at ``v_boot_min``.

    Setting V_target − ΔV/(1 − a) = V_boot,min gives a = 1 − ΔV/(V_target − V_boot,min),
    so t_off = τ·ln((V_target − V_boot,min)/(V_target − V_boot,min − ΔV)). Infinite when
    even a full recharge cannot do it (ΔV ≥ V_target − V_boot,min).

    v_target: recharge target [V]; v_boot_min: lowest acceptable boot voltage [V];
    q_per_cycle: charge per on-time [C]; c: hold capacitance [F]; r_charge: charge-path
    resistance [Ohm].
    """
    tau = r_charge * c
    headroom = v_target - v_boot_min
    delta_v = q_per_cycle / c
    if delta_v >= headroom:
        return _infinite(tau)
    return -tau * math.log1p(-_ratio(delta_v, headroom))


def max_duty_for_boot_min(
    v_target: Volts,
    v_boot_min: Volts,
    q_per_cycle: Coulombs,
    c: Farads,
    r_charge: Ohms,
    f_sw: Hertz,
) -> Ratio:
    """Largest duty (0…1) whose off-time still sustains the valley at ``v_boot_min``.

    D_max = 1 − t_off,min·f_sw, clipped to [0, 1]; 0 when no off-time suffices. The charge
    per cycle is taken as fixed: evaluate it at the longest on-time, which makes the
    result conservative for shorter ones.

    v_target: recharge target [V]; v_boot_min: lowest acceptable boot voltage [V];
    q_per_cycle: charge per on-time [C]; c: hold capacitance [F]; r_charge: charge-path
    resistance [Ohm]; f_sw: switching frequency [Hz].
    """
    t_off_min = min_off_time_for_boot_min(v_target, v_boot_min, q_per_cycle, c, r_charge)
    fraction_off = _ratio(t_off_min, 1.0 / f_sw)
    if math.isinf(fraction_off):
        return 0.0
    return min(1.0, max(0.0, 1.0 - fraction_off))


def boot_voltage_max(
    v_aux_max: Volts, v_f_diode: Volts, v_switch_low: Volts = 0.0, v_undershoot: Volts = 0.0
) -> Volts:
    """Highest voltage across the hold capacitor: V_aux,max − V_F − V_sw,low + V_undershoot.

    The capacitor charges to the auxiliary rail less the diode drop, measured from where the
    switch node sits while it is pulled low (V_sw,low: 0 V for a low side to ground, the
    negative rail of a split supply); a switch node that rings ``v_undershoot`` below that
    level as it falls lets the diode charge the capacitor that much higher.

    v_aux_max: highest auxiliary rail [V]; v_f_diode: diode drop [V]; v_switch_low: switch
    node voltage during refresh [V]; v_undershoot: its negative excursion, as a magnitude [V].
    """
    return v_aux_max - v_f_diode - v_switch_low + v_undershoot


def boot_cycle(
    v_peak: Volts,
    v_target: Volts,
    q_at_target: Coulombs,
    dq_dv: Farads,
    c: Farads,
    r_charge: Ohms,
    t_off: Seconds,
    c_gate: Farads = 0.0,
) -> SustainedBoot:
    """One switching cycle of a bootstrap supply: (valley at the end of the on-time, peak at
    the end of the following off-time), from the peak before it.

    The on-time takes Q(V) = Q_t + dQ/dV·(V − V_target) from the capacitor at V = v_peak
    (a gate charge and resistive drains that grow with the boot voltage); the off-time
    recharges it toward V_target with τ = R·C: V' = V_target − (V_target − V_valley)·a,
    a = exp(−t_off/τ).

    v_peak: boot voltage at the start of the on-time [V]; v_target: recharge target [V];
    q_at_target: charge per on-time at V_target [C]; dq_dv: its slope [F]; c: hold
    capacitance [F]; r_charge: charge-path resistance [Ohm]; t_off: off-time [s]; c_gate:
    the gate's incremental capacitance, which shares the on-time's droop [F].
    """
    valley = v_peak - (q_at_target + dq_dv * (v_peak - v_target)) / (c + c_gate)
    tau = r_charge * c
    x = math.inf if tau == 0 else _ratio(t_off, tau)
    a = math.exp(-x)
    return SustainedBoot(peak=v_target - (v_target - valley) * a, valley=valley)


def sustained_boot_voltage_linear(
    v_target: Volts,
    q_at_target: Coulombs,
    dq_dv: Farads,
    c: Farads,
    r_charge: Ohms,
    t_off: Seconds,
    c_gate: Farads = 0.0,
) -> SustainedBoot:
    """The fixed point of :func:`boot_cycle`: the steady state of a charge per cycle that
    grows with the boot voltage.

    With the deficit u = V_target − V_peak and C' = C + C_g (the gate shares the droop; the
    recharge time constant is R·C), the cycle map gives u = a·(u + (Q_t − k·u)/C'), so
    u = a·Q_t/(C'·(1 − a + a·k/C')) and the valley is V_target − u − (Q_t − k·u)/C'.
    With k = 0 and C_g = 0 this is :func:`sustained_boot_voltage`.
    A charge that falls with the voltage (k > 0) lets the supply settle higher than the
    fixed-charge formula says, and always at a positive voltage when Q vanishes at 0 V.

    Arguments as for :func:`boot_cycle` (k = dq_dv).
    """
    if q_at_target == 0 and dq_dv == 0:
        return SustainedBoot(peak=v_target, valley=v_target)
    tau = r_charge * c
    x = math.inf if tau == 0 else _ratio(t_off, tau)
    one_minus_a = -math.expm1(-x)
    a = 1.0 - one_minus_a
    shared = c + c_gate
    denominator = shared * (one_minus_a + a * _ratio(dq_dv, shared))
    if _ratio(denominator, shared) <= 0:
        gone = -_infinite(v_target)
        return SustainedBoot(peak=gone, valley=gone)
    deficit = a * q_at_target / denominator
    valley = v_target - deficit - (q_at_target - dq_dv * deficit) / shared
    return SustainedBoot(peak=v_target - deficit, valley=valley)


def min_off_time_linear(
    v_target: Volts,
    v_boot_min: Volts,
    q_at_target: Coulombs,
    dq_dv: Farads,
    c: Farads,
    r_charge: Ohms,
    c_gate: Farads = 0.0,
) -> Seconds:
    """Shortest off-time whose steady valley (:func:`sustained_boot_voltage_linear`) stays
    at ``v_boot_min``; 0 with no charge-path resistance, infinite when even a full recharge
    each cycle falls short. Found by bisection (the valley rises with the off-time).

    Arguments as for :func:`sustained_boot_voltage_linear`; v_boot_min [V].
    """
    tau = float(r_charge * c / _unit_of(r_charge * c))
    full = v_target - (q_at_target) / (c + c_gate)
    if full < v_boot_min:
        return _infinite(r_charge * c)
    if tau <= 0:
        return _zero_like(r_charge * c)
    unit = _unit_of(r_charge * c)

    def valley(t: float) -> float:
        return float(
            _magnitude_of(
                sustained_boot_voltage_linear(
                    v_target, q_at_target, dq_dv, c, r_charge, t * unit, c_gate
                ).valley
                - v_boot_min
            )
        )

    lo, hi = 0.0, tau
    while valley(hi) < 0:
        hi *= 2.0
    for _ in range(80):
        mid = (lo + hi) / 2
        if valley(mid) < 0:
            lo = mid
        else:
            hi = mid
    return hi * unit


def max_charge_resistance(
    v_target: Volts,
    v_boot_min: Volts,
    q_at_target: Coulombs,
    dq_dv: Farads,
    c: Farads,
    t_off: Seconds,
    c_gate: Farads = 0.0,
) -> Ohms:
    """Largest charge-path resistance that still sustains ``v_boot_min`` at ``t_off``: the
    valley falls as R grows, so it is found by bisection; infinite when no resistance is
    too large (the charge per cycle is nothing), 0 when even 0 Ω falls short."""
    volt = _unit_of(v_target)
    ohm = _unit_of(t_off) / _unit_of(c)

    def margin(r: float) -> float:
        return _magnitude_of(
            (
                sustained_boot_voltage_linear(
                    v_target, q_at_target, dq_dv, c, r * ohm, t_off, c_gate
                ).valley
                - v_boot_min
            )
            / volt
        )

    if margin(0.0) < 0:
        return 0.0 * ohm
    hi = 1.0
    while margin(hi) >= 0:
        hi *= 2.0
        if hi > 1e15:
            return math.inf * ohm
    lo = 0.0
    for _ in range(80):
        mid = (lo + hi) / 2
        if margin(mid) >= 0:
            lo = mid
        else:
            hi = mid
    return lo * ohm


def _magnitude_of(value: float) -> float:
    """A plain float from a float or a (dimensionless or voltage) pint quantity."""
    if hasattr(value, "magnitude"):
        return float(value.magnitude)
    return float(value)


def hold_time_linear(
    c: Farads,
    v_start: Volts,
    v_min: Volts,
    qg: Coulombs,
    i_at_start: Amps,
    di_dv: float = 0.0,
) -> Seconds:
    """How long the supply holds the switch on when its drain falls with the voltage.

    At turn-on the gate takes Q_g: V_1 = V_0 − Q_g/C. Then C·dV/dt = −I(V) with a drain
    that is linear in the boot voltage, I(V) = I_0 + g·(V − V_0) (resistors to the source
    draw V/R, a level shifter's base path (V_bus + V − V_EB − V_sat)/R): I decays as
    exp(−g·t/C), so the boot voltage reaches V_min after t = (C/g)·ln(I(V_1)/I(V_min)).
    With g = 0 this is (C·(V_0 − V_min) − Q_g)/I_0, i.e. :func:`hold_time`.

    c: hold capacitance (with the gate's, which shares it) [F]; v_start: V_0 [V];
    v_min: lowest acceptable voltage [V]; qg: gate charge [C]; i_at_start: drain at V_0
    [A]; di_dv: its slope with the boot voltage [A/V].
    """
    spare = c * (v_start - v_min) - qg
    if spare <= 0:
        return _zero_like(spare) / _unit_of(i_at_start)
    if di_dv == 0 or _ratio(di_dv * (v_start - v_min), i_at_start) < 1e-9:
        return hold_time(c, v_start - v_min, qg, i_at_start)
    v_1 = v_start - qg / c
    i_1 = i_at_start + di_dv * (v_1 - v_start)
    i_min = i_at_start + di_dv * (v_min - v_start)
    if _ratio(i_min, i_at_start) <= 0:
        return _infinite(c * v_start, i_at_start)
    return (c / di_dv) * math.log(_ratio(i_1, i_min))


def first_charge_dip(v_supply: Volts, v_drop: Volts, c_boot: Farads, c_bypass: Farads) -> Volts:
    """How far the gate supply's bypass capacitor falls when it charges an empty bootstrap
    capacitor (start-up, or after the boot supply has run down), before the supply's own
    regulation responds: charge sharing between the two capacitors through the diode,
    ΔV = (V_supply − V_drop)·C_boot/(C_boot + C_bypass) (charge conservation, textbook).

    The final common level satisfies C_bypass·ΔV = C_boot·(V_supply − V_drop − ΔV); with
    C_bypass = 10·C_boot the supply dips by a eleventh of the boot voltage, which is the
    reason for the usual ten-times rule (common practice).
    v_supply: the supply before the recharge [V]; v_drop: the diode's drop and the switch
    node's level above the supply's return [V]; c_boot, c_bypass [F].
    """
    return (v_supply - v_drop) * _ratio(c_boot, c_boot + c_bypass)
