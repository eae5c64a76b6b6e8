"""The rule gate-overvoltage: V_GS of a floating switch in both directions, and its clamps.

Each expectation names its outside reference beside it. ngspice (Debian package) is the
independent simulator: the same netlists drivelint judges are simulated, and the verdict
has to agree with the V_GS the simulator shows.
"""

from __future__ import annotations

import shutil
import subprocess
from pathlib import Path

import pytest
from nominal import at_nominal, check_nominal

from drivelint.checks.base import Finding
from drivelint.checks.registry import registry
from drivelint.config import RuleSetting
from drivelint.diagnostics import Severity
from drivelint.physics.stress import derating_factor
from drivelint.pipeline import check_path, check_text
from drivelint.ratings.parts import load_libraries

RULE = "gate-overvoltage"
EXAMPLES = Path(__file__).resolve().parents[2] / "examples"
CARD = registry()[RULE]

# Common practice: power MOSFETs are rated V_GS(max) = ±20 V (also drivelint's default).
VGS_MAX_TYPICAL = 20.0
# Textbook: a conducting silicon junction drops about 0.7 V (drivelint's default V_F).
V_F = 0.7


def lint(text: str, **options: float) -> list[Finding]:
    """This rule's findings on a netlist, with card options overridden."""
    settings = {RULE: RuleSetting(options=options)} if options else None
    result = check_text(at_nominal(text), path="deck.cir", settings=settings)
    errors = [d for d in result.diagnostics if d.severity is Severity.ERROR]
    assert not errors, [d.message for d in errors]
    return [f for f in result.findings if f.rule == RULE]


def line_of(text: str, name: str) -> int:
    """1-based line of the element line that starts with ``name``."""
    for number, line in enumerate(text.splitlines(), start=1):
        if line.split() and line.split()[0].lower() == name.lower():
            return number
    raise AssertionError(f"{name} not in netlist")


def value(finding: Finding, name: str) -> float:
    return finding.values[name].value


# -- netlists of our own (invented generic parts) ---------------------------------------------

# The card's bad example: a 24 V high-side switch, bootstrap from 12 V, NPN pull-down to
# ground, 47 uF on the output. Variants below swap the load and the clamp.
BAD = CARD.bad
GOOD = CARD.good

ISOLATED = """isolated 15 V gate supply, switch-element driver
VBUS bus 0 DC 48
VISO top sw DC 15
VCTL ctl 0 PULSE(0 5 0 100n 100n 20u 50u)
S1 top gd ctl 0 swon
S2 gd sw 0 ctl swon
RG gd g 33
M1 bus g sw nfet
LLOAD sw ph 100u
RLOAD ph 0 10
DFW 0 sw dfw
{clamp}
.model swon SW(VT=2.5 VH=0.1 RON=10 ROFF=100meg)
.model dfw D(IS=1n BV=100)
.model dz12 D(IS=1n BV=12)
.model dz15 D(IS=1n BV=15)
.model dz16 D(IS=1n BV=16)
.model dz24 D(IS=1n BV=24)
.model nfet VDMOS(VTO=3 KP=20 Cgs=2n Cgdmax=1n)
.end
"""

RAIL_FED = """gate pulled up from a ground-referenced 24 V rail, NPN pull-down
VBUS bus 0 DC 24
VG vg 0 DC 24
VIN in 0 PULSE(5 0 200u 100n 100n 500u 1m)
RPU vg g 10k
Q1 g b 0 qn
RB in b 4.7k
M1 bus g out nfet
RLOAD out 0 48
{clamp}
.model qn NPN(BF=100)
.model dz18 D(IS=1n BV=18)
.model nfet VDMOS(VTO=3 KP=20 Cgs=2n Cgdmax=1n)
.end
"""


def pin_boot_diode(text: str) -> str:
    """Give the bootstrap diode D1 a forward drop of exactly V_F, so V_boot = V_aux − V_F."""
    return text.replace(".end", f"* drivelint: part D1 vf={V_F}\n.end")


def with_aux(text: str, volts: float) -> str:
    return text.replace("VAUX aux 0 DC 12", f"VAUX aux 0 DC {volts:g}")


def with_load(text: str, load: str) -> str:
    return text.replace("COUT out 0 47u\nRLOAD out 0 48", load)


# -- the positive side ------------------------------------------------------------------------


def test_bootstrap_puts_its_own_voltage_across_gate_source() -> None:
    # V_boot = V_aux − V_F (bootstrap supply, AN-978, from memory); gate and source ride
    # together, so V_GS = V_boot whatever the bus (common practice). 12 V aux: 11.3 V, quiet.
    assert lint(GOOD) == []
    # A 24 V aux rail puts 23.3 V (V_F pinned at 0.7 V by a directive) across the gate.
    text = pin_boot_diode(with_aux(GOOD, 24))
    text = text.replace("DZ out g dz15\n", "")
    (finding,) = [f for f in lint(text) if f.device == "m1"]
    assert finding.severity is Severity.ERROR
    assert finding.span.line == line_of(text, "M1")
    # less the little the gate takes from the 470 nF as the two settle at turn-on
    # (charge sharing, Q_g/(C + C_g): about 0.2 V for the model's 2 nF + 1 nF)
    assert value(finding, "vgs_max_positive") == pytest.approx(24 - V_F, abs=0.3)
    assert value(finding, "vgs_max_positive") < 24 - V_F
    assert "sharing its charge" in finding.values["vgs_drive"].origin
    assert value(finding, "vgs_limit_positive") == pytest.approx(VGS_MAX_TYPICAL)
    assert "no gate–source clamp" in finding.message
    assert "at most 20 V" in finding.fix


def test_rail_fed_gate_sees_the_whole_rail_only_with_the_output_shorted() -> None:
    # A gate pulled up from a 24 V rail while the drain sits on the same 24 V: in normal
    # operation the source follows the gate up (textbook source follower), so V_GS stays
    # well inside the rating; only with the source held at ground (an output short) does
    # the gate see the whole 24 V − 0 (common practice). That case is a warning, and the
    # fix is the clamp that would protect it.
    text = RAIL_FED.format(clamp="")
    (finding,) = lint(text)
    assert finding.device == "m1" and finding.span.line == line_of(text, "M1")
    assert finding.severity is Severity.WARNING
    assert value(finding, "vgs_max_positive") == pytest.approx(0.0)
    assert value(finding, "vgs_output_short") == pytest.approx(24.0)
    assert value(finding, "v_gate_supply") == pytest.approx(24.0)
    assert "shorted" in finding.message
    # The pull-down returns to ground, but a resistive load lets the source follow the
    # gate down (textbook source follower): V_GS stays at about −V_th (VTO = 3 V).
    assert value(finding, "vgs_max_negative") == pytest.approx(-3.0)
    # The fix names the largest E24 Zener (IEC 60063) whose +5 % edge stays within 20 V.
    assert "Zener of 18 V" in finding.fix
    # An 18 V Zener gate–source, fed through the 10 k pull-up, is a shunt regulator: quiet.
    assert lint(RAIL_FED.format(clamp="DZ out g dz18")) == []


def test_reference_zener_to_ground_caps_a_rail_fed_gate() -> None:
    # A Zener from the gate network to ground holds the gate at V_Z above ground
    # (textbook Zener reference): the 24 V source follower's gate stays at 15 V.
    text = (EXAMPLES / "linreg24v_source_follower.cir").read_text(encoding="utf-8")
    assert lint(text) == []
    # Without the reference the gate can reach the 24 V input: with the output shorted
    # that is the whole 24 V across gate and source (a warning for a linear stage).
    (finding,) = lint(text.replace("D_REF 0 REF ZENER_15", "* no reference"))
    assert value(finding, "vgs_output_short") == pytest.approx(24.0)
    assert finding.severity is Severity.WARNING


# -- the negative side ------------------------------------------------------------------------


def test_pull_down_to_ground_with_output_capacitance_reaches_minus_bus() -> None:
    # A capacitor's voltage cannot change at once (textbook): 47 µF into 48 Ω decays with
    # τ = R·C = 2.256 ms, so while Q1 pulls the gate to ground in about a microsecond the
    # source is still at 24 V and V_GS = 0 − 24 V, beyond the −20 V rating (common practice).
    text = pin_boot_diode(BAD)
    (finding,) = lint(text)
    assert finding.device == "q1" and finding.span.line == line_of(text, "Q1")
    assert finding.severity is Severity.ERROR
    assert value(finding, "vgs_max_negative") == pytest.approx(-24.0)
    assert value(finding, "vgs_limit_negative") == pytest.approx(-VGS_MAX_TYPICAL)
    assert value(finding, "c_source_node") == pytest.approx(47e-6)
    assert value(finding, "tau_source_node") == pytest.approx(48 * 47e-6)
    assert value(finding, "vgs_max_positive") == pytest.approx(12.0 - V_F, abs=0.3)
    assert "return q1 to the source out" in finding.fix
    # The fix's Zener stays off at the 11.3 V drive with 5 % tolerance: 12 V (E24).
    assert "Zener of 12 V" in finding.fix
    json_values = finding.to_json()["values"]
    assert isinstance(json_values, dict)
    assert {"vgs_max_positive", "vgs_max_negative"} <= set(json_values)


def test_resistive_load_lets_the_source_follow_the_gate_down() -> None:
    # Textbook source follower: with only a resistor to ground the switch turns off as
    # V_GS nears V_th and the source then falls with the gate — no excursion to flag.
    assert lint(with_load(BAD, "RLOAD out 0 48")) == []


def test_inductive_load_with_freewheel_diode_follows() -> None:
    # The load current keeps flowing through the freewheel diode, pulling the node to
    # about −V_F rather than holding it up (common practice).
    load = "LLOAD out ph 100u\nRLOAD ph 0 48\nDFW 0 out dfw\n.model dfw D(IS=1n BV=100)"
    assert lint(with_load(BAD, load)) == []


def test_node_capacitance_counts_only_when_it_outlasts_the_gate_fall() -> None:
    # τ = R·C (textbook): 100 nF × 48 Ω = 4.8 µs holds the node past a 1 µs gate fall;
    # 10 nF × 48 Ω = 0.48 µs does not.
    held = with_load(BAD, "COUT out 0 100n\nRLOAD out 0 48")
    (finding,) = lint(held)
    assert value(finding, "tau_source_node") == pytest.approx(4.8e-6)
    assert value(finding, "pulldown_fall_time") == pytest.approx(1e-6)
    assert lint(held, hold_time_constant=10e-6) == []
    short = with_load(BAD, "COUT out 0 10n\nRLOAD out 0 48")
    assert lint(short) == []
    assert len(lint(short, hold_time_constant=0.1e-6)) == 1


def test_bridge_partner_holds_the_node_up() -> None:
    # In a half bridge's dead time the load current can flow into the switch node and
    # hold it at the bus through the high side's body diode (common practice).
    load = (
        "LLOAD out ph 100u\nRLOAD ph 0 10\n"
        "M2 out gl 0 nfet\nVGL gl 0 PULSE(0 12 0 100n 100n 100u 1m)"
    )
    text = with_load(BAD, load)
    (finding,) = lint(text)
    assert finding.device == "q1"
    assert value(finding, "vgs_max_negative") == pytest.approx(-24.0)
    assert "bridge partner m2" in finding.message


def test_zener_or_diode_cathode_at_the_gate_holds_the_negative_side() -> None:
    # A gate–source Zener, cathode at the gate, is forward biased when the source rises
    # above the gate: V_GS ≈ −V_F (common practice). The card's good example.
    assert lint(GOOD) == []
    # A plain fast diode the same way round clamps the negative side as well.
    diode = GOOD.replace("DZ out g dz15", "DZ out g dfast")
    assert lint(diode) == []


def test_pull_down_to_a_negative_rail_with_source_following() -> None:
    # The source follows down to ground, then the gate goes on to the −15 V rail:
    # V_GS = V_ret − 0 = −15 V (textbook), within ±20 V; a −25 V rail is beyond it.
    base = with_load(BAD, "RLOAD out 0 48").replace("Q1 g b 0 qn", "Q1 g b vn qn")
    rail = "VN vn 0 DC {v}\nVIN in vn PULSE(5 0 200u 100n 100n 500u 1m)"
    text = base.replace("VIN in 0 PULSE(5 0 200u 100n 100n 500u 1m)", rail)
    assert lint(text.format(v=-15)) == []
    (finding,) = lint(text.format(v=-25))
    assert value(finding, "vgs_max_negative") == pytest.approx(-25.0)
    assert value(finding, "v_return") == pytest.approx(-25.0)


# -- the clamps -------------------------------------------------------------------------------


def test_reversed_zener_is_an_error() -> None:
    # A Zener with its anode at the gate is forward biased as the gate rises: V_GS is held
    # at about +V_F, below any threshold (textbook diode), and the drive is shorted.
    text = GOOD.replace("DZ out g dz15", "DZ g out dz15")
    (finding,) = [f for f in lint(text) if f.device == "dz"]
    assert finding.severity is Severity.ERROR
    assert finding.span.line == line_of(text, "DZ")
    assert "reversed" in finding.message
    assert value(finding, "clamp_positive_level") == pytest.approx(V_F)
    assert "turn dz round" in finding.fix


def test_zener_below_the_drive_level_is_an_error() -> None:
    # A 12 V Zener across a 15 V floating supply breaks down every on-time (textbook
    # Zener): V_GS pinned at 12 V, current limited only by the 33 Ω gate resistor:
    # I ≤ (15 − 12)/33 = 90.9 mA.
    text = ISOLATED.format(clamp="DZ sw g dz12")
    (finding,) = lint(text)
    assert finding.device == "dz" and finding.span.line == line_of(text, "DZ")
    assert finding.severity is Severity.ERROR
    assert value(finding, "clamp_positive_level") == pytest.approx(12.0)
    assert value(finding, "vgs_drive") == pytest.approx(15.0)
    assert value(finding, "vgs_max_positive") == pytest.approx(12.0)
    assert value(finding, "clamp_current_bound") == pytest.approx(3.0 / 33.0)
    # Smallest E24 value (IEC 60063) whose −5 % edge is above 15 V: 15/0.95 = 15.8 → 16 V.
    assert "Zener of 16 V" in finding.fix


def test_zener_at_the_drive_level_may_conduct_within_its_tolerance() -> None:
    # Zeners are sold at ±5 % (common practice): a 15 V part can break down at 14.25 V,
    # below the 15 V drive. A 16 V part (15.2 V at −5 %) stays off.
    (finding,) = lint(ISOLATED.format(clamp="DZ sw g dz15"))
    assert finding.severity is Severity.WARNING
    assert value(finding, "clamp_positive_low") == pytest.approx(15.0 * 0.95)
    assert lint(ISOLATED.format(clamp="DZ sw g dz16")) == []
    assert lint(ISOLATED.format(clamp="DZ sw g dz15"), zener_tolerance=0.0) == []


def test_zener_above_the_rating_protects_nothing() -> None:
    (finding,) = lint(ISOLATED.format(clamp="DZ sw g dz24"))
    assert finding.severity is Severity.WARNING
    assert "protects nothing" in finding.message
    assert value(finding, "clamp_positive_level") == pytest.approx(24.0)
    assert "Zener of 16 V" in finding.fix


def test_back_to_back_zeners_clamp_both_ways_at_vz_plus_vf() -> None:
    # Two Zeners anode to anode: one breaks down while the other conducts forward,
    # ±(V_Z + V_F) (common practice). 15 V: ±15.7 V holds the −24 V excursion.
    pair = "DZA g mid dz{v}\nDZB out mid dz{v}\n.model dz22 D(IS=1n BV=22)"
    text = GOOD.replace("DZ out g dz15", pair)
    assert lint(text.format(v=15)) == []
    # 22 V: ±22.7 V lies beyond ±20 V, so the −24 V excursion is not held (error on Q1,
    # naming the pair) and the positive side protects nothing (warning on the pair).
    findings = {f.device: f for f in lint(text.format(v=22))}
    assert set(findings) == {"q1", "dza"}
    assert findings["q1"].severity is Severity.ERROR
    assert "conducts only at -22.7 V" in findings["q1"].message
    warning = findings["dza"]
    assert warning.severity is Severity.WARNING
    assert value(warning, "clamp_positive_level") == pytest.approx(22.0 + V_F)
    assert value(warning, "clamp_negative_level") == pytest.approx(-(22.0 + V_F))


# -- ratings and options ----------------------------------------------------------------------


def test_negative_rating_from_vgs_min_either_sign() -> None:
    # On a 12 V bus the held excursion is −12 V: inside ±20 V, beyond a −10 V rating.
    bus12 = BAD.replace("VBUS bus 0 DC 24", "VBUS bus 0 DC 12")
    assert lint(bus12) == []
    for written in ("-10", "10"):
        text = bus12.replace(".end", f"* drivelint: part M1 vgs_min={written}\n.end")
        (finding,) = lint(text)
        assert value(finding, "vgs_rating_negative") == pytest.approx(-10.0)
        assert value(finding, "vgs_max_negative") == pytest.approx(-12.0)


@pytest.mark.parametrize(
    ("guideline", "limit"),
    [("mil-dtl-917", 14.0), ("nasa-eee-inst-002", 12.0)],
)
def test_derating_guidelines_turn_a_15_v_drive_into_a_finding(guideline: str, limit: float) -> None:
    # MIL-DTL-917 derates V_GS to 70 %, NASA EEE-INST-002 to 60 % (from memory): a 15 V
    # isolated drive on a 20 V part passes at the default 1.0 and fails either guideline.
    text = ISOLATED.format(clamp="")
    assert lint(text) == []
    factor = derating_factor(guideline, "fet", "vgs").factor
    (finding,) = lint(text, derating=factor)
    assert value(finding, "vgs_limit_positive") == pytest.approx(limit)
    assert value(finding, "vgs_max_positive") == pytest.approx(15.0)
    assert f"at most {limit:g} V" in finding.fix


def test_unknown_inputs_stay_quiet(tmp_path: Path) -> None:
    # A node capacitor next to an inductive load of unknown current: whether it holds the
    # source cannot be told, so nothing is said.
    assert lint(with_load(BAD, "COUT out 0 47u\nLLOAD out 0 100u")) == []
    # No threshold known (no VTO, no parts vth): the follower case cannot be evaluated.
    no_vto = with_load(BAD, "RLOAD out 0 48").replace("VTO=3 ", "")
    assert lint(no_vto) == []
    # A clamp listed as a Zener with no voltage (no vz, no BV) might hold a 23.3 V drive:
    # say nothing about the positive side (its forward drop still holds the negative side).
    # Without the clamp both the drive and the held turn-off are flagged.
    over = pin_boot_diode(with_aux(GOOD, 24)).replace("DZ out g dz15", "DZ out g dzx")
    over = over.replace(".end", ".model dzx D(IS=1n)\n.end")
    library = tmp_path / "parts.toml"
    library.write_text('[part.dzx]\nkind = "zener"\n', encoding="utf-8")
    parts = load_libraries([library])
    found = check_text(at_nominal(over), path="deck.cir", parts=parts).findings
    assert [f.device for f in found if f.rule == RULE] == []
    bare = over.replace("DZ out g dzx\n", "")
    found = check_text(at_nominal(bare), path="deck.cir", parts=parts).findings
    assert sorted(f.device for f in found if f.rule == RULE) == ["m1", "q1"]


# -- the bundled examples ---------------------------------------------------------------------


def test_example_loadswitch_pull_down_to_ground() -> None:
    # examples/README.md: Q4 pulls the gate to ground while C_OUT (47 µF) holds the source
    # at 24 V, so V_GS reaches about −24 V against ±20 V.
    result = check_nominal(EXAMPLES / "loadswitch24v_dc_enable.cir")
    (finding,) = [f for f in result.findings if f.rule == RULE]
    text = (EXAMPLES / "loadswitch24v_dc_enable.cir").read_text(encoding="utf-8")
    assert finding.device == "q4" and finding.span.line == line_of(text, "Q4")
    assert finding.severity is Severity.ERROR
    assert value(finding, "vgs_max_negative") == pytest.approx(-24.0)
    assert value(finding, "v_bus") == pytest.approx(24.0)
    assert value(finding, "c_source_node") == pytest.approx(47e-6)
    assert value(finding, "r_discharge") == pytest.approx(48.0)
    assert value(finding, "vgs_rating") == pytest.approx(20.0)  # parts.toml NFET_40V_E


def test_example_heater_zener_below_drive() -> None:
    # examples/README.md: D_Z (12 V) across gate–source below the 15 V isolated drive.
    result = check_nominal(EXAMPLES / "heater96v_isolated_supply.cir")
    (finding,) = [f for f in result.findings if f.rule == RULE]
    text = (EXAMPLES / "heater96v_isolated_supply.cir").read_text(encoding="utf-8")
    assert finding.device == "d_z" and finding.span.line == line_of(text, "D_Z")
    assert finding.severity is Severity.ERROR
    assert value(finding, "clamp_positive_level") == pytest.approx(12.0)
    assert value(finding, "vgs_drive") == pytest.approx(15.0)
    assert value(finding, "clamp_current_bound") == pytest.approx(3.0 / 33.0)


QUIET_EXAMPLES = [
    "lev48_phase_leg_npn_shifter.cir",  # clean; D2 holds the ground pull-down at −V_F
    "induction325_half_bridge_driver.cir",  # clean
    "buck12v_5v_400k_sync.cir",
    "tool36_leg_totem_pole.cir",
    "mower48v_hbridge_wrapped_fets.cir",
    "boost12v_led_lowside.cir",
    "heater12v_pchannel_highside.cir",
    "linreg24v_source_follower.cir",
    "classd45v_split_rail_amp.cir",  # every pull-down returns to the switch node
    "valve24v_pump_loadswitch.cir",  # the 15 V Zener holds the riding reservoir's charge
    "buck48v_closed_loop_ammeters.cir",
    "winch36v_shunt_load_dump.cir",
    "actuator24v_hbridge_held_leg.cir",  # leg B never on
]


def test_linear_regulator_example_warns_for_the_output_short() -> None:
    # examples/README.md: the pass device's gate is pulled up from 60 V with no Zener. In
    # normal operation the source follows the gate (V_GS a few volts, ngspice in
    # tests/test_examples_simulate.py); with the output shorted V_GS heads for 60 V, and
    # with the output held up by C_OUT while Q_EA pulls the gate down, for −48 V.
    result = check_nominal(EXAMPLES / "linreg48v_pass_follower.cir")
    found = {f.device: f for f in result.findings if f.rule == RULE}
    assert set(found) == {"m_pass", "q_ea"}
    assert all(f.severity is Severity.WARNING for f in found.values())
    assert value(found["m_pass"], "vgs_output_short") == pytest.approx(60.0)
    assert value(found["q_ea"], "vgs_max_negative") == pytest.approx(-48.0)
    assert "Zener of 18 V" in found["m_pass"].fix


@pytest.mark.parametrize("name", QUIET_EXAMPLES)
def test_other_examples_give_nothing_for_this_rule(name: str) -> None:
    result = check_path(EXAMPLES / name)
    assert [f.message for f in result.findings if f.rule == RULE] == []


def test_every_example_is_covered() -> None:
    covered = {
        *QUIET_EXAMPLES,
        "loadswitch24v_dc_enable.cir",
        "heater96v_isolated_supply.cir",
        "linreg48v_pass_follower.cir",
    }
    assert covered == {p.name for p in EXAMPLES.glob("*.cir")}


# -- ngspice: the verdicts against an independent simulator -------------------------------------


def simulate(
    text: str, stop: str, vectors: list[str], workdir: Path, saves: tuple[str, ...] = ()
) -> dict[str, list[float]]:
    """Run ``text`` in ngspice batch mode for ``tran <step> <stop>``; return the vectors."""
    if shutil.which("ngspice") is None:
        pytest.skip("ngspice is not installed (Debian package 'ngspice'); CI has it")
    control = (
        ".control\nset wr_singlescale\nset wr_vecnames\n"
        + (f"save all {' '.join(saves)}\n" if saves else "")
        + f"tran {stop}\nwrdata vectors.txt {' '.join(vectors)}\nquit\n.endc\n"
    )
    lines = text.rstrip().splitlines()
    assert lines[-1].strip().lower() == ".end"
    deck = workdir / "deck.cir"
    deck.write_text("\n".join([*lines[:-1], control, ".end"]) + "\n", encoding="utf-8")
    done = subprocess.run(
        ["ngspice", "-b", deck.name],
        cwd=workdir,
        capture_output=True,
        text=True,
        timeout=30,
        check=False,
    )
    out = workdir / "vectors.txt"
    assert done.returncode == 0 and out.is_file(), done.stdout + done.stderr
    header, *rows = out.read_text(encoding="utf-8").splitlines()
    names = header.split()
    columns: dict[str, list[float]] = {n: [] for n in names}
    for row in rows:
        for name, cell in zip(names, row.split(), strict=True):
            columns[name].append(float(cell))
    return columns


def after(w: dict[str, list[float]], name: str, t0: float) -> list[float]:
    return [v for t, v in zip(w["time"], w[name], strict=True) if t >= t0]


# The control turns the switch off at 700 µs (PULSE: Q1 off from 200 µs for 500 µs).
TURN_OFF = 700e-6


@pytest.mark.parametrize(
    ("load", "flagged"),
    [
        ("COUT out 0 47u\nRLOAD out 0 48", True),  # τ = 2.26 ms
        ("COUT out 0 100n\nRLOAD out 0 48", True),  # τ = 4.8 µs
        ("COUT out 0 10n\nRLOAD out 0 48", False),  # τ = 0.48 µs
        ("RLOAD out 0 48", False),  # resistive load only
    ],
)
def test_ngspice_agrees_on_the_negative_excursion(load: str, flagged: bool, tmp_path: Path) -> None:
    text = with_load(BAD, load)
    w = simulate(text, "0.2u 0.8m", ["v(g,out)", "v(out)"], tmp_path)
    # The switch was fully on before turn-off (source at the 24 V bus).
    assert after(w, "v(out)", 650e-6)[0] == pytest.approx(24.0, abs=0.1)
    lowest = min(after(w, "v(g,out)", TURN_OFF))
    if flagged:
        (finding,) = lint(text)
        # The simulator goes beyond 80 % of −V_bus; drivelint's −V_bus is the bound.
        assert lowest < 0.8 * value(finding, "vgs_max_negative")
        assert lowest >= value(finding, "vgs_max_negative") - 1.0
    else:
        # Not flagged: the simulated excursion stays inside the ±20 V rating.
        assert lint(text) == []
        assert lowest > -VGS_MAX_TYPICAL


def test_ngspice_zener_clamp_holds_the_good_example(tmp_path: Path) -> None:
    # With the 15 V Zener the same turn-off stops at about −V_F.
    w = simulate(GOOD, "0.2u 0.8m", ["v(g,out)"], tmp_path)
    assert min(after(w, "v(g,out)", TURN_OFF)) == pytest.approx(-V_F, abs=0.3)
    assert lint(GOOD) == []


def test_ngspice_low_zener_current_stays_under_the_reported_bound(tmp_path: Path) -> None:
    # The heater example: ngspice shows V_GS pinned near V_Z and the Zener conducting;
    # its current stays below drivelint's bound (V_drive − V_Z)/R_G.
    path = EXAMPLES / "heater96v_isolated_supply.cir"
    (finding,) = [f for f in check_path(path).findings if f.rule == RULE]
    text = path.read_text(encoding="utf-8").replace(".tran 0.1u 1m\n", "")
    w = simulate(text, "0.1u 0.3m", ["v(g,sw)", "@d_z[id]", "v(sw)"], tmp_path, saves=("@d_z[id]",))
    # VPWM: on from 10 µs for 100 µs every 200 µs; look mid-pulse, at 60 µs and 260 µs.
    bound = value(finding, "clamp_current_bound")
    for mid in (60e-6, 260e-6):
        index = next(i for i, t in enumerate(w["time"]) if t >= mid)
        assert w["v(sw)"][index] > 90.0, "the switch is on mid-pulse"
        assert w["v(g,sw)"][index] == pytest.approx(12.0, abs=0.6)
        assert 0.02 < -w["@d_z[id]"][index] < bound
