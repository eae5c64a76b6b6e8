"""switching-loss: transition times from the gate drive, the losses they cost, the junction."""

from __future__ import annotations

from pathlib import Path

import pytest
from crosscheck import facts_of
from nominal import at_nominal
from simulator import run_transient

from drivelint.checks import switching
from drivelint.checks.base import Finding
from drivelint.checks.facts import StageFacts
from drivelint.checks.registry import registry
from drivelint.diagnostics import Severity
from drivelint.pipeline import check_path, check_text
from drivelint.stages.model import DriveStage

RULE = "switching-loss"
ROOT = Path(__file__).resolve().parents[2]
EXAMPLES = ROOT / "examples"
OUTSIDE = Path(__file__).resolve().parent / "outside"
DECKS = Path(__file__).resolve().parent / "switching"
BAD = DECKS / "buck48_slow_gate.cir"
GOOD = DECKS / "buck48_firm_gate.cir"
HOT_LOW = DECKS / "buck48_hot_low_side.cir"
CARD = registry()[RULE]


def lint(text: str) -> list[Finding]:
    result = check_text(at_nominal(text))
    assert not [d for d in result.diagnostics if d.severity.label == "error"], result.diagnostics
    return [f for f in result.findings if f.rule == RULE]


def _by_kind(findings: list[Finding]) -> dict[str, Finding]:
    return {("edge" if "edge_fraction" in f.values else "junction"): f for f in findings}


def test_bad_deck_fires_on_the_edges_and_the_junction() -> None:
    found = _by_kind(lint(BAD.read_text(encoding="utf-8")))
    edge, heat = found["edge"], found["junction"]
    assert edge.device == "rg" and edge.span.line == 15 and edge.severity == Severity.WARNING
    assert heat.device == "m1" and heat.span.line == 16 and heat.severity == Severity.ERROR
    values = heat.values
    # CGDO·W·48 V = 7.2 nC; the plateau V_th + √(2·4.05 A/50 A/V²) = 3.40 V; the boot
    # supply 12 V less the diode's drop; 100 Ω each way (the behavioural driver's 0.1 Ω is
    # inside the subcircuit, its output resistance not known: 0 Ω, stated)
    assert values["q_gd"].value == pytest.approx(7.2e-9)
    assert values["v_plateau"].value == pytest.approx(3.402, abs=0.01)
    assert values["r_on"].value == pytest.approx(100.0)
    drive = values["v_drive"].value
    assert values["i_gate_on"].value == pytest.approx((drive - 3.402) / 100, rel=1e-3)
    assert values["i_gate_off"].value == pytest.approx(3.402 / 100, rel=1e-3)
    # Q_gs2 = CGSO·W·(V_pl − V_th) = 2 nF × 0.402 V
    assert values["q_gs2"].value == pytest.approx(0.804e-9, rel=0.01)
    t_off = 7.2e-9 / 0.03402 + 0.804e-9 / ((3.0 + 3.402) / 2 / 100)
    assert values["t_off"].value == pytest.approx(t_off, rel=1e-3)
    # the inductor's steady state: 4.01 A average, 1.92 A ripple
    assert values["i_turn_on"].value == pytest.approx(3.05, abs=0.02)
    assert values["i_turn_off"].value == pytest.approx(4.97, abs=0.02)
    p_sw = 0.5 * 48 * (3.05 * values["t_on"].value + 4.97 * t_off) * 1e5
    assert values["p_switching"].value == pytest.approx(p_sw, rel=0.01)
    assert values["t_junction"].value == pytest.approx(
        300.15 + values["p_switch"].value * 62, rel=1e-6
    )
    assert values["t_junction_limit"].value == pytest.approx(273.15 + 110)
    assert values["tj_max"].value == pytest.approx(273.15 + 150)
    assert "above its rating of 150.0 °C" in heat.message
    assert "lower rg to" in heat.fix.lower() and "lower rg to" in edge.fix.lower()
    assert edge.values["edge_fraction"].value == pytest.approx(
        (edge.values["t_on"].value + edge.values["t_off"].value) * 1e5
    )
    assert edge.values["edge_fraction_max"].value == pytest.approx(0.02)


def test_good_deck_is_quiet() -> None:
    assert lint(GOOD.read_text(encoding="utf-8")) == []


def test_the_suggested_resistors_make_it_quiet() -> None:
    text = BAD.read_text(encoding="utf-8")
    found = _by_kind(lint(text))
    edge_ohms = found["edge"].values["suggested_gate_resistor"].value
    heat_ohms = found["junction"].values["suggested_gate_resistor"].value
    assert edge_ohms == pytest.approx(56.0) and heat_ohms == pytest.approx(33.0)
    fixed = _by_kind(lint(text.replace("RG hgate g 100", f"RG hgate g {edge_ohms:g}")))
    assert "edge" not in fixed
    assert lint(text.replace("RG hgate g 100", f"RG hgate g {heat_ohms:g}")) == []


def test_without_a_thermal_resistance_only_the_edges_are_judged() -> None:
    text = BAD.read_text(encoding="utf-8").replace(" rth_ja=62", "")
    assert set(_by_kind(lint(text))) == {"edge"}


def test_between_the_derated_limit_and_the_rating_is_a_warning() -> None:
    # 39 Ω: the edges within 2 %, the junction between 110 °C and 150 °C
    text = BAD.read_text(encoding="utf-8").replace("RG hgate g 100", "RG hgate g 39")
    (heat,) = lint(text)
    assert heat.severity == Severity.WARNING
    assert 273.15 + 110 < heat.values["t_junction"].value < 273.15 + 150
    assert "its derated limit of 110.0 °C" in heat.message


def test_load_current_condition_sets_the_operating_point() -> None:
    # 2 A given at both edges: the plateau V_th + √(2·2 A/50 A/V²) = 3.28 V
    text = BAD.read_text(encoding="utf-8").replace(
        "* drivelint: part", "* drivelint: conditions load_current=2\n* drivelint: part"
    )
    heat = _by_kind(lint(text))["junction"]
    values = heat.values
    assert values["i_rms"].value == pytest.approx(2.0)
    assert values["i_turn_on"].origin.startswith("directive")
    assert values["v_plateau"].value == pytest.approx(3.283, abs=0.01)
    p_sw = 0.5 * 48 * 2.0 * (values["t_on"].value + values["t_off"].value) * 1e5
    assert values["p_switching"].value == pytest.approx(p_sw, rel=1e-6)


def test_an_undamped_lead_inductance_is_a_resistive_load() -> None:
    # 47 uH into 3 Ω is L/R = 15.7 us; 47 nH is 15.7 ns, short against the on- and
    # off-time: the current follows the resistor, (48 − 0)/3 = 16 A at turn-off, none at
    # turn-on (it has decayed through the low side's body diode)
    text = BAD.read_text(encoding="utf-8").replace("L1 sw out 47u IC=4", "L1 sw out 47n")
    stage, facts = _facts(text)
    point = switching.operating_point(stage, facts)
    assert point is not None
    assert point.i_turn_off.value == pytest.approx(16.0)
    assert point.i_turn_on.value == 0.0


def test_in_between_the_load_is_not_guessed() -> None:
    # 2 uH into 3 Ω: L/R 0.67 us, neither long nor short against 2.5 us / 7.5 us
    text = BAD.read_text(encoding="utf-8").replace("L1 sw out 47u IC=4", "L1 sw out 2u")
    stage, facts = _facts(text)
    assert switching.operating_point(stage, facts) is None
    assert set(_by_kind(lint(text))) == {"edge"}


def _facts(text: str) -> tuple[DriveStage, StageFacts]:
    import tempfile

    folder = Path(tempfile.mkdtemp())
    deck = folder / "deck.cir"
    deck.write_text(text, encoding="utf-8")
    return facts_of(deck, "m1")


def _simulate(deck: Path, tmp_path: Path) -> tuple[float, float, float]:
    """ngspice: M1's average V_DS·I_D over two steady periods, and the node's 10–90 % rise
    at turn-on and fall at turn-off, each over 0.8 (the whole swing)."""
    text = (
        deck.read_text(encoding="utf-8")
        .replace("M1 bus g sw sw", "M1 busd g sw sw")
        .replace("VBUS bus 0 DC 48\n", "VBUS bus 0 DC 48\nVAM bus busd DC 0\n")
        .replace(".end\n", ".tran 1n 300u 280u 1n uic\n.end\n")
    )
    waves = run_transient(text, ["v(sw)", "v(busd)", "i(vam)"], tmp_path)
    t, sw, bus, amps = waves.time, waves["v(sw)"], waves["v(busd)"], waves["i(vam)"]
    lo, hi = waves.index(280e-6), waves.index(300e-6)
    energy = sum(
        (t[i + 1] - t[i])
        * ((bus[i] - sw[i]) * amps[i] + (bus[i + 1] - sw[i + 1]) * amps[i + 1])
        / 2
        for i in range(lo, hi)
    )
    power = energy / (t[hi] - t[lo])

    def crossing(level: float, start: float, rising: bool) -> float:
        for i in range(waves.index(start), len(t) - 1):
            a, b = sw[i], sw[i + 1]
            if (a < level <= b) if rising else (a > level >= b):
                return t[i] + (level - a) / (b - a) * (t[i + 1] - t[i])
        raise AssertionError(f"the node never crosses {level} V")

    rise = crossing(43.2, 290e-6, True) - crossing(4.8, 290e-6, True)
    fall = crossing(4.8, 292.5e-6, False) - crossing(43.2, 292.5e-6, False)
    return power, rise / 0.8, fall / 0.8


@pytest.mark.parametrize("deck", [BAD, GOOD], ids=["slow-gate", "firm-gate"])
def test_against_ngspice(deck: Path, tmp_path: Path) -> None:
    # ngspice 39 (level-1 MOSFETs, constant overlap capacitances), at the nominal corner.
    # Measured: slow gate 3.77 W, the node 82.7 ns up / 207 ns down (the rule: 3.58 W,
    # Q_gd/I_g 90.4 ns / 212 ns); firm gate 0.174 W, 4.14 ns / 10.2 ns (the rule: 0.178 W,
    # 4.25 ns / 9.95 ns).
    stage, facts = facts_of(deck, "m1")
    paths = switching.gate_paths(stage, facts)
    assert paths is not None
    point = switching.operating_point(stage, facts)
    assert point is not None
    found = switching.transitions(facts, "m1", *paths, facts.v_switched, point.i_rms)
    assert found is not None
    heat = switching._heat(found, point, facts, 62.0, 0.007, found.rds_on.value)
    power, rise, fall = _simulate(deck, tmp_path)
    assert found.q_gd.value / found.i_on.value == pytest.approx(rise, rel=0.20)
    assert found.q_gd.value / found.i_off.value == pytest.approx(fall, rel=0.20)
    assert heat.p_sw + heat.p_cond == pytest.approx(power, rel=0.20)


def test_examples_and_outside_decks_are_quiet() -> None:
    # every bundled example and outside deck: no switching-loss finding. The edges take at
    # most 1.5 % of the period (the class-D at its 384 kHz carrier); where the operating
    # point is known (the 12 V buck, the heater's resistive element, the winch) the junctions
    # stay below their limits; the lev48 and totem-pole legs are not judged (their gate paths
    # are not plain resistors to a driver), nor are the modulated stages' losses.
    decks = sorted(EXAMPLES.glob("*.cir")) + sorted(OUTSIDE.glob("*.cir"))
    for deck in decks:
        result = check_path(deck)
        assert [f for f in result.findings if f.rule == RULE] == [], deck.name


def test_card_options() -> None:
    assert CARD.options["edge_fraction"].default == pytest.approx(0.02)
    assert CARD.options["tj_margin"].default == pytest.approx(40.0)
    assert CARD.options["rds_tempco"].default == pytest.approx(0.007)


def test_the_html_card_leads_with_the_junction_and_the_edges() -> None:
    from drivelint.report.html.page import key_pairs

    found = _by_kind(lint(CARD.bad))
    assert [(c, limit) for c, _, limit, _ in key_pairs(found["junction"])] == [
        ("t_junction", "t_junction_limit")
    ]
    assert [(c, limit) for c, _, limit, _ in key_pairs(found["edge"])] == [
        ("edge_fraction", "edge_fraction_max")
    ]


def test_a_driver_current_limit_caps_the_gate_current() -> None:
    # a parts entry for the driver with i_source 50 mA: the turn-on's plateau current is
    # capped there (from 74 mA through 100 Ω), and the fix asks for a stronger driver
    text = BAD.read_text(encoding="utf-8").replace("RG hgate g 100", "RG hgate g 10")
    stage, facts = _facts(text)
    paths = switching.gate_paths(stage, facts)
    assert paths is not None
    on, off = paths
    from dataclasses import replace

    from drivelint.ratings.values import Value

    limited = replace(on, current_limit=Value(0.05, "A", "test"))
    found = switching.transitions(facts, "m1", limited, off, facts.v_switched)
    assert found is not None and found.limited
    assert found.i_on.value == pytest.approx(0.05)
    text_fix, value = switching.faster_fix(found, 0.5, "test")
    assert value is None and "stronger driver" in text_fix and "100 mA source" in text_fix


def test_the_low_side_partner_conducts_the_rest_of_the_period() -> None:
    # M2 (KP·W/L = 2 A/V², 12 V drive: 1/(2 × 9) = 55.6 mΩ) carries the inductor's 4.05 A
    # RMS for 1 − D of the period; both its edges are soft in a buck (the load current
    # leaves the node), so it makes no switching loss
    (finding,) = lint(HOT_LOW.read_text(encoding="utf-8"))
    assert finding.device == "m2" and finding.span.line == 19 and finding.switch == "m1"
    assert finding.severity == Severity.ERROR
    values = finding.values
    assert values["duty"].value == pytest.approx(0.749, abs=0.002)
    assert values["rds_on"].value == pytest.approx(1 / 18, rel=1e-3)
    assert values["p_switching"].value == 0.0
    assert values["i_turn_on"].value == pytest.approx(-4.97, abs=0.02)
    cold = 4.05**2 * (1 / 18) * values["duty"].value
    assert values["p_switch_cold"].value == pytest.approx(cold, rel=0.01)
    hot = values["rds_on_hot"].value
    assert hot == pytest.approx((1 / 18) * (1 + 0.007 * (values["t_junction"].value - 298.15)))
    assert "both edges of m2 are soft" in " ".join(finding.derivation)
    assert "R_DS(on) of" in finding.fix
    # the bad deck's partner has no thermal resistance: not judged
    assert {f.device for f in lint(BAD.read_text(encoding="utf-8"))} == {"rg", "m1"}


def test_thermal_runaway_has_no_steady_temperature() -> None:
    # 300 K/W: R_th·P_cond(25 °C)·α = 300 × 0.68 W × 0.007 ≈ 1.4 ≥ 1
    text = HOT_LOW.read_text(encoding="utf-8").replace("rth_ja=130", "rth_ja=300")
    (finding,) = lint(text)
    assert finding.severity == Severity.ERROR
    assert "no steady temperature (thermal runaway" in finding.message
    assert "t_junction" not in finding.values
    assert finding.values["thermal_gain"].value == pytest.approx(
        300 * finding.values["p_switch_cold"].value * 0.007, rel=1e-6
    )


def test_a_case_resistance_gives_the_heatsink_needed() -> None:
    # R_thJC 2 K/W: the case-to-ambient path that keeps T_j at 110 °C from 27 °C with the
    # dissipation at that temperature, (110 − 27)/P − 2 (the series thermal path)
    text = HOT_LOW.read_text(encoding="utf-8").replace("rth_ja=130", "rth_ja=130 rth_jc=2")
    (finding,) = lint(text)
    values = finding.values
    rds = values["rds_on"].value * (1 + 0.007 * (383.15 - 298.15))
    p_limit = values["i_rms"].value ** 2 * rds * values["duty"].value
    assert values["rth_case_ambient_needed"].value == pytest.approx(83.0 / p_limit - 2.0)
    assert "a heatsink: case to ambient" in finding.fix
