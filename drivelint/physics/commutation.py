"""The switch node's undershoot as the load current commutates to the low side's diode.

At the high side's turn-off the load current leaves the high side's channel and moves to the
low side's body diode (or a freewheel diode). While it does, the current through every
inductance of the commutation loop between the driver's switch pin (VS) and its common
(COM) changes at di/dt, so the switch pin falls to

    V_VS − V_COM = −(V_F(I_load) + L_s·di/dt)

below the common (high-voltage gate-driver application notes on V_S undershoot, e.g.
International Rectifier AN-978 "HV Floating MOS-Gate Driver ICs" and design tip DT04-4,
from memory; the inductor law v = L·di/dt, textbook). The rate is the high side's: its
channel current falls as its gate discharges from the plateau through the turn-off path,
di/dt = g_m·dV_GS/dt with dV_GS/dt = (V_pl − V_off)/(R_off·C_iss) at the plateau (the
gate's RC discharge and the transconductance, standard gate-charge texts), the fastest point
of the fall: a square-law channel (g_m = 2·I/(V_pl − V_th), the MOS1 equations of the
SPICE3 / ngspice manual) falls 2–3 times faster there than the average I/t_fall.

During the undershoot the bootstrap diode sees the extra swing across it and carries the part
of the load current the loop's inductance cannot take yet into the hold capacitor: L_s, the
boot path's resistance and C_boot ring as a series RLC (textbook circuit theory), and the
boot path holds the node no lower than its own drop.
"""

from __future__ import annotations

import math
from collections.abc import Callable
from dataclasses import dataclass

from drivelint.physics._units import Amps, Farads, Ohms, Seconds, Volts, _infinite, _ratio

# Siemens and amperes per second: unit aliases like the others in _units (floats at run time).
Siemens = float
AmpsPerSecond = float
Henries = float


def square_law_transconductance(i_load: Amps, v_plateau: Volts, v_threshold: Volts) -> Siemens:
    """g_m of a square-law channel at the load current: 2·I/(V_pl − V_th).

    From I = β/2·(V_GS − V_th)² (MOS1 equations, SPICE3 / ngspice manual; VDMOS uses them
    too): dI/dV_GS = β·(V_GS − V_th) = 2·I/(V_GS − V_th) at V_GS = V_pl.
    i_load: drain current [A]; v_plateau: V_GS carrying it [V]; v_threshold: V_th [V].
    """
    return 2.0 * i_load / (v_plateau - v_threshold)


def current_fall_rate(
    g_m: Siemens, v_plateau: Volts, r_off: Ohms, c_iss: Farads, v_off: Volts = 0.0
) -> AmpsPerSecond:
    """The drain current's fastest fall at turn-off: g_m·(V_pl − V_off)/(R_off·C_iss).

    As the gate leaves the plateau it discharges through R_off towards V_off at
    dV_GS/dt = (V_pl − V_off)/(R_off·C_iss) (RC discharge), and the channel follows at
    dI/dt = g_m·dV_GS/dt. g_m: transconductance at the load current [S]; v_plateau [V];
    r_off: total turn-off resistance [Ohm]; c_iss: input capacitance [F]; v_off: the
    driver's low level against the source [V].
    """
    return g_m * (v_plateau - v_off) / (r_off * c_iss)


# The feedback integration: steps per fast time constant, and a bound on the steps in all.
_STEPS_PER_TAU = 40
_MAX_STEPS = 20_000
# Below this ε·G the fast mode is over in a fraction of a per cent of the fall: no feedback.
_NEGLIGIBLE_FEEDBACK = 1e-3


def current_fall_rate_with_feedback(
    i_load: Amps,
    g_m: Siemens,
    v_plateau: Volts,
    v_threshold: Volts,
    r_off: Ohms,
    c_iss: Farads,
    c_gd: Farads,
    l_s: Henries,
    v_off: Volts = 0.0,
    square_law: bool = True,
) -> AmpsPerSecond:
    """The drain current's fastest fall at turn-off when the loop's inductance feeds the
    undershoot back through C_gd [A/s].

    While the current falls, the switch node sits L_s·di/dt lower; as that swing builds,
    C_gd carries C_gd·dV_S/dt into the gate and slows its discharge (the Miller effect of
    the source's own movement). With V_GS = x, the drain current i(x), its slope g = di/dx
    and V_S = −V_F + L_s·di/dt, the gate's node gives (Kirchhoff's current law, textbook):

        (V_off − x)/R_off = C_iss·dx/dt + C_gd·L_s·d²i/dt²,  d²i/dt² = g'·(dx/dt)² + g·d²x/dt²

    a second-order equation in x with a fast time constant C_gd·L_s·g/C_iss against the slow
    R_off·C_iss. It is integrated (classical Runge–Kutta, dimensionless: u = (x − V_th)/
    (V_pl − V_th), s = t/(R_off·C_iss)) from the plateau at rest until the rate has passed
    its peak. With C_gd·L_s → 0 it is :func:`current_fall_rate`. The node's own capacitance
    and paths in parallel with the loop's inductance are not counted (each slows the
    swing further): an upper bound on the rate.

    i_load [A]; g_m: transconductance at the load current [S]; v_plateau, v_threshold [V];
    r_off [Ohm]; c_iss: C_iss while the current falls [F]; c_gd: C_gd at the blocking
    voltage [F]; l_s [H]; v_off [V]; square_law: i = I·u² (g_m = 2·I/(V_pl − V_th)), else
    a constant g_m (i = I − g_m·(V_pl − x)).
    """
    simple = current_fall_rate(g_m, v_plateau, r_off, c_iss, v_off)
    span = v_plateau - v_threshold
    tau = r_off * c_iss
    # G: di/dx in units of I/ΔV; ε: the fast time constant per G, in units of τ
    k = 2.0 if square_law else _ratio(g_m * span, i_load)
    w = _ratio(v_threshold - v_off, span)
    eps = _ratio(c_gd * l_s * i_load, span * tau * c_iss)
    if not eps * k > _NEGLIGIBLE_FEEDBACK or not k > 0:
        return simple
    end = 0.0 if square_law else max(0.0, 1.0 - 1.0 / k)

    def slope(u: float) -> float:
        return k * u if square_law else k

    def accel(u: float, du: float) -> float:
        bend = k if square_law else 0.0
        return (-(u + w) - du - eps * bend * du * du) / (eps * slope(u))

    step = min(eps * k, 1.0) / _STEPS_PER_TAU
    u, du, s, peak, at_peak = 1.0, 0.0, 0.0, 0.0, 0.0
    for _ in range(_MAX_STEPS):
        # classical RK4 on (u, du/ds)
        a1 = accel(u, du)
        u2, v2 = u + 0.5 * step * du, du + 0.5 * step * a1
        if u2 <= end:
            break
        a2 = accel(u2, v2)
        u3, v3 = u + 0.5 * step * v2, du + 0.5 * step * a2
        if u3 <= end:
            break
        a3 = accel(u3, v3)
        u4, v4 = u + step * v3, du + step * a3
        if u4 <= end:
            break
        a4 = accel(u4, v4)
        u += step * (du + 2.0 * v2 + 2.0 * v3 + v4) / 6.0
        du += step * (a1 + 2.0 * a2 + 2.0 * a3 + a4) / 6.0
        s += step
        rate = -slope(u) * du
        if rate > peak:
            peak, at_peak = rate, s
        # past the peak and the fast mode settled (or no longer resolved by the step)
        elif s > at_peak + 10.0 * eps * k or eps * slope(u) < 2.0 * step:
            break
    return simple * (peak / (k * (1.0 + w))) if peak > 0 else simple


def switch_node_undershoot(v_f: Volts, l_s: Henries, di_dt: AmpsPerSecond) -> Volts:
    """The switch pin against the driver's common while the current commutates:
    −(V_F + L_s·di/dt) [V] (negative).

    v_f: forward drop of the diode taking the load current, at that current [V]; l_s: the
    loop inductance between the switch pin and the common through that diode [H]; di_dt:
    the rate the current commutates at [A/s].
    """
    return -(v_f + l_s * di_dt)


def max_loop_inductance(v_limit: Volts, v_f: Volts, di_dt: AmpsPerSecond) -> Henries:
    """The loop inductance that keeps the undershoot within ``v_limit``:
    (|V_limit| − V_F)/(di/dt) [H]; ≤ 0 when the diode's drop alone reaches the limit.

    v_limit: the allowed swing below the common, either sign [V]; v_f [V]; di_dt [A/s].
    """
    return (abs(v_limit) - v_f) / di_dt


@dataclass(frozen=True, slots=True)
class TurnOffEdge:
    """A switch's turn-off into a commutation loop, for the limits under the feedback of
    :func:`current_fall_rate_with_feedback` (arguments as there)."""

    i_load: Amps
    g_m: Siemens
    v_plateau: Volts
    v_threshold: Volts
    c_iss: Farads
    c_gd: Farads
    v_off: Volts = 0.0
    square_law: bool = True

    def rate(self, r_off: Ohms, l_s: Henries) -> AmpsPerSecond:
        return current_fall_rate_with_feedback(
            self.i_load,
            self.g_m,
            self.v_plateau,
            self.v_threshold,
            r_off,
            self.c_iss,
            self.c_gd,
            l_s,
            self.v_off,
            self.square_law,
        )

    def depth(self, v_f: Volts, r_off: Ohms, l_s: Henries) -> Volts:
        """V_F + L_s·di/dt: how far below the common the switch pin swings [V]."""
        return v_f + l_s * self.rate(r_off, l_s)


def max_loop_inductance_with_feedback(
    edge: TurnOffEdge, v_limit: Volts, v_f: Volts, r_off: Ohms
) -> Henries:
    """The largest loop inductance whose undershoot, with the feedback, stays within
    ``v_limit`` [H]; ≤ 0 when the diode's drop alone reaches it. The depth V_F + L·di/dt(L)
    grows with L, so a bisection from :func:`max_loop_inductance` (the bound without the
    feedback, which passes) finds it to 0.1 %."""
    start = max_loop_inductance(
        v_limit, v_f, current_fall_rate(edge.g_m, edge.v_plateau, r_off, edge.c_iss, edge.v_off)
    )
    if not start > 0:
        return start

    def fails(l_s: Henries) -> bool:
        return edge.depth(v_f, r_off, l_s) > abs(v_limit)

    return _crossing(fails, start, 2.0 * start)


def min_turn_off_resistance_with_feedback(
    edge: TurnOffEdge, v_limit: Volts, v_f: Volts, r_off: Ohms, l_s: Henries
) -> Ohms:
    """The smallest total turn-off resistance whose undershoot through ``l_s``, with the
    feedback, stays within ``v_limit`` [Ohm]: ``r_off`` when it already does, infinite when
    the diode's drop alone reaches the limit. The bound without the feedback
    (:func:`min_turn_off_resistance`) passes; a bisection between it and ``r_off`` finds
    it to 0.1 %."""
    if not edge.depth(v_f, r_off, l_s) > abs(v_limit):
        return r_off
    bound = min_turn_off_resistance(
        edge.g_m, edge.v_plateau, edge.c_iss, l_s, v_limit, v_f, edge.v_off
    )
    if not math.isfinite(bound) or not bound > r_off:
        return bound

    def fails(r: Ohms) -> bool:
        return edge.depth(v_f, r, l_s) > abs(v_limit)

    return _crossing(fails, r_off, bound)


def min_turn_off_resistance(
    g_m: Siemens,
    v_plateau: Volts,
    c_iss: Farads,
    l_s: Henries,
    v_limit: Volts,
    v_f: Volts,
    v_off: Volts = 0.0,
) -> Ohms:
    """The total turn-off resistance that slows the current's fall enough for ``l_s``:
    R_off ≥ g_m·(V_pl − V_off)·L_s/(C_iss·(|V_limit| − V_F)) [Ohm]; infinite when the
    diode's drop alone reaches the limit. Arguments as in :func:`current_fall_rate` and
    :func:`switch_node_undershoot`.
    """
    room = abs(v_limit) - v_f
    numerator = g_m * (v_plateau - v_off) * l_s
    if not _ratio(room, abs(v_limit)) > 0:
        return _infinite(numerator, c_iss * room)
    return numerator / (c_iss * room)


def charge_fraction(window: Seconds, tau: Seconds) -> float:
    """How far an RC path charges towards a step in ``window``: 1 − exp(−t/τ) (τ = 0:
    all the way; textbook first-order step response)."""
    if not tau > 0 * tau:
        return 1.0
    return -math.expm1(-_ratio(window, tau))


def boot_overcharge(step: Volts, window: Seconds, tau: Seconds) -> Volts:
    """What the hold capacitor gains while the switch node sits ``step`` lower for
    ``window``, charged through a path of time constant ``tau``: ΔV·(1 − exp(−t/τ)) [V]."""
    return step * charge_fraction(window, tau)


def boot_path_overcharge(i_load: Amps, l_s: Henries, r_path: Ohms, c_hold: Farads) -> Volts:
    """How much higher the hold capacitor charges while the boot path carries the load
    current the loop's inductance cannot take yet: the peak of a series RLC (L_s, the path's
    resistance, C_boot) whose inductor current starts at zero and whose other branch carries
    I_load, ΔV = I·Z_0·exp(−ζ·φ(ζ)), Z_0 = √(L/C), ζ = R/(2·Z_0), φ = acos ζ/√(1 − ζ²)
    (ζ < 1), 1 (ζ = 1), acosh ζ/√(ζ² − 1) (ζ > 1) (the series RLC's natural response,
    textbook circuit theory). It tends to I·√(L/C) with no resistance (the inductor's
    energy ½L·I² into the capacitor) and to I·L/(R·C) with much (the RC path's share).
    The fastest edge: a current fall long against the loop's time constants passes less.
    i_load [A]; l_s [H]; r_path: the boot path's series resistance with the diode's RS [Ω];
    c_hold [F].
    """
    z0: Ohms = (l_s / c_hold) ** 0.5
    zeta = _ratio(r_path, 2.0 * z0)
    if math.isclose(zeta, 1.0):
        phase = 1.0
    elif zeta < 1.0:
        phase = math.acos(zeta) / math.sqrt(1.0 - zeta * zeta)
    else:
        phase = math.acosh(zeta) / math.sqrt(zeta * zeta - 1.0)
    return i_load * z0 * math.exp(-zeta * phase)


def min_series_resistance(
    i_load: Amps, l_s: Henries, c_hold: Farads, r_path: Ohms, allowed: Volts
) -> Ohms:
    """The resistor to add in series with the boot diode that keeps
    :func:`boot_path_overcharge` within ``allowed`` [Ω] (0 when it already is; infinite
    when nothing may be added). The overcharge falls as the resistance grows, so a
    bisection finds it to 0.1 %."""
    if not allowed > 0 * allowed:
        return _infinite(l_s, c_hold * i_load)
    if not boot_path_overcharge(i_load, l_s, r_path, c_hold) > allowed:
        return 0.0 * r_path

    def over(r: Ohms) -> bool:
        return boot_path_overcharge(i_load, l_s, r, c_hold) > allowed

    return _crossing(over, r_path, r_path + 2.0 * (l_s / c_hold) ** 0.5) - r_path


def _crossing(fails: Callable[[float], bool], start: float, trial: float) -> float:
    """Where a test that is monotonic in x changes its answer, to 0.1 %, by bisection.

    ``start`` is one side; ``trial``, 2·trial, 4·trial, … (above ``start``) are tried until
    one is on the other side. The point returned is on the side where ``fails`` is false:
    the largest passing x when ``fails(start)`` is false, the smallest when it is true.
    """
    side = fails(start)
    low, high = start, trial
    for _ in range(60):
        if fails(high) != side:
            break
        low, high = high, 2.0 * high
    for _ in range(60):
        mid = 0.5 * (low + high)
        if fails(mid) == side:
            low = mid
        else:
            high = mid
        if _ratio(high - low, high) < 1e-3:
            break
    return low if not side else high
