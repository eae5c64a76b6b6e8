"""Configuration and parts files: every key checked for type, range and unit at load.

Guards: values of the wrong type (an integer where a table is due, a string for a number,
non-UTF-8 bytes) ended in tracebacks; negative, NaN and infinite margins and conditions
were accepted and made findings vanish; `"9**9**9 Hz"` hung inside the unit library's
integer power, past any time bound; in parts files, unknown keys and wrong types were
ignored (a typo `vgs_mx` hid a real error), impossible values crashed rules, and a bad
`kind` or pin table gave an internal error per netlist.
"""

from __future__ import annotations

import os
import re
import subprocess
import sys
from pathlib import Path

import pytest
from click.testing import CliRunner

from drivelint.cli import main
from drivelint.config import ConfigError, load_config
from drivelint.ratings.directives import PART_KEYS
from drivelint.ratings.parts import PART_KEY_TABLE, PartsError, load_parts
from drivelint.ratings.units import UnitError, parse_quantity

ROOT = Path(__file__).resolve().parents[2]
EXAMPLES = ROOT / "examples"
MOWER = EXAMPLES / "mower48v_hbridge_wrapped_fets.cir"

# (configuration text, the key named, the line named)
BAD_CONFIGS = {
    "limits not a table": ("limits = 3\n", "limits", 1),
    "conditions a string": ("conditions = 'fast'\n", "conditions", 1),
    "rule an integer": ("rule = 1\n", "rule", 1),
    "one rule not a table": ("[rule]\ndc-hold = 5\n", "rule.dc-hold", 2),
    "conditions_for a table": ("[conditions_for]\nglob = 'x'\n", "conditions_for", 1),
    "conditions_for entry a number": ("conditions_for = [1]\n", "conditions_for[0]", 1),
    "fail_on a number": ("fail_on = 3\n", "fail_on", 1),
    "condition a boolean": ("[conditions]\nfsw = true\n", "conditions.fsw", 2),
    "condition an array": ("# c\n[conditions]\n\nfsw = [1]\n", "conditions.fsw", 4),
    "condition a date": ("[conditions]\nfsw = 1979-05-27\n", "conditions.fsw", 2),
    "severity a number": ("[rule.dc-hold]\nseverity = 3\n", "rule.dc-hold.severity", 2),
    "option a boolean": (
        "[rule.bootstrap-capacitor-small]\nmargin = true\n",
        "rule.bootstrap-capacitor-small.margin",
        2,
    ),
    "option a table": ("[rule.dc-hold.x]\na = 1\n", "rule.dc-hold.x", 1),
    "limit a float": ("[limits]\nmax_devices = 1e3\n", "limits.max_devices", 2),
    "limit a boolean": ("[limits]\nmax_devices = true\n", "limits.max_devices", 2),
    "limit huge": ("[limits]\nmax_devices = 9223372036854775807\n", "limits.max_devices", 2),
    "time bound switched off": (
        "[limits]\nmax_seconds_per_file = 100000000\n",
        "limits.max_seconds_per_file",
        2,
    ),
    "negative frequency": ("[conditions]\nfsw = '-100 kHz'\n", "conditions.fsw", 2),
    "zero frequency": ("[conditions]\nfsw = 0\n", "conditions.fsw", 2),
    "NaN frequency": ("[conditions]\nfsw = nan\n", "conditions.fsw", 2),
    "NaN quantity": ("[conditions]\nv_bus = 'nan V'\n", "conditions.v_bus", 2),
    "infinite bus": ("[conditions]\nv_bus = inf\n", "conditions.v_bus", 2),
    "overflowing bus": ("[conditions]\nv_bus = '1e400 V'\n", "conditions.v_bus", 2),
    "duty over 1": ("[conditions]\nduty_max = 1.5\n", "conditions.duty_max", 2),
    "negative ambient": ("[conditions]\nambient = '-300 degC'\n", "conditions.ambient", 2),
    "per-glob negative": (
        "[[conditions_for]]\nglob = '*.cir'\non_time_max = '-1 ms'\n",
        "conditions_for[0].on_time_max",
        3,
    ),
    "negative margin": (
        "[rule.bootstrap-capacitor-small]\nmargin = -1\n",
        "rule.bootstrap-capacitor-small.margin",
        2,
    ),
    "margin below one": (
        "[rule.bootstrap-capacitor-small]\nmargin = 0.5\n",
        "rule.bootstrap-capacitor-small.margin",
        2,
    ),
    "NaN margin": (
        "[rule.bootstrap-capacitor-small]\nmargin = 'nan'\n",
        "rule.bootstrap-capacitor-small.margin",
        2,
    ),
    "infinite option": (
        "[rule.bootstrap-diode-slow]\ntrr_max = inf\n",
        "rule.bootstrap-diode-slow.trr_max",
        2,
    ),
    "derating over 1": (
        "[rule.bootstrap-diode-voltage]\nderating = 3\n",
        "rule.bootstrap-diode-voltage.derating",
        2,
    ),
    "power tower": ("[conditions]\nfsw = '9**9**9 Hz'\n", "conditions.fsw", 2),
    "caret power": ("[conditions]\nfsw = '9^9^9 Hz'\n", "conditions.fsw", 2),
    "long quantity": ("[conditions]\nfsw = '" + "1" * 500 + " Hz'\n", "conditions.fsw", 2),
}


@pytest.mark.parametrize("name", sorted(BAD_CONFIGS))
def test_bad_configuration_names_file_key_and_line(tmp_path: Path, name: str) -> None:
    text, key, line = BAD_CONFIGS[name]
    path = tmp_path / "drivelint.toml"
    path.write_text(text, encoding="utf-8")
    with pytest.raises(ConfigError) as raised:
        load_config(path)
    assert str(raised.value).startswith(f"{path}:{line}: {key}: "), str(raised.value)


@pytest.mark.parametrize("name", ["condition a boolean", "negative margin", "power tower"])
@pytest.mark.parametrize("command", ["check", "netlist", "stages"])
def test_every_command_exits_2_on_a_bad_configuration(
    tmp_path: Path, name: str, command: str
) -> None:
    text, key, _ = BAD_CONFIGS[name]
    (tmp_path / "drivelint.toml").write_text(text)
    deck = tmp_path / "deck.cir"
    deck.write_text(MOWER.read_text())
    result = CliRunner().invoke(main, [command, str(deck)])
    assert result.exit_code == 2 and key in result.output, result.output
    assert result.exception is None or isinstance(result.exception, SystemExit)


def test_every_limit_has_a_ceiling() -> None:
    from drivelint.config import LIMIT_CEILINGS
    from drivelint.limits import Limits

    assert set(LIMIT_CEILINGS) == set(Limits.names())
    for name in Limits.names():
        assert getattr(Limits(), name) <= LIMIT_CEILINGS[name], name


def test_pyproject_errors_carry_the_full_key_and_its_line(tmp_path: Path) -> None:
    path = tmp_path / "pyproject.toml"
    path.write_text("[project]\nname = 'x'\n\n[tool.drivelint]\nlimits = 'big'\n")
    with pytest.raises(ConfigError, match=re.escape(f"{path}:5: tool.drivelint.limits: ")):
        load_config(path)
    path.write_text("[tool]\ndrivelint = 3\n")
    with pytest.raises(ConfigError, match="tool.drivelint: expected a table"):
        load_config(path)


def test_deeply_nested_toml_is_an_error_not_a_crash(tmp_path: Path) -> None:
    path = tmp_path / "drivelint.toml"
    path.write_text("colour = " + "[" * 100_000 + "]" * 100_000 + "\n")
    with pytest.raises(ConfigError, match="nested too deeply"):
        load_config(path)
    parts = tmp_path / "parts.toml"
    parts.write_text("[part.x]\nkind = " + "{a=" * 50_000 + "1" + "}" * 50_000 + "\n")
    with pytest.raises(PartsError, match="nested too deeply"):
        load_parts(parts)


def test_non_utf8_configuration_names_the_line(tmp_path: Path) -> None:
    path = tmp_path / "drivelint.toml"
    path.write_bytes(b"fail_on = 'error'\n# caf\xe9\n")
    with pytest.raises(ConfigError, match=re.escape(f"{path}:2: not UTF-8")):
        load_config(path)


def test_a_fifo_configuration_does_not_hang(tmp_path: Path) -> None:
    if not hasattr(os, "mkfifo"):
        pytest.skip("no FIFOs here")
    os.mkfifo(tmp_path / "drivelint.toml")
    with pytest.raises(ConfigError, match="not a regular file"):
        load_config(tmp_path / "drivelint.toml")


def test_power_towers_are_refused_before_pint_sees_them() -> None:
    """Run in a child with a time-out: the old path computed 9**9**9 for minutes."""
    code = (
        "from drivelint.ratings.units import parse_quantity, UnitError\n"
        "for text in ['9**9**9 Hz', '(9**9)**9 Hz', '9^9^9 Hz', '2**99999999 V', '9 ** 9 ** 9']:\n"
        "    try:\n"
        "        parse_quantity(text, 'Hz')\n"
        "    except UnitError:\n"
        "        pass\n"
        "    else:\n"
        "        raise SystemExit(text)\n"
    )
    run = subprocess.run([sys.executable, "-c", code], timeout=60, capture_output=True, text=True)
    assert run.returncode == 0, run.stdout + run.stderr


@pytest.mark.parametrize(
    "text", ["nan", "inf V", "-inf V", "1e400 V", "1e99999999999 V", 1e400, float("nan"), True, [1]]
)
def test_quantities_must_be_finite_numbers(text: object) -> None:
    with pytest.raises(UnitError):
        parse_quantity(text, "V")  # type: ignore[arg-type]


def test_ordinary_quantities_still_read() -> None:
    assert parse_quantity("20 volt", "V") == 20.0
    assert parse_quantity("2 kiloohm", "Ohm") == 2000.0
    assert parse_quantity("(3*4) V", "V") == 12.0
    assert parse_quantity("175 degC", "K") == pytest.approx(448.15)


# -- parts files ----------------------------------------------------------------------------

GOOD_NFET = '[part.NFET_A]\nkind = "nmos"\nvgs_max = "20 V"\nqg = "38 nC"\n'

# (parts text, what the message must start with after "parts.toml:")
BAD_PARTS = {
    "typo": (
        GOOD_NFET + 'vgs_mx = "12 V"\n',
        "5: part.NFET_A.vgs_mx: unknown key (did you mean 'vgs_max'?)",
    ),
    "unknown key": (GOOD_NFET + 'colour = "red"\n', "5: part.NFET_A.colour: unknown key"),
    "wrong unit": (GOOD_NFET + 'vds_max = "100 A"\n', "5: part.NFET_A.vds_max: '100 A' is in A"),
    "not a quantity": (GOOD_NFET + 'vds_max = "lots"\n', "5: part.NFET_A.vds_max: cannot read"),
    "a list": (GOOD_NFET + "vds_max = [1, 2]\n", "5: part.NFET_A.vds_max: expected a quantity"),
    "a boolean": (GOOD_NFET + "vds_max = true\n", "5: part.NFET_A.vds_max: expected a quantity"),
    "a table": (GOOD_NFET + "vds_max = { v = 1 }\n", "5: part.NFET_A.vds_max: expected a quantity"),
    "NaN": (GOOD_NFET + "vds_max = nan\n", "5: part.NFET_A.vds_max: 'nan' is not a finite"),
    "NaN string": (GOOD_NFET + 'vds_max = "nan V"\n', "5: part.NFET_A.vds_max:"),
    "infinite": (GOOD_NFET + "vds_max = inf\n", "5: part.NFET_A.vds_max: 'inf' is not a finite"),
    "overflow": (
        GOOD_NFET + 'vds_max = "1e400 V"\n',
        "5: part.NFET_A.vds_max: '1e400 V' is not a finite",
    ),
    "negative": (GOOD_NFET + 'qgd = "-7 nC"\n', "5: part.NFET_A.qgd: -7e-09 C is out of range"),
    "zero rating": (GOOD_NFET + 'vds_max = "0 V"\n', "5: part.NFET_A.vds_max: 0 V is out of range"),
    "power tower": (GOOD_NFET + 'vds_max = "9**9**9 V"\n', "5: part.NFET_A.vds_max: cannot read"),
    "key for another kind": (
        GOOD_NFET + 'vrrm = "100 V"\n',
        "5: part.NFET_A.vrrm: does not apply to a nmos part",
    ),
    "bad kind": ('[part.X]\nkind = "widget"\n', "2: part.X.kind: 'widget'; expected one of"),
    "kind a number": ("[part.X]\nkind = 3\n", "2: part.X.kind: 3; expected one of"),
    "no kind": ('[part.X]\nvds_max = "1 V"\n', "1: part.X.kind: None; expected one of"),
    "pins not a table": (
        '[part.D]\nkind = "driver"\npins = "VB"\n',
        "3: part.D.pins: expected a table",
    ),
    "pin role unknown": (
        '[part.D]\nkind = "driver"\npins = { VB = "bootx" }\n',
        "3: part.D.pins.VB: 'bootx'",
    ),
    "pin role a number": (
        '[part.D]\nkind = "driver"\npins = { VB = 1 }\n',
        "3: part.D.pins.VB: 1;",
    ),
    "pins on a switch": (
        GOOD_NFET + 'pins = { G = "boot" }\n',
        "5: part.NFET_A.pins: pin roles are for drivers",
    ),
    "part not a table": ('part.X = "nmos"\n', "1: part.X: must be a table"),
    "part a list": ("part = [1]\n", "1: part: expected [part.NAME] tables"),
    "defined twice": (
        GOOD_NFET + '[part.nfet_a]\nkind = "nmos"\n',
        "5: part.nfet_a: part 'nfet_a' is defined twice",
    ),
    "top-level key": ('kind = "nmos"\n', "1: unknown top-level key 'kind'"),
}


@pytest.mark.parametrize("name", sorted(BAD_PARTS))
def test_bad_parts_files_name_file_line_and_key(tmp_path: Path, name: str) -> None:
    text, expected = BAD_PARTS[name]
    path = tmp_path / "parts.toml"
    path.write_text(text, encoding="utf-8")
    with pytest.raises(PartsError) as raised:
        load_parts(path)
    assert str(raised.value).startswith(f"{path}:{expected}"), str(raised.value)


def test_non_utf8_parts_file(tmp_path: Path) -> None:
    path = tmp_path / "parts.toml"
    path.write_bytes(GOOD_NFET.encode() + b"# \xff\n")
    with pytest.raises(PartsError, match=re.escape(f"{path}:5: not UTF-8")):
        load_parts(path)


def test_parts_given_on_the_command_line_or_in_the_config_stop_the_run(tmp_path: Path) -> None:
    bad = tmp_path / "bad.toml"
    bad.write_text(GOOD_NFET + 'vgs_mx = "12 V"\n')
    for command in ("check", "stages"):
        result = CliRunner().invoke(main, [command, "--parts", str(bad), str(MOWER)])
        assert result.exit_code == 2 and f"{bad}:5: part.NFET_A.vgs_mx" in result.output
    (tmp_path / "drivelint.toml").write_text("parts = ['bad.toml']\n")
    deck = tmp_path / "deck.cir"
    deck.write_text(MOWER.read_text())
    result = CliRunner().invoke(main, ["check", "--no-cache", str(deck)])
    assert result.exit_code == 2 and "vgs_mx" in result.output


def test_a_bad_parts_file_beside_a_netlist_costs_that_folder_only(tmp_path: Path) -> None:
    good, bad = tmp_path / "good", tmp_path / "bad"
    for folder in (good, bad):
        folder.mkdir()
        (folder / "deck.cir").write_text(MOWER.read_text())
    (good / "parts.toml").write_text((EXAMPLES / "parts.toml").read_text())
    (bad / "parts.toml").write_text('[part.NFET_100V_A]\nkind = "nmos"\nvgs_max = "NaN V"\n')
    result = CliRunner().invoke(main, ["check", "--no-cache", "--format", "json", str(tmp_path)])
    assert result.exit_code == 1 and "internal-error" not in result.output
    import json

    payload = json.loads(result.stdout)
    status = {Path(f["path"]).parent.name: f["status"] for f in payload["files"]}
    assert status == {"good": "findings", "bad": "error"}
    (problem,) = next(f for f in payload["files"] if "bad" in f["path"])["diagnostics"]
    assert (
        problem["code"] == "parts"
        and f"{bad / 'parts.toml'}:3: part.NFET_100V_A.vgs_max" in problem["message"]
    )


def test_every_key_the_code_reads_is_in_the_table() -> None:
    """The table is the one place: the directive keys, and every key read from a part."""
    for key, unit in PART_KEYS.items():
        assert PART_KEY_TABLE[key].unit == unit, key
    read = set()
    for path in (ROOT / "drivelint").rglob("*.py"):
        text = path.read_text(encoding="utf-8")
        read |= set(
            re.findall(
                r"""(?:\.raw|ratings\.get(?:_or_default)?)\([^"')]*["']([a-z_]+)["']""", text
            )
        )
    assert read and read <= set(PART_KEY_TABLE), read - set(PART_KEY_TABLE)
    later = "vceo_max v_max i_source i_sink qgd qgs vgs_min vgs_on vgs_plateau vgs_qg rds_on "
    later += "rg_internal rth_ja rth_jc tj_max p_max t_prop t_prop_mismatch r_source r_sink uvlo "
    later += "uvlo_boot iq_boot q_levelshift vz vf trr qrr vrrm ir_leak tolerance"
    assert set(later.split()) <= set(PART_KEY_TABLE)


def test_the_readme_documents_every_parts_key() -> None:
    readme = (ROOT / "README.md").read_text(encoding="utf-8")
    for key, spec in PART_KEY_TABLE.items():
        assert re.search(rf"\| `{key}` \| {re.escape(spec.unit)} \|", readme), key
