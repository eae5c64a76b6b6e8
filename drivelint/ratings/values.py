"""A number with its unit and where it came from: the currency of every finding."""

from __future__ import annotations

import math
from dataclasses import dataclass

from drivelint.diagnostics import positional_reduce

# SI units drivelint reports in ("1" is dimensionless).
UNITS = frozenset(
    {"V", "A", "F", "C", "s", "Hz", "K", "W", "1", "Ohm", "K/W", "H", "V/s", "A/s", "S"}
)


@dataclass(frozen=True, slots=True)
class Value:
    """``value`` in SI base units of ``unit``; ``origin`` says where it came from.

    Origins are short and specific: ``examples/parts.toml:12 (part D_BOOT vrrm)``,
    ``model dfast BV (deck.cir:40)``, ``directive (deck.cir:3)``, ``default (common
    practice)``, ``computed``.
    """

    __reduce__ = positional_reduce

    value: float
    unit: str
    origin: str

    def __post_init__(self) -> None:
        if self.unit not in UNITS:
            raise ValueError(f"unknown unit {self.unit!r}")

    def text(self) -> str:
        from drivelint.netlist.values import format_si

        if self.unit == "1":
            return f"{self.value:.3g}"
        if self.unit == "K":
            return f"{self.value - 273.15:.1f} °C"
        if self.unit == "V/s":  # switch-node edges: volts per nanosecond, as datasheets give them
            return f"{self.value * 1e-9:.3g} V/ns"
        if self.unit == "A/s":  # commutation rates: amperes per nanosecond, likewise
            return f"{self.value * 1e-9:.3g} A/ns"
        return format_si(self.value, "Ω" if self.unit == "Ohm" else self.unit)

    def to_json(self) -> dict[str, object]:
        value: float | str = self.value
        if not math.isfinite(self.value):
            value = "inf" if self.value > 0 else ("-inf" if self.value < 0 else "nan")
        return {"value": value, "unit": self.unit, "origin": self.origin}


def computed(value: float, unit: str, how: str = "computed") -> Value:
    return Value(value, unit, how)
