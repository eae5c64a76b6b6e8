"""Quantities typed by people (``"38 nC"``, ``"62 K/W"``, ``"175 degC"``) read into SI floats.

The common forms — a number, an SI prefix and one of the units drivelint uses — are read
by a regular expression; anything else goes to pint, imported only then, so that loading
a parts file with ordinary values does not pay pint's import time.

pint is handed only text that is already bounded: at most ``MAX_QUANTITY_CHARS``
characters of digits, letters, spaces and ``. + - * / ( )``, with no power operator.
pint evaluates what it parses with Python integers, so ``"9**9**9 Hz"`` would compute a
number of hundreds of millions of digits, in C, where no time bound can interrupt it.
Every result must be a finite number.
"""

from __future__ import annotations

import math
import re
from collections.abc import Mapping
from decimal import Decimal, InvalidOperation
from typing import Any

MAX_QUANTITY_CHARS = 64
# What may reach pint: unit names, SI prefixes, numbers, products and quotients.
_PINT_SAFE = re.compile(r"[0-9A-Za-z_ .+\-*/()µμΩ°]+")
_POWER = re.compile(r"\*\*|\^")

_PREFIX: Mapping[str, int] = {
    "": 0,
    "T": 12,
    "G": 9,
    "M": 6,
    "k": 3,
    "m": -3,
    "u": -6,
    "µ": -6,
    "μ": -6,
    "n": -9,
    "p": -12,
    "f": -15,
}
# unit symbol -> the dimension name drivelint uses (SI base unit symbol)
_UNITS: Mapping[str, str] = {
    "V": "V",
    "A": "A",
    "F": "F",
    "C": "C",
    "s": "s",
    "Hz": "Hz",
    "Ohm": "Ohm",
    "ohm": "Ohm",
    "Ω": "Ohm",
    "W": "W",
    "K": "K",
    "K/W": "K/W",
    "H": "H",
    "S": "S",
}
_QUANTITY = re.compile(
    r"\s*([+-]?(?:\d+\.?\d*|\.\d+)(?:[eE][+-]?\d+)?)\s*"
    r"(T|G|M|k|m|u|µ|μ|n|p|f)?(V|A|F|C|s|Hz|Ohm|ohm|Ω|W|K/W|K|H|S)?\s*"
)
_CELSIUS = re.compile(r"\s*([+-]?(?:\d+\.?\d*|\.\d+)(?:[eE][+-]?\d+)?)\s*(?:degC|°C|celsius)\s*")
_PINT_UNITS: Mapping[str, str] = {
    "V": "volt",
    "A": "ampere",
    "F": "farad",
    "C": "coulomb",
    "s": "second",
    "Hz": "hertz",
    "Ohm": "ohm",
    "W": "watt",
    "K": "kelvin",
    "K/W": "kelvin/watt",
    "H": "henry",
    "V/s": "volt/second",
    "S": "siemens",
    "1": "",
}


class UnitError(ValueError):
    """A quantity that cannot be read, or has the wrong dimension."""


def parse_quantity(raw: str | float, unit: str, *, bare_celsius: bool = False) -> float:
    """``raw`` in SI base units of ``unit`` (one of V A F C s Hz Ohm W K K/W H V/s S 1).

    One reader for everything people type, in a parts file, a configuration or a netlist
    directive:

    - a number with a unit written as such (``"20 kHz"``, ``"38nC"``, ``"8.5 mOhm"``) takes
      SI prefixes: ``M`` is mega, ``m`` milli;
    - a number with a SPICE scale factor and no unit, or the key's unit after it in any case
      (``"20k"``, ``"38n"``, ``"2meg"``, ``"10uf"``), follows SPICE3: case-insensitive, ``m``
      and ``M`` are milli, ``meg`` is mega, ``mil`` is 25.4 µm. A lone upper-case ``M`` is
      refused, since SPICE and SI read it a billion times apart;
    - a plain number is in ``unit`` already; for a temperature (``K``) it is in °C when
      ``bare_celsius`` (what people mean by ``ambient = 40``), in kelvin otherwise (values
      already converted); ``degC`` and ``K`` say which;
    - a dimensionless value may be a percentage (``"95 %"``).

    Raises :class:`UnitError` for anything else, including non-finite results.
    """
    if isinstance(raw, bool) or not isinstance(raw, (str, int, float)):
        raise UnitError(f"expected a number or a quantity string, not {type(raw).__name__}")
    if isinstance(raw, (int, float)):
        value = float(raw)
        if bare_celsius and unit == "K":
            value += 273.15
        return _finite(value, str(raw))
    text = raw
    if len(text) > MAX_QUANTITY_CHARS:
        raise UnitError(f"quantity is {len(text)} characters long (at most {MAX_QUANTITY_CHARS})")
    if unit == "K":
        celsius = _CELSIUS.fullmatch(text)
        if celsius:
            return _finite(float(celsius.group(1)) + 273.15, text)
    match = _QUANTITY.fullmatch(text)
    other: str | None = None  # a unit of another dimension, for the message
    if match is not None:
        number, prefix, symbol = match.group(1), match.group(2) or "", match.group(3)
        if symbol is None and not prefix:
            value = float(number)
            if bare_celsius and unit == "K":
                value += 273.15
            return _finite(value, text)
        if symbol is not None and _UNITS[symbol] == unit:
            if symbol == "K/W" and prefix:
                raise UnitError(f"'{text}': a prefix on K/W is not supported")
            return _finite(_scaled(number, _PREFIX[prefix], text), text)
        if symbol is not None:
            other = _UNITS[symbol]
    if unit == "1":
        percent = _PERCENT.fullmatch(text)
        if percent:
            return _finite(_scaled(percent.group(1), -2, text), text)
    spice = _SPICE.fullmatch(text)
    if spice is not None and _spice_unit_fits(spice.group(3), unit):
        number, scale = spice.group(1), spice.group(2)
        if scale == "M":
            raise UnitError(
                f"'{text}' is ambiguous: SPICE reads M as milli, SI as mega; write 'm' for "
                f"milli or 'meg' for mega, or give the unit (such as '{_EXAMPLES.get(unit, '')}')"
            )
        lowered = scale.lower()
        if lowered == "mil":
            return _finite(float(number) * 25.4e-6, text)
        return _finite(_scaled(number, _SPICE_DECADES[lowered], text), text)
    if other is not None and unit != "1":
        raise UnitError(f"'{text}' is in {other}, expected {unit}")
    if not any(c.isdigit() for c in text):
        raise UnitError(
            f"cannot read as a quantity: '{text}' is not a number; expected a number and "
            f"a unit such as '{_EXAMPLES.get(unit, '1.5')}'"
        )
    if not _PINT_SAFE.fullmatch(text) or _POWER.search(text):
        raise UnitError(
            f"cannot read '{text}' as a quantity: expected a number and a unit such as "
            f"'{_EXAMPLES.get(unit, '1.5')}'"
        )
    return _finite(_parse_with_pint(text, unit), text)


# SPICE3 scale factors (ngspice manual, "Basic syntax"), as powers of ten.
_SPICE_DECADES: Mapping[str, int] = {
    "t": 12,
    "g": 9,
    "meg": 6,
    "k": 3,
    "m": -3,
    "u": -6,
    "n": -9,
    "p": -12,
    "f": -15,
}
_SPICE = re.compile(
    r"\s*([+-]?(?:\d+\.?\d*|\.\d+)(?:[eE][+-]?\d+)?)\s*(meg|mil|[tgkmunpf])\s*([a-z/]*)\s*",
    re.IGNORECASE,
)
_PERCENT = re.compile(r"\s*([+-]?(?:\d+\.?\d*|\.\d+)(?:[eE][+-]?\d+)?)\s*%\s*")


def _spice_unit_fits(written: str, unit: str) -> bool:
    """After a SPICE scale factor: nothing, or the key's own unit in any case."""
    if not written:
        return True
    return written.lower() == {"Ohm": "ohm", "1": ""}.get(unit, unit.lower())


def _scaled(number: str, decades: int, text: str) -> float:
    # Decimal keeps "9 mOhm" exactly 0.009 rather than 9 * 1e-3.
    try:
        return float(Decimal(number).scaleb(decades))
    except (InvalidOperation, ArithmeticError):
        raise UnitError(f"'{text}' is out of range") from None


_EXAMPLES: Mapping[str, str] = {
    "V": "20 V",
    "A": "2 A",
    "F": "220 nF",
    "C": "45 nC",
    "s": "35 ns",
    "Hz": "100 kHz",
    "Ohm": "8.5 mOhm",
    "W": "2 W",
    "K": "175 degC",
    "K/W": "62 K/W",
    "H": "10 uH",
    "V/s": "20 V/ns",
    "S": "50 S",
    "1": "0.95",
}


def _finite(value: float, text: str) -> float:
    if not math.isfinite(value):
        raise UnitError(f"'{text}' is not a finite number")
    return value


def _parse_with_pint(text: str, unit: str) -> float:
    import pint

    registry = _registry()
    try:
        quantity = registry.Quantity(text)
    except (
        pint.errors.UndefinedUnitError,
        pint.errors.DefinitionSyntaxError,
        ValueError,
        TypeError,
    ) as exc:
        raise UnitError(f"cannot read '{text}' as a quantity: {exc}") from None
    except Exception as exc:  # pint raises assorted parser errors for garbage input
        raise UnitError(f"cannot read '{text}' as a quantity ({type(exc).__name__})") from None
    target = _PINT_UNITS[unit]
    try:
        if target == "":
            return float(quantity.to("dimensionless").magnitude)
        return float(quantity.to(target).magnitude)
    except pint.errors.DimensionalityError:
        raise UnitError(f"'{text}' has the wrong unit: expected {unit}") from None
    except (TypeError, ValueError, OverflowError, ArithmeticError) as exc:
        raise UnitError(f"cannot read '{text}' as a quantity ({type(exc).__name__})") from None


_REGISTRY: Any = None


def _registry() -> Any:
    global _REGISTRY
    if _REGISTRY is None:
        import pint

        _REGISTRY = pint.UnitRegistry(autoconvert_offset_to_baseunit=True)
    return _REGISTRY
