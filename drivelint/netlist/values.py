"""SPICE3 numbers: reading them from netlist text and printing them for messages."""

from __future__ import annotations

import math
import re
from decimal import Decimal
from types import MappingProxyType
from typing import Final

# The SPICE3 scale factors. Every one except MIL is a power of ten, kept here as
# that power so a scaled value can be read exactly (see parse_number).
_DECADES: Final = MappingProxyType(
    {"t": 12, "g": 9, "meg": 6, "k": 3, "m": -3, "u": -6, "n": -9, "p": -12, "f": -15}
)
_MIL: Final = 25.4e-6

SCALE_FACTORS: Final = MappingProxyType(
    {
        "T": 1e12,
        "G": 1e9,
        "MEG": 1e6,
        "K": 1e3,
        "MIL": _MIL,
        "M": 1e-3,
        "U": 1e-6,
        "N": 1e-9,
        "P": 1e-12,
        "F": 1e-15,
    }
)
"""Scale-factor suffix (upper case; matched case-insensitively) -> multiplier."""

# MEG and MIL are tried before M so that "1MEG" is mega and "1MIL" a mil, not milli.
# Whatever letters follow are a unit and ignored, which the regex does by not
# looking at them.
_NUMBER: Final = re.compile(
    r"(?P<base>[+-]?(?:\d+\.?\d*|\.\d+))"
    r"(?:[eE](?P<exp>[+-]?\d+))?"
    r"(?P<scale>meg|mil|[tgkmunpf])?",
    re.IGNORECASE,
)

# An exponent this long already puts the value at 0 or inf; past it we skip the
# exact decimal shift (and Python's limit on int() of very long digit strings).
_MAX_EXPONENT_DIGITS: Final = 6


def parse_number(text: str) -> float | None:
    """Read the SPICE3 number at the start of ``text``; None if it does not start with one."""
    match = _NUMBER.match(text)
    if match is None:
        return None
    scale = match.group("scale")
    if scale is None:
        return float(match.group(0))
    base = match.group("base")
    exponent = match.group("exp") or "0"
    if scale.lower() == "mil":
        return float(f"{base}e{exponent}") * _MIL
    shift = _DECADES[scale.lower()]
    if len(exponent.lstrip("+-")) > _MAX_EXPONENT_DIGITS:
        return float(f"{base}e{exponent}") * 10.0**shift
    # Shift the decimal exponent rather than multiply, so "4.7k" is exactly 4700.0
    # (4.7 * 1e3 would carry the binary rounding of 4.7 into the product).
    return float(f"{base}e{int(exponent) + shift}")


_PREFIXES: Final = ("f", "p", "n", "u", "m", "", "k", "M", "G", "T")
_UNITY: Final = _PREFIXES.index("")


def format_si(value: float, unit: str = "", digits: int = 3) -> str:
    """Engineering notation for messages: ``digits`` significant digits (3: ``220 nF``)."""
    suffix = f" {unit}" if unit else ""
    if math.isnan(value):
        return f"nan{suffix}"
    if math.isinf(value):
        return f"{'-' if value < 0 else ''}inf{suffix}"
    if value == 0:
        return f"0{suffix}"
    # Round to the significant digits first, so 999.7 becomes "1 k" and not "1000".
    rounded = Decimal(f"{abs(value):.{max(1, digits) - 1}e}")
    decade = rounded.adjusted()
    group = min(max(decade // 3, -_UNITY), len(_PREFIXES) - 1 - _UNITY)
    mantissa = rounded.scaleb(-3 * group).normalize()
    shown = f"{mantissa:f}"
    sign = "-" if value < 0 else ""
    return f"{sign}{shown} {_PREFIXES[group + _UNITY]}{unit}".rstrip()
