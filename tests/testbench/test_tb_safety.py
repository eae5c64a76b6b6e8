"""The testbench command writes only where it is told, atomically, with file names that
cannot escape; bad input is a diagnostic; ngspice runs are bounded in time and output."""

from __future__ import annotations

import os
import shutil
import stat
from pathlib import Path

import pytest
from testbench_support import EXAMPLES, NGSPICE, build

from drivelint.batch import Job
from drivelint.config import Config
from drivelint.testbench.command import (
    MAX_NAME,
    BenchOptions,
    OutputError,
    make_testbenches,
    safe_name,
    write_atomically,
)
from drivelint.testbench.ngspice import parse_results, run_deck


@pytest.mark.parametrize(
    ("name", "expected"),
    [
        ("xlega.d_bt", "xlega.d_bt"),
        ("X1.M$2", "x1.m_2"),
        ("../../etc/passwd", "____etc_passwd"),
        ("a/b\\c:d e", "a_b_c_d_e"),
        ("..", "_"),
        (".hidden", "hidden"),
        ("", "_"),
    ],
)
def test_file_names_from_device_names_stay_in_their_folder(name: str, expected: str) -> None:
    safe = safe_name(name)
    assert safe == expected
    assert "/" not in safe and "\\" not in safe and ".." not in safe and not safe.startswith(".")


def test_long_names_are_bounded_and_stay_distinct() -> None:
    one, two = safe_name("x" * 300 + "a"), safe_name("x" * 300 + "b")
    assert len(one) <= MAX_NAME and len(two) <= MAX_NAME and one != two


def test_writes_are_atomic_and_inside_the_output_folder(tmp_path: Path) -> None:
    root = tmp_path / "out"
    target = root / "design" / "deck.cir"
    write_atomically(root, target, "first\n")
    write_atomically(root, target, "second\n")
    assert target.read_text() == "second\n"
    assert [p.name for p in target.parent.iterdir()] == ["deck.cir"]  # no temporary left
    elsewhere = tmp_path / "elsewhere"
    elsewhere.mkdir()
    (root / "link").symlink_to(elsewhere, target_is_directory=True)
    with pytest.raises(OutputError):
        write_atomically(root, root / "link" / "deck.cir", "x\n")
    with pytest.raises(OutputError):
        write_atomically(root, tmp_path / "outside.cir", "x\n")
    assert not list(elsewhere.iterdir()) and not (tmp_path / "outside.cir").exists()


def _tree(root: Path) -> dict[str, bytes]:
    return {
        str(p.relative_to(root)): p.read_bytes() for p in sorted(root.rglob("*")) if p.is_file()
    }


def test_only_the_output_folder_is_written(tmp_path: Path) -> None:
    project = tmp_path / "project"
    shutil.copytree(EXAMPLES, project)
    (project / "drivelint.toml").write_text("", encoding="utf-8")
    before = _tree(project)
    outcome = build(
        [project / "loadswitch24v_dc_enable.cir"], tmp_path / "out", run=NGSPICE is not None
    )
    assert outcome.records and not outcome.failed
    assert _tree(project) == before
    written = {p.relative_to(tmp_path) for p in tmp_path.rglob("*") if p.is_file()}
    assert all(p.parts[0] in ("project", "out") for p in written)
    # in DIR: the decks, the parts they are checked with, the index and (with --run) the
    # waveform files; nothing ngspice left behind (its raw file goes to a private
    # temporary folder that is removed)
    names = sorted(p.name for p in (tmp_path / "out").rglob("*") if p.is_file())
    waves = ["dc-hold__ven.wave.json", "gate-overvoltage__q4.wave.json"] if NGSPICE else []
    assert names == sorted(
        [
            "dc-hold__ven.cir",
            "gate-overvoltage__q4.cir",
            "gate-overvoltage__q4.fixed.cir",
            "parts.toml",
            "testbench.json",
            *waves,
        ]
    )


def test_netlists_with_one_stem_get_folders_of_their_own(tmp_path: Path) -> None:
    for folder in ("a", "b"):
        (tmp_path / folder).mkdir()
        (tmp_path / folder / "drivelint.toml").write_text("", encoding="utf-8")
        shutil.copy(EXAMPLES / "tool36_leg_totem_pole.cir", tmp_path / folder / "leg.cir")
        shutil.copy(EXAMPLES / "parts.toml", tmp_path / folder / "parts.toml")
    outcome = build([tmp_path / "a" / "leg.cir", tmp_path / "b" / "leg.cir"], tmp_path / "out")
    folders = [r.deck.path.parent.name for r in outcome.records if r.deck]
    assert folders == ["leg", "leg-2"]


def test_a_broken_netlist_is_a_diagnostic_and_the_batch_goes_on(tmp_path: Path) -> None:
    project = tmp_path / "project"
    project.mkdir()
    (project / "drivelint.toml").write_text("", encoding="utf-8")
    broken = project / "broken.cir"
    broken.write_text("broken\nR1 a 0 1k\nM1 d g\n.subckt X a\n", encoding="utf-8")
    good = project / "tool36.cir"
    shutil.copy(EXAMPLES / "tool36_leg_totem_pole.cir", good)
    shutil.copy(EXAMPLES / "parts.toml", project / "parts.toml")
    outcome = build([broken, good], tmp_path / "out")
    assert outcome.failed
    assert outcome.diagnostics and all(
        d.span.path.endswith("broken.cir") for d in outcome.diagnostics
    )
    assert [r.finding.rule for r in outcome.records] == ["bootstrap-capacitor-small"]
    assert outcome.records[0].deck is not None


def test_the_time_bound_of_check_holds(tmp_path: Path) -> None:
    options = BenchOptions(output=tmp_path / "out", seconds_per_file=1e-6)
    outcome = make_testbenches([Job(EXAMPLES / "tool36_leg_totem_pole.cir", Config())], options)
    assert outcome.failed and outcome.diagnostics
    assert outcome.diagnostics[0].code == "limit"
    assert not (tmp_path / "out").exists()


def _fake_ngspice(tmp_path: Path, body: str) -> str:
    script = tmp_path / "fake-ngspice"
    script.write_text("#!/bin/sh\n" + body + "\n", encoding="utf-8")
    script.chmod(script.stat().st_mode | stat.S_IXUSR)
    return str(script)


@pytest.mark.skipif(os.name != "posix", reason="the fake simulator is a POSIX shell script")
def test_a_run_past_its_time_bound_is_stopped(tmp_path: Path) -> None:
    deck = tmp_path / "deck.cir"
    deck.write_text("x\n.end\n", encoding="utf-8")
    fake = _fake_ngspice(tmp_path, "sleep 30")
    result = run_deck(deck, ["a"], timeout=0.5, executable=fake)
    assert result.error is not None and "longer than" in result.error


@pytest.mark.skipif(os.name != "posix", reason="the fake simulator is a POSIX shell script")
def test_a_runs_output_is_bounded(tmp_path: Path) -> None:
    deck = tmp_path / "deck.cir"
    deck.write_text("x\n.end\n", encoding="utf-8")
    fake = _fake_ngspice(
        tmp_path, "echo 'hold_time = 1.5e-04'; yes 'noise noise noise' | head -c 2000000"
    )
    result = run_deck(deck, ["hold_time"], timeout=20, max_output=10_000, executable=fake)
    assert result.values == {"hold_time": 1.5e-4}
    assert result.error is None
    fake = _fake_ngspice(tmp_path, "echo 'fatal'; exit 1")
    assert run_deck(deck, ["a"], executable=fake).error == "ngspice exited with status 1"
    missing = run_deck(deck, ["a"], executable=str(tmp_path / "nowhere"))
    assert missing.error is not None and "cannot start" in missing.error


def test_results_are_read_from_ngspice_lines() -> None:
    # what ngspice 39 prints for .meas cards in batch mode (seen in its output)
    text = "\n".join(
        [
            "Doing analysis at TEMP = 27.000000 and TNOM = 27.000000",
            "hold_time           =  7.732348e-04 targ=  9.095348e-04 trig=  1.363000e-04",
            "i_drain             =  8.78212e-04",
            "sustained_boot_voltage =  7.055008e+00 at=  1.495064e-02",
            "Error: measure  tb_x  min(TRIG) : no such vector as 'v(a,b)'",
            " .meas tran tb_x min v(a,b) from=1 to=2 failed!",
            "Total analysis time (seconds) = 1.146",
        ]
    )
    values, failed = parse_results(text, ["hold_time", "i_drain", "sustained_boot_voltage", "tb_x"])
    assert values == {
        "hold_time": 7.732348e-04,
        "i_drain": 8.78212e-04,
        "sustained_boot_voltage": 7.055008,
    }
    assert failed == ("tb_x",)
