"""Arithmetic in a derivation that adds up as it is printed.

A derivation line such as ``ΔV = V_boot,0 − V_boot,min = 11.53 V − 10 V = 1.53 V`` is read
by someone checking it by hand: every term is printed to the resolution of the result (and
to at least three significant digits of its own), and the result printed is the sum of the
terms as printed, so the line adds up as it stands.
"""

from __future__ import annotations

import math
from collections.abc import Sequence
from decimal import Decimal

from drivelint.netlist.values import format_si

# Significant digits a term keeps of its own, whatever the result's resolution.
OWN_DIGITS = 3


def _exponent(value: float) -> int:
    """The decade of ``value``'s last kept digit at three significant digits."""
    return math.floor(math.log10(abs(value))) - (OWN_DIGITS - 1)


def _text(value: Decimal, unit: str) -> str:
    """``value`` with its SI prefix and every digit it was rounded to (trailing zeros
    after the point dropped)."""
    if value == 0:
        return format_si(0.0, unit)
    magnitude = float(value)
    digits = value.adjusted() - value.as_tuple().exponent + 1  # type: ignore[operator]
    return format_si(magnitude, unit, digits=max(1, min(int(digits), 12)))


def resolution(terms: Sequence[tuple[int, float]]) -> float:
    """The decade the result of ``terms`` is printed to (for lines that share it)."""
    exact = sum(s * v for s, v in terms)
    values = [abs(v) for _, v in terms if v and math.isfinite(v)]
    if exact and math.isfinite(exact):
        return 10.0 ** _exponent(exact)
    return 10.0 ** _exponent(max(values)) if values else 1.0


def sum_line(terms: Sequence[tuple[int, float]], unit: str, finest: float | None = None) -> str:
    """``a + b − c = r`` for signed terms (+1 or −1, value), adding up as printed; with
    ``finest``, printed at least to that resolution (to match a line that uses the result)."""
    finite = [v for _, v in terms if math.isfinite(v)]
    if len(finite) != len(terms):
        result = sum(s * v for s, v in terms)
        parts = [format_si(v, unit) for _, v in terms]
        return _join(terms, parts) + f" = {format_si(result, unit)}"
    exact = sum(s * v for s, v in terms)
    nonzero = [abs(v) for v in finite if v] + ([abs(exact)] if exact else [])
    if not nonzero:
        return _join(terms, [format_si(0.0, unit)] * len(terms)) + f" = {format_si(0.0, unit)}"
    exponent = _exponent(exact) if exact else _exponent(max(nonzero))
    if finest is not None and finest > 0:
        exponent = min(exponent, math.floor(math.log10(finest) + 1e-9))
    quantum = Decimal(1).scaleb(exponent)
    rounded: list[Decimal] = []
    for _, value in terms:
        if value == 0:
            rounded.append(Decimal(0))
            continue
        own = Decimal(1).scaleb(min(exponent, _exponent(value)))
        rounded.append(Decimal(repr(value)).quantize(own))
    total = Decimal(0)
    for (sign, _), term in zip(terms, rounded, strict=True):
        total += Decimal(sign) * term
    shown = total.quantize(quantum) if total else Decimal(0)
    parts = [_text(r, unit) for r in rounded]
    return _join(terms, parts) + f" = {_text(shown, unit)}"


def _join(terms: Sequence[tuple[int, float]], parts: Sequence[str]) -> str:
    out = ""
    for index, ((sign, _), part) in enumerate(zip(terms, parts, strict=True)):
        if part.startswith("-") and index > 0:
            part = f"({part.replace('-', '−', 1)})"
        if index == 0:
            out = part if sign > 0 else f"−{part}"
        else:
            out += f" {'+' if sign > 0 else '−'} {part}"
    return out


def at(value: float, unit: str, finest: float) -> str:
    """``value`` printed to the resolution ``finest`` (at least three significant digits)."""
    if value == 0 or not math.isfinite(value):
        return format_si(value, unit)
    exponent = min(_exponent(value), math.floor(math.log10(finest) + 1e-9))
    return _text(Decimal(repr(value)).quantize(Decimal(1).scaleb(exponent)), unit)
