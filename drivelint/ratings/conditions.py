"""Operating conditions: the keys, their units and their ranges, one table for every input.

A condition can be given in a netlist directive (``* drivelint: conditions fsw=20k``), in
``[conditions]`` or ``[[conditions_for]]`` of the configuration; all three read it through
:func:`read_condition`, so ``"20k"``, ``"20 kHz"`` and ``20000`` mean the same everywhere
and a value out of range is refused the same way.
"""

from __future__ import annotations

import math
from collections.abc import Mapping

from drivelint.ratings.units import UnitError, parse_quantity

# key -> the unit it is read in (SI; temperatures in kelvin, typed in °C)
CONDITION_KEYS: Mapping[str, str] = {
    "fsw": "Hz",
    "duty_max": "1",
    "on_time_max": "s",
    "v_bus": "V",
    "v_aux": "V",
    "ambient": "K",
    "load_current": "A",
    # the switch node's edge rate, where it is known (measured, or set by a snubber)
    "dv_dt": "V/s",
    # tolerance corners (drivelint/checks/corners.py)
    "corners": "1",
    "as_corner": "1",
    "cap_tolerance": "1",
    "cap_temperature_loss": "1",
    "cap_dc_bias_loss": "1",
    "supply_tolerance": "1",
    "bus_tolerance": "1",
    "qg_spread": "1",
    "junction_max": "K",
}

# The tolerance corners' ranges (fractions, and a temperature in kelvin).
CORNER_RANGES: Mapping[str, tuple[float, float, bool]] = {
    # key: (low, high, low is allowed)
    "corners": (0.0, 1.0, True),
    "as_corner": (0.0, 1.0, True),
    "cap_tolerance": (0.0, 0.9, True),
    "cap_temperature_loss": (0.0, 0.9, True),
    "cap_dc_bias_loss": (0.0, 0.95, True),
    "supply_tolerance": (0.0, 0.5, True),
    "bus_tolerance": (0.0, 0.5, True),
    "qg_spread": (0.0, 2.0, True),
    "junction_max": (173.0, 574.0, True),
}

# Ranges (SI units): a negative, zero, NaN or infinite frequency or bus voltage would make
# findings vanish rather than fail.
CONDITION_RANGES: Mapping[str, tuple[float, float, bool]] = {
    # key: (low, high, low is allowed)
    "fsw": (0.0, 1e9, False),
    "duty_max": (0.0, 1.0, True),
    "on_time_max": (0.0, 1e6, False),
    "v_bus": (0.0, 1e6, False),
    "v_aux": (0.0, 1e4, False),
    # kelvin: -100 °C to 300 °C, wider than any rated part; the diode laws lose meaning beyond
    "ambient": (173.0, 574.0, True),
    "load_current": (0.0, 1e6, True),
    "dv_dt": (0.0, 1e12, False),  # up to 1000 V/ns
    # tolerance corners: fractions, and a temperature (drivelint/checks/corners.py)
    **CORNER_RANGES,
}
ANY_VALUE = (0.0, math.inf, True)


def out_of_range(value: float, bounds: tuple[float, float, bool]) -> str | None:
    """None if ``value`` is inside ``bounds``, else what the range is."""
    low, high, closed = bounds
    if not math.isfinite(value):
        return "must be a finite number"
    if value < low or (value == low and not closed) or value > high:
        opening = "[" if closed else "("
        top = "" if math.isinf(high) else f"{high:g}"
        return f"{value:g} is out of range: expected a value in {opening}{low:g}, {top or '∞'}]"
    return None


def read_condition(key: str, raw: str | float) -> float:
    """The SI value of condition ``key`` typed as ``raw``; :class:`UnitError` says why not.

    The key must be known (the caller names the place); a bare temperature is in °C.
    """
    value = parse_quantity(raw, CONDITION_KEYS[key], bare_celsius=True)
    problem = out_of_range(value, CONDITION_RANGES.get(key, ANY_VALUE))
    if problem:
        raise UnitError(problem)
    return value
