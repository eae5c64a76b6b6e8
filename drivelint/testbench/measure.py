"""``.meas`` cards, the claims they check, and the limits that show a failure.

Every card is written for ngspice's batch mode (``ngspice -b deck`` prints
``name = value`` for each): node voltages by their flattened names (``xlega.hb``),
differences through ``par('v(a)-v(b)')``, device currents as ``@name[param]`` (saved with
``.save``), and results of earlier cards combined with ``param='…'``.
"""

from __future__ import annotations

import math
from dataclasses import dataclass

from drivelint.circuit.model import GROUND
from drivelint.testbench.stimulus import number

HELPER_PREFIX = "tb_"  # cards that feed a claim but are not one themselves
TOLERANCE = 0.20  # a claim is confirmed within ±20 % (an upper bound: at most 20 % above)
SENSES = ("estimate", "upper bound", "lower bound")


@dataclass(frozen=True, slots=True)
class Claim:
    """A computed quantity the finding asserts, and the card that measures it."""

    key: str  # the finding's value key, and the name of its .meas card
    value: float
    unit: str
    sense: str = "estimate"  # how a measurement confirms it (SENSES)

    def verdict(self, measured: float | None) -> str:
        """ "confirmed", "not confirmed" or "not measured"."""
        if measured is None or not math.isfinite(measured):
            return "not measured"
        claimed = self.value
        if self.sense == "upper bound":
            ok = measured <= claimed + TOLERANCE * abs(claimed)
        elif self.sense == "lower bound":
            ok = measured >= claimed - TOLERANCE * abs(claimed)
        elif claimed == 0:
            ok = abs(measured) <= 1e-12
        else:
            ok = abs(measured - claimed) <= TOLERANCE * abs(claimed)
        return "confirmed" if ok else "not confirmed"


@dataclass(frozen=True, slots=True)
class Limit:
    """What the failure looks like in the simulation: a measured value on the wrong side
    of a bound. The design's deck shows the failure; the fixed deck must not."""

    measure: str  # a card's name
    bound: float
    holds_when: str  # ">=" or "<=": how the value must stand against the bound
    what: str  # plain words for the header and the report
    unit: str = ""

    def holds(self, measured: float | None) -> bool | None:
        if measured is None or not math.isfinite(measured):
            return None
        return measured >= self.bound if self.holds_when == ">=" else measured <= self.bound


@dataclass(frozen=True, slots=True)
class Card:
    """One ``.meas`` line and what it measures, in words."""

    name: str
    text: str
    what: str


def voltage(net: str) -> str:
    return f"v({net})"


def difference(high: str, low: str) -> str:
    """The vector V(high) − V(low) in a form ``.meas`` accepts."""
    if low == GROUND:
        return voltage(high)
    return f"par('v({high})-v({low})')"


def device_vector(device: str, parameter: str) -> str:
    """``@name[param]`` of a flattened device: ngspice calls ``x1.d2`` ``d.x1.d2``."""
    if "." in device:
        letter = device.rsplit(".", 1)[-1][0]
        return f"@{letter}.{device}[{parameter}]"
    return f"@{device}[{parameter}]"


def source_current(device: str) -> str:
    """The current through a voltage source (into its + node), as ngspice names it."""
    if "." in device:
        return f"i(v.{device})"
    return f"i({device})"


def window(start: float, end: float) -> str:
    return f"FROM={number(start)} TO={number(end)}"


def extreme(name: str, kind: str, vector: str, start: float, end: float, what: str) -> Card:
    assert kind in ("MIN", "MAX")
    return Card(name, f".meas tran {name} {kind} {vector} {window(start, end)}", what)


def at(name: str, vector: str, time: float, what: str) -> Card:
    return Card(name, f".meas tran {name} FIND {vector} AT={number(time)}", what)


def integral(name: str, vector: str, start: float, end: float, what: str) -> Card:
    return Card(name, f".meas tran {name} INTEG {vector} {window(start, end)}", what)


def average(name: str, vector: str, start: float, end: float, what: str) -> Card:
    return Card(name, f".meas tran {name} AVG {vector} {window(start, end)}", what)


def expression(name: str, formula: str, what: str) -> Card:
    return Card(name, f".meas tran {name} param='{formula}'", what)


def time_to_fall(
    name: str, start: float, vector: str, level: float, what: str, falls: bool = True
) -> Card:
    """Time from ``start`` until ``vector`` first crosses ``level`` (falling by default)."""
    edge = "FALL=1" if falls else "RISE=1"
    return Card(
        name,
        f".meas tran {name} TRIG AT={number(start)} "
        f"TARG {vector} VAL={number(level)} TD={number(start)} {edge}",
        what,
    )


@dataclass(frozen=True, slots=True)
class Trace:
    """One series of a deck's waveform file: a node voltage, a difference of two, or a
    source's current (``scale`` −1 turns it round), as ngspice names the vectors."""

    name: str  # what the series is called in the file, e.g. "V(boot)-V(sw)"
    unit: str
    plus: str  # a vector: "v(boot)", "i(v_tb_d1)"
    minus: str | None = None
    scale: float = 1.0

    @property
    def vectors(self) -> tuple[str, ...]:
        return (self.plus,) if self.minus is None else (self.plus, self.minus)


def voltage_trace(high: str, low: str = GROUND, name: str | None = None) -> Trace:
    """V(high) − V(low) as a trace."""
    label = name or (f"V({high})" if low == GROUND else f"V({high})-V({low})")
    return Trace(label, "V", voltage(high), None if low == GROUND else voltage(low))
