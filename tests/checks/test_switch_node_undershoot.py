"""switch-node-undershoot: the driver's switch pin below its common as the high side's current
commutates through the loop's strays, and the boot capacitor charged higher meanwhile."""

from __future__ import annotations

from pathlib import Path

import pytest
from crosscheck import facts_of
from nominal import at_nominal, check_nominal
from simulator import run_transient

from drivelint.checks.base import Finding
from drivelint.checks.registry import registry
from drivelint.checks.undershoot import commutation_edge
from drivelint.diagnostics import Severity
from drivelint.pipeline import check_path, check_text
from drivelint.ratings.parts import load_libraries

RULE = "switch-node-undershoot"
ROOT = Path(__file__).resolve().parents[2]
EXAMPLES = ROOT / "examples"
OUTSIDE = Path(__file__).resolve().parent / "outside"
DECKS = Path(__file__).resolve().parent / "undershoot"
BAD = DECKS / "leg48_source_lead_fast_off.cir"
GOOD = DECKS / "leg48_kelvin_common.cir"
PARTS = DECKS / "parts.toml"
CARD = registry()[RULE]


def own(findings: list[Finding] | tuple[Finding, ...]) -> list[Finding]:
    return [f for f in findings if f.rule == RULE]


def lint(text: str, parts: bool = True) -> list[Finding]:
    library = load_libraries([PARTS]) if parts else None
    result = check_text(at_nominal(text), parts=library)
    assert not [d for d in result.diagnostics if d.severity.label == "error"], result.diagnostics
    return own(result.findings)


def test_bad_deck_fires_on_the_driver() -> None:
    (finding,) = own(check_nominal(BAD).findings)
    assert finding.device == "xu" and finding.switch == "m1"
    assert finding.span.line == 16
    assert finding.severity == Severity.ERROR  # rated by parts.toml's vs_min
    values = finding.values
    # V_pl = 3 + √(2·20/10) = 5 V, g_m = 20 S, R_off = 22 + 1 Ω (RG, the model's RG),
    # C_iss = 2 nF + C_gd(V_GD = −43 V) ≈ 2.02 nF: without the feedback di/dt would reach
    # 2.15 A/ns; C_gd (23.3 pF) carrying the undershoot's own rise into the gate holds it to
    # 1.58 A/ns (tests/physics/test_commutation.py checks that integration); 15 nH: 24.5 V
    assert values["v_plateau"].value == pytest.approx(5.0)
    assert values["g_m"].value == pytest.approx(20.0)
    assert values["r_off"].value == pytest.approx(23.0)
    assert values["l_s"].value == pytest.approx(15e-9)
    assert values["c_iss"].value == pytest.approx(2.02e-9, rel=0.01)
    assert values["c_gd"].value == pytest.approx(23.3e-12, rel=0.01)
    assert values["di_dt"].value == pytest.approx(1.58e9, rel=0.01)
    assert "feedback" in values["di_dt"].origin
    assert values["v_undershoot"].value == pytest.approx(-24.5, abs=0.2)
    assert values["vs_min"].value == pytest.approx(-5.0)
    assert "parts.toml" in values["vs_min"].origin
    # V_F + L·di/dt(L) = 5 V at 2.14 nH with the feedback (1.96 nH without), the E12
    # value at or below it; R_off 160 Ω in all (177 Ω without), less the model's 1 Ω
    assert values["l_s_max"].value == pytest.approx(1.8e-9)
    assert values["r_off_min"].value == pytest.approx(160.3, rel=0.01)
    assert values["suggested_turn_off_resistor"].value == pytest.approx(180.0)
    assert "ls" in values["l_s"].origin
    assert "cut the loop inductance (ls: 15 nH) to at most 1.8 nH" in finding.fix
    assert "raise rg to 180 Ω" in finding.fix and "Schottky" in finding.fix


def test_good_deck_is_quiet() -> None:
    # the common at the low side's source: LS is outside the pin-to-common loop
    assert own(check_nominal(GOOD).findings) == []


def test_without_a_rating_the_default_warns() -> None:
    (finding,) = lint(BAD.read_text(encoding="utf-8"), parts=False)
    assert finding.severity == Severity.WARNING
    assert finding.values["vs_min"].value == pytest.approx(-5.0)
    assert "vs_min_default" in finding.values["vs_min"].origin


def test_the_card_examples() -> None:
    assert own(check_text(CARD.bad).findings)
    assert own(check_text(CARD.good).findings) == []


def test_the_suggested_inductance_makes_it_quiet() -> None:
    (finding,) = lint(BAD.read_text(encoding="utf-8"))
    l_max = finding.values["l_s_max"].value
    text = BAD.read_text(encoding="utf-8").replace("LS src 0 15n", f"LS src 0 {l_max:.4g}")
    assert lint(text) == []


def test_small_strays_or_a_slow_turn_off_are_quiet() -> None:
    text = BAD.read_text(encoding="utf-8")
    assert lint(text.replace("LS src 0 15n", "LS src 0 1n")) == []
    assert lint(text.replace("RG hgate g 22", "RG hgate g 220")) == []


def test_strays_on_the_drain_side_count_too() -> None:
    # the switch pin taken at the high side's source, 5 nH of trace to the low side's drain
    text = BAD.read_text(encoding="utf-8")
    text = text.replace("XU boot hgate sw hin 0 HSDRV", "XU boot hgate hs hin 0 HSDRV")
    text = text.replace("C1 boot sw 1u IC=11", "C1 boot hs 1u IC=11")
    text = text.replace("M1 bus g sw vdm", "M1 bus g hs vdm\nLT hs sw 5n")
    (finding,) = lint(text)
    assert finding.values["l_s"].value == pytest.approx(20e-9)
    assert "lt" in finding.values["l_s"].origin and "ls" in finding.values["l_s"].origin


def test_no_load_current_from_anywhere_is_not_judged() -> None:
    # an inductor into a resistor: the steady-state current at the turn-off stands in
    text = BAD.read_text(encoding="utf-8").replace("* drivelint: conditions load_current=20A\n", "")
    (finding,) = lint(text)
    assert "steady-state" in finding.values["i_load"].origin
    assert finding.values["i_load"].value == pytest.approx(20.0 + 36 * 0.24e-5 / 10e-6 / 2, rel=0.1)
    # an inductor small against its load: the ripple formula leaves its range, not judged
    assert lint(text.replace("L1 sw out 10u IC=20", "L1 sw out 100n IC=20")) == []
    # a load the facts cannot follow (a current source) gives no current: not judged
    text = text.replace("RLOAD out 0 0.6", "ILOAD out 0 DC 20")
    assert lint(text) == []


def test_no_load_current_is_not_judged() -> None:
    # nothing commutates into the freewheeling part at the turn-off (found by the
    # hostile-input campaign: a zero current gave a zero rate and a division by it)
    text = BAD.read_text(encoding="utf-8").replace("load_current=20A", "load_current=0")
    assert lint(text) == []


def _stiff_boot_path() -> str:
    """The bad deck with no resistor in the boot path and a 100 nF capacitor, its switch
    rated 13 V: the boot path takes the load current the loop's 15 nH cannot yet."""
    text = BAD.read_text(encoding="utf-8")
    text = text.replace("D1 vcc bd dfast\nRB bd boot 10\n", "D1 vcc boot dfast\n")
    text = text.replace("C1 boot sw 1u IC=11", "C1 boot sw 100n IC=11")
    return text.replace(
        "* drivelint: conditions", "* drivelint: part M1 vgs_max=13V\n* drivelint: conditions"
    )


def test_boot_overcharge_against_the_switch_rating() -> None:
    # L_s 15 nH, R_path 0.2 Ω (the diode's RS), C 100 nF: Z0 = 0.387 Ω, ζ = 0.26,
    # ΔV = 20 A × 0.387 Ω × 0.703 = 5.45 V on top of ≈ 12.2 V
    found = {f.device: f for f in lint(_stiff_boot_path())}
    boot = found["c1"]
    values = boot.values
    assert values["v_limit"].value == pytest.approx(13.0)
    assert values["dv_boot"].value == pytest.approx(5.45, abs=0.02)
    assert values["v_boot_max"].value < 13.0 < values["v_boot_undershoot"].value
    assert values["suggested_series_resistor"].value > 0
    assert "c1" in boot.message and "m1's vgs_max" in boot.message
    assert "in series with the boot diode d1" in boot.fix
    # the boot path holds the switch pin at I·R_path + ΔV = 4 V + 5.45 V
    pin = found["xu"].values["v_undershoot"]
    assert pin.value == pytest.approx(-9.46, abs=0.05)
    assert "boot path" in pin.origin


def test_the_suggested_series_resistor_makes_the_boot_quiet() -> None:
    found = {f.device: f for f in lint(_stiff_boot_path())}
    ohms = found["c1"].values["suggested_series_resistor"].value
    text = _stiff_boot_path().replace(
        "D1 vcc boot dfast\n", f"D1 vcc bd dfast\nRB bd boot {ohms:g}\n"
    )
    assert "c1" not in {f.device for f in lint(text)}


def test_boot_overcharge_against_ngspice(tmp_path: Path) -> None:
    # ngspice, one edge from 11 V: the capacitor rises 6.35 V and the pin falls to −7.2 V;
    # drivelint: ΔV 5.45 V (the dead time's diode-drop boost comes on top in the run) and a
    # hold of −9.46 V, a bound (the boot diode's own drop is not counted against it)
    (finding,) = [f for f in lint(_stiff_boot_path()) if f.device == "c1"]
    waves = run_transient(_one_edge(_stiff_boot_path()), ["v(sw)", "v(boot)-v(sw)"], tmp_path)
    start = waves.index(150e-9)
    rise = max(waves["v(boot)-v(sw)"][start:]) - waves["v(boot)-v(sw)"][start]
    assert rise == pytest.approx(finding.values["dv_boot"].value, rel=0.20), rise
    lowest = min(waves["v(sw)"][start:])
    assert (
        finding.values["v_undershoot"].value < lowest < 0.6 * finding.values["v_undershoot"].value
    )


@pytest.mark.parametrize(
    "path",
    sorted(EXAMPLES.glob("*.cir")) + sorted(OUTSIDE.glob("*.cir")),
    ids=lambda p: p.name,
)
def test_bundled_examples_and_outside_decks_are_quiet(path: Path) -> None:
    # none has strays on a commutation loop that take its switch pin past -5 V (o01's 1 nH
    # lead gives about -3.8 V; o15's 2.5 nH shunt leads carry no known load current)
    from drivelint.config import find_config, load_config

    assert own(check_path(path, load_config(find_config(path))).findings) == []


# -- ngspice ---------------------------------------------------------------------------------


def _one_edge(text: str) -> str:
    """The bad deck at one turn-off edge: the high side on from the start with the load
    current in the inductor, off at 200 ns; the low side held off (the dead time)."""
    text = text.replace(
        "VHIN hin 0 PULSE(0 5 0 5n 5n 2.4u 10u)", "VHIN hin 0 PWL(0 5 200n 5 205n 0)"
    )
    text = text.replace("PULSE(0 12 2.6u 5n 5n 7.3u 10u)", "DC 0")
    return text.replace(".end\n", ".tran 0.02n 500n 0 0.02n uic\n.end\n")


def _computed_and_simulated(
    stray: str, tmp_path: Path, kelvin: bool = False
) -> tuple[float, float]:
    """drivelint's undershoot (nominal corner) and ngspice's lowest V(sw) after the edge;
    ``kelvin``: the low side's gate drive returned to its source, not to ground."""
    deck = tmp_path / "deck" / BAD.name
    deck.parent.mkdir(parents=True)
    text = BAD.read_text(encoding="utf-8").replace("LS src 0 15n", f"LS src 0 {stray}")
    if kelvin:
        text = text.replace("VGL gl 0 PULSE", "VGL gl src PULSE")
    deck.write_text(text, encoding="utf-8")
    (deck.parent / "parts.toml").write_text(PARTS.read_text(encoding="utf-8"), encoding="utf-8")
    stage, facts = facts_of(deck, "m1")
    edge = commutation_edge(stage, facts)
    assert edge is not None
    waves = run_transient(_one_edge(deck.read_text(encoding="utf-8")), ["v(sw)"], tmp_path)
    start = waves.index(150e-9)
    return edge.v_undershoot.value, min(waves["v(sw)"][start:])


@pytest.mark.parametrize("stray", ["2n", "3n"])
def test_small_loops_agree_with_ngspice(stray: str, tmp_path: Path) -> None:
    # where L_s·di/dt is a few volts the edge is the gate's: within ±20 %
    computed, simulated = _computed_and_simulated(stray, tmp_path)
    assert simulated == pytest.approx(computed, rel=0.20), (computed, simulated)


def test_the_bad_deck_is_an_upper_bound_on_ngspice(tmp_path: Path) -> None:
    # 15 nH: drivelint −24.5 V, ngspice −20.0 V (without the feedback through C_gd the rule
    # said −33.0 V). What is left is the low side's own gate: it returns to ground, across
    # LS, so its C_gs (2 nF through RGL) is a path in parallel with the stray that the rule
    # does not count; with that gate returned to its source, ngspice gives −21.6 V (below)
    computed, simulated = _computed_and_simulated("15n", tmp_path)
    assert computed < simulated < 0.7 * computed, (computed, simulated)


def test_the_bad_deck_within_20_percent_of_ngspice(tmp_path: Path) -> None:
    # −20.0 V is 18 % short of −24.5 V: inside the ±20 % the rules' cross-checks hold,
    # though by little (the low side's C_gs across the stray, above)
    computed, simulated = _computed_and_simulated("15n", tmp_path)
    assert simulated == pytest.approx(computed, rel=0.20)


@pytest.mark.parametrize("stray", ["2n", "5n", "8n", "15n"])
def test_with_the_low_side_driven_at_its_source_within_20_percent(
    stray: str, tmp_path: Path
) -> None:
    # no path across the stray but the diode: ngspice −4.57 / −9.38 / −13.51 / −21.61 V
    # against the rule's −4.7 / −9.9 / −14.7 / −24.5 V (at 30 nH: −35.0 V against −42.6 V,
    # 1.22×; the node's capacitance, not counted, slows the swing more as it deepens)
    computed, simulated = _computed_and_simulated(stray, tmp_path, kelvin=True)
    assert computed < simulated, (computed, simulated)
    assert simulated == pytest.approx(computed, rel=0.20), (computed, simulated)
