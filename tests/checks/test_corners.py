"""Tolerance corners (drivelint/checks/corners.py): what the shared facts take at the worst
corner, where each figure comes from, and how a finding names its corner.

The arithmetic is held to its sources in tests/physics/test_tolerance.py (EIA-198 codes,
leakage doubling every 10 K, supply and gate-charge spreads: common practice); here the
facts are held to it on small decks of our own and on the bundled examples.
"""

from __future__ import annotations

from pathlib import Path

import pytest

from drivelint.checks.base import Finding
from drivelint.checks.facts import StageFacts
from drivelint.config import ConfigError, load_config
from drivelint.pipeline import check_path, check_text, load_stages, parts_for
from drivelint.ratings.directives import parse_directives
from drivelint.ratings.ratings import Ratings
from drivelint.ratings.values import Value
from drivelint.stages.wires import collapse_wires

EXAMPLES = Path(__file__).resolve().parents[2] / "examples"

STAGE = """high side on a 12 V bootstrap
{directives}VBUS bus 0 DC 48
VCC vcc 0 DC 12
VH hin 0 PULSE(0 5 0 10n 10n 20u 50u)
XU boot hgate sw vcc hin 0 HSDRV
DB vcc boot dfast
CB boot sw {c}
RGH hgate g 4.7
M1 bus g sw nfet
M2 sw gl 0 nfet
VGL gl 0 PULSE(0 10 20.2u 10n 10n 29.5u 50u)
.subckt HSDRV VB HO VS VCC HIN COM
BH ho1 VS V = V(HIN,COM) > 2.5 ? V(VB,VS) : 0
RH ho1 HO 2
.ends HSDRV
.model dfast D(IS=1n TT=20n BV=100)
.model nfet VDMOS(VTO=3 KP=20 Cgs=2n Cgdmax=1n)
.end
"""


def facts_of(
    tmp_path: Path,
    c: str = "470n",
    directives: str = "",
    conditions: dict[str, Value] | None = None,
) -> StageFacts:
    path = tmp_path / "deck.cir"
    path.write_text(STAGE.format(c=c, directives=directives), encoding="utf-8")
    return _facts(path, conditions)


def _facts(path: Path, conditions: dict[str, Value] | None = None) -> StageFacts:
    circuit, stages = load_stages(path)
    merged = collapse_wires(circuit).circuit
    directives = parse_directives(circuit.directives)
    (stage,) = [s for s in stages if s.floating and s.switch in ("m1", "m_h", "m_hs")]
    return StageFacts(stage, merged, Ratings(parts_for(path), directives), directives, conditions)


def test_the_default_corner(tmp_path: Path) -> None:
    facts = facts_of(tmp_path)
    corners = facts.corners
    assert corners.cap_tolerance.value == 0.10 and "default" in corners.cap_tolerance.origin
    assert (
        corners.cap_temperature_loss.value == 0.15 and "X7R" in corners.cap_temperature_loss.origin
    )
    assert corners.supply_tolerance.value == 0.05
    assert corners.bus_tolerance.value == 0.0
    assert corners.qg_spread.value == 0.20
    assert corners.junction_max.value == pytest.approx(358.15)
    # the hold capacitor: K and X7R at their low and high ends
    assert facts.c_hold_nominal is not None and facts.c_hold_nominal.value == pytest.approx(470e-9)
    assert facts.c_hold is not None and facts.c_hold.value == pytest.approx(470e-9 * 0.9 * 0.85)
    assert "low corner" in facts.c_hold.origin
    assert facts.c_hold_high is not None
    assert facts.c_hold_high.value == pytest.approx(470e-9 * 1.1 * 1.15)
    # the 12 V gate rail at ±5 %
    assert facts.v_aux is not None and facts.v_aux.value == pytest.approx(11.4)
    assert facts.v_aux_max is not None and facts.v_aux_max.value == pytest.approx(12.6)
    assert facts.v_aux_nominal is not None and facts.v_aux_nominal.value == 12
    # the diode's IS as leakage, at 85 °C: 2^6 = 64 times its 25 °C value
    assert facts.i_leak.value == pytest.approx(64e-9)
    # the gate charge at the top of its spread; the stress side keeps the typical one
    assert facts.qg is not None and facts.qg_typical is not None
    assert facts.qg.value == pytest.approx(1.2 * facts.qg_typical.value)
    assert facts.c_gate.value == pytest.approx(1.2 * facts.c_gate_typical.value)


def test_corners_zero_is_the_netlist_as_written(tmp_path: Path) -> None:
    nominal = {"corners": Value(0.0, "1", "test")}
    facts = facts_of(tmp_path, conditions=nominal)
    assert facts.c_hold is not None and facts.c_hold.value == pytest.approx(470e-9)
    assert facts.c_hold_high is not None and facts.c_hold_high.value == pytest.approx(470e-9)
    assert facts.v_aux is not None and facts.v_aux.value == 12
    assert facts.i_leak.value == pytest.approx(1e-9)
    assert facts.qg is not None and facts.qg_typical is not None
    assert facts.qg.value == pytest.approx(facts.qg_typical.value)


def test_conditions_and_a_capacitor_rating_set_the_corner(tmp_path: Path) -> None:
    given = "* drivelint: conditions cap_tolerance=0.2 cap_temperature_loss=0 junction_max=125\n"
    facts = facts_of(tmp_path, directives=given)
    assert facts.c_hold is not None and facts.c_hold.value == pytest.approx(470e-9 * 0.8)
    # 125 °C is 100 K above 25 °C: 2^10
    assert facts.i_leak.value == pytest.approx(1e-9 * 1024)
    # the capacitor's own tolerance rating wins over the condition
    rated = given + "* drivelint: part cb tolerance=0.05\n"
    facts = facts_of(tmp_path, directives=rated)
    assert facts.c_hold is not None and facts.c_hold.value == pytest.approx(470e-9 * 0.95)
    assert "cb tolerance" in facts.corners.cap_tolerance.origin


def test_dc_bias_from_the_netlists_own_voltage_dependent_capacitor(tmp_path: Path) -> None:
    # A class-2 ceramic's DC-bias curve written as C(V): its value at the highest voltage
    # it holds (V_aux,max − V_sw,low = 12.6 V) is what the corner takes, not a condition.
    facts = facts_of(
        tmp_path,
        c="C='470n/(1+(V(boot,sw)/9.5)**2)'",
        directives="* drivelint: conditions cap_dc_bias_loss=0.5\n",
    )
    bias = 1 / (1 + (12.6 / 9.5) ** 2)
    assert facts.c_hold_nominal is not None and facts.c_hold_nominal.value == pytest.approx(470e-9)
    assert facts.c_hold is not None
    assert facts.c_hold.value == pytest.approx(470e-9 * 0.9 * 0.85 * bias)
    assert "C expression" in facts.c_hold.origin


def test_a_dc_bias_loss_given_as_a_condition(tmp_path: Path) -> None:
    facts = facts_of(tmp_path, directives="* drivelint: conditions cap_dc_bias_loss=0.3\n")
    assert facts.c_hold is not None
    assert facts.c_hold.value == pytest.approx(470e-9 * 0.9 * 0.85 * 0.7)


def test_a_stacked_gate_rail_is_toleranced_above_the_rail_it_sits_on() -> None:
    # classd45v: VCC is 12 V stacked on −45 V; the bootstrap charges against −45 V.
    facts = _facts(EXAMPLES / "classd45v_split_rail_amp.cir")
    assert facts.v_aux is not None and facts.v_aux.value == pytest.approx(-45 + 12 * 0.95)
    assert facts.v_aux_max is not None and facts.v_aux_max.value == pytest.approx(-45 + 12 * 1.05)


def test_a_pump_fed_from_the_bus_moves_with_the_bus() -> None:
    # valve24v: the pump's feed is the 24 V bus itself; its tolerance is the bus's (none).
    circuit, stages = load_stages(EXAMPLES / "valve24v_pump_loadswitch.cir")
    (stage,) = [s for s in stages if s.floating]
    directives = parse_directives(circuit.directives)
    facts = StageFacts(
        stage, collapse_wires(circuit).circuit, Ratings(parts_for(EXAMPLES), directives), directives
    )
    assert facts.v_aux is not None and facts.v_aux.value == pytest.approx(24)


def test_corner_conditions_are_validated(tmp_path: Path) -> None:
    config = tmp_path / "drivelint.toml"
    config.write_text('[conditions]\ncap_tolerance = "1.5"\n', encoding="utf-8")
    with pytest.raises(ConfigError, match="cap_tolerance"):
        load_config(config)
    config.write_text('[conditions]\njunction_max = "105 degC"\n', encoding="utf-8")
    assert load_config(config).conditions["junction_max"][0] == pytest.approx(378.15)
    # a directive outside the range is an error on the stage, not a traceback
    text = STAGE.format(c="470n", directives="* drivelint: conditions corners=0.5\n")
    result = check_text(text)
    assert any("corners" in d.message and d.severity.label == "error" for d in result.diagnostics)


def test_a_finding_names_its_corner() -> None:
    (finding,) = [
        f
        for f in check_path(EXAMPLES / "tool36_leg_totem_pole.cir").findings
        if f.rule == "bootstrap-capacitor-small"
    ]
    assert finding.message.startswith("c1 = 10 nF is too small")
    assert "at the worst corner (C −23.5 %, gate supply −5 %, Q_g +20 %, leakage at 85.0 °C)" in (
        finding.message
    )
    values = finding.values
    assert values["c_hold_nominal"].value == pytest.approx(10e-9)
    assert values["capacitance"].value == pytest.approx(7.65e-9)
    for key in ("cap_tolerance", "cap_temperature_loss", "supply_tolerance", "qg_spread"):
        assert key in values
    # the requirement is a nominal part: its low corner (× 0.765) carries the worst corner's
    # charge within the worst corner's allowed droop, and the suggestion is at least that part
    required = values["required_capacitance"].value
    suggested = values["suggested_capacitance"].value
    worst = values["charge_per_cycle"].value / values["delta_v_allowed"].value
    assert required * 0.765 >= worst * (1 - 1e-9)
    assert suggested >= required and "low corner" in finding.fix


def test_the_reverse_voltage_names_only_what_moves_it() -> None:
    # V_R = V_bus + V_boot − V_aux: the gate rail's tolerance cancels; the bus is nominal.
    (finding,) = [
        f
        for f in check_path(EXAMPLES / "winch36v_shunt_load_dump.cir").findings
        if f.rule == "bootstrap-diode-voltage"
    ]
    assert finding.message.endswith("at the nominal corner (no tolerance moves this figure)")
    assert set(finding.values) >= {"bus_tolerance"} and "qg_spread" not in finding.values


def test_every_corner_key_is_a_checked_and_documented_condition() -> None:
    from drivelint.checks.corners import CORNER_KEYS
    from drivelint.config import CONDITION_RANGES
    from drivelint.ratings.directives import CONDITION_KEYS

    readme = (EXAMPLES.parent / "README.md").read_text(encoding="utf-8")
    for key in CORNER_KEYS:
        assert key in CONDITION_KEYS and key in CONDITION_RANGES, key
        assert f"| `{key}` |" in readme, key


def test_a_netlist_that_holds_a_corner_is_met_at_face_value() -> None:
    # README "Sizing with a margin and a corner": a deck marked as_corner = 1 (the
    # testbench writes its corner decks so) is judged as written, and its capacitor needs
    # only its own charge balance, 1×, where the nominal margin of 2 would ask for twice.
    def sizing(directives: str) -> Finding | None:
        text = STAGE.format(c="100n", directives=directives)
        found = [f for f in check_text(text).findings if f.rule == "bootstrap-capacitor-small"]
        return found[0] if found else None

    as_written = sizing("* drivelint: conditions corners=0\n")
    assert as_written is not None  # the margin of 2 at the nominal values is not met
    values = as_written.values
    balance = values["charge_per_cycle"].value / values["delta_v_allowed"].value
    assert values["required_capacitance"].value == pytest.approx(2 * balance)
    assert balance <= 100e-9  # met at face value: as a corner, no finding
    assert sizing("* drivelint: conditions as_corner=1\n") is None
    text = STAGE.format(c="100n", directives="* drivelint: conditions as_corner=0.5\n")
    result = check_text(text)
    assert any("as_corner" in d.message and d.severity.label == "error" for d in result.diagnostics)
