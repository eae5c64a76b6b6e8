"""bootstrap-capacitor-small: C ≥ margin·(Q_g + Q_ls + I·t_on)/(V_boot,0 − V_boot,min)."""

from __future__ import annotations

import bisect
import shutil
from pathlib import Path

import pytest
from nominal import at_nominal
from simulator import run_transient

from drivelint.checks.base import Finding
from drivelint.config import RuleSetting
from drivelint.physics import bootstrap as boot_physics
from drivelint.pipeline import check_path, check_text
from drivelint.ratings.parts import Part, PartsLibrary

RULE = "bootstrap-capacitor-small"
EXAMPLES = Path(__file__).resolve().parents[2] / "examples"

# A high side driven by a driver IC from a 12 V rail: no resistive drain on the boot
# supply, so the budget holds only what the directives and the parts library give.
DRIVER_STAGE = """driver IC high side
* drivelint: part M1 qg={qg} vgs_on={vgs_on}
* drivelint: part DB vf={vf} ir_leak=0 qrr=0
{conditions}VBUS bus 0 DC 48
VCC vcc 0 DC 12
VH hin 0 {control}
XU boot hgate sw vcc hin 0 HSDRV
DB vcc boot dfast
CB boot sw {c}
RGH hgate g 4.7
{extra}M1 bus g sw nfet
RLOAD sw 0 10
.subckt HSDRV VB HO VS VCC HIN COM
BH ho1 VS V = V(HIN,COM) > 2.5 ? V(VB,VS) : 0
RH ho1 HO 2
.ends HSDRV
.model dfast D(IS=1n TT=20n BV=100)
.model nfet VDMOS(VTO=3 KP=20 Cgs=2n Cgdmax=1n)
.end
"""


def driver_library(**values: str) -> PartsLibrary:
    return PartsLibrary({"hsdrv": Part("hsdrv", "driver", values, {}, "parts.toml:1")})


def findings_of(
    text: str, parts: PartsLibrary | None = None, margin: float | None = None
) -> list[Finding]:
    settings = {RULE: RuleSetting(options={"margin": margin})} if margin is not None else None
    # published worked examples are nominal figures: judged at the nominal corner
    result = check_text(at_nominal(text), parts=parts, settings=settings)
    assert not [d for d in result.diagnostics if d.severity.label == "error"], result.diagnostics
    return [f for f in result.findings if f.rule == RULE]


def slua887_deck(c: str) -> str:
    # TI SLUA887 worked example: Q_G = 210 nC, I_HBS = 50 µA, D_max = 1, f_sw = 10 kHz,
    # I_HB = 55 µA, ΔV_HB = V_DD − V_DH − V_HBL = 12 V − 1 V − 9.8 V = 1.2 V. With
    # D_max = 1 both currents of the driver's floating side run for t_on = 1/f_sw = 100 µs,
    # so they are given as one iq_boot of 105 µA and the on-time as on_time_max. V_HBL is
    # the driver's boot under-voltage lockout; vgs_on = 8 V keeps it the governing minimum.
    return DRIVER_STAGE.format(
        qg="210n",
        vgs_on="8",
        vf="1",
        c=c,
        extra="",
        conditions="* drivelint: conditions on_time_max=100u\n",
        control="PULSE(0 5 0 10n 10n 49u 100u)",
    )


SLUA887_PARTS = {"iq_boot": "105 uA", "uvlo_boot": "9.8 V"}


def test_slua887_worked_example_end_to_end() -> None:
    # TI SLUA887: Q_total = 210 nC + 50 µA·1/10 kHz + 55 µA/10 kHz = 220.5 nC,
    # C_boot ≥ 220.5 nC / 1.2 V = 183.75 nF (the bare charge balance: margin 1).
    (finding,) = findings_of(slua887_deck("100n"), driver_library(**SLUA887_PARTS), margin=1)
    values = finding.values
    assert values["delta_v_allowed"].value == pytest.approx(1.2)
    assert values["v_boot_min"].value == pytest.approx(9.8)
    assert "uvlo_boot" in values["v_boot_min"].origin
    assert values["charge_per_cycle"].value == pytest.approx(220.5e-9)
    assert values["required_capacitance"].value == pytest.approx(183.75e-9)
    # The note's droop is ΔV = Q/C: 220.5 nC on 100 nF droops 2.205 V per cycle ...
    assert boot_physics.droop_per_cycle(220.5e-9, 100e-9) == pytest.approx(2.205)
    # ... while the finding shares the charge with the gate, ΔV = Q/(C + C_g), with C_g the
    # model's C_gs + C_gd at the drive level (the card says so): a little less.
    c_gate = values["gate_capacitance"].value
    assert 2e-9 < c_gate < 3.5e-9
    assert values["droop_per_cycle"].value == pytest.approx(220.5e-9 / (100e-9 + c_gate))
    # IEC 60063 E12: the next value at or above 183.75 nF is 220 nF.
    assert values["suggested_capacitance"].value == pytest.approx(220e-9)
    assert finding.device == "cb" and finding.span.line == 10
    assert "220 nF" in finding.fix and "2.14 V per cycle" in finding.message
    reported = finding.to_json()["values"]
    assert isinstance(reported, dict)
    assert {"required_capacitance", "droop_per_cycle"} <= set(reported)


def test_default_margin_is_an978s_factor_of_two() -> None:
    # International Rectifier AN-978 (from memory) doubles the charge balance:
    # C ≥ 2·Q_total/ΔV, here 2 × 183.75 nF = 367.5 nF, so E12 390 nF is suggested and a
    # 330 nF capacitor, enough for the bare balance, is still flagged.
    (finding,) = findings_of(slua887_deck("330n"), driver_library(**SLUA887_PARTS))
    assert finding.values["margin"].value == 2
    assert finding.values["minimum_capacitance"].value == pytest.approx(183.75e-9)
    assert finding.values["required_capacitance"].value == pytest.approx(367.5e-9)
    assert finding.values["suggested_capacitance"].value == pytest.approx(390e-9)
    assert findings_of(slua887_deck("330n"), driver_library(**SLUA887_PARTS), margin=1) == []
    assert findings_of(slua887_deck("390n"), driver_library(**SLUA887_PARTS)) == []


def test_basso_drive_current_during_the_on_time() -> None:
    # Basso, switch-mode power supply design (from memory): 0.2 A for 75 % of a 50 µs
    # period on top of 170 nC, at 2 V droop: (170 nC + 0.75·50 µs·0.2 A)/2 V = 3.835 µF.
    # Here the 0.2 A is a gate–source resistor: V_boot,0 = 12 − 0.5 = 11.5 V across
    # 57.5 Ω; vgs_on = 9.5 V gives the 2 V droop; the pulse is high for 37.5 µs.
    deck = DRIVER_STAGE.format(
        qg="170n",
        vgs_on="9.5",
        vf="0.5",
        c="2.2u",
        conditions="",
        control="PULSE(0 5 0 1n 1n 37.499u 50u)",
        extra="RGS g sw 57.5\n",
    )
    # 4.7 µF holds the on-time, but not with the default margin of 2: this rule's finding.
    held = deck.replace("CB boot sw 2.2u", "CB boot sw 4.7u")
    (finding,) = findings_of(held, driver_library())
    values = finding.values
    assert values["on_time"].value == pytest.approx(37.5e-6)
    assert values["drain_rgs"].value == pytest.approx(0.2)
    assert values["i_resistive"].value == pytest.approx(0.2)
    assert values["minimum_capacitance"].value == pytest.approx(3.835e-6, rel=1e-6)
    assert values["required_capacitance"].value == pytest.approx(7.67e-6, rel=1e-6)
    assert values["suggested_capacitance"].value == pytest.approx(8.2e-6)  # E12
    assert findings_of(held, driver_library(), margin=1) == []
    # 2.2 µF does not even hold it: one finding, dc-hold's, with the same capacitance
    result = check_text(at_nominal(deck), parts=driver_library())
    (hold,) = result.findings
    assert hold.rule == "dc-hold"
    assert hold.values["minimum_capacitance"].value == pytest.approx(3.835e-6, rel=1e-6)
    assert hold.values["capacitance_for_on_time"].value == pytest.approx(7.67e-6, rel=1e-6)


def test_level_shifter_charge_is_in_the_budget() -> None:
    # AN-978 (from memory): Q_ls, the level shifter's charge per cycle, adds to Q_g.
    parts = driver_library(**SLUA887_PARTS, q_levelshift="5 nC")
    (finding,) = findings_of(slua887_deck("100n"), parts, margin=1)
    assert finding.values["level_shift_charge"].value == pytest.approx(5e-9)
    assert finding.values["required_capacitance"].value == pytest.approx(225.5e-9 / 1.2)


# ---------------------------------------------------------------- quiet when it should be


def test_unknown_gate_charge_is_quiet() -> None:
    deck = slua887_deck("1n").replace(
        ".model nfet VDMOS(VTO=3 KP=20 Cgs=2n Cgdmax=1n)", ".model nfet VDMOS(VTO=3 KP=20)"
    )
    deck = deck.replace("qg=210n ", "")
    assert findings_of(deck, driver_library(**SLUA887_PARTS)) == []


def test_unbounded_on_time_is_left_to_dc_hold() -> None:
    deck = slua887_deck("1n").replace("* drivelint: conditions on_time_max=100u\n", "")
    deck = deck.replace("PULSE(0 5 0 10n 10n 49u 100u)", "PWL(0 0 10u 0 11u 5)")
    result = check_text(deck, parts=driver_library(**SLUA887_PARTS))
    rules = {f.rule for f in result.findings}
    assert RULE not in rules and "dc-hold" in rules


def test_supply_starting_below_the_minimum_is_not_a_sizing_finding() -> None:
    # V_boot,0 = 12 − 1 = 11 V against a 12 V minimum: no capacitor can help.
    deck = slua887_deck("1n").replace("vgs_on=8", "vgs_on=12")
    assert findings_of(deck, driver_library(**SLUA887_PARTS)) == []


def test_isolated_supply_is_not_this_rules_business() -> None:
    deck = """isolated 15 V gate supply
* drivelint: part M1 qg=100n
VBUS bus 0 DC 48
VISO vdd2 sw DC 15
VH hin 0 PULSE(0 5 0 10n 10n 20u 50u)
XU vdd2 hgate sw vdd2 hin 0 HSDRV
CB vdd2 sw 1n
RGH hgate g 4.7
M1 bus g sw nfet
RLOAD sw 0 10
.subckt HSDRV VB HO VS VCC HIN COM
BH ho1 VS V = V(HIN,COM) > 2.5 ? V(VB,VS) : 0
RH ho1 HO 2
.ends HSDRV
.model nfet VDMOS(VTO=3 KP=20 Cgs=2n Cgdmax=1n)
.end
"""
    result = check_text(deck, parts=driver_library())
    assert [s.supply.kind for s in result.stages if s.floating] == ["isolated"]
    assert not [f for f in result.findings if f.rule == RULE]


# ---------------------------------------------------------------- the bundled examples


# IEC 60063, E12 series: one decade.
E12 = (1.0, 1.2, 1.5, 1.8, 2.2, 2.7, 3.3, 3.9, 4.7, 5.6, 6.8, 8.2)


def e12_at_least(value: float) -> float:
    """The smallest E12 value ≥ ``value`` (by search over the IEC 60063 table)."""
    candidates = [step * 10.0**decade for decade in range(-15, 3) for step in E12]
    return min(c for c in candidates if c >= value * (1 - 1e-9))


def test_example_totem_pole_leg_hold_capacitor_too_small() -> None:
    # examples/README.md: C1 = 10 nF against Q_g ≈ 95 nC at 10 V. Recomputed by hand from
    # the netlist and parts.toml: V_boot,0 = 12 V less the diode drop (the extra charge a
    # freewheeling current gives in the dead time is not counted on); Q_g on the
    # equal-slopes gate-charge curve through NFET_60V_B's 95 nC at 10 V
    # with Q_gd = 11 nC; R_GS 22 k across V_boot for the on-time (PW 31.25 µs plus half of
    # each 20 ns edge); the DFAST_100 model's IS as diode leakage; margin 2; V_boot,min the
    # part's gate-charge test voltage 10 V (its library entry gives no vgs_on).
    # (at the nominal corner: the hand figures are the netlist's own values)
    path = EXAMPLES / "tool36_leg_totem_pole.cir"
    result = check_path(path, text=at_nominal(path.read_text(encoding="utf-8")))
    (finding,) = [f for f in result.findings if f.rule == RULE]
    assert finding.device == "c1" and finding.span.line == 34
    assert finding.severity.label == "error"
    values = finding.values
    v_boot = values["v_boot"].value
    assert 11.0 < v_boot < 11.8  # 12 V less one diode drop
    assert values["v_boot_min"].value == 10.0
    assert "vgs_qg" in values["v_boot_min"].origin
    q_g = 11e-9 + (95e-9 - 11e-9) * v_boot / 10.0
    assert values["gate_charge"].value == pytest.approx(q_g)
    assert values["gate_capacitance"].value == pytest.approx(8.4e-9)
    t_on = 31.25e-6 + 20e-9
    assert values["on_time"].value == pytest.approx(t_on)
    q_rr = values["recovery_charge"].value
    assert 0 < q_rr < 1e-12  # a 20 ns diode at microamps: nothing worth counting
    q_total = q_g + (v_boot / 22e3 + 1e-9) * t_on + q_rr
    required = 2 * q_total / (v_boot - 10.0)
    assert values["charge_per_cycle"].value == pytest.approx(q_total, rel=1e-6)
    assert values["required_capacitance"].value == pytest.approx(required, rel=1e-6)
    assert 100e-9 < required < 200e-9  # an order of magnitude above the 10 nF fitted
    # The droop the finding reports shares the charge with the gate, and the part of the
    # gate charge taken before the node rises comes back through the 2.2 Ω path.
    refilled = values["droop_per_cycle"].origin
    assert "C + C_g" in refilled
    droop = values["droop_per_cycle"].value
    assert q_total / (10e-9 + 8.4e-9) * 0.7 < droop < q_total / (10e-9 + 8.4e-9)
    suggested = e12_at_least(required)
    assert values["suggested_capacitance"].value == pytest.approx(suggested)
    assert f"{suggested * 1e9:.0f} nF" in finding.fix


@pytest.mark.parametrize(
    "example",
    [
        "lev48_phase_leg_npn_shifter.cir",  # clean
        "induction325_half_bridge_driver.cir",  # clean
        "mower48v_hbridge_wrapped_fets.cir",  # 470 nF is enough for leg A; leg B is never on
        "loadswitch24v_dc_enable.cir",  # DC enable: dc-hold's finding
        "heater96v_isolated_supply.cir",  # isolated supply
        "buck12v_5v_400k_sync.cir",  # V_boot,0 below vgs_on 4.5 V: gate-headroom's finding
        "boost12v_led_lowside.cir",
        "heater12v_pchannel_highside.cir",
        "linreg24v_source_follower.cir",
    ],
)
def test_other_examples_are_quiet(example: str) -> None:
    result = check_path(EXAMPLES / example)
    assert not [f for f in result.findings if f.rule == RULE]


# ---------------------------------------------------------------- against ngspice


def _boot_during_on_times(capacitor: str, tmp_path: Path) -> list[tuple[float, float]]:
    """(boot voltage just before turn-on, lowest boot voltage during the on-time) per cycle
    of the totem-pole example with C1 replaced, simulated in ngspice."""
    text = (EXAMPLES / "tool36_leg_totem_pole.cir").read_text(encoding="utf-8")
    text = text.replace("C1    BOOT SW 10n", f"C1    BOOT SW {capacitor}")
    waves = run_transient(text, ["v(boot,sw)", "v(sw)"], tmp_path / f"tool36_{capacitor}")
    rows = list(zip(waves.time, waves["v(boot,sw)"], waves["v(sw)"], strict=True))
    time = list(waves.time)
    cycles: list[tuple[float, float]] = []
    start: int | None = None
    for index, (_, _boot, sw) in enumerate(rows):
        if sw > 30.0 and start is None:
            start = index
        elif sw <= 30.0 and start is not None:
            before = bisect.bisect_left(time, time[start] - 1e-6)
            cycles.append(
                (max(r[1] for r in rows[before : start + 1]), min(r[1] for r in rows[start:index]))
            )
            start = None
    return cycles[2:]  # past the start-up charge of the first cycles


def test_suggested_capacitor_holds_the_boot_supply_in_ngspice(tmp_path: Path) -> None:
    # ngspice (independent simulator) on the example itself: with the 10 nF the rule flags,
    # the boot supply falls far below V_boot,min = 10 V in every on-time; with the E12
    # value it suggests, it stays above, and the droop per cycle is close to Q_total/C.
    if shutil.which("ngspice") is None:
        pytest.skip("ngspice is not installed; the simulator cross-check needs it (CI has it)")
    # the simulation runs the netlist as written: the finding at the nominal corner
    path = EXAMPLES / "tool36_leg_totem_pole.cir"
    nominal = check_path(path, text=at_nominal(path.read_text(encoding="utf-8")))
    (finding,) = [f for f in nominal.findings if f.rule == RULE]
    v_min = finding.values["v_boot_min"].value
    small = _boot_during_on_times("10n", tmp_path)
    assert len(small) >= 8 and all(low < v_min - 2.0 for _, low in small)
    value = finding.values["suggested_capacitance"].value
    suggested = _boot_during_on_times(f"{value * 1e9:.0f}n", tmp_path)
    assert len(suggested) >= 8 and all(low > v_min for _, low in suggested)
    measured = max(before - low for before, low in suggested)
    predicted = finding.values["suggested_droop_per_cycle"].value
    # Q_g is the datasheet-style figure at 10 V; the simulated gate takes a little less.
    assert measured == pytest.approx(predicted, rel=0.25)


def test_a_recovery_dominated_budget_points_at_the_diode() -> None:
    # A slow diode's recovery charge TT·I_F goes into the budget; when it is most of it the
    # fix says a fast diode, not a larger capacitor, is the cure. The buck example with a
    # 6 V driver rail (so the supply clears the switch's 4.5 V and the capacitor is judged).
    text = (EXAMPLES / "buck12v_5v_400k_sync.cir").read_text(encoding="utf-8")
    path = EXAMPLES / "buck12v_5v_400k_sync.cir"
    result = check_path(path, text=at_nominal(text.replace("VDRV=5 ", "VDRV=6 ")))
    (finding,) = [f for f in result.findings if f.rule == RULE]
    values = finding.values
    q_rr = values["recovery_charge"].value
    assert q_rr > 5 * values["gate_charge"].value
    assert values["charge_per_cycle"].value == pytest.approx(
        values["gate_charge"].value
        + values["level_shift_charge"].value
        + values["i_drain"].value * values["on_time"].value
        + q_rr
    )
    assert "recovery charge" in finding.fix and "d_bst" in finding.fix
