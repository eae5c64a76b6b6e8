"""SPICE3 number syntax and engineering-notation output."""

from __future__ import annotations

import math
import re
import shutil
import subprocess
from pathlib import Path

import pytest
from hypothesis import given
from hypothesis import strategies as st

from drivelint.netlist.values import SCALE_FACTORS, format_si, parse_number

# ngspice manual, chapter "Circuit Description", "General Structure and
# Conventions" - "Some naming conventions", Table 2.2 "Ngspice scale factors";
# the SPICE3 user's manual has the same table.
MANUAL_SCALE_FACTORS = {
    "T": 1e12,
    "G": 1e9,
    "MEG": 1e6,
    "K": 1e3,
    "MIL": 25.4e-6,
    "M": 1e-3,
    "U": 1e-6,
    "N": 1e-9,
    "P": 1e-12,
    "F": 1e-15,
}


def test_scale_factor_table_matches_the_manual() -> None:
    # ngspice manual, Table 2.2 "Ngspice scale factors".
    assert dict(SCALE_FACTORS) == MANUAL_SCALE_FACTORS


@pytest.mark.parametrize("suffix", sorted(MANUAL_SCALE_FACTORS))
def test_every_scale_factor_in_every_case(suffix: str) -> None:
    # ngspice manual, Table 2.2; the manual's fields are case-insensitive.
    factor = MANUAL_SCALE_FACTORS[suffix]
    for spelled in (suffix, suffix.lower(), suffix.capitalize()):
        assert parse_number(f"3{spelled}") == pytest.approx(3 * factor, rel=1e-15)
        assert parse_number(f"-2.5{spelled}") == pytest.approx(-2.5 * factor, rel=1e-15)


def test_the_manuals_examples_of_the_same_number() -> None:
    # ngspice manual, "Some naming conventions": "1000, 1000.0, 1000Hz, 1e3, 1.0e3,
    # 1kHz, and 1k all represent the same number", and "10, 10V, 10Volts, and 10Hz
    # all represent the same number".
    for text in ("1000", "1000.0", "1000Hz", "1e3", "1.0e3", "1kHz", "1k"):
        assert parse_number(text) == 1000.0, text
    for text in ("10", "10V", "10Volts", "10Hz"):
        assert parse_number(text) == 10.0, text


def test_letters_after_a_scale_factor_are_ignored() -> None:
    # ngspice manual, "Some naming conventions": "M, MA, MSec, and MMhos all
    # represent the same scale factor" (milli).
    for text in ("1M", "1MA", "1MSec", "1MMhos"):
        assert parse_number(text) == pytest.approx(1e-3, rel=1e-15), text


@pytest.mark.parametrize(
    ("text", "expected"),
    [
        # Mantissa forms (SPICE3 user's manual, "number field": integer, floating
        # point, either followed by an integer exponent).
        ("1", 1.0),
        ("1.", 1.0),
        (".5", 0.5),
        ("1.5", 1.5),
        ("-44", -44.0),
        ("+3.14159", 3.14159),
        ("1e-3", 1e-3),
        ("1.5E+3", 1500.0),
        ("2.65e3", 2650.0),
        ("1e-14", 1e-14),
        # Unit letters that are not scale factors are ignored; F is femto, not farad
        # (ngspice manual, "Some naming conventions" and Table 2.2).
        ("10V", 10.0),
        ("5Hz", 5.0),
        ("10uF", 1e-5),
        ("1F", 1e-15),
        ("1MEGohm", 1e6),
        ("2.2kOhm", 2200.0),
        ("1Mil", 25.4e-6),
        ("1M", 1e-3),
        ("4.7k", 4700.0),
        ("100n", 1e-7),
        ("22p", 22e-12),
        ("1.5e3k", 1.5e6),
        # Exponent then letters that are not an exponent: "1e" is 1 with unit "e".
        ("1eV", 1.0),
        # SPICE3 stops at the scale factor: the "7" of 4k7 is ignored (ngspice 39
        # gives 4000 for R 1 0 4k7 - checked in the ngspice test below).
        ("4k7", 4000.0),
        ("1Milli", 25.4e-6),
    ],
)
def test_number_forms(text: str, expected: float) -> None:
    assert parse_number(text) == pytest.approx(expected, rel=1e-15)


def test_scaled_values_are_exact_decimals() -> None:
    # 4.7k must be the double nearest to 4700, not 4.7 * 1000 with its rounding;
    # the reference is Python's correctly rounded decimal conversion.
    assert parse_number("4.7k") == float("4700")
    assert parse_number("0.1u") == float("1e-7")
    assert parse_number("3.3n") == float("3.3e-9")
    assert parse_number("1.1MEG") == float("1.1e6")


@pytest.mark.parametrize("text", ["abc", "{x}", "", "-", "e5", ".", "+", "'1'", "k1", " "])
def test_text_that_is_not_a_number(text: str) -> None:
    assert parse_number(text) is None


@given(st.floats(allow_nan=False, allow_infinity=False))
def test_repr_of_any_float_reads_back_exactly(x: float) -> None:
    # Python's repr gives the shortest decimal that reads back to the same double;
    # a SPICE3 number reader must read that decimal exactly.
    value = parse_number(repr(x))
    assert value == x
    assert math.copysign(1.0, value) == math.copysign(1.0, x)  # keeps -0.0


@given(
    st.integers(min_value=-99999, max_value=99999),
    st.sampled_from(sorted(MANUAL_SCALE_FACTORS)),
)
def test_scaled_integers(mantissa: int, suffix: str) -> None:
    # Table 2.2 of the ngspice manual, applied to any integer mantissa.
    assert parse_number(f"{mantissa}{suffix}") == pytest.approx(
        mantissa * MANUAL_SCALE_FACTORS[suffix], rel=1e-15
    )


@pytest.mark.parametrize(
    ("value", "unit", "text"),
    [
        (2.2e-7, "F", "220 nF"),
        (1500, "Ohm", "1.5 kOhm"),
        (0, "V", "0 V"),
        (0, "", "0"),
        (1.0, "V", "1 V"),
        (45e-9, "C", "45 nC"),
        (35e-9, "s", "35 ns"),
        (100e3, "Hz", "100 kHz"),
        (-12.0, "V", "-12 V"),
        (4.7e-6, "F", "4.7 uF"),
        (1e6, "Ohm", "1 MOhm"),
        (2.5e9, "Hz", "2.5 GHz"),
        (3e12, "Ohm", "3 TOhm"),
        (1e-15, "F", "1 fF"),
        (0.5, "V", "500 mV"),
        (12345.0, "", "12.3 k"),
        (999.7, "V", "1 kV"),  # 3 significant digits round up into the next prefix
        (0.0015, "A", "1.5 mA"),
        (math.inf, "", "inf"),
        (-math.inf, "V", "-inf V"),
    ],
)
def test_format_si(value: float, unit: str, text: str) -> None:
    # SI prefixes (BIPM SI brochure, table of prefixes), written with "u" for micro.
    assert format_si(value, unit) == text


@given(st.floats(min_value=1e-15, max_value=9.99e14))
def test_format_si_round_trips_to_three_significant_digits(x: float) -> None:
    # Reading the printed value back through the SI prefix table gives x to within
    # the rounding of 3 significant digits.
    prefixes = {
        "f": 1e-15,
        "p": 1e-12,
        "n": 1e-9,
        "u": 1e-6,
        "m": 1e-3,
        "": 1.0,
        "k": 1e3,
        "M": 1e6,
        "G": 1e9,
        "T": 1e12,
    }
    number, prefix_and_unit = format_si(x, "X").split(" ")
    prefix = prefix_and_unit[:-1]
    assert len(number.replace(".", "").replace("-", "").lstrip("0")) <= 3
    assert float(number) * prefixes[prefix] == pytest.approx(x, rel=5e-3)


# ---------------------------------------------------------------------------
# Cross-check against ngspice as an independent reader of the same tokens.

NGSPICE = shutil.which("ngspice")

NGSPICE_TOKENS = [
    "4.7k",
    "1MEG",
    "10m",
    "2.5MIL",
    "4k7",
    "22",
    "1.5e3",
    "3.3Meg",
    "100u",
    "47n",
    "1e-3k",
    "2.2kOhm",
    "10uF",
    "5Hz",
    "1F",
    "12T",
    "1.2G",
    ".5",
    "7.",
]


def run_ngspice_resistances(tmp_path: Path, values: list[str]) -> list[float]:
    """Resistances ngspice reads for one resistor per value, across a 1 V source."""
    lines = ["drivelint number cross-check", "V1 1 0 1"]
    lines += [f"R{i} 1 0 {value}" for i, value in enumerate(values, start=1)]
    lines += [".control", "set numdgt=17", "op"]
    lines += [f"print @r{i}[resistance]" for i in range(1, len(values) + 1)]
    lines += ["quit 0", ".endc", ".end"]
    deck = tmp_path / "numbers.cir"
    deck.write_text("\n".join(lines) + "\n")
    assert NGSPICE is not None
    result = subprocess.run(
        [NGSPICE, "-b", str(deck)], capture_output=True, text=True, timeout=60, check=False
    )
    found = dict(re.findall(r"@r(\d+)\[resistance\]\s*=\s*(\S+)", result.stdout))
    assert len(found) == len(values), result.stdout + result.stderr
    return [float(found[str(i)]) for i in range(1, len(values) + 1)]


@pytest.mark.skipif(NGSPICE is None, reason="ngspice is not installed (CI has it)")
def test_ngspice_reads_the_same_numbers(tmp_path: Path) -> None:
    # ngspice 39 (Debian package) as an independent SPICE3 number reader.
    resistances = run_ngspice_resistances(tmp_path, NGSPICE_TOKENS)
    for token, resistance in zip(NGSPICE_TOKENS, resistances, strict=True):
        ours = parse_number(token)
        assert ours is not None, token
        assert ours == pytest.approx(resistance, rel=1e-9), token
