"""The switch node's undershoot at the high side's turn-off, and the boot overcharge it causes.

Sources: the inductor law v = L·di/dt and the first-order RC step response (textbook circuit
theory); V_S undershoot below COM, L·di/dt of the commutation loop (International Rectifier
AN-978 and design tip DT04-4, from memory); the square-law channel I = β/2·(V_GS − V_th)² of
the MOS1 equations (SPICE3 / ngspice manual), so g_m = β·(V_GS − V_th) = 2·I/(V_GS − V_th);
the gate's discharge through R_off, dV_GS/dt = V/(R·C) (gate-charge texts, L. Balogh, TI
SLUA618, from memory).
"""

# Physics functions are typed with float aliases but are called here with pint quantities
# on purpose, so attribute and argument checks on those calls are switched off.
# mypy: disable-error-code="attr-defined, arg-type, type-arg, operator"

from __future__ import annotations

import math

import pint
import pytest

from drivelint.physics import commutation, switching


def test_square_law_transconductance_matches_beta_times_overdrive() -> None:
    # KP = 10 A/V² (VDMOS, W/L = 1): 20 A at V_GS = 3 + √(2·20/10) = 5 V, g_m = KP·2 V = 20 S
    beta, vth = 10.0, 3.0
    v_pl = vth + math.sqrt(2 * 20.0 / beta)
    assert commutation.square_law_transconductance(20.0, v_pl, vth) == pytest.approx(
        beta * (v_pl - vth)
    )
    assert commutation.square_law_transconductance(20.0, v_pl, vth) == pytest.approx(20.0)


def test_undershoot_by_hand() -> None:
    # 20 S × 5 V/(23 Ω × 2 nF) = 2.174 A/ns; 15 nH × 2.174 A/ns + 0.8 V = 33.4 V below COM
    rate = commutation.current_fall_rate(20.0, 5.0, 23.0, 2e-9)
    assert rate == pytest.approx(100.0 / 46e-9)
    v = commutation.switch_node_undershoot(0.8, 15e-9, rate)
    assert v == pytest.approx(-(0.8 + 15e-9 * rate))
    assert v == pytest.approx(-33.41, abs=0.01)
    # a negative turn-off bias discharges the gate faster
    assert commutation.current_fall_rate(20.0, 5.0, 23.0, 2e-9, -5.0) == pytest.approx(2 * rate)


def test_the_limits_round_trip() -> None:
    g_m, v_pl, c_iss, l_s, v_f = 20.0, 5.0, 2e-9, 15e-9, 0.8
    rate = commutation.current_fall_rate(g_m, v_pl, 23.0, c_iss)
    l_max = commutation.max_loop_inductance(-5.0, v_f, rate)
    assert commutation.switch_node_undershoot(v_f, l_max, rate) == pytest.approx(-5.0)
    r_min = commutation.min_turn_off_resistance(g_m, v_pl, c_iss, l_s, -5.0, v_f)
    slow = commutation.current_fall_rate(g_m, v_pl, r_min, c_iss)
    assert commutation.switch_node_undershoot(v_f, l_s, slow) == pytest.approx(-5.0)
    # the diode's drop alone at the limit: no resistance is enough
    assert math.isinf(commutation.min_turn_off_resistance(g_m, v_pl, c_iss, l_s, -0.8, v_f))
    assert commutation.max_loop_inductance(0.5, v_f, rate) < 0


def test_current_fall_time_is_the_third_interval_of_the_turn_off() -> None:
    # t_3 = R·C·ln(V_pl/V_th): the difference between turn_off_time with and without V_th
    with_vth = switching.turn_off_time(10.0, 2e-9, 12.0, 5.0, 20e-9, 3.0)
    without = switching.turn_off_time(10.0, 2e-9, 12.0, 5.0, 20e-9)
    t3 = switching.current_fall_time(10.0, 2e-9, 5.0, 3.0)
    assert t3 == pytest.approx(20e-9 * math.log(5 / 3))
    assert with_vth - without == pytest.approx(t3)
    # the peak rate of a square-law fall is 2·V_pl·ln(V_pl/V_th)/(V_pl − V_th) times the mean
    peak = commutation.current_fall_rate(20.0, 5.0, 10.0, 2e-9)
    assert peak * t3 / 20.0 == pytest.approx(2 * 5 * math.log(5 / 3) / 2)


def test_boot_overcharge_and_its_resistor() -> None:
    # 30 V for 10 ns through τ = 20 ns: 30·(1 − e^−0.5) = 11.80 V (the RC step, dead time)
    assert commutation.boot_overcharge(30.0, 10e-9, 20e-9) == pytest.approx(
        30 * (1 - math.exp(-0.5))
    )
    assert commutation.charge_fraction(1e-9, 0.0) == 1.0
    # the series RLC: no resistance, the inductor's energy into C, ½·L·I² = ½·C·ΔV²
    inductance, c, i = 15e-9, 100e-9, 20.0
    assert commutation.boot_path_overcharge(i, inductance, 0.0, c) == pytest.approx(
        i * math.sqrt(inductance / c)
    )
    # much resistance: the RC path's share of the L·I volt-seconds, I·L/(R·C)
    assert commutation.boot_path_overcharge(i, inductance, 50.0, c) == pytest.approx(
        i * inductance / (50.0 * c), rel=0.02
    )
    # critically damped (ζ = 1): I·Z0/e
    z0 = math.sqrt(inductance / c)
    assert commutation.boot_path_overcharge(i, inductance, 2 * z0, c) == pytest.approx(
        i * z0 / math.e
    )
    # continuous through ζ = 1 and falling with the resistance
    near = [
        commutation.boot_path_overcharge(i, inductance, 2 * z0 * k, c) for k in (0.999, 1.0, 1.001)
    ]
    assert near[0] == pytest.approx(near[1], rel=1e-3)
    assert near[2] == pytest.approx(near[1], rel=1e-3)
    assert near[0] > near[2]
    # ζ = 0.26: exp(−ζ·acos ζ/√(1 − ζ²)) = 0.703 of I·Z0 (by hand: 7.75 V × 0.703 = 5.45 V)
    assert commutation.boot_path_overcharge(i, inductance, 0.2, c) == pytest.approx(5.45, abs=0.01)
    r = commutation.min_series_resistance(i, inductance, c, 0.2, 2.0)
    assert commutation.boot_path_overcharge(i, inductance, r + 0.2, c) == pytest.approx(
        2.0, rel=2e-3
    )
    assert commutation.min_series_resistance(i, inductance, c, 0.2, 40.0) == 0.0
    assert math.isinf(commutation.min_series_resistance(i, inductance, c, 0.2, 0.0))


def test_with_pint(ureg: pint.UnitRegistry) -> None:
    q = ureg.Quantity
    g_m = commutation.square_law_transconductance(q(20, "A"), q(5, "V"), q(3, "V"))
    assert g_m.to("S").magnitude == pytest.approx(20.0)
    rate = commutation.current_fall_rate(g_m, q(5, "V"), q(23, "ohm"), q(2, "nF"))
    assert rate.to("A/ns").magnitude == pytest.approx(100 / 46)
    v = commutation.switch_node_undershoot(q(0.8, "V"), q(15, "nH"), rate)
    assert v.to("V").magnitude == pytest.approx(-33.41, abs=0.01)
    l_max = commutation.max_loop_inductance(q(-5, "V"), q(0.8, "V"), rate)
    assert l_max.to("nH").magnitude == pytest.approx(4.2 / 2.1739, rel=1e-3)
    r_min = commutation.min_turn_off_resistance(
        g_m, q(5, "V"), q(2, "nF"), q(15, "nH"), q(-5, "V"), q(0.8, "V")
    )
    assert r_min.to("ohm").magnitude == pytest.approx(20 * 5 * 15e-9 / (2e-9 * 4.2))
    assert commutation.boot_overcharge(q(30, "V"), q(10, "ns"), q(20, "ns")).to(
        "V"
    ).magnitude == pytest.approx(30 * (1 - math.exp(-0.5)))
    dv = commutation.boot_path_overcharge(q(20, "A"), q(15, "nH"), q(0.2, "ohm"), q(100, "nF"))
    assert dv.to("V").magnitude == pytest.approx(5.45, abs=0.01)
    r = commutation.min_series_resistance(
        q(20, "A"), q(15, "nH"), q(100, "nF"), q(0.2, "ohm"), q(2, "V")
    )
    assert r.to("ohm").magnitude == pytest.approx(
        commutation.min_series_resistance(20.0, 15e-9, 100e-9, 0.2, 2.0), rel=1e-6
    )
    t3 = switching.current_fall_time(q(10, "ohm"), q(2, "nF"), q(5, "V"), q(3, "V"))
    assert t3.to("ns").magnitude == pytest.approx(20 * math.log(5 / 3))


def _second_order_peak(eps_k: float, y0: float) -> float:
    """The peak of −dy/ds for ε·k·y'' + y' + y = 0, y(0) = y0, y'(0) = 0 (a linear
    second-order system released from rest: y = A·e^(r1·s) + B·e^(r2·s), the roots of
    ε·k·r² + r + 1 = 0; the peak where r1·e^(r1·s) = r2·e^(r2·s); textbook ODEs)."""
    root = math.sqrt(1.0 - 4.0 * eps_k)
    r1, r2 = (-1.0 + root) / (2.0 * eps_k), (-1.0 - root) / (2.0 * eps_k)
    s = math.log(r2 / r1) / (r1 - r2)
    return -(y0 * r1 * r2 / (r1 - r2)) * (math.exp(r2 * s) - math.exp(r1 * s))


@pytest.mark.parametrize("l_s", [2e-9, 15e-9, 25e-9])
def test_feedback_with_a_constant_transconductance_is_a_linear_second_order_system(
    l_s: float,
) -> None:
    # With i = I − g_m·(V_pl − x) the gate's node gives C_gd·L·g_m·x'' + C_iss·x' + x/R = 0
    # (V_off = 0): in s = t/(R·C_iss) and y = x/(V_pl − V_th), ε·k·y'' + y' + y = 0 with
    # ε·k = C_gd·L·g_m/(R·C_iss²); di/dt = g_m·dx/dt, so the peak rate is the closed form's
    # (with more inductance the current is gone before the closed form's peak: the
    # integration stops there, as the fall does)
    i_load, g_m, v_pl, vth, r, c_iss, c_gd = 20.0, 20.0, 5.0, 4.0, 23.0, 2e-9, 25e-12
    tau, span = r * c_iss, v_pl - vth
    eps_k = c_gd * l_s * g_m / (tau * c_iss)
    expected = g_m * span / tau * _second_order_peak(eps_k, v_pl / span)
    rate = commutation.current_fall_rate_with_feedback(
        i_load, g_m, v_pl, vth, r, c_iss, c_gd, l_s, square_law=False
    )
    assert rate == pytest.approx(expected, rel=0.005)
    assert rate < commutation.current_fall_rate(g_m, v_pl, r, c_iss)


def test_feedback_vanishes_without_c_gd_or_inductance() -> None:
    simple = commutation.current_fall_rate(20.0, 5.0, 23.0, 2e-9)
    for c_gd, l_s in ((0.0, 15e-9), (25e-12, 0.0), (1e-15, 1e-12)):
        rate = commutation.current_fall_rate_with_feedback(
            20.0, 20.0, 5.0, 3.0, 23.0, 2e-9, c_gd, l_s
        )
        assert rate == pytest.approx(simple, rel=1e-3)
    # more inductance, more feedback: the rate falls, the swing L·di/dt still grows
    rates = [
        commutation.current_fall_rate_with_feedback(
            20.0, 20.0, 5.0, 3.0, 23.0, 2e-9, 25e-12, henries
        )
        for henries in (1e-9, 5e-9, 15e-9, 50e-9)
    ]
    assert rates == sorted(rates, reverse=True)
    swings = [h * r for h, r in zip((1e-9, 5e-9, 15e-9, 50e-9), rates, strict=True)]
    assert swings == sorted(swings)


def test_feedback_runs_on_quantities() -> None:
    u = pint.UnitRegistry()
    rate = commutation.current_fall_rate_with_feedback(
        20.0 * u.A,
        20.0 * u.S,
        5.0 * u.V,
        3.0 * u.V,
        23.0 * u.ohm,
        2.0 * u.nF,
        25.0 * u.pF,
        15.0 * u.nH,
    )
    plain = commutation.current_fall_rate_with_feedback(
        20.0, 20.0, 5.0, 3.0, 23.0, 2e-9, 25e-12, 15e-9
    )
    assert rate.to("A/s").magnitude == pytest.approx(plain)


def test_the_limits_with_feedback_meet_the_limit() -> None:
    edge = commutation.TurnOffEdge(20.0, 20.0, 5.0, 3.0, 2e-9, 25e-12)
    l_max = commutation.max_loop_inductance_with_feedback(edge, -5.0, 0.8, 23.0)
    assert edge.depth(0.8, 23.0, l_max) == pytest.approx(5.0, rel=2e-3)
    # the feedback only slows the fall: the inductance allowed is more than without it
    simple = commutation.max_loop_inductance(
        -5.0, 0.8, commutation.current_fall_rate(20.0, 5.0, 23.0, 2e-9)
    )
    assert l_max > simple
    r_min = commutation.min_turn_off_resistance_with_feedback(edge, -5.0, 0.8, 23.0, 15e-9)
    assert edge.depth(0.8, r_min, 15e-9) == pytest.approx(5.0, rel=2e-3)
    assert r_min < commutation.min_turn_off_resistance(20.0, 5.0, 2e-9, 15e-9, -5.0, 0.8)
    # already within: the resistance as it is; the diode's drop alone: none is enough
    assert commutation.min_turn_off_resistance_with_feedback(edge, -5.0, 0.8, 23.0, 1e-10) == 23.0
    assert math.isinf(
        commutation.min_turn_off_resistance_with_feedback(edge, -0.8, 0.8, 23.0, 15e-9)
    )
