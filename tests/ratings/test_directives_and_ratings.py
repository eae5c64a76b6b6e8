"""Inline directives, rating precedence and unit parsing (issue: the checks, points 2–3)."""

from __future__ import annotations

import math

import pytest

from drivelint.circuit.model import Device, Model
from drivelint.diagnostics import Span
from drivelint.netlist.statements import Directive
from drivelint.ratings.directives import parse_directives
from drivelint.ratings.parts import Part, PartsError, PartsLibrary, load_parts
from drivelint.ratings.ratings import Ratings
from drivelint.ratings.units import UnitError, parse_quantity


def directive(text: str, line: int = 3) -> Directive:
    return Directive(text, Span("deck.cir", line, 14), 14)


def test_part_conditions_and_accept_directives() -> None:
    parsed = parse_directives(
        [
            directive("part M1 qg=38n vgs_max=20"),
            directive("conditions fsw=100k duty_max=0.95 on_time_max=2m ambient=40"),
            directive("accept dc-hold M1 -- charge pump fitted on the real board"),
        ],
        known_rules=["dc-hold"],
    )
    assert parsed.diagnostics == ()
    assert parsed.parts["m1"]["qg"][0] == pytest.approx(38e-9)
    assert parsed.parts["m1"]["vgs_max"][0] == 20
    assert parsed.conditions["fsw"][0] == 100e3
    assert parsed.conditions["ambient"][0] == pytest.approx(313.15)  # °C in, kelvin kept
    (accept,) = parsed.accepts
    assert (accept.rule, accept.device, accept.reason) == (
        "dc-hold",
        "m1",
        "charge pump fitted on the real board",
    )


@pytest.mark.parametrize(
    "text, message, column",
    [
        ("accept dc-hold M1", "needs a reason after '--'", 14 + len("accept dc-hold M1")),
        ("accept dc-hold M1 --   ", "needs a reason", None),
        ("accept no-such-rule M1 -- x", "unknown rule 'no-such-rule'", 14 + 7),
        ("part M1 qg", "expected KEY=VALUE", 14 + 8),
        ("part M1 colour=red", "unknown key 'colour'", 14 + 8),
        ("part M1 qg=lots", "'lots' is not a number", 14 + 11),
        ("conditions fsw=", "expected KEY=VALUE", None),
        ("frobnicate", "unknown directive 'frobnicate'", 14),
        ("", "empty directive", 14),
    ],
)
def test_malformed_directives_are_diagnostics(text: str, message: str, column: int | None) -> None:
    parsed = parse_directives([directive(text)], known_rules=["dc-hold"])
    (problem,) = parsed.diagnostics
    assert message in problem.message and problem.span.line == 3
    if column is not None:
        assert problem.span.column == column


def _device(model: Model | None, name: str = "d1") -> Device:
    return Device(
        name,
        "diode",
        (("a", "x"), ("k", "y")),
        Span("deck.cir", 9),
        model=model,
        model_name=model.name if model else None,
    )


def test_rating_precedence_directive_parts_model_default() -> None:
    model = Model("dboot", "d", {"bv": 100.0, "tt": 2e-8, "is": 1e-9}, Span("deck.cir", 20))
    diode = _device(model)
    parts = PartsLibrary({"dboot": Part("dboot", "diode", {"vrrm": "200 V"}, {}, "parts.toml:4")})
    only_model = Ratings(PartsLibrary(), parse_directives([]))
    assert only_model.get(diode, "vrrm").value == 100
    assert "model dboot" in only_model.get(diode, "vrrm").origin
    with_parts = Ratings(parts, parse_directives([]))
    assert with_parts.get(diode, "vrrm").value == 200
    assert with_parts.get(diode, "vrrm").origin.startswith("parts.toml:4")
    with_directive = Ratings(parts, parse_directives([directive("part D1 vrrm=600")]))
    assert with_directive.get(diode, "vrrm").value == 600
    assert with_directive.get(diode, "vrrm").origin == "directive (deck.cir:3)"
    # Nothing anywhere: the documented default, marked as such.
    fet = Device("m1", "mosfet", (), Span("deck.cir", 5))
    default = only_model.get_or_default(fet, "vgs_max")
    assert default.value == 20 and "common practice" in default.origin
    assert only_model.get(fet, "qg") is None


@pytest.mark.parametrize(
    "text, unit, expected",
    [
        ("38 nC", "C", 38e-9),
        ("20 V", "V", 20.0),
        ("9 mOhm", "Ohm", 9e-3),
        ("62 K/W", "K/W", 62.0),
        ("175 degC", "K", 448.15),
        ("30 ns", "s", 30e-9),
        ("0.29 A", "A", 0.29),
        ("120 uA", "A", 120e-6),
        ("100 kHz", "Hz", 1e5),
        ("4.7 uF", "F", 4.7e-6),
        ("2 microfarad", "F", 2e-6),
        (12, "V", 12.0),
        ("1.2 kV", "V", 1200.0),
    ],
)
def test_quantities(text: str | float, unit: str, expected: float) -> None:
    # Unit names and prefixes: the SI brochure (BIPM); pint handles the long forms.
    assert parse_quantity(text, unit) == pytest.approx(expected)


@pytest.mark.parametrize("text, unit", [("3 V", "A"), ("lots", "V"), ("5 parsecs", "s")])
def test_bad_quantities(text: str, unit: str) -> None:
    with pytest.raises(UnitError):
        parse_quantity(text, unit)


def test_parts_file_errors_name_file_and_key(tmp_path) -> None:  # type: ignore[no-untyped-def]
    path = tmp_path / "parts.toml"
    path.write_text('[part.X]\nkind = "nmos"\nqg = "38 nC"\n[part.Y]\nkind = "widget"\n')
    with pytest.raises(PartsError, match=r"parts.toml:5: part.Y.kind"):
        load_parts(path)
    path.write_text('[part.D]\nkind = "driver"\npins = { VB = "bootx" }\n')
    with pytest.raises(PartsError, match="pins.VB"):
        load_parts(path)
    path.write_text("not toml [")
    with pytest.raises(PartsError, match="not valid TOML"):
        load_parts(path)


def test_examples_parts_file_loads_with_units() -> None:
    library = load_parts(
        __import__("pathlib").Path(__file__).resolve().parents[2] / "examples" / "parts.toml"
    )
    for part in library.parts.values():
        for key, raw in part.values.items():
            from drivelint.ratings.directives import PART_KEYS

            if key in PART_KEYS:
                assert math.isfinite(parse_quantity(raw, PART_KEYS[key])), (part.name, key)
