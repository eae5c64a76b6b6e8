"""What recognition produces: one :class:`DriveStage` per MOSFET switch."""

from __future__ import annotations

import math
from collections.abc import Mapping
from dataclasses import dataclass, field
from typing import TYPE_CHECKING, Any

from drivelint.diagnostics import Span, positional_reduce

if TYPE_CHECKING:
    from drivelint.netlist.waveforms import Waveform

SUPPLY_KINDS = ("bootstrap", "isolated", "charge-pump", "none")


@dataclass(frozen=True, slots=True)
class Rail:
    """A net held at a known voltage to ground.

    ``volts`` is the highest voltage it reaches (what stress checks use); ``low`` the lowest
    once it is up (what headroom checks use). They differ for a supply given as PULSE or
    PWL (a surge, a dip, a soft start); ``low`` is None when it equals ``volts``.
    ``source`` names the independent source that sets a varying supply.
    """

    __reduce__ = positional_reduce
    net: str
    volts: float | None
    low: float | None = None
    source: str | None = None

    @property
    def lowest(self) -> float | None:
        return self.volts if self.low is None else self.low

    def to_json(self) -> dict[str, Any]:
        out: dict[str, Any] = {"net": self.net, "volts": self.volts}
        if self.low is not None:
            out["low"] = self.low
            out["source"] = self.source
        return out


@dataclass(frozen=True, slots=True)
class Supply:
    """The floating supply of a gate drive, riding on the switch node."""

    __reduce__ = positional_reduce

    kind: str
    boot_net: str | None = None
    capacitor: str | None = None
    diode: str | None = None
    diode_orientation: str | None = None  # "forward" (aux -> boot) or "reversed"
    series_resistors: tuple[str, ...] = ()
    series_resistance: float | None = None
    aux: Rail | None = None
    source: str | None = None  # isolated: the source or winding; charge-pump: the pump capacitor
    # charge-pump: the feed diode and the net it draws from, the clock net and its source
    # (with the clock's amplitude), and whether the hold (reservoir) rides on the source
    feed_diode: str | None = None
    clock: Rail | None = None
    riding: bool = False
    # a turn-off supply below the source (a split isolated supply, +15/−5 V): its net, its
    # level relative to the source (negative) and the DC source that sets it
    negative: Rail | None = None

    def to_json(self) -> dict[str, Any]:
        return {
            "kind": self.kind,
            "boot_net": self.boot_net,
            "capacitor": self.capacitor,
            "diode": self.diode,
            "diode_orientation": self.diode_orientation,
            "series_resistance": self.series_resistance,
            "series_resistors": list(self.series_resistors),
            "aux": self.aux.to_json() if self.aux else None,
            "source": self.source,
            **(
                {
                    "feed_diode": self.feed_diode,
                    "clock": self.clock.to_json() if self.clock else None,
                    "riding": self.riding,
                }
                if self.kind == "charge-pump"
                else {}
            ),
            **({"negative": self.negative.to_json()} if self.negative else {}),
        }


@dataclass(frozen=True, slots=True)
class GatePath:
    """Devices in order: from the supply to the gate (pull-up) or from the gate onward."""

    __reduce__ = positional_reduce

    devices: tuple[str, ...]
    end_net: str
    returns_to: str  # pull-ups: "boot" or the rail's net; pull-downs: "source", "ground" or a net


@dataclass(frozen=True, slots=True)
class Clamp:
    """A gate clamp: its device, kind, orientation and clamping voltage."""

    __reduce__ = positional_reduce
    device: str
    kind: str  # "zener" or "diode"
    orientation: str  # "normal", "reversed" or "back-to-back"
    devices: tuple[str, ...] = ()
    voltage: float | None = None

    def to_json(self) -> dict[str, Any]:
        return {
            "device": self.device,
            "orientation": self.orientation,
            "kind": self.kind,
            "devices": list(self.devices or (self.device,)),
            "voltage": self.voltage,
        }


@dataclass(frozen=True, slots=True)
class Control:
    """Where the switch's command comes from.

    ``kind`` says how it was found: "source" (an independent source, its waveform the
    command), "tied" (the input is tied to a fixed level), or "modulator" (a behavioural
    comparator or controlled source combines several signals, e.g. a ramp against an error
    amplifier: the duty is the loop's, not in the netlist; ``waveform`` is then the
    periodic input that sets the frequency, if any, and ``inputs`` the sources seen).
    """

    __reduce__ = positional_reduce
    source: str | None
    inverting: bool
    waveform: Waveform | None
    path: tuple[str, ...] = ()
    kind: str = "source"
    inputs: tuple[str, ...] = ()

    @property
    def modulated(self) -> bool:
        return self.kind == "modulator"

    def to_json(self) -> dict[str, Any]:
        return {
            "source": self.source,
            "inverting": self.inverting,
            "waveform": self.waveform.to_json() if self.waveform else None,
            "path": list(self.path),
            "kind": self.kind,
            "inputs": list(self.inputs),
        }


@dataclass(frozen=True, slots=True)
class Refresh:
    """The path that recharges a bootstrap: its kind, devices and resistance."""

    __reduce__ = positional_reduce
    kind: str  # "low-side switch", "freewheel diode", "load", "inductor-load"
    devices: tuple[str, ...]
    resistance: float | None = None
    reference: str | None = None  # the net it pulls the switch node to (ground, a rail)
    command: Control | None = None  # a low-side switch's own command, where it is traced


@dataclass(frozen=True, slots=True)
class DriverInfo:
    """A driver IC seen as a black box: its instance, subcircuit and pin roles."""

    __reduce__ = positional_reduce
    device: str
    subckt: str
    pins: Mapping[str, str]  # role -> net
    origin: str  # "parts library" or "pin names"

    def to_json(self) -> dict[str, Any]:
        return {
            "device": self.device,
            "subckt": self.subckt,
            "pins": dict(sorted(self.pins.items())),
            "origin": self.origin,
        }


@dataclass(frozen=True, slots=True)
class LevelShifter:
    """The ground-referenced transistor that carries the command up to the floating side,
    with the resistors around it; ``pull_up`` is the P-type pull-up it drives (None when
    it acts on the gate node itself), ``on_with_switch`` whether it conducts while the
    switch is on (then its current drains the boot supply for the whole on-time)."""

    __reduce__ = positional_reduce
    transistor: str
    resistors: tuple[str, ...]
    pull_up: str | None
    on_with_switch: bool

    def to_json(self) -> dict[str, Any]:
        return {
            "transistor": self.transistor,
            "resistors": list(self.resistors),
            "pull_up": self.pull_up,
            "on_with_switch": self.on_with_switch,
        }


@dataclass(frozen=True, slots=True)
class DriveStage:
    """One floating switch and its gate drive, as recognised from the circuit."""

    __reduce__ = positional_reduce
    switch: str
    channel: str
    gate: str
    source: str
    drain: str
    floating: bool
    floating_reason: str
    span: Span
    mode: str = "switching"  # "switching", "static" (DC control) or "linear"
    bus: Rail | None = None
    supply: Supply = field(default_factory=lambda: Supply("none"))
    pullups: tuple[GatePath, ...] = ()
    pulldowns: tuple[GatePath, ...] = ()
    clamps: tuple[Clamp, ...] = ()
    refresh: tuple[Refresh, ...] = ()
    control: Control | None = None
    driver: DriverInfo | None = None
    related: tuple[str, ...] = ()  # every device recognised as part of the stage
    notes: tuple[str, ...] = ()  # what recognition assumed, in words (wires, linear use, …)
    level_shifter: LevelShifter | None = None
    # "igbt" or "sic" where the switch is one (``channel`` stays "nmos": both are judged as
    # N-channel switches, V_GE for V_GS and V_CE for V_DS); "" for a silicon MOSFET
    technology: str = ""

    def to_json(self) -> dict[str, Any]:
        shifter: dict[str, Any] = (
            {"level_shifter": self.level_shifter.to_json()} if self.level_shifter else {}
        )
        if self.technology:
            shifter["technology"] = self.technology
        return {
            "switch": self.switch,
            "channel": self.channel,
            "gate": self.gate,
            "source": self.source,
            "drain": self.drain,
            "floating": self.floating,
            "floating_reason": self.floating_reason,
            "mode": self.mode,
            "bus": self.bus.to_json() if self.bus else None,
            "supply": self.supply.to_json(),
            "pullups": [list(p.devices) for p in self.pullups],
            "pulldowns": [
                {"devices": list(p.devices), "returns_to": p.returns_to} for p in self.pulldowns
            ],
            "clamps": [c.to_json() for c in self.clamps],
            "refresh": [
                {
                    "kind": r.kind,
                    "devices": list(r.devices),
                    "resistance": _finite(r.resistance),
                    "reference": r.reference,
                    "command": r.command.to_json() if r.command else None,
                }
                for r in self.refresh
            ],
            "control": self.control.to_json() if self.control else None,
            "driver": self.driver.to_json() if self.driver else None,
            "notes": list(self.notes),
            **shifter,
            "path": self.span.path,
            "line": self.span.line,
        }


def _finite(value: float | None) -> float | str | None:
    if value is None or math.isfinite(value):
        return value
    return "inf"
