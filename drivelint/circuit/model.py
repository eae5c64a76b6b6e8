"""The elaborated circuit: flat devices with hierarchical names, resolved models, nets."""

from __future__ import annotations

from collections.abc import Iterable, Mapping
from dataclasses import dataclass, field
from typing import TYPE_CHECKING, Any

from drivelint.diagnostics import Diagnostic, Span, positional_reduce
from drivelint.netlist.statements import Directive, Missing

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
    "t": "tline",
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
    """A subcircuit recognised as one MOSFET plus parasitics, or as an IGBT macro (the
    MOSFET that drives a PNP, ``technology = "igbt"``: pins d/g/s then stand for the
    collector, gate and emitter)."""

    __reduce__ = positional_reduce

    subckt: str
    inner_device: str
    gate_resistance: float | None
    body_diode: str | None
    technology: str = ""


# Nominal temperature (°C) a behavioural expression reads for temp/temper when no
# other is given: ngspice's default TNOM and TEMP (ngspice manual, ".options": TNOM=27).
NOMINAL_TEMPERATURE = 27.0


@dataclass(frozen=True, slots=True)
class Behaviour:
    """A value given as an expression of node voltages, branch currents or time.

    It is kept as the expression text with everything needed to evaluate it again
    (parameter values and user functions of its scope, and how the names it reads map
    to flat nets and devices), so it travels between processes as plain data.
    ``value_at_zero`` is its value with every node voltage and branch current at 0 and
    the time at 0 (None when it has none there, e.g. a division by V(x)).
    """

    __reduce__ = positional_reduce

    expression: str
    nets: tuple[tuple[str, str], ...]  # (name as written, flat net)
    currents: tuple[tuple[str, str], ...]  # (source name as written, flat device name)
    dynamic: bool  # reads time, temperature or a time-dependent function
    params: tuple[tuple[str, float], ...]
    functions: tuple[tuple[str, tuple[str, ...], str], ...]  # .func name, params, body
    value_at_zero: float | None

    @property
    def reads(self) -> tuple[str, ...]:
        """The flat nets whose voltages the expression reads, in order, once each."""
        return tuple(dict.fromkeys(net for _, net in self.nets))

    @property
    def reads_currents(self) -> tuple[str, ...]:
        return tuple(dict.fromkeys(device for _, device in self.currents))

    def evaluate(
        self,
        voltages: Mapping[str, float],
        currents: Mapping[str, float] | None = None,
        time: float = 0.0,
        temperature: float = NOMINAL_TEMPERATURE,
    ) -> float:
        """The value at the given flat-net voltages (ground is 0 V), currents and time.

        A pure function of its arguments. Raises ValueError when a voltage or current
        it reads is not given, or the expression has no value there.
        """
        from drivelint.netlist.expressions import (
            Environment,
            ExpressionError,
            UserFunction,
            compile_expression,
        )

        nets = dict(self.nets)
        sources = dict(self.currents)
        params = dict(self.params)
        functions = {
            name: UserFunction(name, args, compile_expression(body))
            for name, args, body in self.functions
        }
        given_currents = currents or {}

        def voltage(name: str) -> float:
            net = nets.get(name, name)
            if net == GROUND:
                return 0.0
            if net not in voltages:
                raise ValueError(f"no voltage given for net '{net}'")
            return voltages[net]

        def probe(kind: str, a: str, b: str | None) -> float | None:
            if kind == "v":
                return voltage(a) - (voltage(b) if b is not None else 0.0)
            if kind == "i":
                device = sources.get(a, a)
                if device not in given_currents:
                    raise ValueError(f"no current given for '{device}'")
                return given_currents[device]
            return time if kind == "time" else temperature

        environment = Environment(params.get, probe, functions.get)
        try:
            return compile_expression(self.expression).evaluate(environment)
        except ExpressionError as exc:
            raise ValueError(exc.message) from None

    def to_json(self) -> dict[str, Any]:
        return {
            "expression": self.expression,
            "nets": list(self.reads),
            "currents": list(self.reads_currents),
            "dynamic": self.dynamic,
            "value_at_0": self.value_at_zero,
        }


@dataclass(frozen=True, slots=True)
class Device:
    """One elaborated device: flat name, kind, pins to nets, model and values."""

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
    behaviour: Behaviour | None = None  # set when the value reads voltages, currents or time

    @property
    def behavioural(self) -> bool:
        return self.behaviour is not None

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
    opaque: bool = False  # its subcircuit is not defined: a block whose pins join nothing


@dataclass(frozen=True, slots=True)
class Circuit:
    """A flattened netlist: devices, nets, rails and what the reader noted."""

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
    missing: tuple[Missing, ...] = ()  # what the deck names but does not hold
    # The circuit as written, on a circuit whose wires (ammeters, nH strays, milliohm parts)
    # were merged (stages/wires.py): the rules that need a stray on a path read it there.
    unmerged: Circuit | None = field(default=None, repr=False, compare=False)

    @property
    def partial(self) -> bool:
        """Read around something missing (an include, a library, a model, a subcircuit)."""
        return bool(self.missing)

    def needs(self, devices: Iterable[str], nets: Iterable[str]) -> tuple[Missing, ...]:
        """What is missing that these devices, or blocks on these nets, depend on.

        A device whose model is missing depends on it; an opaque instance (its
        subcircuit missing) on one of the nets may be the very part that drives them.
        """
        names = {m.name for m in self.missing if m.kind == "model"}
        found: dict[tuple[str, str], Missing] = {}
        by_model = {m.name: m for m in self.missing if m.kind == "model"}
        for name in devices:
            device = self.devices.get(name)
            if device is not None and device.model is None and device.model_name in names:
                missing = by_model[device.model_name]
                found[(missing.kind, missing.name)] = missing
        wanted = set(nets)
        by_subckt = {m.name: m for m in self.missing if m.kind == "subckt"}
        for instance in self.instances.values():
            if instance.opaque and wanted.intersection(net for _, net in instance.ports):
                block = by_subckt.get(instance.subckt)
                if block is not None:
                    found[(block.kind, block.name)] = block
        return tuple(found[key] for key in sorted(found))

    def graph(self) -> networkx.MultiGraph[Any]:
        from drivelint.circuit.graph import build_graph

        return build_graph(self)

    def line_text(self, span: Span) -> str:
        lines = self.sources.get(span.path, ())
        return lines[span.line - 1] if 0 < span.line <= len(lines) else ""
