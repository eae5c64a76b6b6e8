"""Stress against ratings, and published derating factors kept as quoted data.

The factors below are quoted, not derived. Each records its document and whether it was
checked against the document (``from_memory=False``) or written down from memory of it.
"""

from __future__ import annotations

from collections.abc import Mapping
from dataclasses import dataclass
from types import MappingProxyType
from typing import TypeVar

from drivelint.physics._units import Kelvin, Ratio, _coerce, _ratio

_T = TypeVar("_T")


def derated_limit(rating: float, factor: Ratio) -> float:
    """The usable part of a rating: rating × factor (same unit as ``rating``).

    rating: absolute maximum rating [any unit]; factor: allowed fraction, e.g. 0.7.
    """
    return rating * factor


def stress_ratio(applied: float, rating: float) -> Ratio:
    """|applied| / |rating| (1.0 means at the rating; compare with the derating factor).

    applied: stress the part sees [same unit as rating]; rating: its rating.
    """
    return _ratio(abs(applied), abs(rating))


@dataclass(frozen=True, slots=True)
class DeratingFactor:
    """One published derating factor: the fraction of a rating a design may use."""

    factor: Ratio
    source: str
    from_memory: bool
    note: str = ""


@dataclass(frozen=True, slots=True)
class TemperatureLimit:
    """A junction-temperature rule of the form T_j ≤ min(cap, T_j,max − margin)."""

    cap: Kelvin
    margin: Kelvin
    source: str
    from_memory: bool


_RAC = "RAC/SRC 'Part Derating Parameters' table (Reliability Analysis Center)"
_MIL_917 = "MIL-DTL-917, Electric Power Equipment, Basic Requirements (Naval Shipboard)"
_NASA = (
    "NASA EEE-INST-002, Instructions for EEE Parts Selection, Screening, Qualification, "
    "and Derating"
)

# Only the capacitor rows of the RAC table could be read in a stored copy (columns
# interleaved by text extraction, but the ceramic row reads 60 % severe / 70 % benign);
# the diode rows and the other documents are quoted from memory.
_DIODE_KINDS = ("rectifier-diode", "fast-recovery-diode", "schottky-diode")


def _rac(
    environment: str, diode: float, ceramic: float
) -> Mapping[str, Mapping[str, DeratingFactor]]:
    """The RAC rows for one environment (severe or benign)."""
    table: dict[str, Mapping[str, DeratingFactor]] = {
        kind: MappingProxyType(
            {"reverse-voltage": DeratingFactor(diode, f"{_RAC}, {environment}", True)}
        )
        for kind in _DIODE_KINDS
    }
    table["ceramic-capacitor"] = MappingProxyType(
        {
            "voltage": DeratingFactor(
                ceramic,
                f"{_RAC}, {environment}",
                False,
                note="read from a text copy of the table whose columns were interleaved",
            )
        }
    )
    return MappingProxyType(table)


DERATING: Mapping[str, Mapping[str, Mapping[str, DeratingFactor]]] = MappingProxyType(
    {
        "rac-severe": _rac("severe environment", diode=0.70, ceramic=0.60),
        "rac-benign": _rac("benign environment", diode=0.80, ceramic=0.70),
        "mil-dtl-917": MappingProxyType(
            {"fet": MappingProxyType({"vgs": DeratingFactor(0.70, _MIL_917, True)})}
        ),
        "nasa-eee-inst-002": MappingProxyType(
            {
                "fet": MappingProxyType(
                    {
                        "vds": DeratingFactor(0.75, _NASA, True),
                        "vgs": DeratingFactor(0.60, _NASA, True),
                    }
                ),
                "bjt": MappingProxyType({"vceo": DeratingFactor(0.75, _NASA, True)}),
                "diode": MappingProxyType({"piv": DeratingFactor(0.70, _NASA, True)}),
            }
        ),
    }
)

NASA_JUNCTION_LIMIT = TemperatureLimit(
    cap=398.15,  # 125 °C
    margin=40.0,
    source=_NASA,
    from_memory=True,
)


def _lookup(table: Mapping[str, _T], key: str, what: str) -> _T:
    """``table[key]``, or a KeyError that lists the keys there are."""
    try:
        return table[key]
    except KeyError:
        known = ", ".join(sorted(table))
        raise KeyError(f"no derating {what} {key!r}; known: {known}") from None


def derating_factor(guideline: str, part_kind: str, quantity: str) -> DeratingFactor:
    """Look up a published factor; a KeyError names the keys that exist.

    guideline: e.g. "rac-severe"; part_kind: e.g. "schottky-diode"; quantity: e.g.
    "reverse-voltage".
    """
    kinds = _lookup(DERATING, guideline, "guideline")
    quantities = _lookup(kinds, part_kind, f"part kind under {guideline}")
    return _lookup(quantities, quantity, f"quantity under {guideline} / {part_kind}")


def junction_temperature_limit(
    t_j_max: Kelvin, rule: TemperatureLimit = NASA_JUNCTION_LIMIT
) -> Kelvin:
    """Derated junction temperature: min(cap, T_j,max − margin).

    t_j_max: the part's maximum junction temperature [K]; rule: the guideline's cap and
    margin (default NASA EEE-INST-002: 125 °C or T_j,max − 40 K, whichever is lower).
    """
    t_max = _coerce(t_j_max, t_j_max, "K", t_j_max)
    cap = _coerce(rule.cap, rule.cap, "K", t_max)
    margin = _coerce(rule.margin, rule.margin, "K", t_max)
    return min(cap, t_max - margin)


def off_state_voltage(v_high: float, v_low: float, ringing: Ratio) -> float:
    """The voltage a switch of a leg blocks while off, with the allowance for ringing:
    (V_high − V_low)·(1 + k_ring) [V].

    v_high: the rail the leg switches to, at its highest [V]; v_low: the level the switch
    node is pulled to by the other switch [V]; ringing: switch-node overshoot as a fraction
    of the swing (common practice: 10–20 % for a compact layout with the bus decoupled at
    the leg).
    """
    return (v_high - v_low) * (1.0 + ringing)
