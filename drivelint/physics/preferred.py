"""IEC 60063 preferred number series E6, E12 and E24, and rounding up to them."""

from __future__ import annotations

import math
from collections.abc import Mapping
from types import MappingProxyType
from typing import Any, cast

# One decade of each series, as tabulated in IEC 60063.
# fmt: off
SERIES: Mapping[str, tuple[float, ...]] = MappingProxyType(
    {
        "E6": (1.0, 1.5, 2.2, 3.3, 4.7, 6.8),
        "E12": (1.0, 1.2, 1.5, 1.8, 2.2, 2.7, 3.3, 3.9, 4.7, 5.6, 6.8, 8.2),
        "E24": (
            1.0, 1.1, 1.2, 1.3, 1.5, 1.6, 1.8, 2.0, 2.2, 2.4, 2.7, 3.0,
            3.3, 3.6, 3.9, 4.3, 4.7, 5.1, 5.6, 6.2, 6.8, 7.5, 8.2, 9.1,
        ),
    }
)
# fmt: on

# A value within this relative distance of a preferred value counts as equal to it, so
# 2.2e-7 (stored as 2.2000000000000002e-07 or 2.1999999999999998e-07) stays 2.2e-7.
_TOLERANCE = 1e-9


def preferred_values(series: str) -> tuple[float, ...]:
    """One decade (1 ≤ x < 10) of ``series`` ("E6", "E12" or "E24")."""
    try:
        return SERIES[series.upper()]
    except KeyError:
        known = ", ".join(SERIES)
        raise ValueError(f"unknown preferred series {series!r}; expected one of {known}") from None


def next_preferred(value: float, series: str = "E12") -> float:
    """Smallest value of ``series`` that is ≥ ``value``, in any decade.

    value: a positive value in any unit; the result is in the same unit (a pint quantity
    keeps its unit: decades are unit-independent under SI prefixes).
    Raises ValueError for a value that is not positive and finite.
    """
    if hasattr(value, "units") and hasattr(value, "magnitude"):
        quantity = cast(Any, value)
        rounded = next_preferred(float(quantity.magnitude), series)
        return cast(float, type(quantity)(rounded, quantity.units))
    table = preferred_values(series)
    if not (value > 0 and math.isfinite(value)):
        raise ValueError(f"preferred values need a positive finite value, not {value!r}")
    decade = math.floor(math.log10(value))
    mantissa = value / 10.0**decade
    # log10 can land one decade off for values a rounding error away from a power of ten.
    if mantissa >= 10.0 * (1.0 - _TOLERANCE):
        decade += 1
        mantissa /= 10.0
    elif mantissa < 1.0 * (1.0 - _TOLERANCE):
        decade -= 1
        mantissa *= 10.0
    for step in table:
        if step >= mantissa * (1.0 - _TOLERANCE):
            return _compose(step, decade)
    return _compose(table[0], decade + 1)


def previous_preferred(value: float, series: str = "E12") -> float:
    """Largest value of ``series`` that is ≤ ``value``, in any decade (the round-down twin of
    :func:`next_preferred`: for a part whose value must not exceed a bound).

    value: a positive finite value in any unit (a pint quantity keeps its unit).
    """
    if hasattr(value, "units") and hasattr(value, "magnitude"):
        quantity = cast(Any, value)
        rounded = previous_preferred(float(quantity.magnitude), series)
        return cast(float, type(quantity)(rounded, quantity.units))
    up = next_preferred(value, series)
    if up <= value * (1.0 + _TOLERANCE):
        return up
    table = preferred_values(series)
    decade = math.floor(math.log10(up))
    mantissa = up / 10.0**decade
    index = min(range(len(table)), key=lambda i: abs(table[i] - mantissa))
    if index == 0:
        return _compose(table[-1], decade - 1)
    return _compose(table[index - 1], decade)


def _compose(step: float, decade: int) -> float:
    """``step × 10**decade`` as the float nearest the decimal value.

    Multiplying would give 2.2000000000000002e-07 for 2.2 × 1e-7; parsing the decimal
    text gives 2.2e-07.
    """
    return float(f"{step!r}e{decade}")
