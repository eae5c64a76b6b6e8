"""gate-pulldown-missing: a passive path that holds the gate off while the driver is unpowered."""

# Physics functions are typed with float aliases but are called here with pint quantities
# on purpose, so attribute and argument checks on those calls are switched off.
# mypy: disable-error-code="attr-defined, arg-type, type-arg"

from __future__ import annotations

import math
from pathlib import Path

import pint
import pytest
from simulator import run_transient

from drivelint.checks.base import Finding
from drivelint.checks.registry import registry
from drivelint.diagnostics import Severity
from drivelint.physics.gate import (
    induced_gate_voltage,
    induced_gate_voltage_ramp,
    induced_gate_voltage_ramp_vdmos,
    vdmos_average_gate_drain_capacitance,
    vdmos_gate_drain_charge,
)
from drivelint.physics.preferred import previous_preferred
from drivelint.pipeline import check_path, check_text
from drivelint.ratings.parts import Part, PartsLibrary

RULE = "gate-pulldown-missing"
ROOT = Path(__file__).resolve().parents[2]
EXAMPLES = ROOT / "examples"
OUTSIDE = Path(__file__).resolve().parent / "outside"
CARD = registry()[RULE]


@pytest.fixture(scope="module")
def ureg() -> pint.UnitRegistry:
    return pint.UnitRegistry()


def lint(text: str, parts: PartsLibrary | None = None) -> list[Finding]:
    result = check_text(text, parts=parts)
    assert not [d for d in result.diagnostics if d.severity.label == "error"], result.diagnostics
    return [f for f in result.findings if f.rule == RULE]


# -- the formulas ------------------------------------------------------------------------------


def test_capacitive_divider(ureg: pint.UnitRegistry) -> None:
    # Charge conservation on a floating node between two capacitors (textbook relation):
    # 48 V × 0.2 nF/(0.2 nF + 1 nF) = 8 V.
    v = induced_gate_voltage(48 * ureg.V, 0.2 * ureg.nF, 1 * ureg.nF)
    assert v.check("[electric_potential]") and v.to("V").magnitude == pytest.approx(8.0)
    assert induced_gate_voltage(48.0, 0.2e-9, 1e-9) == pytest.approx(8.0)


def test_ramp_response_and_its_limits(ureg: pint.UnitRegistry) -> None:
    # First-order RC response to a ramp (textbook): V = R·C_gd·S·(1 − e^(−t_r/τ)).
    # By hand: R 10 kΩ, C_gd 0.2 nF, C_gs 1 nF, 48 V in 10 µs: τ = 12 µs,
    # 10k × 0.2n × 4.8 V/µs = 9.6 V × (1 − e^(−10/12)) = 9.6 × 0.56540 = 5.428 V.
    v = induced_gate_voltage_ramp(
        48 * ureg.V, 10 * ureg.us, 0.2 * ureg.nF, 1 * ureg.nF, 10 * ureg.kohm
    )
    assert v.to("V").magnitude == pytest.approx(9.6 * (1 - math.exp(-10 / 12)))
    # R far above t_r/C: the divider; R far below: R·C_gd·S
    assert induced_gate_voltage_ramp(48.0, 10e-6, 0.2e-9, 1e-9, 1e12) == pytest.approx(8.0, 1e-5)
    assert induced_gate_voltage_ramp(48.0, 10e-6, 0.2e-9, 1e-9, 10.0) == pytest.approx(
        10 * 0.2e-9 * 4.8e6
    )


def test_vdmos_average_capacitance_is_the_charge_over_the_step() -> None:
    # (Q_gd(0) − Q_gd(−ΔV))/ΔV from the model's own charge function; between CGDMIN and
    # CGDMAX, and near CGDMIN for a step far beyond 1/A.
    c = vdmos_average_gate_drain_capacitance(36.0, 0.2e-9, 1e-9, 0.4)
    assert c == pytest.approx(-vdmos_gate_drain_charge(-36.0, 0.2e-9, 1e-9, 0.4) / 36.0)
    assert 0.2e-9 < c < 1e-9
    assert c == pytest.approx(0.2793e-9, rel=1e-3)  # by hand from the formula, 4 digits
    far = vdmos_average_gate_drain_capacitance(1e4, 0.2e-9, 1e-9, 0.4)
    assert far == pytest.approx(0.2e-9, rel=0.01)


def test_vdmos_ramp_tends_to_the_constant_formula(ureg: pint.UnitRegistry) -> None:
    # With CGDMIN = CGDMAX the curve is flat and the integration is the closed form.
    flat = induced_gate_voltage_ramp_vdmos(48.0, 10e-6, 1e-9, 0.2e-9, 0.2e-9, 0.4, 10e3)
    assert flat == pytest.approx(induced_gate_voltage_ramp(48.0, 10e-6, 0.2e-9, 1e-9, 10e3), 1e-3)
    quantity = induced_gate_voltage_ramp_vdmos(
        48 * ureg.V,
        10 * ureg.us,
        1 * ureg.nF,
        0.2 * ureg.nF,
        0.2 * ureg.nF,
        0.4 / ureg.V,
        10 * ureg.kohm,
    )
    assert quantity.to("V").magnitude == pytest.approx(flat)


def test_previous_preferred_rounds_down_in_e12() -> None:
    # IEC 60063 E12: 1.0 1.2 1.5 1.8 2.2 2.7 3.3 3.9 4.7 5.6 6.8 8.2
    assert previous_preferred(50e3) == pytest.approx(47e3)
    assert previous_preferred(47e3) == pytest.approx(47e3)
    assert previous_preferred(9.99e3) == pytest.approx(8.2e3)
    assert previous_preferred(1.05) == pytest.approx(1.0)


# -- small netlists -----------------------------------------------------------------------------


def test_the_card_bad_example_fires_with_its_numbers() -> None:
    (finding,) = lint(CARD.bad)
    assert finding.span.line == 9 and finding.device == "m1"
    assert finding.severity is Severity.ERROR
    values = finding.values
    # ΔV_DS = 36 V (M2 returns the node to ground); C_gd averaged over the step 0.2793 nF,
    # C_gs 1 nF: 36 × 0.2793/1.2793 = 7.86 V, above VTO 2 V
    assert values["delta_v_ds"].value == pytest.approx(36.0)
    assert values["c_gd_step"].value == pytest.approx(0.2793e-9, rel=1e-3)
    assert values["vgs_induced"].value == pytest.approx(7.86, abs=0.01)
    assert values["vth"].value == pytest.approx(2.0)
    assert values["vgs_induced"].origin.startswith("computed")
    # the suggested resistor holds the gate within half the threshold for a 100 µs rise
    ohms = values["suggested_r_gs"].value
    assert values["vgs_induced_with_fix"].value <= 0.5 * 2.0
    assert 100 <= ohms <= 100e3 and previous_preferred(ohms) == pytest.approx(ohms)
    assert values["r_gs_drain"].value == pytest.approx(values["v_boot"].value / ohms)
    assert f"{ohms / 1e3:g} kΩ" in finding.fix or f"{ohms:g} Ω" in finding.fix


def test_the_next_larger_value_would_not_hold() -> None:
    from drivelint.physics.preferred import next_preferred

    (finding,) = lint(CARD.bad)
    values = finding.values
    bigger = next_preferred(values["suggested_r_gs"].value * 1.001)
    peak = induced_gate_voltage_ramp_vdmos(36.0, 100e-6, 1e-9, 0.2e-9, 1e-9, 0.4, bigger)
    assert peak > 0.5 * values["vth"].value


def test_a_gate_source_resistor_holds_it() -> None:
    assert lint(CARD.good) == []
    # through a gate stopper too: gate — 10 Ω — 47 k — source
    divided = CARD.bad.replace("RL sw 0 100", "RL sw 0 100\nRGX hgate sw 47k")
    assert lint(divided) == []


def test_a_resistor_to_ground_holds_a_high_side_whose_source_never_goes_below_ground() -> None:
    # With the source at or above ground, a gate held at 0 V has V_GS ≤ 0: off. (Its
    # negative V_GS once the source rises is gate-overvoltage's.)
    assert lint(CARD.bad.replace("RL sw 0 100", "RL sw 0 100\nRGG g 0 47k")) == []


def test_a_leakage_sized_resistor_is_not_a_hold() -> None:
    (finding,) = lint(CARD.bad.replace("RL sw 0 100", "RL sw 0 100\nRLK g sw 1T"))
    assert finding.values["vgs_induced"].value == pytest.approx(7.86, abs=0.01)


def test_a_driver_that_holds_its_output_low_unpowered_satisfies_it() -> None:
    held = Part("hsdrv", "driver", {"r_hold_unpowered": "100 kOhm"}, {}, "parts.toml:1")
    assert lint(CARD.bad, PartsLibrary({"hsdrv": held})) == []
    # the key is validated like the rest
    other = Part("hsdrv", "driver", {"uvlo_boot": "8 V"}, {}, "parts.toml:1")
    assert len(lint(CARD.bad, PartsLibrary({"hsdrv": other}))) == 1


def test_below_threshold_is_a_warning() -> None:
    # a 12 V bus: 12 × C_gd/(C_gd + C_gs) ≈ 2.5 V... with VTO 3 V the gate still floats
    text = CARD.bad.replace("VBUS bus 0 DC 36", "VBUS bus 0 DC 12").replace("VTO=2", "VTO=4")
    (finding,) = lint(text)
    assert finding.severity is Severity.WARNING
    assert finding.values["vgs_induced"].value < finding.values["vth"].value
    assert "still floats" in finding.message


def test_pull_up_to_the_boot_net_with_only_a_transistor_to_pull_down_is_on_uncommanded() -> None:
    text = """48 V leg, resistor pull-up to the boot net, NPN pull-down to ground
VBUS bus 0 DC 48
VAUX aux 0 DC 12
D1 aux boot dfast
C1 boot sw 470n
R4 boot hg 1k
R5 hg g 10
Q1 hg qb 0 npn1
R_B hin qb 2.2k
VHIN hin 0 PULSE(5 0 20u 50n 50n 30u 125u)
M1 bus g sw nfet
M2 sw gl 0 nfet
VGL gl 0 PULSE(12 0 19.5u 50n 50n 32u 125u)
.model dfast D(IS=1n N=1.6 RS=0.2 BV=100 TT=20n)
.model npn1 NPN(IS=20f BF=120)
.model nfet VDMOS(VTO=3.2 KP=20 Cgs=2n Cgdmax=1.5n Cgdmin=60p A=0.4)
.end
"""
    (finding,) = lint(text)
    assert finding.severity is Severity.ERROR and finding.device == "m1"
    assert finding.span.line == 11
    values = finding.values
    # the divider of one path is the boot level itself: V_aux − V_F
    assert values["vgs_pulled_on"].value == pytest.approx(values["v_boot"].value)
    assert values["vgs_turn_on"].value == pytest.approx(values["v_boot"].value)
    assert "r5–r4" in finding.message and "uncommanded" in finding.message
    # a gate–source resistor that beats the pull-up's divider below V_th holds it
    assert lint(text.replace("R5 hg g 10", "R5 hg g 10\nRGS g sw 100")) == []


def test_a_rail_pull_up_settles_at_rail_less_bus_once_on() -> None:
    text = """48 V load switch pulled up from 60 V, NPN to ground
VBUS bus 0 DC 48
V60 a60 0 DC 60
R_PU a60 g 22k
Q_OFF g qb 0 npn1
R_B en qb 4.7k
VEN en 0 PWL(0 5 1m 5 1.001m 0)
M1 bus g out nfet
R_LOAD out 0 10
.model npn1 NPN(IS=20f BF=120)
.model nfet VDMOS(VTO=3 KP=20 Cgs=2n Cgdmax=1.5n Cgdmin=60p A=0.4)
.end
"""
    (finding,) = lint(text)
    assert finding.values["vgs_turn_on"].value == pytest.approx(60.0)
    assert finding.values["vgs_pulled_on"].value == pytest.approx(12.0)


def test_a_linear_stage_with_a_dc_path_is_not_judged() -> None:
    result = check_path(EXAMPLES / "linreg24v_source_follower.cir")
    assert [f for f in result.findings if f.rule == RULE] == []


def test_an_ideal_behavioural_driver_is_not_judged() -> None:
    result = check_path(OUTSIDE / "o12_behavioural_gate_drive.cir")
    assert [f for f in result.findings if f.rule == RULE] == []


# -- the bundled examples ------------------------------------------------------------------------

# example -> {(device, severity, vgs figure rounded to 10 mV)}
EXAMPLE_FINDINGS = {
    "actuator24v_hbridge_held_leg.cir": {("m_ha", "warning", 2.34), ("m_hb", "warning", 2.34)},
    "buck12v_5v_400k_sync.cir": {("m_hs", "error", 2.0)},
    "buck48v_closed_loop_ammeters.cir": {("m_hs", "error", 3.86)},
    "classd45v_split_rail_amp.cir": {("m_h", "warning", 2.92)},
    "lev48_phase_leg_npn_shifter.cir": {("m1", "error", 10.92)},
    "valve24v_pump_loadswitch.cir": {("m1", "error", 10.84)},
    "winch36v_shunt_load_dump.cir": {("m_h", "warning", 2.59)},
}


@pytest.mark.parametrize("example", sorted(p.name for p in EXAMPLES.glob("*.cir")))
def test_what_each_example_yields(example: str) -> None:
    result = check_path(EXAMPLES / example)
    found = set()
    for finding in result.findings:
        if finding.rule != RULE:
            continue
        key = "vgs_pulled_on" if "vgs_pulled_on" in finding.values else "vgs_induced"
        found.add((finding.device, finding.severity.label, round(finding.values[key].value, 2)))
    assert found == EXAMPLE_FINDINGS.get(example, set())


# -- ngspice: the induced voltage against an independent simulator ------------------------------

CROSS_DECK = """floating gate, drain ramped, source held at ground
VD d 0 PWL(0 0 1u 0 {end} {bus})
M1 d g 0 nfet
RLEAK g 0 {leak}
.model nfet VDMOS(VTO=3 KP=20 Cgs={cgs} Cgdmax={cgdmax} Cgdmin={cgdmin} A=0.4)
.tran 10n {stop}
.end
"""


@pytest.mark.parametrize(
    ("bus", "rise", "ohms"),
    [(48.0, 10e-6, 1e12), (400.0, 100e-6, 1e12), (48.0, 100e-6, 22e3), (24.0, 10e-6, 2.2e3)],
)
def test_induced_voltage_against_ngspice(
    bus: float, rise: float, ohms: float, tmp_path: Path
) -> None:
    cgs, lo, hi = 2.1e-9, 60e-12, 1.6e-9
    deck = CROSS_DECK.format(
        bus=bus,
        end=f"{1e-6 + rise:g}",
        leak=f"{ohms:g}",
        cgs=cgs,
        cgdmax=hi,
        cgdmin=lo,
        stop=f"{1e-6 + 2 * rise:g}",
    )
    waves = run_transient(deck, ["v(g)"], tmp_path)
    measured = max(waves["v(g)"])
    if ohms > 1e9:
        computed = induced_gate_voltage(
            bus, vdmos_average_gate_drain_capacitance(bus, lo, hi, 0.4), cgs
        )
    else:
        computed = induced_gate_voltage_ramp_vdmos(bus, rise, cgs, lo, hi, 0.4, ohms)
    assert computed == pytest.approx(measured, rel=0.2), (computed, measured)


def test_the_card_example_against_ngspice(tmp_path: Path) -> None:
    # the rule's own figure for the card's bad example, simulated as the testbench does it
    # (driver output open, the bus ramped): within ±20 %
    (finding,) = lint(CARD.bad)
    deck = CROSS_DECK.format(
        bus=36, end="101u", leak="1e12", cgs=1e-9, cgdmax=1e-9, cgdmin=0.2e-9, stop="201u"
    ).replace("VTO=3", "VTO=2")
    waves = run_transient(deck, ["v(g)"], tmp_path)
    assert finding.values["vgs_induced"].value == pytest.approx(max(waves["v(g)"]), rel=0.2)


# -- decks of our own (tests/checks/pulldown) ------------------------------------------------------

OWN = Path(__file__).resolve().parent / "pulldown"


def test_a_gate_resistor_returned_to_ground_on_a_split_rail_turns_the_switch_on() -> None:
    result = check_path(OWN / "split_rail_gate_to_ground.cir")
    (finding,) = [f for f in result.findings if f.rule == RULE]
    assert (finding.device, finding.span.line, finding.severity) == ("m_h", 15, Severity.ERROR)
    # the source low at -40 V, the gate at 0 V through R_GP: V_GS = +40 V
    assert finding.values["vgs_turn_on"].value == pytest.approx(40.0)
    # once on, the switch follows its gate: no settled V_GS is claimed
    assert "vgs_pulled_on" not in finding.values
    assert "source follower" in finding.message
    assert finding.fix.startswith("return r_gp to the source sw instead of ground")


def test_a_driver_that_holds_its_output_by_its_parts_entry_is_clean() -> None:
    # parts.toml beside the deck gives HOLDDRV r_hold_unpowered = 100 kOhm
    result = check_path(OWN / "driver_holds_low.cir")
    assert not [d for d in result.diagnostics if d.severity.label == "error"]
    assert [f for f in result.findings if f.rule == RULE] == []
    # without the entry the same deck draws the finding
    bare = check_text((OWN / "driver_holds_low.cir").read_text(encoding="utf-8"))
    assert [f.device for f in bare.findings if f.rule == RULE] == ["m_h"]


def test_the_parts_key_is_validated(tmp_path: Path) -> None:
    from drivelint.ratings.parts import PartsError, load_parts

    bad = tmp_path / "parts.toml"
    bad.write_text('[part.X]\nkind = "driver"\nr_hold_unpowered = "-5 Ohm"\n', encoding="utf-8")
    with pytest.raises(PartsError, match="r_hold_unpowered"):
        load_parts(bad)
    wrong = tmp_path / "wrong.toml"
    wrong.write_text('[part.X]\nkind = "nmos"\nr_hold_unpowered = "10 kOhm"\n', encoding="utf-8")
    with pytest.raises(PartsError, match="r_hold_unpowered"):
        load_parts(wrong)


def test_the_html_card_leads_with_the_induced_voltage_against_the_threshold() -> None:
    from drivelint.report.html.page import key_pairs

    (floating,) = lint(CARD.bad)
    assert [(c, limit) for c, _, limit, _ in key_pairs(floating)] == [("vgs_induced", "vth")]
    result = check_path(EXAMPLES / "lev48_phase_leg_npn_shifter.cir")
    (pulled,) = [f for f in result.findings if f.rule == RULE]
    assert [(c, limit) for c, _, limit, _ in key_pairs(pulled)] == [("vgs_turn_on", "vth")]
