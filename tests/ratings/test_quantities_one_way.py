"""One quantity reader for directives, parts files and the configuration (issue 14, item 4).

References: the SPICE3 scale factors T G MEG K M(milli) U N P F MIL as tabled in the
ngspice manual ("Basic syntax"), and the SI prefixes of the SI brochure (BIPM), where M is
mega and m milli.
"""

from __future__ import annotations

from pathlib import Path

import pytest

from drivelint.config import ConfigError, load_config
from drivelint.diagnostics import Span
from drivelint.netlist.statements import Directive
from drivelint.ratings.directives import PART_KEYS, parse_directives
from drivelint.ratings.parts import PART_KEY_TABLE, load_parts
from drivelint.ratings.units import UnitError, parse_quantity


def directive(text: str) -> Directive:
    return Directive(text, Span("deck.cir", 7, 3), 14)


@pytest.mark.parametrize(
    "written, unit, expected",
    [
        ("20k", "Hz", 20e3),  # SPICE scale factor, no unit
        ("20 kHz", "Hz", 20e3),  # SI prefix and unit
        ("20kHz", "Hz", 20e3),
        ("20KHZ", "Hz", 20e3),  # SPICE: case-insensitive, the unit after the scale
        ("5MHz", "Hz", 5e6),  # a unit written exactly takes SI prefixes: M is mega
        ("5mhz", "Hz", 5e-3),  # ... otherwise SPICE's: m is milli
        ("2meg", "Ohm", 2e6),
        ("2K", "Ohm", 2e3),  # SPICE K is kilo; K is the unit only of temperatures
        ("38n", "C", 38e-9),
        ("10uF", "F", 10e-6),
        ("2m", "s", 2e-3),
        ("1mil", "s", 25.4e-6),  # MIL: 25.4e-6 (ngspice manual)
        ("95 %", "1", 0.95),
        ("0.95", "1", 0.95),
    ],
)
def test_spice_and_si_forms(written: str, unit: str, expected: float) -> None:
    assert parse_quantity(written, unit) == pytest.approx(expected)


def test_a_lone_capital_m_is_refused() -> None:
    # SPICE reads 1M as 1e-3, SI as 1e6: nine decades apart, so neither is guessed.
    with pytest.raises(UnitError, match="ambiguous"):
        parse_quantity("1M", "Ohm")
    assert parse_quantity("1 MOhm", "Ohm") == 1e6


@pytest.mark.parametrize("written", ["20k", "20 kHz", "20kHz", "20000"])
def test_directive_and_toml_read_fsw_alike(tmp_path: Path, written: str) -> None:
    parsed = parse_directives([directive(f"conditions fsw={written.replace(' ', '')}")])
    assert parsed.diagnostics == ()
    config = tmp_path / "drivelint.toml"
    config.write_text(f'[conditions]\nfsw = "{written}"\n')
    assert load_config(config).conditions["fsw"][0] == parsed.conditions["fsw"][0] == 20e3


def test_bare_temperatures_are_celsius_everywhere(tmp_path: Path) -> None:
    parsed = parse_directives([directive("conditions ambient=40"), directive("part M1 tj_max=150")])
    assert parsed.conditions["ambient"][0] == pytest.approx(313.15)
    assert parsed.parts["m1"]["tj_max"][0] == pytest.approx(423.15)
    config = tmp_path / "drivelint.toml"
    config.write_text("[conditions]\nambient = 40\n")
    assert load_config(config).conditions["ambient"][0] == pytest.approx(313.15)
    parts = tmp_path / "parts.toml"
    parts.write_text('[part.N]\nkind = "nmos"\ntj_max = 150\n')
    assert load_parts(parts).parts["n"].values["tj_max"] == pytest.approx(423.15)


def test_directive_keys_are_the_parts_table() -> None:
    assert set(PART_KEYS) == set(PART_KEY_TABLE)
    assert all(PART_KEYS[k] == spec.unit for k, spec in PART_KEY_TABLE.items())


@pytest.mark.parametrize(
    "text, message, column",
    [
        # column of the value: directive text starts at 14, "conditions " is 11 long
        ("conditions duty_max=1.5", "duty_max: 1.5 is out of range", 14 + 11 + 9),
        ("conditions fsw=-20k", "fsw: -20000 is out of range", 14 + 11 + 4),
        ("conditions fsw=20kV", "'20kV' is in V, expected Hz", 14 + 11 + 4),
        ("part M1 qg=-3n", "qg: -3e-09 C is out of range", 14 + 8 + 3),
        ("part M1 vgs_max=20A", "'20A' is in A, expected V", 14 + 8 + 8),
        ("part M1 vgs_mx=20", "did you mean 'vgs_max'", 14 + 8),
        ("conditions fsw=1M", "ambiguous", 14 + 11 + 4),
        # the same word twice: the second one is named, not the first
        ("conditions fsw=20k fsw=20k duty_max=2", "duty_max", 14 + 11 + 16 + 9),
    ],
)
def test_directive_values_are_ranged_with_line_and_column(
    text: str, message: str, column: int
) -> None:
    (problem,) = parse_directives([directive(text)]).diagnostics
    assert message in problem.message
    assert (problem.span.line, problem.span.column) == (7, column)


def test_toml_refuses_what_directives_refuse(tmp_path: Path) -> None:
    config = tmp_path / "drivelint.toml"
    config.write_text('[conditions]\nduty_max = "1.5"\n')
    with pytest.raises(ConfigError, match=r"drivelint.toml:2: conditions.duty_max: 1.5 is out"):
        load_config(config)
