"""Level shifters of every usual layout (issue 14, item 6), recognised and their drain
counted, against ngspice.

References: Ohm's law and Kirchhoff's current law (textbook) for the currents by hand;
ngspice 39 (Debian package) as the independent simulator; V_EB ≈ 0.7 V and V_CE(sat) ≈
0.1 V for small-signal transistors are common practice.
"""

from __future__ import annotations

import json
from pathlib import Path

import pytest
from click.testing import CliRunner
from simulator import run_transient

from drivelint.cli import main
from drivelint.pipeline import check_text

# The collector of the level shifter Q1 is pulled up from the boot node by R_C, and the
# PNP pull-up's base resistor R_B runs from there to its base: when Q1 conducts, R_C and
# R_B both return through it. By hand, with the switch on (source at about 48 V, boot at
# 48 V + 11.3 V): I(R_C) = (59.3 − 0.1)/4.7 k ≈ 12.6 mA and the base current
# (59.3 − 0.7 − 0.1)/2.2 k ≈ 26.6 mA: tens of mA out of the hold capacitor. The boot
# node, the collector and the base have no DC path to ground with the switch off, so the
# simulation starts from the charged capacitor (IC, uic) rather than an operating point.
COLLECTOR_PULLED_UP = """high-side switch, level shifter collector pulled up from the boot node
VBUS bus 0 DC 48
VAUX aux 0 DC 12
D1 aux boot dfast
C_BOOT boot sw 1u IC=11.3
M1 bus g sw nfet
R_LOAD sw 0 24
Q2 pc qb boot pnpmod
R_G pc g 47
R_GS g sw 22k
R_B qb x 2.2k
R_C boot x 4.7k
Q1 x q1b 0 npnmod
R_EN en q1b 10k
VEN en 0 PWL(0 0 200u 0 201u 5)
.model dfast D (IS=1n N=1.5 RS=0.2 BV=100 TT=20n CJO=10p)
.model nfet VDMOS (VTO=3 KP=20 Cgs=2n Cgdmax=1n Cgdmin=50p BV=100)
.model pnpmod PNP (IS=20f BF=160 VAF=60 IKF=0.5 RB=8 RC=0.8 RE=0.15)
.model npnmod NPN (IS=20f BF=120 VAF=100 IKF=0.3 RB=10 RC=1 RE=0.2)
.option method=gear
.tran 0.1u 230u uic
.end
"""


def test_the_collector_pull_up_layout_is_recognised_and_counted() -> None:
    result = check_text(COLLECTOR_PULLED_UP)
    (stage,) = [s for s in result.stages if s.floating]
    shifter = stage.level_shifter
    assert shifter is not None
    assert (shifter.transistor, shifter.pull_up, shifter.on_with_switch) == ("q1", "q2", True)
    assert set(shifter.resistors) == {"r_b", "r_c"}
    (hold,) = [f for f in result.findings if f.rule == "dc-hold"]
    base, feed = hold.values["drain_r_b_q1"].value, hold.values["drain_r_c"].value
    v_top = 48 + hold.values["v_boot"].value
    assert feed == pytest.approx((v_top - 0.1) / 4.7e3, rel=1e-3)
    assert base == pytest.approx((v_top - 0.7 - 0.1) / 2.2e3, rel=1e-3)
    assert 30e-3 < hold.values["i_drain"].value < 50e-3


def test_the_drain_matches_ngspice(tmp_path: Path) -> None:
    result = check_text(COLLECTOR_PULLED_UP)
    (hold,) = [f for f in result.findings if f.rule == "dc-hold"]
    t = 204e-6  # 3 us after the enable: the switch is on, the boot has barely sagged
    waves = run_transient(COLLECTOR_PULLED_UP, ["v(boot,x)", "v(qb,x)", "v(sw)"], tmp_path / "sim")
    assert waves.at("v(sw)", t) > 45  # on
    measured_feed = waves.at("v(boot,x)", t) / 4.7e3
    measured_base = waves.at("v(qb,x)", t) / 2.2e3
    assert hold.values["drain_r_c"].value == pytest.approx(measured_feed, rel=0.1)
    assert hold.values["drain_r_b_q1"].value == pytest.approx(measured_base, rel=0.1)


def test_stages_shows_the_level_shifter(tmp_path: Path) -> None:
    deck = tmp_path / "shifter.cir"
    deck.write_text(COLLECTOR_PULLED_UP)
    text = CliRunner().invoke(main, ["stages", str(deck)]).output
    (line,) = [x for x in text.splitlines() if "level shift:" in x]
    assert "q1 via r_b, r_c, drives pull-up q2" in line
    assert "mA from the boot supply while m1 is on" in line
    payload = json.loads(CliRunner().invoke(main, ["stages", "--format", "json", str(deck)]).output)
    (entry,) = payload["stages"]
    assert entry["level_shifter"]["transistor"] == "q1"
    assert 30e-3 < entry["level_shifter"]["drain_on"] < 50e-3


def test_the_base_pull_up_layout_still_counts_as_before() -> None:
    # examples/README.md: the 24 V load switch's Q1 pulls Q2's base through R_B2, with
    # R_BE2 from the boot node to the base: 748 uA (tests/checks/test_dc_hold.py).
    deck = Path(__file__).resolve().parents[2] / "examples" / "loadswitch24v_dc_enable.cir"
    from nominal import check_nominal

    result = check_nominal(deck)  # the README's figure is the netlist's nominal value
    (stage,) = [s for s in result.stages if s.floating]
    assert stage.level_shifter is not None and stage.level_shifter.pull_up == "q2"
    (hold,) = [f for f in result.findings if f.rule == "dc-hold"]
    assert hold.values["drain_r_b2_q1"].value == pytest.approx(748e-6, rel=0.01)


def test_a_pull_down_to_ground_is_not_a_level_shifter() -> None:
    # A gate pulled to ground by an NPN with nothing from the boot node on its collector.
    text = COLLECTOR_PULLED_UP.replace("R_C boot x 4.7k\n", "")
    text = text.replace("Q2 pc qb boot pnpmod\nR_G pc g 47\n", "R_PU boot g 4.7k\n")
    text = text.replace("R_B qb x 2.2k\n", "")
    text = text.replace("Q1 x q1b 0 npnmod", "Q1 g q1b 0 npnmod")
    (stage,) = [s for s in check_text(text).stages if s.floating]
    assert stage.level_shifter is not None  # R_PU from the boot node: a shifter
    bare = text.replace("R_PU boot g 4.7k\n", "R_PU aux g 4.7k\n")
    (plain,) = [s for s in check_text(bare).stages if s.floating]
    assert plain.level_shifter is None
