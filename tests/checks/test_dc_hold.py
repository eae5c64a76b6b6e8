"""dc-hold: t_hold = (C·ΔV_allowed − Q_g)/I_drain,on against the longest demanded on-time."""

from __future__ import annotations

import math
from pathlib import Path

import pytest
from nominal import at_nominal, check_nominal
from simulator import run_transient

from drivelint.checks.base import Finding
from drivelint.checks.runner import CheckResult
from drivelint.physics import bootstrap as boot_physics
from drivelint.pipeline import check_path, check_text
from drivelint.ratings.parts import Part, PartsLibrary
from drivelint.ratings.values import Value

RULE = "dc-hold"
EXAMPLES = Path(__file__).resolve().parents[2] / "examples"

# A high side driven by a driver IC (ideal output switches) with one gate–source resistor,
# so the only drain on the boot supply is V_boot/R_GS.
DRIVER_STAGE = """driver IC high side
* drivelint: part M1 qg={qg} vgs_on=10
* drivelint: part DB vf={vf} ir_leak=0
VBUS bus 0 DC 48
VCC vcc 0 DC 12
{control}
XU boot hgate sw vcc hin 0 HSDRV
DB vcc boot dfast
CB boot sw {c}
RGH hgate g 4.7
RGS g sw {rgs}
M1 bus g sw nfet
RLOAD sw 0 10
.subckt HSDRV VB HO VS VCC HIN COM
BH ho1 VS V = V(HIN,COM) > 2.5 ? V(VB,VS) : 0
RH ho1 HO 2
.ends HSDRV
.model dfast D(IS=1n TT=20n BV=100)
.model nfet VDMOS(VTO=3 KP=20 Cgs=2n Cgdmax=1n)
.end
"""
DRIVER = PartsLibrary({"hsdrv": Part("hsdrv", "driver", {}, {}, "parts.toml:1")})
DC_COMMAND = "VH hin 0 PWL(0 0 10u 0 11u 5)"


def findings_of(text: str, parts: PartsLibrary | None = DRIVER) -> list[Finding]:
    result = check_text(at_nominal(text), parts=parts)
    assert not [d for d in result.diagnostics if d.severity.label == "error"], result.diagnostics
    return [f for f in result.findings if f.rule == RULE]


def droop_example_deck(control: str, qg: str = "1f") -> str:
    # A published driver application example (from memory): ΔV = 10 mA × 3.33 µs / 0.1 µF
    # = 333 mV. Read the other way, a 0.1 µF capacitor allowed to droop 333 mV under 10 mA
    # holds for 3.33 µs. Here V_boot,0 = 12 − 1.667 = 10.333 V against vgs_on = 10 V
    # (333 mV allowed), and R_GS = 1033.3 Ω draws 10.333 V / 1033.3 Ω = 10 mA. The example
    # leaves the gate charge out: 1 fC (a rating must be positive) shifts 33 nC by 3e-8.
    return DRIVER_STAGE.format(qg=qg, vf="1.667", c="100n", rgs="1033.3", control=control)


def hold_with_gate(values: dict[str, Value], q_g: float = 0.0) -> float:
    """The example's relation with the gate's capacitance, which sits on the boot supply
    beside the hold capacitor once the switch is on, added to C, and a drain that falls with
    the boot voltage as a resistor's does (g = 1/R_drain,equivalent): the card's t_hold."""
    c = values["capacitance"].value + values["gate_capacitance"].value
    v_min = values["v_boot_min"].value
    return boot_physics.hold_time_linear(
        c,
        v_min + values["delta_v_allowed"].value,
        v_min,
        q_g,
        values["i_drain"].value,
        1.0 / values["r_drain_equivalent"].value,
    )


def test_published_droop_example_read_as_a_hold_time() -> None:
    # The example's own arithmetic, with the physics function the rule uses:
    assert boot_physics.hold_time(100e-9, 0.333, 0.0, 10e-3) == pytest.approx(3.33e-6)
    (finding,) = findings_of(droop_example_deck(DC_COMMAND))
    values = finding.values
    assert values["delta_v_allowed"].value == pytest.approx(0.333)
    assert values["i_drain"].value == pytest.approx(10e-3)
    # The rule adds the gate's own capacitance (the model's C_gs + C_gd, about 3 nF) to the
    # 100 nF, and lets R_GS's current fall with the boot voltage (1/R_GS = 968 µA/V), as the
    # card says: 3 % and 2 % longer than the example's constant-current figure.
    assert 2e-9 < values["gate_capacitance"].value < 3.5e-9
    assert values["r_drain_equivalent"].value == pytest.approx(1033.3, rel=1e-3)
    assert values["hold_time"].value == pytest.approx(hold_with_gate(values))
    assert values["hold_time"].value == pytest.approx(3.33e-6, rel=0.06)
    assert math.isinf(values["on_time"].value)
    assert finding.device == "vh" and finding.span.line == 6
    assert finding.severity.label == "error"
    assert finding.to_json()["values"]["hold_time"]["unit"] == "s"  # type: ignore[index]
    for alternative in ("charge pump", "isolated gate supply", "refresh pulses"):
        assert alternative in finding.fix
    held = f"{values['hold_time'].value * 1e6:.3g} us"
    assert held in finding.fix and held in finding.message


def test_gate_charge_comes_off_the_allowed_droop() -> None:
    # t_hold = (C·ΔV − Q_g)/I: (100 nF × 0.333 V − 13.3 nC)/10 mA = 2 µs, plus the gate's
    # capacitance beside the hold capacitor.
    assert boot_physics.hold_time(100e-9, 0.333, 13.3e-9, 10e-3) == pytest.approx(2e-6)
    (finding,) = findings_of(droop_example_deck(DC_COMMAND, qg="13.3n"))
    assert finding.values["hold_time"].value == pytest.approx(
        hold_with_gate(finding.values, 13.3e-9)
    )


def test_finite_on_time_fires_only_beyond_the_hold_time() -> None:
    # 5 µs on-times outlast the 3.33 µs hold time; 2 µs on-times do not.
    longer = droop_example_deck("VH hin 0 PULSE(0 5 0 1n 1n 4.999u 10u)")
    (finding,) = findings_of(longer)
    assert finding.values["on_time"].value == pytest.approx(5e-6)
    assert finding.values["hold_time"].value == pytest.approx(hold_with_gate(finding.values))
    # Holding 5 µs takes (0 + 10 mA × 5 µs)/0.333 V = 150 nF at the bare charge balance,
    # twice that with the margin bootstrap-capacitor-small sizes with (AN-978's 2).
    assert finding.values["minimum_capacitance"].value == pytest.approx(150.15e-9, rel=1e-3)
    assert finding.values["capacitance_for_on_time"].value == pytest.approx(300.3e-9, rel=1e-3)
    assert "3.49 us" in finding.fix and "330 nF (E12)" in finding.fix
    assert [f.rule for f in check_text(at_nominal(longer), parts=DRIVER).findings] == [RULE]
    # At the worst corner the gate rail's −5 % (12 V → 11.4 V) starts the supply at 9.73 V,
    # below the 10 V the switch needs: no capacitor holds that, and the one finding is the
    # supply level's (gate-headroom), not a hold time.
    assert [f.rule for f in check_text(longer, parts=DRIVER).findings] == ["gate-headroom"]
    assert findings_of(droop_example_deck("VH hin 0 PULSE(0 5 0 1n 1n 1.999u 10u)")) == []


def test_slow_pulse_at_half_duty_is_a_long_finite_on_time() -> None:
    # The load-switch example commanded by a 1 Hz, 50 % pulse: each on-time is 0.5 s
    # (PW plus half of each 1 µs edge), far beyond the sub-millisecond hold time the
    # charge balance gives; a 10 kHz, 50 % pulse (50 µs on-times) is within it.
    text = (EXAMPLES / "loadswitch24v_dc_enable.cir").read_text(encoding="utf-8")
    slow = text.replace("DC 5 PWL(0 0 200u 0 201u 5)", "PULSE(0 5 200u 1u 1u 0.5 1)")
    fast = text.replace("DC 5 PWL(0 0 200u 0 201u 5)", "PULSE(0 5 200u 1u 1u 49u 100u)")
    parts = _example_parts()
    (finding,) = findings_of(slow, parts)
    assert finding.values["on_time"].value == pytest.approx(0.5 + 1e-6)
    assert finding.values["on_time"].value > finding.values["hold_time"].value
    assert findings_of(fast, parts) == []


def _example_parts() -> PartsLibrary:
    from drivelint.ratings.parts import load_parts

    return load_parts(EXAMPLES / "parts.toml")


# ---------------------------------------------------------------- level-shifter drains

SHIFTER_STAGE = """PNP pull-up held on by an NPN shifter with an emitter resistor
* drivelint: part M1 qg=27n
* drivelint: part D1 vf=0.7 ir_leak=0
VSUP v24 0 DC 24
VAUX aux 0 DC 12
V5 vl 0 DC 5
VEN en 0 PWL(0 0 100u 0 101u 5)
M1 v24 g out nfet
RLOAD out 0 48
D1 aux boot dfast
CB boot out 470n
R_EN en q1b 10k
Q1 q1c q1b q1e qn
R_E q1e 0 1k
R_B2 q1c q2b 10k
R_BE2 boot q2b 47k
Q2 qpc q2b boot qp
R_G qpc g 4.7k
R_GS g out 100k
R_I3 en q3b 10k
Q3 q3c q3b 0 qn
R_C3 vl q3c 10k
R_B4 q3c q4b 4.7k
Q4 g q4b out qn
.model dfast D(IS=1n BV=100 TT=20n)
.model qn NPN(BF=100)
.model qp PNP(BF=100)
.model nfet VDMOS(VTO=3 KP=20 Cgs=2n Cgdmax=1n)
.end
"""


def test_base_drive_of_a_pnp_pull_up_drains_the_boot_supply() -> None:
    # Ohm's law with common-practice junction drops (V_EB 0.7 V, V_CE(sat) 0.1 V): the boot
    # net sits at 24 + 11.3 = 35.3 V; the base drive leaves through R_B2, Q1 and R_E:
    # (35.3 − 0.7 − 0.1)/(10 k + 1 k) = 3.136 mA; R_GS adds 11.3 V/100 k = 113 µA.
    (finding,) = findings_of(SHIFTER_STAGE, None)
    expected = (35.3 - 0.7 - 0.1) / 11e3 + 11.3 / 100e3
    # R_BE2's share (0.7 V/47 k = 15 µA) is part of the base-drive current; counting it
    # on its own as well would differ by 0.5 %.
    assert finding.values["i_drain"].value == pytest.approx(expected, rel=0.01)
    # Both drains are resistive: they fall by 1/11 k + 1/100 k per volt the supply sags.
    assert finding.values["r_drain_equivalent"].value == pytest.approx(
        1 / (1 / 11e3 + 1 / 100e3), rel=1e-3
    )
    assert finding.values["hold_time"].value == pytest.approx(hold_with_gate(finding.values, 27e-9))
    # The named drains add up to the resistive total (none is counted twice: counting the
    # base drive twice would be off by 3 mA above).
    named = sum(v.value for k, v in finding.values.items() if k.startswith("drain_"))
    assert named == pytest.approx(finding.values["i_resistive"].value)


def test_gate_drive_of_a_p_channel_pull_up_is_a_divider() -> None:
    # A P-channel pull-up takes no gate current: its gate divider R_BE2 (10 k) over R_B2
    # (47 k), Q1 and R_E (1 k) carries (35.3 − 0.1)/(10 k + 47 k + 1 k) = 607 µA.
    deck = (
        SHIFTER_STAGE.replace("Q2 qpc q2b boot qp", "M2 qpc q2b boot pfet")
        .replace("R_BE2 boot q2b 47k", "R_BE2 boot q2b 10k")
        .replace("R_B2 q1c q2b 10k", "R_B2 q1c q2b 47k")
        .replace(".model qp PNP(BF=100)", ".model pfet VDMOS(pchan VTO=-3 KP=5)")
    )
    (finding,) = findings_of(deck, None)
    expected = (35.3 - 0.1) / 58e3 + 11.3 / 100e3
    assert finding.values["i_drain"].value == pytest.approx(expected, rel=0.01)


# ---------------------------------------------------------------- quiet when it should be


def test_pulsed_stage_within_its_hold_time_is_quiet() -> None:
    assert findings_of(droop_example_deck("VH hin 0 PULSE(0 5 0 1n 1n 1u 10u)")) == []


def test_never_on_is_quiet() -> None:
    assert findings_of(droop_example_deck("VH hin 0 DC 0")) == []


def test_unknown_control_is_quiet() -> None:
    deck = droop_example_deck("BH hin 0 V = 5*u(time-1u)")
    assert findings_of(deck) == []


def test_isolated_supply_holds_at_dc() -> None:
    deck = droop_example_deck(DC_COMMAND).replace("DB vcc boot dfast", "VISO boot sw DC 12")
    result = check_text(at_nominal(deck), parts=DRIVER)
    assert [s.supply.kind for s in result.stages if s.floating] == ["isolated"]
    assert not [f for f in result.findings if f.rule == RULE]


def test_dc_on_a_bootstrap_fires_even_without_known_drains() -> None:
    # Nothing known drains the capacitor: the hold time is unbounded on paper, yet real
    # leakage always empties a bootstrap, so a DC command is still an error.
    deck = droop_example_deck(DC_COMMAND).replace("RGS g sw 1033.3\n", "")
    (finding,) = findings_of(deck)
    assert math.isinf(finding.values["hold_time"].value)
    assert finding.values["i_drain"].value == 0
    assert "no steady drain" in finding.message


def test_unknown_gate_charge_gives_an_upper_bound() -> None:
    deck = droop_example_deck(DC_COMMAND).replace("qg=1f ", "")
    deck = deck.replace("VDMOS(VTO=3 KP=20 Cgs=2n Cgdmax=1n)", "VDMOS(VTO=3 KP=20)")
    (finding,) = findings_of(deck)
    # No gate charge and no gate capacitance: the example's 3.33 µs, a little longer as
    # R_GS's current falls with the sagging supply.
    assert finding.values["hold_time"].value == pytest.approx(hold_with_gate(finding.values))
    assert 3.33e-6 < finding.values["hold_time"].value < 3.33e-6 * 1.02
    assert "upper bound" in finding.values["hold_time"].origin


# ---------------------------------------------------------------- the bundled examples


def test_example_load_switch_dc_enable() -> None:
    # examples/README.md: DC enable on a bootstrap supply; R_GS 100 k and the level
    # shifter's base resistors drain C_BOOT. By hand (Ohm's law, common-practice V_EB
    # 0.7 V and V_CE(sat) 0.1 V): R_GS draws V_boot/100 k and the base drive of Q2
    # through R_B2 and Q1 (V_24 + V_boot − 0.7 − 0.1)/47 k, together about 0.85 mA.
    result = check_nominal(EXAMPLES / "loadswitch24v_dc_enable.cir")
    (finding,) = [f for f in result.findings if f.rule == RULE]
    assert finding.device == "ven" and finding.span.line == 38
    assert finding.severity.label == "error"
    values = finding.values
    assert math.isinf(values["on_time"].value)
    v_boot = values["v_boot"].value
    # 12 V less the diode's drop at the nanoamperes it carries at rest (Shockley law)
    assert 11.9 < v_boot < 12.0
    by_hand = v_boot / 100e3 + (24 + v_boot - 0.7 - 0.1) / 47e3
    assert values["i_drain"].value == pytest.approx(by_hand, rel=0.03)
    assert values["gate_charge"].value >= 27e-9  # NFET_40V_E's own Q_g at least
    c = 470e-9 + values["gate_capacitance"].value
    constant = (c * (v_boot - 10.0) - values["gate_charge"].value) / values["i_drain"].value
    # Both drains are resistors: by hand they fall by 1/100 k + 1/47 k per volt of sag,
    # and the hold time is a little longer than at constant current.
    assert values["r_drain_equivalent"].value == pytest.approx(1 / (1 / 100e3 + 1 / 47e3), rel=0.03)
    hold = values["hold_time"].value
    assert hold == pytest.approx(hold_with_gate(values, values["gate_charge"].value))
    assert constant < hold < 1.1 * constant
    assert 0 < hold < 1e-3  # well under a millisecond
    assert "charge pump" in finding.fix and "isolated" in finding.fix


@pytest.mark.parametrize(
    "example",
    [
        "lev48_phase_leg_npn_shifter.cir",  # clean
        "induction325_half_bridge_driver.cir",  # clean
        "mower48v_hbridge_wrapped_fets.cir",  # leg B never on; leg A within its hold time
        "tool36_leg_totem_pole.cir",  # C·ΔV below Q_g: bootstrap-capacitor-small's finding
        "buck12v_5v_400k_sync.cir",  # short on-times
        "heater96v_isolated_supply.cir",  # isolated supply
        "boost12v_led_lowside.cir",
        "heater12v_pchannel_highside.cir",
        "linreg24v_source_follower.cir",
    ],
)
def test_other_examples_are_quiet(example: str) -> None:
    result = check_path(EXAMPLES / example)
    assert not [f for f in result.findings if f.rule == RULE]


def test_mower_leg_a_hold_time_exceeds_its_on_time() -> None:
    # Leg A runs at 99.2 % duty (a refresh problem, not a hold problem): its 49.6 µs
    # on-times are well within what 470 nF holds; leg B's DC 0 V command never turns on.
    result = check_nominal(EXAMPLES / "mower48v_hbridge_wrapped_fets.cir")
    stages = {s.switch: s for s in result.stages}
    assert {"xlega.xqh", "xlegb.xqh"} <= set(stages)
    assert not [f for f in result.findings if f.rule == RULE]


# ---------------------------------------------------------------- against ngspice


def test_load_switch_drain_and_hold_time_against_ngspice(tmp_path: Path) -> None:
    # ngspice (independent simulator) on the example itself: the current C_BOOT delivers
    # once the output has settled, and the time its voltage takes to fall to V_boot,min
    # after the enable, against the finding's I_drain and t_hold (the latter restated for
    # the voltage the simulated capacitor starts from).
    (finding,) = [
        f
        for f in check_nominal(EXAMPLES / "loadswitch24v_dc_enable.cir").findings
        if f.rule == RULE
    ]
    text = (EXAMPLES / "loadswitch24v_dc_enable.cir").read_text(encoding="utf-8")
    waves = run_transient(text, ["v(boot,out)", "v(out)"], tmp_path / "loadswitch")
    rows = list(zip(waves.time, waves["v(boot,out)"], waves["v(out)"], strict=True))

    def boot_at(t: float) -> float:
        return waves.at("v(boot,out)", t)

    c = finding.values["capacitance"].value
    i_drain = finding.values["i_drain"].value
    assert boot_at(0.6e-3) > 0 and waves.at("v(out)", 0.6e-3) > 23.5  # settled
    measured_current = c * (boot_at(0.6e-3) - boot_at(1.0e-3)) / 0.4e-3
    assert measured_current == pytest.approx(i_drain, rel=0.15)
    # Without the level shifter's base drive, R_GS alone would be several times too small.
    assert measured_current > 4 * finding.values["drain_r_gs"].value

    v_min = finding.values["v_boot_min"].value
    enable = 200.5e-6  # the middle of VEN's 200 µs → 201 µs edge
    v_start = boot_at(200e-6)
    fell = next(t for t, v, _ in rows if t > enable and v < v_min)
    measured_hold = fell - enable
    predicted = (c * (v_start - v_min) - finding.values["gate_charge"].value) / i_drain
    # Conservative (the resistive drains shrink as the boot voltage falls) and close.
    assert 0.7 * measured_hold <= predicted <= 1.05 * measured_hold


def required_nominal_part(finding: Finding, nominal: CheckResult, margin: float = 2.0) -> float:
    """The nominal hold capacitance the sizing policy asks for (the rule cards of dc-hold
    and bootstrap-capacitor-small): the larger of the margin on the nominal charge balance
    and the worst corner's balance met at face value by the part's low corner."""
    (at_nominal_finding,) = [f for f in nominal.findings if f.rule == finding.rule]
    nominal_values, values = at_nominal_finding.values, finding.values
    with_margin = (
        margin * nominal_values["charge_per_cycle"].value / nominal_values["delta_v_allowed"].value
    )
    low_corner = values["capacitance"].value / values["c_hold_nominal"].value
    at_corner = values["charge_per_cycle"].value / values["delta_v_allowed"].value / low_corner
    return max(with_margin, at_corner)


# ---------------------------------------------------------------- one cause, one finding

OUTSIDE = Path(__file__).resolve().parent / "outside"


def test_a_hold_of_seconds_is_no_job_for_a_bootstrap(tmp_path: Path) -> None:
    # The heater deck enabled for 2 s: holding it would take far more than any bootstrap
    # capacitor (2 × 341 µA × 2 s / 1.53 V ≈ 0.9 mF). One finding says so and points at
    # the other supplies; no capacitor to fit, no droop of kilovolts.
    text = (OUTSIDE / "o19_heater24v_long_enable.cir").read_text(encoding="utf-8")
    long_enable = text.replace("152m 5 152.01m 0", "2.002 5 2.00201 0")
    assert long_enable != text
    deck = tmp_path / "long.cir"
    deck.write_text(long_enable, encoding="utf-8")
    result = check_path(deck)
    (finding,) = result.findings
    assert finding.rule == RULE
    assert finding.message.startswith("a bootstrap supply cannot hold m1 on for 2 s as ven")
    assert "capacitance_for_on_time" not in finding.values
    needed = finding.values["capacitance_needed"].value
    assert needed == pytest.approx(
        required_nominal_part(finding, check_path(deck, text=at_nominal(long_enable)))
    )
    assert needed > finding.values["practical_max_capacitance"].value
    assert "charge pump" in finding.fix and "isolated gate supply" in finding.fix
    assert " kV" not in finding.message and "mF (E12)" not in finding.fix


def test_one_on_time_gets_one_required_capacitance() -> None:
    # The heater enabled for 150 ms: dc-hold alone, with the capacitance the sizing rule
    # would ask for (its margin on the same Q_total/ΔV_allowed).
    result = check_path(OUTSIDE / "o19_heater24v_long_enable.cir")
    (finding,) = result.findings
    values = finding.values
    assert finding.rule == RULE and finding.device == "ven"
    nominal = check_nominal(OUTSIDE / "o19_heater24v_long_enable.cir")
    expected = required_nominal_part(finding, nominal)
    assert values["capacitance_for_on_time"].value == pytest.approx(expected)
    # 68.4 uF: the worst corner governs (the margin of 2 at nominal asks 67.2 uF), and the
    # next E12 value at or above it is 82 uF
    assert values["suggested_capacitance"].value == pytest.approx(82e-6)
    assert "≥ 68.4 uF" in finding.message and "82 uF (E12)" in finding.fix
    # V_F is listed among the inputs, and the boot voltage adds up as printed (at the
    # nominal corner: the gate rail as written)
    (as_written,) = nominal.findings
    assert as_written.values["diode_vf"].value == pytest.approx(0.473, abs=0.005)
    assert any("12 V − 473 mV − 0 V = 11.53 V" in line for line in as_written.derivation)
