"""The elaborated circuit: flat devices with hierarchical names, resolved models, nets."""

from __future__ import annotations

from collections.abc import Mapping
from dataclasses import dataclass, field
from typing import TYPE_CHECKING, Any

from drivelint.diagnostics import Diagnostic, Span, positional_reduce
from drivelint.netlist.statements import Directive

if TYPE_CHECKING:
    import networkx

    from drivelint.netlist.waveforms import Waveform

GROUND = "0"

# Element letter -> device kind, as reported by `drivelint netlist`.
KIND_BY_LETTER: Mapping[str, str] = {
    "r": "resistor",
    "c": "capacitor",
    "l": "inductor",
    "k": "coupling",
    "d": "diode",
    "q": "bjt",
    "m": "mosfet",
    "j": "jfet",
    "v": "vsource",
    "i": "isource",
    "e": "vcvs",
    "g": "vccs",
    "f": "cccs",
    "h": "ccvs",
    "b": "behavioral",
    "s": "switch",
    "w": "cswitch",
    "x": "subckt",
}

# .model type -> (device kind it serves, channel or polarity).
MODEL_TYPES: Mapping[str, tuple[str, str | None]] = {
    "d": ("diode", None),
    "npn": ("bjt", "npn"),
    "pnp": ("bjt", "pnp"),
    "nmos": ("mosfet", "nmos"),
    "pmos": ("mosfet", "pmos"),
    "vdmos": ("mosfet", None),  # channel from the pchan/nchan flag
    "njf": ("jfet", "njf"),
    "pjf": ("jfet", "pjf"),
    "sw": ("switch", None),
    "csw": ("cswitch", None),
    "r": ("resistor", None),
    "res": ("resistor", None),
    "c": ("capacitor", None),
    "l": ("inductor", None),
}


@dataclass(frozen=True, slots=True)
class Model:
    """A resolved ``.model`` card; ``params`` are evaluated numbers keyed in lower case."""

    __reduce__ = positional_reduce

    name: str
    type: str
    params: Mapping[str, float]
    span: Span

    @property
    def kind(self) -> str | None:
        entry = MODEL_TYPES.get(self.type)
        return entry[0] if entry else None

    @property
    def polarity(self) -> str | None:
        """nmos/pmos/npn/pnp/njf/pjf, with VDMOS resolved through its channel flag."""
        if self.type == "vdmos":
            return "pmos" if self.params.get("pchan") else "nmos"
        entry = MODEL_TYPES.get(self.type)
        return entry[1] if entry else None


@dataclass(frozen=True, slots=True)
class Wrapper:
    """A subcircuit recognised as one MOSFET plus parasitics."""

    __reduce__ = positional_reduce

    subckt: str
    inner_device: str
    gate_resistance: float | None
    body_diode: str | None


@dataclass(frozen=True, slots=True)
class Device:
    __reduce__ = positional_reduce
    name: str
    kind: str
    pins: tuple[tuple[str, str], ...]
    span: Span
    instance: str = ""
    model: Model | None = None
    model_name: str | None = None
    value: float | None = None
    params: Mapping[str, float] = field(default_factory=dict)
    multiplier: float = 1.0
    waveform: Waveform | None = None
    controls: tuple[str, ...] = ()
    expression: str | None = None
    wrapper: Wrapper | None = None

    @property
    def letter(self) -> str:
        return self.name.rsplit(".", 1)[-1][0]

    @property
    def model_type(self) -> str | None:
        if self.model is None:
            return None
        return self.model.polarity or self.model.type

    def net(self, pin: str) -> str | None:
        for role, net in self.pins:
            if role == pin:
                return net
        return None

    @property
    def nets(self) -> tuple[str, ...]:
        return tuple(net for _, net in self.pins)


@dataclass(frozen=True, slots=True)
class Instance:
    """A subcircuit instance that was flattened: its ports and where it was placed."""

    __reduce__ = positional_reduce

    name: str
    subckt: str
    ports: tuple[tuple[str, str], ...]
    span: Span


@dataclass(frozen=True, slots=True)
class Circuit:
    path: str
    title: str
    devices: Mapping[str, Device]
    nets: tuple[str, ...]
    rails: Mapping[str, float]
    instances: Mapping[str, Instance]
    global_nets: frozenset[str]
    files: tuple[str, ...]
    diagnostics: tuple[Diagnostic, ...]
    sources: Mapping[str, tuple[str, ...]] = field(default_factory=dict)
    directives: tuple[Directive, ...] = ()
    ground: str = GROUND

    def graph(self) -> networkx.MultiGraph[Any]:
        from drivelint.circuit.graph import build_graph

        return build_graph(self)

    def line_text(self, span: Span) -> str:
        lines = self.sources.get(span.path, ())
        return lines[span.line - 1] if 0 < span.line <= len(lines) else ""
