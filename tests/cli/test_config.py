"""Configuration discovery, precedence and errors (issue: three ways of use, point 2)."""

from __future__ import annotations

from pathlib import Path

import pytest
from click.testing import CliRunner

from drivelint.cli import main
from drivelint.config import ConfigError, find_config, load_config
from drivelint.diagnostics import Severity

ROOT = Path(__file__).resolve().parents[2]
MOWER = ROOT / "examples" / "mower48v_hbridge_wrapped_fets.cir"


def project(tmp_path: Path, config: str, name: str = "drivelint.toml") -> Path:
    (tmp_path / "designs").mkdir()
    (tmp_path / "designs" / "leg.cir").write_text(MOWER.read_text())
    (tmp_path / "designs" / "parts.toml").write_text((ROOT / "examples" / "parts.toml").read_text())
    (tmp_path / name).write_text(config)
    return tmp_path


def test_nearest_config_wins_and_pyproject_needs_its_table(tmp_path: Path) -> None:
    root = project(tmp_path, "fail_on = 'error'\n")
    inner = root / "designs" / "drivelint.toml"
    inner.write_text("fail_on = 'note'\n")
    assert find_config(root / "designs" / "leg.cir") == inner
    inner.unlink()
    assert find_config(root / "designs" / "leg.cir") == root / "drivelint.toml"
    (root / "drivelint.toml").unlink()
    (root / "pyproject.toml").write_text("[project]\nname = 'x'\n")
    assert find_config(root / "designs" / "leg.cir") != root / "pyproject.toml"
    (root / "pyproject.toml").write_text("[tool.drivelint]\nfail_on = 'error'\n")
    assert find_config(root / "designs" / "leg.cir") == root / "pyproject.toml"
    assert load_config(root / "pyproject.toml").fail_on is Severity.ERROR


def test_rule_table_changes_severity_and_options(tmp_path: Path) -> None:
    root = project(
        tmp_path,
        "[rule.bootstrap-diode-voltage]\nseverity = 'warning'\nderating = '0.5'\n",
    )
    result = CliRunner().invoke(main, ["check", str(root / "designs"), "--format", "json"])
    import json

    payload = json.loads(result.stdout)
    found = [f for f in payload["findings"] if f["rule"] == "bootstrap-diode-voltage"]
    assert found and {f["severity"] for f in found} == {"warning"}
    assert {f["values"]["derating"]["value"] for f in found} == {0.5}


def test_disabled_rule_and_config_override(tmp_path: Path) -> None:
    root = project(tmp_path, "[rule.bootstrap-diode-voltage]\nenabled = false\n")
    quiet = CliRunner().invoke(main, ["check", str(root / "designs"), "--format", "json"])
    assert '"bootstrap-diode-voltage"' not in quiet.output
    other = tmp_path / "other.toml"
    other.write_text("fail_on = 'error'\n")
    loud = CliRunner().invoke(main, ["check", str(root / "designs"), "--config", str(other)])
    assert "bootstrap-diode-voltage" in loud.output and loud.exit_code == 1


@pytest.mark.parametrize(
    "text, message",
    [
        ("colour = 'red'\n", "colour: unknown key"),
        ("[rule.no-such-rule]\nseverity = 'error'\n", "rule.no-such-rule: unknown rule"),
        (
            "[rule.bootstrap-diode-voltage]\nspeed = 1\n",
            "rule.bootstrap-diode-voltage.speed: unknown option",
        ),
        ("[rule.bootstrap-diode-voltage]\nseverity = 'fatal'\n", "severity: unknown severity"),
        ("[conditions]\nfsw = '10 V'\n", "conditions.fsw: '10 V' is in V, expected Hz"),
        ("[conditions]\nspeed = '1'\n", "conditions.speed: unknown condition"),
        ("[limits]\nmax_nothing = 3\n", "limits.max_nothing: unknown limit"),
        ("[limits]\nmax_file_bytes = -1\n", "limits.max_file_bytes: expected a positive integer"),
        ("parts = 'one.toml'\n", "parts: expected a list of strings"),
        ("fail_on = 'always'\n", "fail_on: unknown severity"),
        ("[[conditions_for]]\nfsw = '1 kHz'\n", "conditions_for[0].glob"),
        ("not toml = [\n", "not valid TOML"),
    ],
)
def test_config_errors_name_file_and_key(tmp_path: Path, text: str, message: str) -> None:
    path = tmp_path / "drivelint.toml"
    path.write_text(text)
    with pytest.raises(ConfigError) as raised:
        load_config(path)
    assert str(path) in str(raised.value) and message in str(raised.value)
    result = CliRunner().invoke(main, ["check", str(MOWER), "--config", str(path)])
    assert result.exit_code == 2 and message in result.output


def test_pyproject_errors_use_the_full_key(tmp_path: Path) -> None:
    path = tmp_path / "pyproject.toml"
    path.write_text("[tool.drivelint]\ncolour = 1\n")
    with pytest.raises(ConfigError, match=r"tool\.drivelint\.colour"):
        load_config(path)


def test_conditions_per_glob_and_config_command(tmp_path: Path) -> None:
    root = project(
        tmp_path,
        "[conditions]\nambient = '40 degC'\n[[conditions_for]]\nglob = 'designs/*.cir'\n"
        "fsw = '25 kHz'\n",
    )
    config = load_config(root / "drivelint.toml")
    per_file = config.conditions_for_file(root / "designs" / "leg.cir")
    assert per_file["fsw"][0] == 25e3 and per_file["ambient"][0] == pytest.approx(313.15)
    assert "fsw" not in config.conditions_for_file(root / "elsewhere.cir")
    shown = CliRunner().invoke(main, ["config", str(root / "designs")])
    assert shown.exit_code == 0
    assert "conditions.ambient = 313.15" in shown.output and "drivelint.toml" in shown.output
    assert "fail_on = warning    # default" in shown.output


def test_exclude_patterns(tmp_path: Path) -> None:
    root = project(tmp_path, "exclude = ['designs/']\n")
    result = CliRunner().invoke(main, ["check", str(root / "designs")])
    assert result.exit_code == 0 and "0 files" in result.output
