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
    low: Ohms = r_path
    high: Ohms = r_path + 2.0 * (l_s / c_hold) ** 0.5
    while boot_path_overcharge(i_load, l_s, high, c_hold) > allowed:
        low, high = high, 2.0 * high
    for _ in range(60):
        mid = 0.5 * (low + high)
        if boot_path_overcharge(i_load, l_s, mid, c_hold) > allowed:
            low = mid
        else:
            high = mid
        if _ratio(high - low, high) < 1e-3:
            break
    return high - r_path
