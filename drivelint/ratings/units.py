"""Quantities typed by people (``"38 nC"``, ``"62 K/W"``, ``"175 degC"``) read into SI floats.

The common forms — a number, an SI prefix and one of the units drivelint uses — are read
by a regular expression; anything else goes to pint, imported only then, so that loading
a parts file with ordinary values does not pay pint's import time.
"""

from __future__ import annotations

import re
from collections.abc import Mapping
from decimal import Decimal
from typing import Any

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
}
_QUANTITY = re.compile(
    r"\s*([+-]?(?:\d+\.?\d*|\.\d+)(?:[eE][+-]?\d+)?)\s*"
    r"(T|G|M|k|m|u|µ|μ|n|p|f)?(V|A|F|C|s|Hz|Ohm|ohm|Ω|W|K/W|K|H)?\s*"
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
    "1": "",
}


class UnitError(ValueError):
    """A quantity that cannot be read, or has the wrong dimension."""


def parse_quantity(raw: str | float, unit: str) -> float:
    """``raw`` in SI base units of ``unit`` (one of V A F C s Hz Ohm W K K/W H 1).

    A bare number is taken in ``unit`` already; temperatures in ``degC`` become kelvin.
    """
    if isinstance(raw, (int, float)) and not isinstance(raw, bool):
        return float(raw)
    text = str(raw)
    if unit == "K":
        celsius = _CELSIUS.fullmatch(text)
        if celsius:
            return float(celsius.group(1)) + 273.15
    match = _QUANTITY.fullmatch(text)
    if match is not None:
        number, prefix, symbol = match.group(1), match.group(2) or "", match.group(3)
        if symbol is None and not prefix:
            return float(number)
        if symbol is not None and _UNITS[symbol] == unit:
            if symbol == "K/W" and prefix:
                raise UnitError(f"'{text}': a prefix on K/W is not supported")
            # Decimal keeps "9 mOhm" exactly 0.009 rather than 9 * 1e-3.
            return float(Decimal(number).scaleb(_PREFIX[prefix]))
        if symbol is not None and _UNITS[symbol] != unit and unit != "1":
            raise UnitError(f"'{text}' is in {_UNITS[symbol]}, expected {unit}")
    return _parse_with_pint(text, unit)


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


_REGISTRY: Any = None


def _registry() -> Any:
    global _REGISTRY
    if _REGISTRY is None:
        import pint

        _REGISTRY = pint.UnitRegistry(autoconvert_offset_to_baseunit=True)
    return _REGISTRY
