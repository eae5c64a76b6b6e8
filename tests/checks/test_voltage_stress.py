"""voltage-stress: switches, parts across known voltages and gate-resistor power against
their derated ratings, held to textbook relations and to ngspice."""

from __future__ import annotations

from pathlib import Path

import pytest
from nominal import at_nominal
from simulator import run_transient

from drivelint.checks.registry import registry
from drivelint.checks.stress import finding_kind
from drivelint.pipeline import check_path, check_text
from drivelint.ratings.parts import load_parts

EXAMPLES = Path(__file__).resolve().parents[2] / "examples"

# A 48 V leg at 400 kHz driven by an ideal driver with 2 Ω outputs (RH inside HSDRV) and a
# 4.7 Ω gate resistor; the driver's parts entry gives those 2 Ω to drivelint.
LEG = """48 V leg at 400 kHz, ideal driver with 2 ohm outputs
VBUS bus 0 DC {bus}
VCC vcc 0 DC 12
VHIN hin 0 PULSE(0 5 0 5n 5n 1u 2.5u)
XU boot hgate sw hin 0 HSDRV
D1 vcc boot dfast
C1 boot sw 470n
RG hgate g 4.7
RGS g sw 10k
M1 bus g sw nfet
M2 sw gl 0 nfet
VGL gl 0 PULSE(0 12 1.1u 5n 5n 1.3u 2.5u)
RLOAD sw 0 100
.subckt HSDRV VB HO VS HIN COM
BH ho1 VS V = V(HIN,COM) > 2.5 ? V(VB,VS) : 0
RH ho1 HO 2
.ends HSDRV
.model dfast D(IS=1n N=1.6 RS=0.2 BV=200 TT=20n)
.model nfet VDMOS(VTO=3.5 KP=20 Cgs=4n Cgdmax=1n Cgdmin=0.1n)
{directives}
.tran 2n 40u 0 2n
.end
"""
DRIVER_PARTS = """
[part.HSDRV]
kind = "driver"
pins = { VB = "boot", HO = "high_out", VS = "switch", HIN = "high_in", COM = "ground" }
r_source = "2 Ohm"
r_sink = "2 Ohm"
"""


def _leg(bus: float = 48.0, *directives: str) -> str:
    return LEG.format(bus=bus, directives="\n".join(f"* drivelint: {d}" for d in directives))


def _parts(tmp_path: Path) -> object:
    path = tmp_path / "parts.toml"
    path.write_text(DRIVER_PARTS, encoding="utf-8")
    return load_parts(path)


def _own(result: object) -> list:
    return [f for f in result.findings if f.rule == "voltage-stress"]  # type: ignore[attr-defined]


# -- the rule on netlists ----------------------------------------------------------------------


def test_card_example_names_both_switches_of_the_leg() -> None:
    rule = registry()["voltage-stress"]
    found = _own(check_text(rule.bad, path="bad.cir"))
    assert sorted((f.device, f.span.line) for f in found) == [("m1", 10), ("m2", 11)]
    for finding in found:
        assert finding.values["vds_off"].value == pytest.approx(61.6)
        assert finding.severity.label == "error"  # beyond the 60 V rating itself
        assert finding_kind(finding.values) == "switch"
        assert "77 V" in finding.fix


def test_within_the_rating_but_beyond_the_derating_is_a_warning() -> None:
    # 48 V × 1.1 = 52.8 V: within 60 V, above 48 V (80 %)
    text = _leg(48.0, "part M1 vds_max=60V", "part M2 vds_max=100V")
    found = _own(check_text(text))
    assert [(f.device, f.severity.label) for f in found] == [("m1", "warning")]
    assert found[0].values["derated_limit"].value == pytest.approx(48.0)


def test_no_rating_no_finding() -> None:
    assert _own(check_text(_leg(48.0))) == []


def test_hold_capacitor_against_its_voltage_rating(tmp_path: Path) -> None:
    """The hold capacitor's highest voltage is the boot supply at rest (the diode carrying
    only the off-state drains, so V_F is small), checked against ngspice's V(boot, sw)."""
    text = _leg(48.0, "part C1 v_max=16V")
    found = _own(check_text(at_nominal(text)))
    assert [(f.device, f.span.line) for f in found] == [("c1", 7)]
    finding = found[0]
    assert finding_kind(finding.values) == "part"
    assert finding.severity.label == "warning"  # above 11.2 V, within 16 V
    claimed = finding.values["v_part"].value
    waves = run_transient(text, ["v(boot,sw)"], tmp_path / "sim")
    measured = max(waves.between("v(boot,sw)", 20e-6, 40e-6))
    print(f"V(C1): computed {claimed:.4g} V, ngspice {measured:.4g} V")
    assert measured == pytest.approx(claimed, rel=0.05)
    assert "25 V" in finding.fix
    # a 25 V part is quiet
    assert _own(check_text(at_nominal(_leg(48.0, "part C1 v_max=25V")))) == []


def test_gate_source_resistor_voltage_rating() -> None:
    found = _own(check_text(at_nominal(_leg(48.0, "part RGS v_max=10V"))))
    assert [(f.device, f.severity.label) for f in found] == [("rgs", "error")]


def test_gate_resistor_power_against_ngspice(tmp_path: Path) -> None:
    """The average power in RG over steady cycles, simulated, against P_R computed at the
    nominal corner: ±20 %."""
    parts = _parts(tmp_path)
    text = _leg(48.0, "part RG p_max=0.0625W")
    result = check_text(at_nominal(text), parts=parts)  # type: ignore[arg-type]
    found = [f for f in _own(result) if f.device == "rg"]
    assert len(found) == 1
    claimed = found[0].values["p_resistor"].value
    assert finding_kind(found[0].values) == "power"
    waves = run_transient(text, ["v(hgate,g)"], tmp_path / "sim")
    t0, t1 = 30e-6, 40e-6  # four steady periods
    drop = waves["v(hgate,g)"]
    t = waves.time
    energy = sum(
        (t[i + 1] - t[i]) * (drop[i] ** 2 + drop[i + 1] ** 2) / 2
        for i in range(waves.index(t0), waves.index(t1))
    )
    measured = energy / 4.7 / (t1 - t0)
    print(f"P_RG: computed {claimed:.4g} W, ngspice {measured:.4g} W")
    assert measured == pytest.approx(claimed, rel=0.2), (measured, claimed)


def test_off_state_voltage_against_ngspice(tmp_path: Path) -> None:
    """The settled V_DS of the off high side (the low side on) and of the off low side
    (the high side on) in ngspice, against V_bus − V_sw,low."""
    text = _leg(56.0, "part M1 vds_max=60V", "part M2 vds_max=60V")
    found = _own(check_text(at_nominal(text)))
    assert sorted(f.device for f in found) == ["m1", "m2"]
    steady = found[0].values["vds_off_steady"].value
    waves = run_transient(text, ["v(bus,sw)", "v(sw)"], tmp_path / "sim")
    # high side off, low side on: 1.3 us … 2.3 us of a period; high side on: 0.2 … 0.9 us
    hs_off = max(waves.between("v(bus,sw)", 30e-6 + 1.5e-6, 30e-6 + 2.3e-6))
    ls_off = max(waves.between("v(sw)", 30e-6 + 0.3e-6, 30e-6 + 0.9e-6))
    print(
        f"V_DS,off: computed {steady:.4g} V, ngspice {hs_off:.4g} V (high side), "
        f"{ls_off:.4g} V (low side)"
    )
    assert hs_off == pytest.approx(steady, rel=0.2)
    assert ls_off == pytest.approx(steady, rel=0.2)


def test_linear_and_p_channel_stages_are_not_judged_for_vds() -> None:
    for name in ("linreg48v_pass_follower.cir", "heater12v_pchannel_highside.cir"):
        result = check_path(EXAMPLES / name)
        assert not [f for f in _own(result) if finding_kind(f.values) == "switch"], name


def test_bundled_examples() -> None:
    """Only the winch's 60 V switches are overstressed: its 56 V load dump plus the
    ringing allowance exceeds their rating (the other examples give no part ratings the
    rule can judge beyond V_DS, and their V_DS are within 80 %)."""
    found = {}
    for path in sorted(EXAMPLES.glob("*.cir")):
        for f in _own(check_path(path)):
            found.setdefault(path.name, []).append((f.device, f.severity.label))
    assert found == {"winch36v_shunt_load_dump.cir": [("m_h", "error"), ("m_l", "error")]}
