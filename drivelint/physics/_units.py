"""Unit aliases and the few helpers that let one formula run on floats and on pint quantities.

Nothing here imports pint: a quantity is recognised by its attributes (``units``, ``to``),
so the start-up path of the command line stays free of it.
"""

from __future__ import annotations

import math
from typing import Any, cast

# Aliases name the SI unit a float carries; at run time they are plain floats, in the tests
# they may be pint quantities of the same dimension.
Volts = float
Amps = float
Farads = float
Coulombs = float
Seconds = float
Hertz = float
Ohms = float
Watts = float
Kelvin = float
KelvinPerWatt = float
Ratio = float


def _is_quantity(value: object) -> bool:
    """True for a pint quantity (anything carrying ``units`` and a ``to`` conversion)."""
    return hasattr(value, "units") and hasattr(value, "to")


def _ratio(a: float, b: float) -> float:
    """``a / b`` as a plain float; a pint ratio is reduced to its dimensionless magnitude.

    Raises pint's DimensionalityError when ``a`` and ``b`` differ in dimension, which is how
    the tests catch a formula that feeds a dimensioned value to ``exp`` or ``log``.
    """
    value = a / b
    if _is_quantity(value):
        return float(cast(Any, value).to("dimensionless").magnitude)
    return float(value)


def _unit_of(value: float) -> float:
    """One of ``value``'s unit (``1 V`` for a quantity in volts), or ``1.0`` for a float."""
    if _is_quantity(value):
        return cast(float, 1.0 * cast(Any, value).units)
    return 1.0


def _zero_like(value: float) -> float:
    """Zero in the unit of ``value``."""
    return 0.0 * _unit_of(value)


def _infinite(numerator: float, denominator: float = 1.0) -> float:
    """Infinity in the unit of ``numerator / denominator`` (plain ``inf`` for floats).

    Used where a quotient is infinite by definition (a hold time with no drain current),
    so the result still has the right dimension when the inputs are quantities; only the
    units of the arguments matter, not their values (a zero denominator is fine).
    """
    return math.inf * _unit_of(numerator) / _unit_of(denominator)


def _coerce(value: float | None, default: float, unit: str, like: float) -> float:
    """``value`` (or ``default`` if None) in ``unit``, as a quantity exactly when ``like`` is one.

    A quantity is converted to ``unit`` (so ``25 degC`` becomes ``298.15 K``); a plain
    number is given ``unit`` when ``like`` is a quantity, so defaults and physical
    constants written as floats join a pint calculation with the right dimension.
    """
    chosen = default if value is None else value
    if _is_quantity(chosen):
        return cast(float, cast(Any, chosen).to(unit))
    if _is_quantity(like):
        # The registry-bound Quantity class of ``like`` builds a quantity of the same
        # registry without importing pint here.
        return cast(float, cast(Any, type(like))(float(chosen), unit))
    return float(chosen)
