"""Gate charge and gate–source voltage of a floating switch, and level-shifter currents."""

from __future__ import annotations

from drivelint.physics._units import Amps, Coulombs, Farads, Ohms, Ratio, Volts, _ratio


def gate_charge_estimate(c_gs: Farads, c_gd: Farads, v_drive: Volts, v_bus: Volts) -> Coulombs:
    """Gate charge from linear capacitances when no part data gives Q_g.

    Q_g ≈ C_gs·V_drive + C_gd·(V_bus + V_drive): the gate–drain capacitance swings from
    −V_bus to +V_drive across the Miller plateau, so its charge counts the whole swing.
    Real capacitances fall with voltage, so this over-estimates at high bus voltage.

    c_gs: gate–source capacitance [F]; c_gd: gate–drain capacitance [F];
    v_drive: gate drive amplitude [V]; v_bus: voltage the drain–source blocks when off [V].
    """
    return c_gs * v_drive + c_gd * (v_bus + v_drive)


def gate_charge_at(
    qg_rated: Coulombs,
    vgs_rated: Volts,
    v_drive: Volts,
    v_plateau: Volts | None = None,
    q_plateau_end: Coulombs | None = None,
) -> Coulombs:
    """Estimate the gate charge at ``v_drive`` from a datasheet Q_g given at ``vgs_rated``.

    With the plateau known (``v_plateau`` and the charge at its end, ``q_plateau_end``) the
    charge is taken as linear beyond the plateau through the rated point. Without it, Q_g is
    scaled in proportion to the drive, which over-estimates above the rated drive and
    under-estimates below it. Either way this is a first-order estimate, not part data.

    qg_rated: total gate charge from the datasheet [C]; vgs_rated: V_GS at which it is
    given [V]; v_drive: drive level wanted [V]; v_plateau: Miller plateau voltage [V];
    q_plateau_end: gate charge at the end of the plateau [C].
    Raises ValueError when ``v_drive`` does not reach the plateau (the switch never fully
    turns on, so no total gate charge applies).
    """
    if v_plateau is None or q_plateau_end is None:
        return qg_rated * _ratio(v_drive, vgs_rated)
    if v_drive < v_plateau:
        raise ValueError("drive level below the Miller plateau: the switch does not fully turn on")
    slope = (qg_rated - q_plateau_end) / (vgs_rated - v_plateau)
    return q_plateau_end + slope * (v_drive - v_plateau)


def worst_positive_vgs(v_gate_max: Volts, v_source_min: Volts) -> Volts:
    """Largest V_GS: highest gate voltage against the lowest source voltage it can meet.

    v_gate_max: highest gate voltage to ground [V]; v_source_min: lowest source voltage
    to ground while the gate is that high [V].
    """
    return v_gate_max - v_source_min


def worst_negative_vgs(v_gate_min: Volts, v_source_max: Volts) -> Volts:
    """Most negative V_GS: lowest gate voltage against the highest source voltage (≤ 0 if bad).

    v_gate_min: lowest gate voltage to ground [V]; v_source_max: highest source voltage to
    ground while the gate is that low [V].
    """
    return v_gate_min - v_source_max


def negative_vgs_when_pulled_to_ground(
    v_source_held: Volts, v_return: Volts, v_threshold: Volts, source_follows: bool
) -> Volts:
    """V_GS when the pull-down returns to ground (or ``v_return``) instead of the source.

    If something holds the source up (switch-node capacitance, the other switch of a
    bridge, a freewheel path to the bus), the gate is pulled to ``v_return`` while the
    source stays at ``v_source_held``: V_GS = −(V_source,held − V_return), down to −V_bus.
    If the source can follow the gate down (a resistive load to ground), the switch turns
    off as V_GS nears its threshold and the source then sinks with the gate, so V_GS stays
    near −V_th — never beyond the held-source value.

    v_source_held: source voltage to ground at the moment the gate is pulled down [V];
    v_return: voltage the pull-down returns to [V]; v_threshold: gate threshold, > 0 [V];
    source_follows: True when nothing holds the source up.
    """
    held = v_return - v_source_held
    if not source_follows:
        return held
    return max(held, -v_threshold)


def level_shift_sink_current(v_logic: Volts, v_be: Volts, r_emitter: Ohms) -> Amps:
    """Collector current of an emitter-degenerated level-shift transistor: (V_logic − V_BE)/R_E.

    v_logic: logic high level at the base [V]; v_be: base–emitter drop [V];
    r_emitter: emitter resistor [Ohm].
    """
    return (v_logic - v_be) / r_emitter


def pullup_current(v_supply: Volts, r_pullup: Ohms) -> Amps:
    """Current a resistor pull-up supplies with the gate held low: V/R.

    v_supply: voltage across the pull-up when the gate is held down [V]; r_pullup: [Ohm].
    """
    return v_supply / r_pullup


def level_shift_margin(i_sink: Amps, i_pullup: Amps) -> Ratio:
    """How many times the shifter's sink current exceeds the pull-up current (> 1 to win).

    i_sink: current the level shifter can sink [A]; i_pullup: pull-up current [A].
    """
    return _ratio(i_sink, i_pullup)
