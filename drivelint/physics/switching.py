"""Gate current, transition times, hard-switching and conduction losses, junction temperature."""

from __future__ import annotations

import math

from drivelint.physics._units import (
    Amps,
    Coulombs,
    Farads,
    Hertz,
    Kelvin,
    KelvinPerWatt,
    Ohms,
    Ratio,
    Seconds,
    Volts,
    Watts,
    _coerce,
    _ratio,
    _unit_of,
)


def transition_time(q_switching: Coulombs, i_gate: Amps) -> Seconds:
    """Time to move the gate through a charge at a steady gate current: t = Q/I.

    q_switching: charge of the transition (Q_gs2 + Q_gd for the switching interval) [C];
    i_gate: gate current during it [A].
    """
    return q_switching / i_gate


def gate_current_turn_on(v_drive: Volts, v_plateau: Volts, r_total: Ohms) -> Amps:
    """Gate current on the Miller plateau at turn-on: (V_drive − V_plateau)/R_total.

    v_drive: driver output high level, relative to the source [V]; v_plateau: Miller
    plateau voltage [V]; r_total: driver pull-up + external + internal gate resistance [Ohm].
    """
    return (v_drive - v_plateau) / r_total


def gate_current_turn_off(v_plateau: Volts, r_total: Ohms, v_off: Volts = 0.0) -> Amps:
    """Gate current on the Miller plateau at turn-off: (V_plateau − V_off)/R_total.

    v_plateau: Miller plateau voltage [V]; r_total: driver pull-down + external + internal
    gate resistance [Ohm]; v_off: driver low level relative to the source (0, or negative
    for a negative turn-off bias) [V].
    """
    return (v_plateau - v_off) / r_total


def turn_off_time(
    r_off: Ohms,
    c_iss: Farads,
    v_drive: Volts,
    v_plateau: Volts,
    q_gd: Coulombs,
    v_threshold: Volts | None = None,
    v_off: Volts = 0.0,
) -> Seconds:
    """Time from the driver's turn-off edge until the switch stops conducting.

    The gate-charge description of a MOSFET's turn-off (the gate discharging through the
    total turn-off resistance): V_GS falls from V_drive to the Miller plateau as an RC
    decay, t_1 = R_off·C_iss·ln(V_drive/V_pl); it stays on the plateau while Q_gd is
    taken out at I_g = V_pl/R_off, t_2 = Q_gd/I_g; then the drain current falls as V_GS
    decays from V_pl to the threshold, t_3 = R_off·C_iss·ln(V_pl/V_th) (left out when the
    threshold is not given, or not below the plateau). Standard gate-drive texts, e.g.
    L. Balogh, "Fundamentals of MOSFET and IGBT Gate Driver Circuits" (TI application
    report SLUA618), turn-off intervals (from memory). C_iss at low V_DS is used for both
    RC intervals, which makes t_3 an over-estimate (C_gd is smaller with the drain up).

    r_off: driver pull-down + external + internal gate resistance [Ohm]; c_iss: input
    capacitance C_gs + C_gd with the switch on [F]; v_drive: V_GS while on [V];
    v_plateau: Miller plateau [V]; q_gd: gate–drain (Miller) charge [C]; v_threshold:
    gate threshold [V] or None; v_off: the level the pull-down drives the gate to, relative
    to the source (0, or negative with a turn-off supply below the source) [V].

    With v_off < 0 the gate decays toward v_off instead of 0 (the same RC law, every level
    measured from v_off): t_1 = R_off·C_iss·ln((V_drive − V_off)/(V_pl − V_off)),
    I_g = (V_pl − V_off)/R_off, t_3 = R_off·C_iss·ln((V_pl − V_off)/(V_th − V_off)).
    """
    if v_off:
        threshold = None if v_threshold is None else v_threshold - v_off
        return turn_off_time(
            r_off, c_iss, v_drive - v_off, v_plateau - v_off, q_gd, threshold, 0.0 * v_off
        )
    plateau = min(v_plateau, v_drive)
    t_delay = r_off * c_iss * math.log(_ratio(v_drive, plateau))
    # Q_gd/I_g with I_g = V_pl/R_off, written so that an ideal driver (R_off = 0) gives 0
    t_plateau = q_gd * r_off / plateau
    total = t_delay + t_plateau
    if v_threshold is not None and 0 < _ratio(v_threshold, plateau) < 1:
        total = total + current_fall_time(r_off, c_iss, plateau, v_threshold)
    return total


def current_fall_time(
    r_off: Ohms, c_iss: Farads, v_plateau: Volts, v_threshold: Volts, v_off: Volts = 0.0
) -> Seconds:
    """The current-fall interval of a turn-off: V_GS decays from the plateau to the
    threshold through R_off, t_3 = R_off·C_iss·ln((V_pl − V_off)/(V_th − V_off)).

    The third turn-off interval of the gate-charge description (SLUA618, from memory, as in
    :func:`turn_off_time`), towards the driver's low level ``v_off`` (0 V, or a negative
    bias). r_off: total turn-off resistance [Ohm]; c_iss: input capacitance [F];
    v_plateau, v_threshold, v_off: against the source [V].
    """
    return r_off * c_iss * math.log(_ratio(v_plateau - v_off, v_threshold - v_off))


def shoot_through_current(v_bus: Volts, r_high: Ohms, r_low: Ohms, r_loop: Ohms) -> Amps:
    """Bound on the current a leg conducts with both switches on: V_bus/(R_hs + R_ls + R_loop).

    Ohm's law with both switches fully on: the loop's inductance only slows the rise
    (di/dt = V_bus/L), so the resistive figure is what the current heads for, an upper
    bound on what a short overlap reaches; the switches' saturation current bounds it too.
    v_bus: the voltage across the leg [V]; r_high, r_low: the on-resistances [Ohm];
    r_loop: the rest of the loop's resistance (shunts, traces) [Ohm].
    """
    return v_bus / (r_high + r_low + r_loop)


def switching_loss(v: Volts, i: Amps, t_rise: Seconds, t_fall: Seconds, f: Hertz) -> Watts:
    """Hard-switching loss with linear overlap: P_sw = ½·V·I·(t_r + t_f)·f.

    Textbook relation (e.g. Erickson & Maksimović, Fundamentals of Power Electronics).
    v: voltage switched [V]; i: current switched [A]; t_rise, t_fall: voltage/current
    overlap times at turn-on and turn-off [s]; f: switching frequency [Hz].
    """
    return 0.5 * v * i * (t_rise + t_fall) * f


def conduction_loss(i_rms: Amps, r_ds_on: Ohms, duty: Ratio) -> Watts:
    """Conduction loss: P = I²·R_DS(on)·D.

    i_rms: RMS current while the switch conducts [A]; r_ds_on: on-resistance at the
    operating temperature [Ohm]; duty: fraction of the period the switch is on.
    """
    return i_rms * i_rms * r_ds_on * duty


def junction_temperature(t_ambient: Kelvin, p: Watts, r_th_ja: KelvinPerWatt) -> Kelvin:
    """Steady junction temperature: T_j = T_a + P·R_thJA.

    t_ambient: ambient temperature [K]; p: dissipated power [W]; r_th_ja: junction-to-
    ambient thermal resistance [K/W].
    """
    # A quantity in °C is moved to kelvin first: pint cannot add a temperature rise to an
    # offset unit.
    t_a = _coerce(t_ambient, t_ambient, "K", t_ambient)
    return t_a + p * r_th_ja


def gate_drive_power(q_g: Coulombs, v_drive: Volts, f: Hertz) -> Watts:
    """Power the gate drive dissipates charging and discharging the gate: P_G = Q_G·V_drv·f.

    The energy Q_G·V_drv drawn from the drive supply each cycle ends up as heat in the
    resistances of the charge and discharge paths, whatever the gate's C(V) (gate-driver
    application notes, e.g. L. Balogh, "Fundamentals of MOSFET and IGBT Gate Driver
    Circuits", Texas Instruments SLUA618, gate drive power — from memory).
    q_g: total gate charge at the drive level [C]; v_drive: drive swing [V]; f: switching
    frequency [Hz].
    """
    return q_g * v_drive * f


def resistor_share(p_edge: Watts, r: Ohms, r_path: Ohms) -> Watts:
    """The part of one edge's gate-drive loss a resistor in that path dissipates:
    P_R = P_edge·R/R_path, the path's resistances carrying the same current in series.

    p_edge: the loss of one edge, ½·Q_G·V_drv·f for each of turn-on and turn-off (the same
    application notes) [W]; r: the resistor [Ohm]; r_path: every resistance of the path,
    the driver's output and the switch's internal gate resistance included [Ohm].
    """
    return p_edge * _ratio(r, r_path)


def edge_fraction(t_on: Seconds, t_off: Seconds, f: Hertz) -> Ratio:
    """The part of each period the switch spends in transition: (t_on + t_off)·f.

    t_on, t_off: the turn-on and turn-off transition times (current and voltage overlap)
    [s]; f: switching frequency [Hz].
    """
    return (t_on + t_off) * f


def current_rise_charge(q_gs: Coulombs) -> Coulombs:
    """The part of Q_gs the gate takes between the threshold and the plateau, Q_gs2 ≈ ½·Q_gs.

    The datasheet's Q_gs runs from 0 V to the plateau; the current only flows above V_th,
    and power MOSFETs put the threshold roughly half-way up that charge (common practice,
    e.g. Vishay Siliconix AN608A's gate-charge intervals — from memory). q_gs: gate–source
    charge to the plateau [C].
    """
    return 0.5 * q_gs


def rds_on_at_temperature(
    r_ds_on: Ohms, t_junction: Kelvin, tempco: float, t_rated: Kelvin = 298.15
) -> Ohms:
    """On-resistance at the junction temperature: R_DS(on)·(1 + α·(T_j − T_rated)).

    Silicon MOSFETs' R_DS(on) rises about 0.5–1 %/K, some 1.5–2× at 125 °C against 25 °C
    (common practice; datasheets' normalised R_DS(on)-vs-T_j curves). r_ds_on: at
    ``t_rated`` [Ohm]; t_junction: [K]; tempco: α [1/K]; t_rated: [K] (25 °C).
    """
    t_j = _coerce(t_junction, t_junction, "K", t_junction)
    rise = t_j - _coerce(t_rated, t_rated, "K", t_j)
    factor = 1.0 + tempco * rise
    return r_ds_on * max(factor, 0.0 * factor)


def heatsink_resistance_needed(
    t_limit: Kelvin, t_ambient: Kelvin, p: Watts, r_th_jc: KelvinPerWatt
) -> KelvinPerWatt:
    """Case-to-ambient thermal resistance (interface + heatsink) that keeps T_j at t_limit:
    R_th,ca = (T_limit − T_a)/P − R_thJC (the series thermal path, textbook).

    t_limit: allowed junction temperature [K]; t_ambient: [K]; p: dissipation [W];
    r_th_jc: junction-to-case thermal resistance [K/W]. Negative: no heatsink is enough.
    """
    t_lim = _coerce(t_limit, t_limit, "K", t_limit)
    t_a = _coerce(t_ambient, t_ambient, "K", t_lim)
    return (t_lim - t_a) / p - r_th_jc


def junction_temperature_self_heating(
    t_ambient: Kelvin,
    p_fixed: Watts,
    p_cond_rated: Watts,
    r_th_ja: KelvinPerWatt,
    tempco: float,
    t_rated: Kelvin = 298.15,
) -> Kelvin:
    """Steady T_j with a conduction loss that rises with it: the fixed point of
    T_j = T_a + R_th·(P_fixed + P_cond,rated·(1 + α·(T_j − T_rated))), in closed form
    T_j = (T_a + R_th·(P_fixed + P_cond,rated·(1 − α·T_rated)))/(1 − R_th·P_cond,rated·α)
    (the thermal Ohm's law with R_DS(on) linear in T_j, as :func:`rds_on_at_temperature`).
    Infinite when R_th·P_cond,rated·α ≥ 1: each kelvin adds more than a kelvin (thermal
    runaway), no steady temperature.

    t_ambient [K]; p_fixed: the losses that do not depend on T_j (switching) [W];
    p_cond_rated: the conduction loss with R_DS(on) at ``t_rated`` [W]; r_th_ja [K/W];
    tempco: α [1/K]; t_rated: [K].
    """
    t_a = _coerce(t_ambient, t_ambient, "K", t_ambient)
    t_r = _coerce(t_rated, t_rated, "K", t_a)
    gain = _ratio(r_th_ja * p_cond_rated * tempco, 1.0)
    if gain >= 1.0:
        return math.inf * _unit_of(t_a)
    numerator = t_a + r_th_ja * (p_fixed + p_cond_rated * (1.0 - tempco * t_r))
    return numerator / (1.0 - gain)
