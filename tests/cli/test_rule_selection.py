"""Choosing rules (issue 14, item 1): --select/--ignore, severity "off", an acceptance
for every device of a file, and rule settings per path in the configuration."""

from __future__ import annotations

import json
import shutil
from pathlib import Path

import pytest
from click.testing import CliRunner

from drivelint.cli import main
from drivelint.config import ConfigError, load_config
from drivelint.pipeline import check_path

ROOT = Path(__file__).resolve().parents[2]
EXAMPLES = ROOT / "examples"
# examples/README.md: leg A of the mower H-bridge has an under-rated bootstrap diode
# (bootstrap-diode-voltage) and a 99.2 % duty the refresh cannot keep up with
# (bootstrap-no-refresh), dead times short of its hard turn-offs (cross-conduction, a
# warning), and its 15 Ω low-side gate resistor lets the high side's edge lift the low
# side's gate to its threshold (induced-turn-on); the load switch a DC enable (dc-hold)
# and a pull-down to ground (gate-overvoltage).
MOWER = "mower48v_hbridge_wrapped_fets.cir"
SWITCH = "loadswitch24v_dc_enable.cir"


def run(*args: str):  # type: ignore[no-untyped-def]
    return CliRunner().invoke(main, ["check", "--no-cache", "--format", "json", *args])


def rules_in(output: str) -> set[str]:
    return {f["rule"] for f in json.loads(output)["findings"] if f["accepted"] is None}


def project(tmp_path: Path, config: str = "") -> Path:
    folder = tmp_path / "designs"
    folder.mkdir()
    for name in (MOWER, SWITCH, "parts.toml"):
        shutil.copy(EXAMPLES / name, folder / name)
    if config:
        (folder / "drivelint.toml").write_text(config)
    return folder


def test_select_and_ignore_on_the_command_line() -> None:
    every = rules_in(run(str(EXAMPLES / MOWER)).stdout)
    assert every == {
        "bootstrap-diode-voltage",
        "bootstrap-no-refresh",
        "cross-conduction",
        "induced-turn-on",
    }
    selected = run("--select", "bootstrap-diode-voltage", str(EXAMPLES / MOWER))
    assert rules_in(selected.stdout) == {"bootstrap-diode-voltage"} and selected.exit_code == 1
    ignored = run(
        "--ignore",
        "bootstrap-diode-voltage,bootstrap-no-refresh,cross-conduction,induced-turn-on",
        str(EXAMPLES / MOWER),
    )
    assert rules_in(ignored.stdout) == set() and ignored.exit_code == 0
    # A family by its first words; ignore wins over select.
    family = run("--select", "bootstrap", "--ignore", "bootstrap-no", str(EXAMPLES / MOWER))
    assert rules_in(family.stdout) == {"bootstrap-diode-voltage"}


def test_an_unknown_rule_is_a_usage_error() -> None:
    result = run("--select", "dc-hlod", str(EXAMPLES / MOWER))
    assert result.exit_code == 2 and "'dc-hlod' names no rule" in result.output


def test_ignore_does_not_make_an_acceptance_stale(tmp_path: Path) -> None:
    folder = project(tmp_path)
    deck = folder / SWITCH
    lines = deck.read_text().splitlines()
    deck.write_text(
        "\n".join([lines[0], "* drivelint: accept dc-hold M1 -- pump fitted", *lines[1:]])
    )
    payload = json.loads(run("--ignore", "dc-hold", str(deck)).stdout)
    (entry,) = payload["files"]
    assert not [d for d in entry["diagnostics"] if "stale" in d["message"]]
    assert "dc-hold" not in {f["rule"] for f in payload["findings"]}


def test_severity_off_switches_a_rule_off(tmp_path: Path) -> None:
    folder = project(tmp_path, '[rule.bootstrap-no-refresh]\nseverity = "off"\n')
    assert rules_in(run(str(folder / MOWER)).stdout) == {
        "bootstrap-diode-voltage",
        "cross-conduction",
        "induced-turn-on",
    }
    with pytest.raises(ConfigError, match="expected error, warning, note or off"):
        (folder / "drivelint.toml").write_text('[rule.dc-hold]\nseverity = "of"\n')
        load_config(folder / "drivelint.toml")


def test_acceptance_of_a_switched_off_rule_is_not_stale(tmp_path: Path) -> None:
    folder = project(tmp_path, '[rule.dc-hold]\nseverity = "off"\n')
    deck = folder / SWITCH
    lines = deck.read_text().splitlines()
    deck.write_text(
        "\n".join([lines[0], "* drivelint: accept dc-hold M1 -- pump fitted", *lines[1:]])
    )
    result = check_path(deck)
    assert not [d for d in result.diagnostics if d.code == "directive"]
    assert "dc-hold" not in {f.rule for f in (*result.findings, *result.accepted)}


def test_accept_for_every_device_of_a_file(tmp_path: Path) -> None:
    folder = project(tmp_path)
    deck = folder / SWITCH
    lines = deck.read_text().splitlines()
    reason = "turn-off transient limited by the output inductance on the board"
    deck.write_text(
        "\n".join([lines[0], f"* drivelint: accept gate-overvoltage * -- {reason}", *lines[1:]])
    )
    result = check_path(deck)
    assert "gate-overvoltage" not in {f.rule for f in result.findings}
    (accepted,) = [f for f in result.accepted if f.rule == "gate-overvoltage"]
    assert accepted.accepted is not None and accepted.accepted.reason == reason
    assert accepted.accepted.span.line == 2
    assert "dc-hold" in {f.rule for f in result.findings}


def test_rules_per_path(tmp_path: Path) -> None:
    config = (
        "[[rules_for]]\n"
        f'glob = "{MOWER}"\n'
        'ignore = ["bootstrap-no-refresh", "cross-conduction"]\n'
        "[rules_for.rule.bootstrap-diode-voltage]\n"
        'severity = "warning"\n'
        "[[rules_for]]\n"
        f'glob = "{SWITCH}"\n'
        'select = ["dc-hold"]\n'
    )
    folder = project(tmp_path, config)
    payload = json.loads(run(str(folder)).stdout)
    by_file: dict[str, set[tuple[str, str]]] = {}
    for f in payload["findings"]:
        by_file.setdefault(Path(f["path"]).name, set()).add((f["rule"], f["severity"]))
    assert by_file[MOWER] == {("bootstrap-diode-voltage", "warning"), ("induced-turn-on", "error")}
    assert by_file[SWITCH] == {("dc-hold", "error")}


@pytest.mark.parametrize(
    "config, message",
    [
        ("[[rules_for]]\nignore = ['dc-hold']\n", "rules_for[0].glob: each entry needs a glob"),
        ("[[rules_for]]\nglob = '*'\nignore = ['dc-hlod']\n", "rules_for[0].ignore: 'dc-hlod'"),
        ("[[rules_for]]\nglob = '*'\nsevrity = 1\n", "rules_for[0].sevrity: unknown key"),
        (
            "[[rules_for]]\nglob = '*'\n[rules_for.rule.dc-hold]\nmargn = '2'\n",
            "rules_for[0].rule.dc-hold.margn: unknown option",
        ),
        ("select = 'dc-hold'\n", "select: expected a list of rule ids"),
    ],
)
def test_bad_rule_settings_name_the_key(tmp_path: Path, config: str, message: str) -> None:
    path = tmp_path / "drivelint.toml"
    path.write_text(config)
    with pytest.raises(ConfigError, match=message.replace("[", r"\[").replace("]", r"\]")):
        load_config(path)


def test_missing_path_exits_2_naming_it(tmp_path: Path) -> None:
    # issue 14, item 9: not 1 with a made-up position.
    result = CliRunner().invoke(main, ["check", "--no-cache", str(tmp_path / "exampels")])
    assert result.exit_code == 2
    assert "exampels' does not exist" in result.output and ":1:1" not in result.output


def test_an_s_expression_netlist_is_skipped_with_a_note(tmp_path: Path) -> None:
    # issue 14, item 7: a PCB netlist shares the .net suffix; one note, no syntax errors.
    from drivelint.cli import not_spice

    board = tmp_path / "board.net"
    board.write_text('(export (version "E")\n  (components\n    (comp (ref "R1")))\n  (nets))\n')
    spice = tmp_path / "amp.net"
    spice.write_text("(rev B) output stage\nR1 a 0 1k\nV1 a 0 DC 1\n.end\n")
    assert not_spice(board.read_bytes()) is not None
    assert not_spice(spice.read_bytes()) is None  # a title may open with a parenthesis
    result = CliRunner().invoke(main, ["check", "--no-cache", str(tmp_path)])
    notes = [x for x in result.output.splitlines() if "board.net" in x]
    assert notes == [
        f"{board}: note: skipped: an S-expression file (a PCB or schematic netlist "
        "of another format), not SPICE [not-spice]"
    ]
    assert result.exit_code == 0


@pytest.mark.parametrize("command", ["netlist", "stages"])
def test_missing_path_exits_2_in_every_command(tmp_path: Path, command: str) -> None:
    result = CliRunner().invoke(main, [command, str(tmp_path / "nosuch.cir")])
    assert result.exit_code == 2 and "nosuch.cir' does not exist" in result.output
