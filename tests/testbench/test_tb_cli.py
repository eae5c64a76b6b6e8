"""`drivelint testbench`: arguments, exit codes, the text and JSON reports, --run."""

from __future__ import annotations

import json
import shutil
from pathlib import Path

import pytest
from click.testing import CliRunner, Result
from testbench_support import EXAMPLES, needs_ngspice

from drivelint.cli import main

LOADSWITCH = "loadswitch24v_dc_enable.cir"  # dc-hold on ven, gate-overvoltage on q4
CLEAN = "induction325_half_bridge_driver.cir"


def run(*args: str) -> Result:
    return CliRunner().invoke(main, ["testbench", *args])


@pytest.fixture()
def project(tmp_path: Path) -> Path:
    folder = tmp_path / "designs"
    shutil.copytree(EXAMPLES, folder)
    (folder / "drivelint.toml").write_text("", encoding="utf-8")
    return folder


def test_json_lists_each_finding_with_its_decks_and_claims(project: Path, tmp_path: Path) -> None:
    out = tmp_path / "tb"
    result = run(str(project / LOADSWITCH), "--output", str(out), "--format", "json")
    assert result.exit_code == 0, result.output
    payload = json.loads(result.stdout)
    assert [(r["rule"], r["device"]) for r in payload] == [
        ("dc-hold", "ven"),
        ("gate-overvoltage", "q4"),
    ]
    hold, negative = payload
    for record in payload:
        assert {"rule", "device", "path", "deck", "fixed_deck", "claims"} <= set(record)
        assert Path(record["deck"]).parent == out / "loadswitch24v_dc_enable"
        assert Path(record["deck"]).is_file() and record["path"].endswith(LOADSWITCH)
        assert all(isinstance(v, float) for v in record["claims"].values())
    assert set(hold["claims"]) == {"hold_time", "i_drain"}
    assert hold["fixed_deck"] is None and "charge pump" in hold["fixed_reason"]
    assert negative["claims"]["vgs_max_negative"] == pytest.approx(-24.0)
    assert Path(negative["fixed_deck"]).name == "gate-overvoltage__q4.fixed.cir"
    assert (out / "loadswitch24v_dc_enable" / "parts.toml").is_file()


def test_rule_and_device_select_findings(project: Path, tmp_path: Path) -> None:
    by_rule = run(
        str(project), "--output", str(tmp_path / "a"), "--rule", "dc-hold", "--format", "json"
    )
    assert [r["rule"] for r in json.loads(by_rule.stdout)] == ["dc-hold"]
    by_device = run(
        str(project), "--output", str(tmp_path / "b"), "--device", "XLEGA.D_BT", "--format", "json"
    )
    assert [r["device"] for r in json.loads(by_device.stdout)] == ["xlega.d_bt"]
    files = sorted(p.name for p in (tmp_path / "b").rglob("*.cir"))
    assert files == [
        "bootstrap-diode-voltage__xlega.d_bt.cir",
        "bootstrap-diode-voltage__xlega.d_bt.fixed.cir",
    ]
    # the switch's name selects every finding of its stage
    by_switch = run(
        str(project), "--output", str(tmp_path / "s"), "--device", "xlega.xqh", "--format", "json"
    )
    assert sorted(r["device"] for r in json.loads(by_switch.stdout)) == [
        "vhia",
        "vlia",
        "xlega.d_bt",
        "xlega.r_gl",
    ]


def test_text_report_and_a_clean_design(project: Path, tmp_path: Path) -> None:
    text = run(str(project / LOADSWITCH), "--output", str(tmp_path / "t"))
    assert text.exit_code == 0
    assert "dc-hold ven" in text.stdout and "    hold_time: claimed " in text.stdout
    assert "no fixed deck:" in text.stdout
    clean = run(str(project / CLEAN), "--output", str(tmp_path / "c"))
    assert clean.exit_code == 0 and "no findings" in clean.stdout
    assert not (tmp_path / "c").exists()


def test_usage_errors(project: Path, tmp_path: Path) -> None:
    unknown = run(str(project), "--output", str(tmp_path / "x"), "--rule", "no-such-rule")
    assert unknown.exit_code == 2 and "unknown rule" in unknown.stderr
    assert run("-", "--output", str(tmp_path / "x")).exit_code == 2
    assert run(str(project)).exit_code == 2  # --output is required


def test_a_broken_netlist_exits_1_without_a_traceback(project: Path, tmp_path: Path) -> None:
    broken = project / "broken.cir"
    broken.write_text("broken\nR1 a\n", encoding="utf-8")
    result = run(str(broken), str(project / LOADSWITCH), "--output", str(tmp_path / "o"))
    assert result.exit_code == 1
    assert "broken.cir:2:1: error" in result.stderr and "Traceback" not in result.output
    assert "dc-hold ven" in result.stdout  # the other file still gets its decks


def test_run_reports_measured_beside_claimed(project: Path, tmp_path: Path) -> None:
    needs_ngspice()
    result = run(
        str(project / LOADSWITCH),
        "--output",
        str(tmp_path / "r"),
        "--run",
        "--format",
        "json",
        "--rule",
        "gate-overvoltage",
    )
    assert result.exit_code == 0, result.output
    (record,) = json.loads(result.stdout)
    measured = record["measured"]["vgs_max_negative"]
    assert measured["value"] == pytest.approx(-24.0)
    assert measured["measured"] == pytest.approx(-24.0, rel=0.2)
    assert measured["status"] == "confirmed" and record["failure_shown"] is True
    assert record["fixed_failure_gone"] is True
