"""Bootstrap diode: reverse voltage, recovery charge and time, leakage and forward drop.

Recovery follows the charge-control view of a PN diode: the stored charge in steady
conduction is τ·I_F (Lauritzen and Ma, "A simple diode model with reverse recovery",
IEEE Trans. Power Electronics, 1991), the same quasi-static charge Q = TT·I_D that the
SPICE diode model uses.
"""

from __future__ import annotations

import math
from functools import lru_cache

from drivelint.physics._units import Amps, Coulombs, Kelvin, Ratio, Seconds, Volts, _coerce, _ratio

# CODATA 2018 exact values (SI 2019 redefinition).
BOLTZMANN = 1.380649e-23  # J/K
ELEMENTARY_CHARGE = 1.602176634e-19  # C

# SPICE's default nominal temperature (TNOM = 27 °C) and diode defaults for silicon:
# EG = 1.11 eV and XTI = 3, as in the SPICE3 / ngspice manual's diode model table.
SPICE_TNOM = 300.15  # K
SPICE_EG = 1.11  # V (E_g/q)
SPICE_XTI = 3.0


def diode_reverse_voltage(
    v_bus: Volts, v_boot: Volts, v_aux: Volts, ringing_margin: Volts = 0.0
) -> Volts:
    """Reverse voltage on the bootstrap diode with the switch node high.

    V_R = V_bus + V_boot − V_aux + margin: the cathode rides at V_bus + V_boot while the
    anode stays at the auxiliary rail.

    v_bus: switch-node voltage when high [V]; v_boot: hold-capacitor voltage [V];
    v_aux: rail feeding the anode [V]; ringing_margin: switch-node overshoot to add [V].
    """
    return v_bus + v_boot - v_aux + ringing_margin


def recovery_charge(tau: Seconds, i_forward: Amps) -> Coulombs:
    """Stored charge a diode gives back on reverse recovery: Q_rr ≈ τ·I_F.

    This is all the charge stored in steady conduction (charge-control model); recombination
    during a slow turn-off recovers less, so it is an upper bound for the budget.

    tau: carrier lifetime, SPICE TT [s]; i_forward: forward current before turn-off [A].
    """
    return tau * i_forward


def storage_time(tt: Seconds, i_forward: Amps, i_reverse: Amps) -> Seconds:
    """Time a diode keeps conducting backwards after its current reverses.

    t_s = TT·ln(1 + I_F/I_R): charge-control model, with the stored charge decaying as
    dQ/dt = −I_R − Q/TT from TT·I_F to zero (standard semiconductor texts).

    tt: transit time / carrier lifetime [s]; i_forward: forward current before the
    reversal [A]; i_reverse: magnitude of the reverse current the circuit drives [A].
    """
    return tt * math.log1p(_ratio(i_forward, i_reverse))


def thermal_voltage(t_kelvin: Kelvin) -> Volts:
    """V_T = k·T/q.

    t_kelvin: junction temperature [K].
    """
    k = _coerce(BOLTZMANN, BOLTZMANN, "J/K", t_kelvin)
    q = _coerce(ELEMENTARY_CHARGE, ELEMENTARY_CHARGE, "C", t_kelvin)
    return k * t_kelvin / q


def reverse_leakage(
    i_s: Amps,
    t_kelvin: Kelvin | None = None,
    n: Ratio = 1.0,
    eg: Volts | None = None,
    xti: Ratio = SPICE_XTI,
    t_nom: Kelvin | None = None,
) -> Amps:
    """First-order reverse leakage of a diode model: its saturation current at temperature.

    I_leak ≈ IS(T) = IS·exp((T/T_nom − 1)·E_G/(N·V_T(T)))·(T/T_nom)^(XTI/N), the SPICE3
    temperature law, which is what a simulator draws from a diode reverse biased well beyond
    N·V_T. Limits: it leaves out generation current in the depletion region, surface
    leakage and the approach to breakdown (BV), all of which make real silicon PN diodes
    leak far more than IS says; use a datasheet I_R where there is one. Schottky models,
    with large IS, are closer.

    i_s: SPICE IS at ``t_nom`` [A]; t_kelvin: junction temperature, None for ``t_nom`` [K];
    n: emission coefficient; eg: activation energy E_G/q, None for 1.11 V [V];
    xti: saturation-current temperature exponent; t_nom: model's nominal temperature,
    None for 300.15 K [K].
    """
    t_ref = _coerce(t_nom, SPICE_TNOM, "K", i_s)
    t = t_ref if t_kelvin is None else _coerce(t_kelvin, SPICE_TNOM, "K", i_s)
    gap = _coerce(eg, SPICE_EG, "V", i_s)
    warm = _ratio(t, t_ref)
    activation = (warm - 1.0) * _ratio(gap, n * thermal_voltage(t))
    power_law = float(warm ** (xti / n))
    return i_s * math.exp(activation) * power_law


def forward_voltage(i_f: Amps, i_s: Amps, n: Ratio, t_kelvin: Kelvin | None = None) -> Volts:
    """Forward drop of the ideal diode equation: V_F = n·V_T·ln(1 + I_F/I_S).

    Series resistance (SPICE RS) is not included; add I_F·RS for it.

    i_f: forward current [A]; i_s: saturation current at the junction temperature [A];
    n: emission coefficient; t_kelvin: junction temperature, None for 300.15 K [K].
    """
    t = _coerce(t_kelvin, SPICE_TNOM, "K", i_f)
    return n * thermal_voltage(t) * math.log1p(_ratio(i_f, i_s))


def saturation_current_at(
    i_s: Amps, t_kelvin: Kelvin | None = None, n: Ratio = 1.0, t_nom: Kelvin | None = None
) -> Amps:
    """A diode model's saturation current at ``t_kelvin`` (the SPICE3 temperature law, with
    E_G = 1.11 eV and XTI = 3). Same law as :func:`reverse_leakage`, named for its use in
    the forward drop. i_s: IS at t_nom [A]; t_kelvin, t_nom: [K] (None: 300.15 K); n: N."""
    return reverse_leakage(i_s, t_kelvin, n, t_nom=t_nom)


def diode_drop(
    i_f: Amps,
    i_s: Amps,
    n: Ratio = 1.0,
    r_s: float = 0.0,
    t_kelvin: Kelvin | None = None,
) -> Volts:
    """Forward drop of a SPICE diode model at ``i_f`` and ``t_kelvin``: N·V_T·ln(1 + I/IS(T))
    + I·RS (SPICE3 / ngspice diode model: Shockley law, series resistance, IS temperature law).

    i_f: forward current [A]; i_s: IS at the model's 27 °C [A]; n: N; r_s: RS [Ohm];
    t_kelvin: junction temperature, None for 300.15 K [K].
    """
    i_s_t = saturation_current_at(i_s, t_kelvin, n)
    return forward_voltage(i_f, i_s_t, n, t_kelvin) + i_f * r_s


def recharge_end_current(
    c_hold: float,
    n_vt: Volts,
    tt: Seconds,
    q_cycle: float,
    t_off: Seconds,
) -> Amps:
    """Current a diode still carries at the end of an off-time that puts back ``q_cycle``.

    The diode charges the hold capacitor C from an ideal source with the switch node held
    low (series resistance left out). Its junction current x and voltage v = N·V_T·ln(x/IS)
    obey C·dv_C/dt = x + TT·dx/dt (SPICE3 diode: Shockley current plus diffusion charge
    TT·x), with dv_C = −N·V_T·dx/x, so dx/dt = −x²/(TT·x + C·N·V_T). From x_0 just after the
    edge to x_1 at the end of t_off:

        t_off   = TT·ln(x_0/x_1) + C·N·V_T·(1/x_1 − 1/x_0)
        Q_cycle = ∫x dt = TT·(x_0 − x_1) + C·N·V_T·ln(x_0/x_1)

    (the diffusion charge TT·x_1 still stored at the end goes back in recovery; what stays
    in the capacitor per cycle is ∫x dt, which in steady state is the charge each on-time
    takes). Solved here for x_1. Without TT it is x_1 = C·N·V_T·(1 − exp(−Q/(C·N·V_T)))/t_off,
    i.e. C·N·V_T/t_off for a deep recharge and Q/t_off (the mean) for a shallow one.

    c_hold: hold capacitance [F]; n_vt: N·V_T [V]; tt: transit time TT [s]; q_cycle: charge
    put back per off-time [C]; t_off: off-time [s]. Plain floats only (it iterates).
    """
    return _recharge_end_current(
        float(c_hold), float(n_vt), float(tt), float(q_cycle), float(t_off)
    )


@lru_cache(maxsize=4096)
def _recharge_end_current(c: float, k: float, tau: float, q: float, t: float) -> float:
    """:func:`recharge_end_current` on plain floats; remembered, because the legs of one
    circuit are often copies of one another and each solve is a few thousand steps."""
    if q <= 0 or t <= 0 or c <= 0 or k <= 0:
        return 0.0
    cnv = c * k

    def times(x1: float) -> tuple[float, float]:
        """(t_off, Q) for an end current x1, with x0 from the charge equation."""
        # Q = tau·(x0 − x1) + cnv·ln(x0/x1): solve for x0 ≥ x1 by bisection on ln(x0/x1).
        # charge(L) exceeds both cnv·L and tau·x1·(e^L − 1): the root lies below each bound
        hi = q / cnv
        if tau * x1 > 0:
            hi = min(hi, math.log1p(q / (tau * x1)))
        lo, hi = 0.0, hi * (1 + 1e-12) + 1e-300
        for _ in range(60):
            mid = (lo + hi) / 2
            charge = tau * x1 * math.expm1(mid) + cnv * mid
            if charge < q:
                lo = mid
            else:
                hi = mid
        ratio = (lo + hi) / 2
        return tau * ratio + cnv * (-math.expm1(-ratio)) / x1, ratio

    # t_off falls as x1 grows: bisect x1 on a log scale between 1 fA and 1 kA.
    lo, hi = math.log(1e-15), math.log(1e3)
    for _ in range(60):
        mid = (lo + hi) / 2
        elapsed, _ = times(math.exp(mid))
        if elapsed > t:
            lo = mid
        else:
            hi = mid
    return math.exp((lo + hi) / 2)


def stored_charge_after_step(
    c_hold: float,
    i_s: float,
    n_vt: float,
    r_series: float,
    tt: float,
    i_before: float,
    v_step: float,
    t: float,
) -> float:
    """Charge stored in a diode ``t`` after the node under its capacitor steps down by
    ``v_step`` (a dead time letting a freewheeling current pull the switch node a diode
    drop below its low level): what the diode gives back when the node then rises.

    The SPICE3 diode in series with R and the capacitor C: junction current x with
    u = N·V_T·ln(1 + x/IS), diffusion charge TT·x, terminal current
    i = x + TT·dx/dt = (V_step − ΔV_C − (u(x) − u(x_0)) − (i − x_0)·R)/R + x_0 ... written
    as i = x_0 + (V_step − ΔV_C − u(x) + u(x_0))/R, C·dΔV_C/dt = i, TT·dx/dt = i − x,
    from x = x_0 (``i_before``, the steady current before the step). Integrated with
    fourth-order Runge-Kutta steps; the stored charge TT·x(t) is returned. Plain floats.

    c_hold: capacitor [F]; i_s: IS [A]; n_vt: N·V_T [V]; r_series: RS plus any series
    resistor [Ohm]; tt: TT [s]; i_before: the diode's current before the step [A];
    v_step: the step [V]; t: time after it [s].
    """
    c, is_, nvt, tau = float(c_hold), float(i_s), float(n_vt), float(tt)
    r = max(float(r_series), 1e-3)
    x0, step, span = float(i_before), float(v_step), float(t)
    if tau <= 0:
        return 0.0
    if step <= 0 or span <= 0 or c <= 0:
        return tau * x0
    u0 = nvt * math.log1p(x0 / is_)

    def rates(x: float, rise: float) -> tuple[float, float]:
        u = nvt * math.log1p(max(x, 0.0) / is_)
        current = x0 + (step - rise - (u - u0)) / r
        return (current - x) / tau, current / c

    dt = min(r * c, tau, span) / 50.0
    count = max(1, min(200_000, int(math.ceil(span / dt))))
    dt = span / count
    x, rise = x0, 0.0
    for _ in range(count):
        k1 = rates(x, rise)
        k2 = rates(x + dt / 2 * k1[0], rise + dt / 2 * k1[1])
        k3 = rates(x + dt / 2 * k2[0], rise + dt / 2 * k2[1])
        k4 = rates(x + dt * k3[0], rise + dt * k3[1])
        x += dt / 6 * (k1[0] + 2 * k2[0] + 2 * k3[0] + k4[0])
        rise += dt / 6 * (k1[1] + 2 * k2[1] + 2 * k3[1] + k4[1])
    return tau * max(x, 0.0)
