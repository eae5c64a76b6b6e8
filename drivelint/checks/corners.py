"""Tolerance corners: where a stage's figures are judged, in one place.

A margin is only as good as the worst part on the shelf. The shared facts
(:class:`drivelint.checks.facts.StageFacts`) take every toleranced input at its worst
corner through this module, so each rule that computes a margin judges it there and says
which corner it used:

- the hold capacitor at its lowest: the part's tolerance, the dielectric's fall over
  temperature, and its DC-bias loss at the voltage it holds (evaluated from the netlist's
  own voltage-dependent C where it models one, else a configured fraction);
- the auxiliary (gate) rail and an isolated gate supply at the low end of their tolerance
  for hold and headroom figures, the high end for stresses; the bus likewise;
- the gate charge at the top of its spread;
- the bootstrap diode's and the clamps' leakage at the junction's highest temperature.

The stress side of a figure (the highest V_GS) takes the opposite corner where it matters:
the capacitor at its highest and the gate charge at its typical value, which share less.

Every corner parameter is an operating condition (``[conditions]``, ``conditions_for`` or
a ``* drivelint: conditions`` directive), validated like the others, with the documented
default below; a capacitor's own ``tolerance`` rating (parts library or directive) wins
over ``cap_tolerance``. Setting a parameter to 0 (``junction_max`` to 25 °C) judges that
input at its nominal value.
"""

from __future__ import annotations

import math
from collections.abc import Mapping
from dataclasses import dataclass
from typing import TYPE_CHECKING

from drivelint.netlist.values import format_si
from drivelint.physics import tolerance as tol
from drivelint.ratings.conditions import CORNER_RANGES
from drivelint.ratings.ratings import RatingError
from drivelint.ratings.values import Value

if TYPE_CHECKING:
    from drivelint.checks.base import Finding
    from drivelint.checks.facts import StageFacts

# Documented defaults, each with why (README "Tolerance corners").
DEFAULT_CAP_TOLERANCE = 0.10  # EIA letter K: the usual tolerance of a class-2 ceramic
DEFAULT_DIELECTRIC = "X7R"  # the dielectric bootstrap capacitors are commonly chosen in
DEFAULT_CAP_DC_BIAS_LOSS = 0.0  # unknown without the part's curve: give it, or model C(V)
DEFAULT_SUPPLY_TOLERANCE = 0.05  # a regulated gate rail within ±5 % (common practice)
DEFAULT_BUS_TOLERANCE = 0.0  # the netlist's bus is the design's own; a surge is a waveform
DEFAULT_QG_SPREAD = 0.20  # datasheet maximum Q_g over the typical (common practice)
DEFAULT_JUNCTION_MAX = 358.15  # K, 85 °C: the top of the industrial ambient range

# The condition keys of the corners (their units are in ratings.directives.CONDITION_KEYS,
# their ranges in config.CONDITION_RANGES, like every condition's).
CORNER_KEYS = (
    "corners",
    "cap_tolerance",
    "cap_temperature_loss",
    "cap_dc_bias_loss",
    "supply_tolerance",
    "bus_tolerance",
    "qg_spread",
    "junction_max",
)
_DEFAULTS: Mapping[str, tuple[float, str]] = {
    "cap_tolerance": (
        DEFAULT_CAP_TOLERANCE,
        "default: ±10 % (EIA letter K, the usual class-2 ceramic tolerance)",
    ),
    "cap_temperature_loss": (
        tol.temperature_change(DEFAULT_DIELECTRIC)[0],
        f"default: {DEFAULT_DIELECTRIC}'s ±15 % over −55…125 °C (EIA-198)",
    ),
    "cap_dc_bias_loss": (
        DEFAULT_CAP_DC_BIAS_LOSS,
        "default: none known (give cap_dc_bias_loss from the part's curve, or model C(V))",
    ),
    "supply_tolerance": (
        DEFAULT_SUPPLY_TOLERANCE,
        "default: ±5 %, a regulated gate rail (common practice)",
    ),
    "bus_tolerance": (
        DEFAULT_BUS_TOLERANCE,
        "default: none (the netlist's bus; give its range as a waveform or bus_tolerance)",
    ),
    "qg_spread": (
        DEFAULT_QG_SPREAD,
        "default: +20 %, a datasheet maximum over the typical (common practice)",
    ),
}


@dataclass(frozen=True, slots=True)
class Corners:
    """The corner parameters of one stage, each with its origin."""

    cap_tolerance: Value
    cap_temperature_loss: Value
    cap_dc_bias_loss: Value
    supply_tolerance: Value
    bus_tolerance: Value
    qg_spread: Value
    junction_max: Value

    def values(self) -> dict[str, Value]:
        return {key: getattr(self, key) for key in CORNER_KEYS[1:]}


def holds_corner(facts: StageFacts) -> Value | None:
    """``as_corner = 1``: the netlist's values already are a worst tolerance corner (the
    decks the testbench command writes hold one). They are judged as written, and the
    margins kept for the nominal values (the hold capacitor's sizing margin) are not
    stacked on them: the corner is met at face value, as for a computed corner."""
    held = facts.condition("as_corner")
    if held is None:
        return None
    if held.value not in (0.0, 1.0):
        raise RatingError(
            f"condition as_corner = {held.value:g} ({held.origin}): expected 0 (the netlist "
            "holds nominal values) or 1 (it holds a worst corner's values)"
        )
    return held if held.value == 1.0 else None


def corners_of(facts: StageFacts) -> Corners:
    """The stage's corner parameters: conditions, else the documented defaults; a hold
    capacitor's own tolerance rating wins over ``cap_tolerance``."""
    switch = facts.condition("corners")
    if switch is not None and switch.value not in (0.0, 1.0):
        raise RatingError(
            f"condition corners = {switch.value:g} ({switch.origin}): expected 0 (nominal) "
            "or 1 (the worst corner)"
        )
    held = holds_corner(facts)
    if held is not None:
        return nominal_corners(f"the netlist holds a corner: as_corner = 1 ({held.origin})")
    if switch is not None and switch.value == 0.0:
        return nominal_corners(f"nominal: corners = 0 ({switch.origin})")
    found: dict[str, Value] = {}
    for key in CORNER_KEYS[1:]:
        given = facts.condition(key)
        if given is not None:
            low, high, closed = CORNER_RANGES[key]
            inside = (low <= given.value if closed else low < given.value) and given.value <= high
            if not inside:
                # A directive is not range-checked where it is read; the configuration is.
                raise RatingError(
                    f"condition {key} = {given.text()} ({given.origin}) is outside {low:g}…{high:g}"
                )
            found[key] = given
        elif key == "junction_max":
            ambient = facts.temperature.value
            found[key] = (
                Value(ambient, "K", f"the ambient ({facts.temperature.origin})")
                if ambient > DEFAULT_JUNCTION_MAX
                else Value(
                    DEFAULT_JUNCTION_MAX, "K", "default: 85 °C, the top of the industrial range"
                )
            )
        else:
            value, origin = _DEFAULTS[key]
            found[key] = Value(value, "1", origin)
    cap = facts.capacitor
    rated = facts.ratings.get(cap, "tolerance") if cap is not None else None
    if rated is not None:
        found["cap_tolerance"] = Value(rated.value, "1", f"{cap.name} tolerance ({rated.origin})")  # type: ignore[union-attr]
    return Corners(**found)


def nominal_corners(origin: str) -> Corners:
    """Every input at its nominal value (``corners = 0``)."""
    zero = Value(0.0, "1", origin)
    return Corners(zero, zero, zero, zero, zero, zero, Value(tol.LEAKAGE_REFERENCE, "K", origin))


def _pct(value: float) -> str:
    return f"{value * 100:.3g} %"


# -- the hold capacitor ---------------------------------------------------------------------------


def bias_factor(facts: StageFacts, volts: float) -> tuple[float, str]:
    """C(V)/C(0) of the hold capacitor at ``volts`` across it, and how it was found: the
    netlist's own voltage-dependent C where it gives one (evaluated by drivelint's own
    expression grammar), else 1 − cap_dc_bias_loss."""
    cap = facts.capacitor
    behaviour = cap.behaviour if cap is not None else None
    if cap is not None and behaviour is not None and cap.value:
        plus, minus = cap.net("p"), cap.net("n")
        voltages = {net: 0.0 for net in behaviour.reads}
        if plus is not None:
            voltages[plus] = volts
        if minus is not None:
            voltages[minus] = 0.0
        try:
            at = behaviour.evaluate(voltages)
        except ValueError:
            at = None
        if at is not None and math.isfinite(at) and at > 0:
            factor = min(at / cap.value, 1.0)
            return factor, (
                f"its C expression at {format_si(volts, 'V')}: {format_si(at, 'F')}, "
                f"{factor:.3g} of its 0 V value"
            )
    loss = facts.corners.cap_dc_bias_loss
    return 1.0 - loss.value, f"DC-bias loss {_pct(loss.value)} ({loss.origin})"


def hold_capacitance(facts: StageFacts, nominal: Value, volts: float) -> Value:
    """The hold capacitor at its lowest, holding ``volts``."""
    corners = facts.corners
    factor, how = bias_factor(facts, volts)
    low = tol.capacitance_low(
        nominal.value, corners.cap_tolerance.value, corners.cap_temperature_loss.value, factor
    )
    if low == nominal.value:
        return nominal
    return Value(
        low,
        "F",
        f"{nominal.origin}, {nominal.text()} at its low corner: "
        f"−{_pct(corners.cap_tolerance.value)} tolerance, "
        f"−{_pct(corners.cap_temperature_loss.value)} over temperature, {how}",
    )


def stress_capacitance(facts: StageFacts, nominal: Value, volts: float) -> Value:
    """The hold capacitor at its highest (it shares least with the gate)."""
    corners = facts.corners
    factor, how = bias_factor(facts, volts)
    code_rise = corners.cap_temperature_loss.value  # the class-2 codes are symmetric
    high = tol.capacitance_high(nominal.value, corners.cap_tolerance.value, code_rise, factor)
    if high == nominal.value:
        return nominal
    return Value(
        high,
        "F",
        f"{nominal.origin}, {nominal.text()} at its high corner: "
        f"+{_pct(corners.cap_tolerance.value)} tolerance, +{_pct(code_rise)} over temperature, "
        f"{how}",
    )


# -- supplies -------------------------------------------------------------------------------------


def supply(
    facts: StageFacts, value: Value, reference: float, key: str, high: bool, what: str
) -> Value:
    """A supply level at the low (``high`` False) or high end of its tolerance ``key``
    (``supply_tolerance`` or ``bus_tolerance``), measured from ``reference``."""
    spread = getattr(facts.corners, key)
    if spread.value == 0:
        return value
    level = (tol.supply_high if high else tol.supply_low)(value.value, reference, spread.value)
    sign = "+" if high else "−"
    return Value(
        level,
        "V",
        f"{value.origin}, {value.text()} at the {'high' if high else 'low'} end of its "
        f"tolerance ({sign}{_pct(spread.value)} of the {format_si(value.value - reference, 'V')} "
        f"{what}, {key} {spread.origin})",
    )


def nominal_for(facts: StageFacts, low_level: float) -> float:
    """The nominal auxiliary rail whose low corner is ``low_level`` (the inverse of the
    supply corner, from the node the rail charges the bootstrap against)."""
    spread = facts.corners.supply_tolerance.value
    reference = facts.v_sw_low.value if facts.stage.supply.kind == "bootstrap" else 0.0
    return reference + (low_level - reference) / (1.0 - spread)


def aux_low(facts: StageFacts, nominal: float) -> float:
    """The low corner of a nominal auxiliary rail (the inverse of :func:`nominal_for`)."""
    reference = facts.v_sw_low.value if facts.stage.supply.kind == "bootstrap" else 0.0
    return tol.supply_low(nominal, reference, facts.corners.supply_tolerance.value)


# -- gate charge and leakage ----------------------------------------------------------------------


def charge_spread(facts: StageFacts) -> float:
    """The factor a gate charge takes at the top of its spread."""
    return tol.charge_with_spread(1.0, facts.corners.qg_spread.value)


def leakage(facts: StageFacts, value: Value) -> Value:
    """A leakage at the junction's highest temperature: doubling every 10 K from 25 °C
    (common practice), for a datasheet I_R and a model card's IS alike (a model's IS
    temperature law with the silicon default E_G = 1.11 eV would make a Schottky card
    without its own EG leak far more than the part does)."""
    hot = facts.corners.junction_max
    if value.value == 0 or hot.value == tol.LEAKAGE_REFERENCE:
        return value
    current = tol.leakage_at(value.value, hot.value)
    return Value(
        current,
        "A",
        f"{value.origin}, {value.text()} at {hot.text()} (doubling every 10 K from 25 °C, "
        f"common practice; junction_max {hot.origin})",
    )


def corner_factor(facts: StageFacts) -> float:
    """The hold capacitor's low corner over its nominal value (1 with none known)."""
    nominal, low = facts.c_hold_nominal, facts.c_hold
    if nominal is None or low is None or not nominal.value:
        return 1.0
    return low.value / nominal.value


HOLD = "hold"
STRESS = "stress"
# What a figure takes from the corners: the hold capacitor, the gate supply, the bus, the
# gate charge, the leakage. Hold and headroom figures take all of them at their worst; the
# highest V_GS the capacitor (highest), gate supply (highest) and bus.
ALL = frozenset({"capacitor", "supply", "bus", "charge", "leakage"})
_SIDE_USES = {HOLD: ALL, STRESS: frozenset({"capacitor", "supply", "bus"})}


def with_corner(
    finding: Finding, facts: StageFacts, side: str, uses: frozenset[str] | None = None
) -> Finding:
    """``finding`` with the corner its figures used named in its message and values;
    ``uses`` narrows what the figure depends on (the side's default otherwise)."""
    from dataclasses import replace

    used = _SIDE_USES[side] if uses is None else uses
    values = {**corner_values(facts, side, used), **finding.values}
    message = f"{finding.message}; {corner_text(facts, side, used)}"
    return replace(finding, message=message, values=values)


def corner_values(
    facts: StageFacts, side: str, uses: frozenset[str] | None = None
) -> dict[str, Value]:
    """The corner parameters a figure used, for a finding's values."""
    uses = _SIDE_USES[side] if uses is None else uses
    corners = facts.corners
    out: dict[str, Value] = {}
    if "supply" in uses and facts.stage.supply.kind in ("bootstrap", "isolated"):
        out["supply_tolerance"] = corners.supply_tolerance
    if "bus" in uses:
        out["bus_tolerance"] = corners.bus_tolerance
    if "capacitor" in uses and facts.c_hold_nominal is not None:
        out["c_hold_nominal"] = facts.c_hold_nominal
        out["cap_tolerance"] = corners.cap_tolerance
        out["cap_temperature_loss"] = corners.cap_temperature_loss
        if facts.capacitor is not None and facts.capacitor.behaviour is None:
            out["cap_dc_bias_loss"] = corners.cap_dc_bias_loss
    if "charge" in uses:
        out["qg_spread"] = corners.qg_spread
    if "leakage" in uses:
        out["junction_max"] = corners.junction_max
    return out


def corner_text(facts: StageFacts, side: str, uses: frozenset[str] | None = None) -> str:
    """A short clause naming the corner, for a finding's message."""
    uses = _SIDE_USES[side] if uses is None else uses
    corners = facts.corners
    parts: list[str] = []
    nominal, used = facts.c_hold_nominal, (facts.c_hold if side == HOLD else facts.c_hold_high)
    if "capacitor" in uses and nominal is not None and used is not None and nominal.value:
        change = used.value / nominal.value - 1
        if change:
            parts.append(f"C {'+' if change > 0 else '−'}{_pct(abs(change))}")
    sign = "−" if side == HOLD else "+"
    floating = facts.stage.supply.kind in ("bootstrap", "isolated")
    if "supply" in uses and corners.supply_tolerance.value and floating:
        parts.append(f"gate supply {sign}{_pct(corners.supply_tolerance.value)}")
    if "bus" in uses and corners.bus_tolerance.value:
        parts.append(f"bus {sign}{_pct(corners.bus_tolerance.value)}")
    if "charge" in uses and corners.qg_spread.value:
        parts.append(f"Q_g +{_pct(corners.qg_spread.value)}")
    if "leakage" in uses and corners.junction_max.value != tol.LEAKAGE_REFERENCE:
        parts.append(f"leakage at {corners.junction_max.text()}")
    if not parts:
        if holds_corner(facts) is not None:
            return "at the corner the netlist holds (as_corner = 1: judged as written)"
        return "at the nominal corner (no tolerance moves this figure)"
    return f"at the {'worst' if side == HOLD else 'highest'} corner ({', '.join(parts)})"
