"""level-shift-contention: the discrete level shifter's voltage and its contention with
the pull-up, on decks of our own (tests/testbench/decks/levelshift) and the examples."""

from __future__ import annotations

from pathlib import Path

import pytest
from nominal import check_nominal
from simulator import run_transient

from drivelint.checks.levelshift import finding_kind
from drivelint.pipeline import check_path, check_text

ROOT = Path(__file__).resolve().parents[2]
DECKS = ROOT / "tests" / "testbench" / "decks" / "levelshift"
RULE = "level-shift-contention"


def _own(result: object) -> list:
    return [f for f in result.findings if f.rule == RULE]  # type: ignore[attr-defined]


def test_a_40_v_shifter_on_a_48_v_bus() -> None:
    (finding,) = _own(check_path(DECKS / "shifter_40v.cir"))
    assert (finding.device, finding.span.line) == ("q1", 10)
    assert finding_kind(finding.values) == "blocking"
    # 48 V + V_boot (the 12 V rail +5 % less the diode's drop) + 10 % of 48 V ringing
    assert finding.values["shifter_voltage"].value == pytest.approx(48 + 12.4 + 4.8, abs=0.3)
    assert finding.severity.label == "error"  # beyond the 40 V rating itself
    assert "100 V" not in finding.message and "vceo" not in finding.message


def test_weak_base_drive_leaves_the_gate_up() -> None:
    (finding,) = _own(check_path(DECKS / "weak_base.cir"))
    assert (finding.device, finding.span.line) == ("q1", 10)
    assert finding_kind(finding.values) == "contention"
    values = finding.values
    # β·(V − V_BE)/(R_B + (β+1)·R_E) = 120 × 4.3 V / (47 k + 121 × 100 Ω)
    assert values["shifter_sink"].value == pytest.approx(120 * 4.3 / (47e3 + 12100))
    assert values["shifter_margin"].value < 1
    assert "does not turn off" in finding.message
    assert finding.severity.label == "error"
    # R_E alone caps the current below 2 × the pull-up's: the fix is the pull-up
    assert "suggested_base_resistor" not in values
    assert values["suggested_pull_up"].value == pytest.approx(3.3e3)


def test_clean_leg_stays_quiet() -> None:
    assert _own(check_path(DECKS / "clean.cir")) == []


def test_a_shifter_within_its_derating_but_a_weak_margin_is_a_warning() -> None:
    text = (DECKS / "clean.cir").read_text(encoding="utf-8")
    # 10 k base: 120 × 4.3 V/(10 k + 12.1 k) = 23.3 mA against (12.4 − 0.2) V/1 k = 12.2 mA:
    # margin 1.9, short of 2; the node is still pulled to its floor
    text = text.replace("RB hin qb 2.2k", "RB hin qb 10k")
    (finding,) = _own(check_text(text, path="weak_margin.cir"))
    assert finding.severity.label == "warning"
    assert 1 < finding.values["shifter_margin"].value < 2
    # β·4.3 V/(2 × 12.2 mA) − 12.1 k ≈ 9.0 k: 8.2 k, the E12 value below
    assert finding.values["suggested_base_resistor"].value == pytest.approx(8.2e3)


def test_no_rating_no_blocking_finding() -> None:
    text = (DECKS / "shifter_40v.cir").read_text(encoding="utf-8")
    text = "\n".join(line for line in text.splitlines() if "vceo_max" not in line)
    # the model card gives no V_CEO: nothing to judge the voltage against
    assert _own(check_text(text + "\n", path="unrated.cir")) == []


def test_sink_current_against_ngspice(tmp_path: Path) -> None:
    """The shifter's collector current while it pulls against the pull-up, simulated,
    against I_sink computed at the nominal corner: ±20 %."""
    path = DECKS / "weak_base.cir"
    (finding,) = _own(check_nominal(path))
    claimed = finding.values["shifter_sink"].value
    text = path.read_text(encoding="utf-8").replace(
        ".end", "VAM hg hgq 0\n.tran 20n 300u 0 20n\n.end"
    )
    text = text.replace("Q1 hg qb qe qsh", "Q1 hgq qb qe qsh")
    waves = run_transient(text, ["i(vam)"], tmp_path / "sim")
    # the high side's off-time: 57.5 us … 145 us of each 125 us period after the start
    samples = waves.between("i(vam)", 200e-6, 240e-6)
    measured = sum(samples) / len(samples)
    print(f"I_sink: computed {claimed * 1e3:.3g} mA, ngspice {measured * 1e3:.3g} mA")
    assert measured == pytest.approx(claimed, rel=0.2)


def test_blocking_voltage_against_ngspice(tmp_path: Path) -> None:
    path = DECKS / "shifter_40v.cir"
    (finding,) = _own(check_nominal(path))
    claimed = finding.values["shifter_voltage_steady"].value
    text = path.read_text(encoding="utf-8").replace(".end", ".tran 20n 300u 0 20n\n.end")
    waves = run_transient(text, ["v(hg)", "v(qe)"], tmp_path / "sim")
    # the high side's on-time of the second period: 145 us … 182 us
    vce = [
        a - b
        for a, b in zip(
            waves.between("v(hg)", 150e-6, 180e-6),
            waves.between("v(qe)", 150e-6, 180e-6),
            strict=True,
        )
    ]
    measured = max(vce)
    print(f"V_CE: computed {claimed:.4g} V, ngspice {measured:.4g} V")
    assert measured == pytest.approx(claimed, rel=0.2)


def test_bundled_examples_are_quiet() -> None:
    """The examples' shifters are 100 V parts on buses up to 48 V (lev48: 48 V + 11.5 V +
    ringing ≈ 64 V against 75 V derated), and lev48's 2.2 k base sinks about three times
    its 1 k pull-up's current."""
    for path in sorted((ROOT / "examples").glob("*.cir")):
        assert _own(check_path(path)) == [], path.name
    lev48 = check_nominal(ROOT / "examples" / "lev48_phase_leg_npn_shifter.cir")
    assert _own(lev48) == []
