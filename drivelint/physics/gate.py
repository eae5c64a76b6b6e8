"""Gate charge and gate–source voltage of a floating switch, and level-shifter currents."""

from __future__ import annotations

import math

from drivelint.physics._units import Amps, Coulombs, Farads, Ohms, Ratio, Seconds, Volts, _ratio


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


def gate_charge_at_drive(
    qg_rated: Coulombs,
    vgs_rated: Volts,
    v_drive: Volts,
    qgd: Coulombs | None = None,
) -> Coulombs:
    """The gate charge at ``v_drive`` from a datasheet's total Q_g at ``vgs_rated`` and Q_gd.

    The gate-charge curve of a power MOSFET rises with slope C_gs below the Miller plateau,
    stays on the plateau while Q_gd is delivered, then rises with slope C_iss at low V_DS.
    Taking the two slopes as equal (C) makes the curve above the plateau
    Q(V) = Q_gd + C·V with C = (Q_g − Q_gd)/V_GS,rated, which passes through the rated point
    and needs no more than the two charges a datasheet always gives. Without Q_gd the
    charge is scaled in proportion to the drive, Q(V) = Q_g·V/V_GS,rated. Valid for drives
    beyond the plateau (a switch driven below it does not fully turn on).

    qg_rated: total gate charge [C] at vgs_rated [V]; v_drive: drive level [V];
    qgd: gate–drain (Miller) charge [C], None when unknown.
    """
    if qgd is None:
        return qg_rated * _ratio(v_drive, vgs_rated)
    return qgd + (qg_rated - qgd) * _ratio(v_drive, vgs_rated)


def gate_capacitance_above_plateau(
    qg_rated: Coulombs, vgs_rated: Volts, qgd: Coulombs | None = None
) -> Farads:
    """Slope dQ/dV of the gate-charge curve beyond the plateau: (Q_g − Q_gd)/V_GS,rated.

    The same equal-slopes curve as :func:`gate_charge_at_drive`; without Q_gd, Q_g/V_GS.
    qg_rated: total gate charge [C] at vgs_rated [V]; qgd: Miller charge [C] or None.
    """
    return (qg_rated - (qgd if qgd is not None else 0.0 * qg_rated)) / vgs_rated


def vdmos_gate_drain_capacitance(v_gd: Volts, cgd_min: Farads, cgd_max: Farads, a: float) -> Farads:
    """Gate–drain capacitance of the ngspice VDMOS model at V_GD = ``v_gd``.

    With s = (C_max − C_min)/(1 + π/2) and y = C_max − s: C = s·tanh(a·V) + y for V > 0 and
    C = s·atan(a·V) + y for V ≤ 0, so C tends to C_max with the gate well above the drain
    and to C_min with the drain far above the gate (ngspice VDMOS model, the capacitance
    function of its device support code; parameters CGDMIN, CGDMAX, A).

    v_gd: gate–drain voltage [V]; cgd_min, cgd_max: [F]; a: shape parameter [1/V].
    """
    s = (cgd_max - cgd_min) / (1.0 + math.pi / 2.0)
    y = cgd_max - s
    x = a * v_gd
    if _magnitude(x) > 0:
        return s * math.tanh(_magnitude(x)) + y
    return s * math.atan(_magnitude(x)) + y


def vdmos_gate_drain_charge(v_gd: Volts, cgd_min: Farads, cgd_max: Farads, a: float) -> Coulombs:
    """Charge on the VDMOS gate–drain capacitance at V_GD = ``v_gd`` (zero at 0 V).

    The integral of :func:`vdmos_gate_drain_capacitance`: y·V + s·ln(cosh(a·V))/a for V > 0,
    y·V + s·(V·atan(a·V) − ln(1 + (a·V)²)/(2a)) for V ≤ 0.
    v_gd: gate–drain voltage [V]; cgd_min, cgd_max: [F]; a: shape parameter [1/V].
    """
    s = (cgd_max - cgd_min) / (1.0 + math.pi / 2.0)
    y = cgd_max - s
    x = _magnitude(a * v_gd)
    if x > 0:
        # ln(cosh(x)) = x − ln 2 + ln(1 + exp(−2x)), which does not overflow
        return y * v_gd + s * v_gd * (x - math.log(2.0) + math.log1p(math.exp(-2.0 * x))) / x
    if x == 0:
        return y * v_gd
    return y * v_gd + s * v_gd * (math.atan(x) - math.log1p(x * x) / (2.0 * x))


def vdmos_gate_charge(
    cgs: Farads,
    cgd_min: Farads,
    cgd_max: Farads,
    a: float,
    v_drive: Volts,
    v_switched: Volts,
) -> Coulombs:
    """Charge the gate of a VDMOS model takes to turn on while its drain–source voltage falls
    from ``v_switched`` to zero: C_gs·V_drive + Q_gd(V_drive) − Q_gd(−V_switched).

    V_GD moves from −V_switched (off, blocking) to +V_drive (on, V_DS ≈ 0); the gate–drain
    charge is the difference of :func:`vdmos_gate_drain_charge` at the two ends.
    cgs, cgd_min, cgd_max: model capacitances [F]; a: [1/V]; v_drive: final V_GS [V];
    v_switched: V_DS before turn-on [V].
    """
    q_gd = vdmos_gate_drain_charge(v_drive, cgd_min, cgd_max, a) - vdmos_gate_drain_charge(
        -v_switched, cgd_min, cgd_max, a
    )
    return cgs * v_drive + q_gd


def shared_droop(
    v_start: Volts,
    c_hold: Farads,
    q_gate: Coulombs,
    c_gate: Farads,
    q_other: Coulombs = 0.0,
) -> Volts:
    """Droop of a hold capacitor that charges a gate (and feeds other loads) in one on-time.

    The capacitor at V_0 gives the gate its charge Q_g(V) while the gate rises to where the
    two meet; near the end of the charge curve Q_g(V) = Q_g(V_0) − C_g·(V_0 − V), so
    C·(V_0 − V) = Q_g(V_0) − C_g·(V_0 − V) + Q_other gives ΔV = (Q_g(V_0) + Q_other)/(C + C_g):
    charge sharing between the hold capacitor and the gate, which the plain Q/C of the
    sizing formula leaves out. The droop never exceeds V_0 (the gate cannot take more than
    the capacitor holds).

    v_start: hold voltage before turn-on [V]; c_hold: hold capacitance [F]; q_gate: gate
    charge at V_0 [C]; c_gate: slope of the gate-charge curve near V_0 [F]; q_other: charge
    drawn by everything else during the on-time [C].
    """
    droop = (q_gate + q_other) / (c_hold + c_gate)
    return min(droop, v_start)


def _magnitude(value: float) -> float:
    """A plain float from a float or a dimensionless pint quantity."""
    if hasattr(value, "units") and hasattr(value, "to"):
        return float(value.to("dimensionless").magnitude)
    return float(value)


def bjt_sink_capability(
    v_drive: Volts, v_be: Volts, r_base: Ohms, r_emitter: Ohms, beta: Ratio
) -> Amps:
    """The largest collector current a bipolar switch driven through a base resistor can
    sink in its active region: I_C = β·(V_drive − V_BE)/(R_B + (β + 1)·R_E).

    Textbook common-emitter bias with emitter degeneration (e.g. Sedra & Smith,
    Microelectronic Circuits, the BJT DC bias chapter): the base loop
    V_drive = I_B·R_B + V_BE + (β + 1)·I_B·R_E. Asked to sink more, the transistor
    saturates; asked for less than this, it cannot pull its collector down.
    v_drive: base drive level [V]; v_be: base–emitter drop [V]; r_base, r_emitter [Ohm];
    beta: forward current gain [1].
    """
    if v_drive <= v_be:
        return 0.0 * (v_drive - v_be) / r_base  # zero, as a current (pint keeps the unit)
    return beta * (v_drive - v_be) / (r_base + (beta + 1.0) * r_emitter)


def node_against_pull_up(v_top: Volts, i_sink: Amps, r_pull_up: Ohms, v_floor: Volts) -> Volts:
    """Where a node pulled up to ``v_top`` through R_pu settles while a transistor sinks at
    most ``i_sink`` from it: max(V_top − I_sink·R_pu, V_floor) (Ohm's law; V_floor is the
    lowest the transistor can take it, its saturation level).

    v_top: the pull-up's supply [V]; i_sink: the sink's capability [A]; r_pull_up [Ohm];
    v_floor: the saturated transistor's collector level [V].
    """
    return max(v_top - i_sink * r_pull_up, v_floor)


def base_resistor_for(
    i_collector: Amps, v_drive: Volts, v_be: Volts, r_emitter: Ohms, beta: Ratio
) -> Ohms:
    """The base resistor that lets a bipolar switch sink ``i_collector`` in its active
    region: R_B = β·(V_drive − V_BE)/I_C − (β + 1)·R_E, the bias relation of
    :func:`bjt_sink_capability` solved for R_B (≤ 0: the emitter resistor alone caps the
    current below ``i_collector``).
    """
    return beta * (v_drive - v_be) / i_collector - (beta + 1.0) * r_emitter


def induced_gate_voltage(delta_v: Volts, c_gd: Farads, c_gs: Farads) -> Volts:
    """Gate voltage a drain step couples onto a gate that nothing holds:
    ΔV_DS·C_gd/(C_gd + C_gs), the capacitive divider of the two gate capacitances (charge
    conservation on the floating gate node; textbook relation).

    delta_v: the drain's step against the source [V]; c_gd: gate–drain capacitance over
    that step [F]; c_gs: gate–source capacitance (plus anything else from the gate to the
    source's side) [F].
    """
    return delta_v * c_gd / (c_gd + c_gs)


def induced_gate_voltage_ramp(
    delta_v: Volts, rise_time: Seconds, c_gd: Farads, c_gs: Farads, r_gs: Ohms
) -> Volts:
    """Peak gate voltage a linear drain ramp (ΔV over ``rise_time``) couples onto a gate held
    to its source by ``r_gs``.

    The gate node obeys (C_gs + C_gd)·dV/dt + V/R = C_gd·S with S = ΔV/t_r, so
    V(t) = R·C_gd·S·(1 − e^(−t/τ)) with τ = R·(C_gs + C_gd): an RC differentiator, whose
    peak is at the end of the ramp. A resistor far above t_r/(C_gs + C_gd) leaves the
    divider of :func:`induced_gate_voltage`; a small one holds the gate near R·C_gd·S.

    delta_v: drain step [V]; rise_time: its duration, > 0 [s]; c_gd, c_gs: [F];
    r_gs: gate–source resistance, > 0 [Ohm].
    """
    tau = r_gs * (c_gs + c_gd)
    slope = delta_v / rise_time
    return r_gs * c_gd * slope * -math.expm1(-_ratio(rise_time, tau))


def vdmos_average_gate_drain_capacitance(
    delta_v: Volts, cgd_min: Farads, cgd_max: Farads, a: float
) -> Farads:
    """The gate–drain capacitance of the ngspice VDMOS model averaged over the drain rising
    ``delta_v`` above a gate that stays near its source: (Q_gd(0) − Q_gd(−ΔV))/ΔV, the
    charge the step moves through C_gd over the step (:func:`vdmos_gate_drain_charge`).

    delta_v: drain step, > 0 [V]; cgd_min, cgd_max: [F]; a: shape parameter [1/V].
    """
    return -vdmos_gate_drain_charge(-delta_v, cgd_min, cgd_max, a) / delta_v


RAMP_STEPS = 1000  # integration steps over the ramp (midpoint rule)


def induced_gate_voltage_ramp_vdmos(
    delta_v: Volts,
    rise_time: Seconds,
    cgs: Farads,
    cgd_min: Farads,
    cgd_max: Farads,
    a: float,
    r_gs: Ohms,
) -> Volts:
    """Peak gate voltage of :func:`induced_gate_voltage_ramp` with the ngspice VDMOS model's
    voltage-dependent C_gd (:func:`vdmos_gate_drain_capacitance`), integrated over the ramp.

    (C_gs + C_gd(V_G − V_D))·dV_G/dt = C_gd(V_G − V_D)·S − V_G/R with V_D = S·t: C_gd is
    largest while the drain is still near the gate, so a resistor small enough to hold the
    gate sees its highest voltage early in the ramp, not at its end; the integration (the
    midpoint rule over ``RAMP_STEPS`` steps) follows that. ``r_gs`` may be ``math.inf``.

    delta_v: drain step [V]; rise_time: [s]; cgs, cgd_min, cgd_max: [F]; a: [1/V];
    r_gs: [Ohm].
    """
    unit = delta_v / _magnitude_si(delta_v, "V") if _magnitude_si(delta_v, "V") else delta_v
    dv = _magnitude_si(delta_v, "V")
    tr = _magnitude_si(rise_time, "s")
    c_s, c_lo, c_hi = (_magnitude_si(c, "F") for c in (cgs, cgd_min, cgd_max))
    shape = _magnitude_si(a, "1/V")
    conductance = (
        0.0 if math.isinf(_magnitude_si(r_gs, "ohm")) else 1.0 / _magnitude_si(r_gs, "ohm")
    )
    slope = dv / tr
    step = tr / RAMP_STEPS

    def rate(t: float, v: float) -> float:
        c_gd = vdmos_gate_drain_capacitance(v - slope * t, c_lo, c_hi, shape)
        return (c_gd * slope - v * conductance) / (c_s + c_gd)

    v = peak = 0.0
    for index in range(RAMP_STEPS):
        t = index * step
        half = v + rate(t, v) * step / 2
        v += rate(t + step / 2, half) * step
        peak = max(peak, v)
    return peak * unit


def _magnitude_si(value: float, unit: str) -> float:
    """A float in SI ``unit`` from a float or a pint quantity."""
    if hasattr(value, "units") and hasattr(value, "to"):
        return float(value.to(unit).magnitude)
    return float(value)
