"""Elaborate a :class:`Deck` into a flat :class:`Circuit`.

Subcircuits are flattened with hierarchical names (``x1.m2``, net ``x1.boot``); models are
resolved through the hierarchy; parameters are evaluated with subcircuit scoping and
instance overrides. A subcircuit that is one MOSFET plus parasitics (the usual shape of a
part maker's MOSFET model) becomes one transistor named after its instance.
"""

from __future__ import annotations

from collections import deque
from collections.abc import Iterable, Mapping, Sequence
from dataclasses import dataclass, field, replace
from itertools import combinations_with_replacement
from typing import TYPE_CHECKING, TypeVar

from drivelint._gc import paused_gc
from drivelint.circuit.model import (
    GROUND,
    KIND_BY_LETTER,
    Behaviour,
    Circuit,
    Device,
    Instance,
    Model,
    Wrapper,
)
from drivelint.circuit.scope import ParamDef, Scope
from drivelint.diagnostics import Diagnostic, DiagnosticError, Severity, Span
from drivelint.limits import Limits
from drivelint.netlist.statements import (
    Assign,
    Deck,
    Element,
    Expr,
    Field,
    FuncCard,
    GlobalCard,
    Group,
    IfBlock,
    Missing,
    ModelCard,
    ParamCard,
    Statement,
    Subckt,
    TranCard,
    Word,
)

if TYPE_CHECKING:
    from drivelint.netlist.expressions import Expression

DEFAULT_GROUND_ALIASES = frozenset({"0", "gnd"})
_Named = TypeVar("_Named", ModelCard, Subckt)

# Pin roles in node order, per element letter (for the fixed-count kinds).
PIN_ROLES: Mapping[str, tuple[str, ...]] = {
    "r": ("p", "n"),
    "c": ("p", "n"),
    "l": ("p", "n"),
    "d": ("a", "k"),
    "j": ("d", "g", "s"),
    "v": ("p", "n"),
    "i": ("p", "n"),
    "b": ("p", "n"),
    "s": ("p", "n", "cp", "cn"),
    "w": ("p", "n"),
}
USAGE: Mapping[str, str] = {
    "r": "R<name> N+ N- VALUE",
    "c": "C<name> N+ N- VALUE",
    "l": "L<name> N+ N- VALUE",
    "k": "K<name> L<a> L<b> [L<c> …] COUPLING",
    "d": "D<name> ANODE CATHODE MODEL",
    "q": "Q<name> C B E [SUBSTRATE] MODEL",
    "m": "M<name> D G S [B] MODEL [W=… L=…]",
    "j": "J<name> D G S MODEL",
    "v": "V<name> N+ N- [DC VALUE] [PULSE(…)|PWL(…)|SIN(…)|EXP(…)]",
    "i": "I<name> N+ N- [DC VALUE] [PULSE(…)|PWL(…)|SIN(…)|EXP(…)]",
    "e": "E<name> N+ N- NC+ NC- GAIN",
    "g": "G<name> N+ N- NC+ NC- GAIN",
    "f": "F<name> N+ N- VNAME GAIN",
    "h": "H<name> N+ N- VNAME GAIN",
    "b": "B<name> N+ N- V=EXPR | I=EXPR",
    "s": "S<name> N+ N- NC+ NC- MODEL",
    "w": "W<name> N+ N- VNAME MODEL",
    "x": "X<name> NODE … SUBCKT [PARAM=VALUE …]",
    "t": "T<name> A+ A- B+ B- Z0=… TD=…",
}
WAVEFORM_KINDS = frozenset({"pulse", "pwl", "sin", "exp", "sine"})
# Other spellings of a waveform keyword, by dialect.
WAVEFORM_ALIASES: Mapping[str, str] = {"sine": "sin"}
# Keys whose value is the element's behavioural expression.
BEHAVIOURAL_KEYS = frozenset({"value", "vol", "v", "i", "cur", "table"})
PASSIVE_KEYS: Mapping[str, tuple[str, str]] = {
    "r": ("r", "resistance"),
    "c": ("c", "capacitance"),
    "l": ("l", "inductance"),
}
# Keys an element's own code reads (not evaluated as plain instance parameters).
SKIPPED_KEYS: Mapping[str, frozenset[str]] = {
    **{letter: BEHAVIOURAL_KEYS for letter in "ebg"},
    **{letter: frozenset(keys) for letter, keys in PASSIVE_KEYS.items()},
    "v": frozenset({"file"}),
    "i": frozenset({"file"}),
}
UNSUPPORTED_WAVEFORMS = frozenset({"sffm", "am", "trnoise", "trrandom", "pat"})
# Parts allowed beside the one MOSFET in a wrapper subcircuit.
WRAPPER_PASSIVES = frozenset({"resistor", "inductor", "capacitor", "diode"})
SERIES_KINDS = frozenset({"resistor", "inductor"})


@dataclass(frozen=True, slots=True)
class ElaborateOptions:
    """What elaboration needs besides the deck: ground names and limits."""

    ground_aliases: frozenset[str] = DEFAULT_GROUND_ALIASES
    limits: Limits = field(default_factory=Limits)


class _LimitReached(Exception):
    """Stops elaboration once the device bound is passed (reported once)."""


@dataclass(slots=True)
class _Block:
    """Where a block of statements is being flattened."""

    scope: Scope
    prefix: str
    ports: Mapping[str, str]
    chain: tuple[str, ...]  # subcircuit names from the top, for self-instantiation
    multiplier: float = 1.0  # product of the m= of the instances above


class _Elaborator:
    def __init__(self, deck: Deck, options: ElaborateOptions) -> None:
        self.deck = deck
        self.options = options
        self.limits = options.limits
        self.grounds = frozenset(a.lower() for a in options.ground_aliases) | {GROUND}
        self.devices: dict[str, Device] = {}
        self.order: list[str] = []  # names in insertion order, for cheap "added since"
        self.instances: dict[str, Instance] = {}
        self.diagnostics: list[Diagnostic] = []
        self.global_nets: set[str] = set()
        self.tran: object = None
        self._models: dict[tuple[int, str], Model | None] = {}
        self._seen_diagnostics: set[tuple[Span, str]] = set()
        # Each element statement's positional fields and assignments, by id(statement).
        self._split: dict[int, tuple[list[Field], dict[str, Assign]]] = {}
        self.missing: dict[tuple[str, str], Missing] = {m_key(m): m for m in deck.missing}

    # -- diagnostics -------------------------------------------------------------------

    def report(self, severity: Severity, span: Span, message: str, code: str = "elaborate") -> None:
        key = (span, message)
        if key in self._seen_diagnostics:
            return
        self._seen_diagnostics.add(key)
        self.diagnostics.append(
            Diagnostic(severity, span, message, self.deck.line_text(span), code)
        )

    def record(self, error: DiagnosticError) -> None:
        d = error.diagnostic
        self.report(d.severity, d.span, d.message, d.code)

    def fail(self, span: Span, message: str, code: str = "elaborate") -> DiagnosticError:
        return DiagnosticError(
            Diagnostic(Severity.ERROR, span, message, self.deck.line_text(span), code)
        )

    # -- scopes --------------------------------------------------------------------------

    def new_scope(
        self, parent: Scope | None, statements: Iterable[Statement]
    ) -> tuple[Scope, list[Statement]]:
        """The scope of a block and its statements, with each ``.if`` resolved."""
        scope = Scope(self.limits, self.deck.line_text, parent)
        effective: list[Statement] = []
        self.collect(scope, statements, effective, parent is None, 0)
        return scope, effective

    def collect(
        self,
        scope: Scope,
        statements: Iterable[Statement],
        out: list[Statement],
        top: bool,
        depth: int,
    ) -> None:
        for statement in statements:
            if isinstance(statement, IfBlock):
                chosen = self.choose(statement, scope)
                if chosen is not None and depth < self.limits.max_if_nesting:
                    self.collect(scope, chosen, out, top, depth + 1)
                continue
            out.append(statement)
            if isinstance(statement, ParamCard):
                for assign in statement.assigns:
                    assert isinstance(assign.value, Expr)
                    # The value's span, so an error's offset in the text lands on its column.
                    scope.params[assign.key] = ParamDef(assign.value.span, text=assign.value.text)
                    scope.forget(assign.key)
            elif isinstance(statement, FuncCard):
                if statement.name in scope.funcs:
                    self.report(
                        Severity.WARNING,
                        statement.span,
                        f"function '{statement.name}' defined again; this definition is used",
                    )
                scope.funcs[statement.name] = statement
            elif isinstance(statement, ModelCard):
                self.define(scope.models, statement, "model")
            elif isinstance(statement, Subckt):
                self.define(scope.subckts, statement, "subcircuit")
            elif isinstance(statement, GlobalCard) and top:
                self.global_nets.update(w.text for w in statement.nets)
            elif isinstance(statement, TranCard) and top and self.tran is None:
                self.tran = statement

    def choose(self, block: IfBlock, scope: Scope) -> tuple[Statement, ...] | None:
        """The branch of an ``.if`` whose condition holds, evaluated in ``scope``."""
        from drivelint.netlist.expressions import BehaviouralValue

        for condition, statements in block.branches:
            if condition is None:
                return statements
            try:
                expression = scope.compile(condition)
                if expression is not None and expression.behavioural:
                    raise BehaviouralValue("", 0)
                holds = scope.number(condition) != 0.0
            except BehaviouralValue:
                self.report(
                    Severity.ERROR,
                    condition.span,
                    "an '.if' condition must depend on parameters only, not on node "
                    "voltages, currents or time; no branch is read",
                    "if",
                )
                return None
            except DiagnosticError as exc:
                self.record(exc)
                self.report(
                    Severity.ERROR,
                    condition.span,
                    "'.if' condition has no value; no branch is read",
                    "if",
                )
                return None
            if holds:
                return statements
        return None

    def define(self, table: dict[str, _Named], statement: _Named, what: str) -> None:
        """Add a definition to its scope's table; a second one wins, with a warning."""
        if statement.name in table:
            self.report(
                Severity.WARNING,
                statement.span,
                f"{what} '{statement.name}' defined again; this definition is used",
            )
        table[statement.name] = statement

    def model(self, name: str, scope: Scope, span: Span) -> Model | None:
        found = scope.find_model(name)
        if found is None:
            return None
        card, owner = found
        key = (id(owner), name)
        if key not in self._models:
            params: dict[str, float] = {}
            for assign in card.params:
                try:
                    params[assign.key] = owner.number(assign.value)
                except DiagnosticError as exc:
                    self.record(exc)
            self._models[key] = Model(card.name, card.type, params, card.span)
        return self._models[key]

    # -- the walk ----------------------------------------------------------------------------

    def run(self) -> Circuit:
        top, statements = self.new_scope(None, self.deck.statements)
        self.transient = self.transient_settings(top)
        over = _first_over_bound(statements, self.limits.max_devices)
        if over is not None:
            # Counted before anything is built: a small deck of nested instances can
            # stand for billions of devices, and building them would take minutes.
            self.report(
                Severity.ERROR,
                over,
                f"the netlist flattens to more than {self.limits.max_devices} devices "
                "(limit max_devices); not elaborated",
                "limit",
            )
        else:
            try:
                self.flatten(statements, _Block(top, "", {}, ()))
            except _LimitReached:
                pass
        nets = sorted({net for d in self.devices.values() for _, net in d.pins})
        return Circuit(
            path=self.deck.path,
            title=self.deck.title,
            devices=self.devices,
            nets=tuple(nets),
            rails=find_rails(self.devices.values()),
            instances=self.instances,
            global_nets=frozenset(self.global_nets),
            files=self.deck.files,
            diagnostics=(*self.deck.diagnostics, *self.diagnostics),
            sources=self.deck.sources,
            directives=self.deck.directives,
            missing=tuple(self.missing.values()),
        )

    def transient_settings(self, scope: Scope) -> object:
        """TSTEP and TSTOP of the deck's ``.tran``, for the source defaults.

        An analysis card never fails a read: an option drivelint does not know, a value
        it cannot use or a zero step is a warning, and that value is left out.
        """
        from drivelint.netlist.waveforms import TransientSettings, WaveformError, check_tran_time

        card = self.tran
        if not isinstance(card, TranCard):
            return TransientSettings()
        numbers: list[tuple[float, Field]] = []
        for item in card.fields:
            if (
                isinstance(item, Word)
                and not _looks_numeric(item)
                and scope.param(item.text) is None
            ):
                if item.text not in ("uic", "startup"):
                    self.report(
                        Severity.WARNING, item.span, f"'.tran' option '{item.raw}' ignored", "tran"
                    )
                continue
            if isinstance(item, Assign):
                continue
            try:
                numbers.append((scope.number(item), item))
            except DiagnosticError as exc:
                d = exc.diagnostic
                self.report(Severity.WARNING, d.span, f"'.tran' value ignored: {d.message}", "tran")
        if len(numbers) == 1:
            # One time alone is the stop time (as LTspice writes .tran TSTOP).
            numbers.insert(0, (0.0, numbers[0][1]))
        settings: dict[str, float | None] = {"tstep": None, "tstop": None}
        for name, (number, item) in zip(("tstep", "tstop"), numbers):
            try:
                check_tran_time(name, number)
            except WaveformError as exc:
                if not (name == "tstep" and number == 0.0 and len(card.fields) == 1):
                    self.report(
                        Severity.WARNING, item.span, f"{exc}; the value is left out", "tran"
                    )
                continue
            settings[name] = number
        return TransientSettings(tstep=settings["tstep"], tstop=settings["tstop"])

    def flatten(self, statements: Sequence[Statement], block: _Block) -> None:
        seen: dict[str, Element] = {}
        for statement in statements:
            if not isinstance(statement, Element):
                continue
            first = seen.get(statement.name)
            if first is not None:
                # ngspice turns an R, C or L given by an expression into sources of its
                # own, so a plain part of the same name still loads there: a warning.
                renamed = any(map(_valued_by_expression, (first, statement)))
                self.report(
                    Severity.WARNING if renamed else Severity.ERROR,
                    statement.span,
                    f"duplicate element name '{statement.name}'; this line is ignored",
                )
                continue
            seen[statement.name] = statement
            try:
                if statement.letter == "x":
                    self.instantiate(statement, block)
                else:
                    self.add(self.device(statement, block))
            except DiagnosticError as exc:
                self.record(exc)

    def add(self, device: Device) -> None:
        if len(self.devices) >= self.limits.max_devices:
            self.report(
                Severity.ERROR,
                device.span,
                f"more than {self.limits.max_devices} devices after flattening "
                "(limit max_devices); elaboration stopped here",
                "limit",
            )
            raise _LimitReached
        self.devices[device.name] = device
        self.order.append(device.name)

    def net(self, word: Field, block: _Block) -> str:
        if not isinstance(word, Word):
            raise self.fail(word.span, "expected a node name here")
        name = word.text
        if name in self.grounds:
            return GROUND
        if name in block.ports:
            return block.ports[name]
        if name in self.global_nets or not block.prefix:
            return name
        return block.prefix + name

    # -- subcircuit instances ---------------------------------------------------------------

    def instantiate(self, element: Element, block: _Block) -> None:
        positional = [f for f in element.fields if not isinstance(f, Assign)]
        assigns = [f for f in element.fields if isinstance(f, Assign)]
        words = [f for f in positional if not (isinstance(f, Word) and f.text == "params:")]
        if not words or not isinstance(words[-1], Word):
            raise self.fail(element.span, f"expected '{USAGE['x']}'")
        name_word = words[-1]
        assert isinstance(name_word, Word)
        definition = block.scope.find_subckt(name_word.text)
        if definition is None:
            self.opaque_instance(element, name_word, words[:-1], block)
            return
        nodes = words[:-1]
        if len(nodes) != len(definition.ports):
            raise self.fail(
                element.span,
                f"'{element.name}' connects {len(nodes)} nodes but subcircuit "
                f"'{definition.name}' has {len(definition.ports)} ports "
                f"({' '.join(p.text for p in definition.ports)})",
                "node-count",
            )
        if definition.name in block.chain:
            chain = " -> ".join([*block.chain, definition.name])
            raise self.fail(
                element.span,
                f"subcircuit '{definition.name}' instantiates itself: {chain}",
                "recursion",
            )
        if len(block.chain) >= self.limits.max_instance_depth:
            raise self.fail(
                element.span,
                f"subcircuits nested deeper than {self.limits.max_instance_depth} instances "
                "(limit max_instance_depth)",
                "limit",
            )
        name = block.prefix + element.name
        ports = {port.text: self.net(node, block) for port, node in zip(definition.ports, nodes)}
        scope, body = self.new_scope(block.scope, definition.body)
        # Defaults are evaluated in the new scope (they may refer to each other); the
        # instance's overrides are evaluated where the instance stands.
        for assign in definition.params:
            scope.params.setdefault(assign.key, self.param_def(assign, scope))
        known = {a.key for a in definition.params} | set(scope.params)
        multiplier = block.multiplier
        for assign in assigns:
            if assign.key == "m" and "m" not in known:
                # An instance multiplier parallels every device inside the instance.
                multiplier *= block.scope.number(assign.value)
                continue
            if assign.key not in known:
                self.report(
                    Severity.WARNING,
                    assign.span,
                    f"subcircuit '{definition.name}' has no parameter '{assign.key}'",
                )
            scope.params[assign.key] = ParamDef(assign.span, value=block.scope.number(assign.value))
        self.instances[name] = Instance(
            name,
            definition.name,
            tuple((p.text, ports[p.text]) for p in definition.ports),
            element.span,
        )
        inner = _Block(scope, name + ".", ports, (*block.chain, definition.name), multiplier)
        before = len(self.order)
        self.flatten(body, inner)
        self.collapse_wrapper(name, definition, ports, before, element.span)

    def note_missing(self, kind: str, name: str, span: Span, message: str) -> None:
        missing = Missing(kind, name, span)
        self.missing.setdefault(m_key(missing), missing)
        self.report(Severity.WARNING, span, message, "missing")

    def opaque_instance(
        self, element: Element, name_word: Word, nodes: Sequence[Field], block: _Block
    ) -> None:
        """An instance of a subcircuit that is not defined: a block whose pins join nothing."""
        name = block.prefix + element.name
        nets = [self.net(node, block) for node in nodes]
        self.note_missing(
            "subckt",
            name_word.text,
            name_word.span,
            f"subcircuit '{name_word.text}' is not defined; '{name}' is kept as an opaque block "
            "whose pins join nothing",
        )
        self.instances[name] = Instance(
            name,
            name_word.text,
            tuple((str(index), net) for index, net in enumerate(nets, start=1)),
            element.span,
            opaque=True,
        )

    def param_def(self, assign: Assign, scope: Scope) -> ParamDef:
        value = assign.value
        if isinstance(value, Word):
            return ParamDef(value.span, text=value.text, scope=scope)
        if isinstance(value, Expr):
            return ParamDef(value.span, text=value.text, scope=scope)
        raise self.fail(assign.span, f"parameter '{assign.key}' needs a value")

    def collapse_wrapper(
        self, name: str, definition: Subckt, ports: Mapping[str, str], before: int, span: Span
    ) -> None:
        """Replace a one-MOSFET-plus-parasitics instance by one transistor device."""
        if not _could_be_wrapper(definition):
            return
        added = [self.devices[n] for n in self.order[before:] if n in self.devices]
        transistors = [d for d in added if d.kind == "mosfet"]
        if (
            len(transistors) != 1
            or any(
                d.kind not in WRAPPER_PASSIVES | {"bjt"} for d in added if d is not transistors[0]
            )
            or sum(d.kind == "bjt" for d in added) > 1
        ):
            return
        fet = transistors[0]
        bjts = [d for d in added if d.kind == "bjt"]
        if bjts:
            self.collapse_igbt(name, definition, ports, fet, bjts, added, span)
            return
        mapping = map_wrapper_ports(fet, added, ports)
        if mapping is None:
            return
        for device in added:
            del self.devices[device.name]
        pins = tuple(mapping.pins)
        wrapper = Wrapper(definition.name, fet.name, mapping.gate_resistance, mapping.body_diode)
        self.add(
            replace(
                fet,
                name=name,
                pins=pins,
                span=span,
                instance=name.rsplit(".", 1)[0] if "." in name else "",
                model_name=definition.name,
                wrapper=wrapper,
            )
        )

    def collapse_igbt(
        self,
        name: str,
        definition: Subckt,
        ports: Mapping[str, str],
        fet: Device,
        bjts: Sequence[Device],
        added: Sequence[Device],
        span: Span,
    ) -> None:
        """Replace an IGBT macro (an N-channel MOSFET whose drain feeds a PNP's base, the
        PNP's emitter the collector, its collector and the MOSFET's source the emitter;
        ports named collector, gate, emitter) by one N-channel switch: d, g, s stand for the
        collector, gate and emitter. Anything else stays flattened."""
        mapping = map_igbt_ports(fet, bjts[0], added, ports)
        if mapping is None:
            return
        for device in added:
            del self.devices[device.name]
        wrapper = Wrapper(
            definition.name, fet.name, mapping.gate_resistance, mapping.body_diode, "igbt"
        )
        self.add(
            replace(
                fet,
                name=name,
                pins=mapping.pins,
                span=span,
                instance=name.rsplit(".", 1)[0] if "." in name else "",
                model_name=definition.name,
                wrapper=wrapper,
            )
        )

    # -- devices -------------------------------------------------------------------------------

    def device(self, element: Element, block: _Block) -> Device:
        letter = element.letter
        split = self._split.get(id(element))
        if split is None:
            # Once per statement, however many instances flatten it.
            fields = element.fields
            if letter in "rcl" and any(_is_tc(f) for f in fields):
                fields = self.temperature_coefficients(element)
            split = (
                [f for f in fields if not isinstance(f, Assign)],
                {f.key: f for f in fields if isinstance(f, Assign)},
            )
            self._split[id(element)] = split
        positional, assigns = split
        name = block.prefix + element.name
        scope = block.scope
        params: dict[str, float] = {}
        skipped = SKIPPED_KEYS.get(letter, frozenset())
        for key, assign in assigns.items():
            if key in skipped:
                continue
            try:
                params[key] = scope.number(assign.value)
            except DiagnosticError as exc:
                self.record(exc)
        multiplier = params.get("m", 1.0)
        if not multiplier > 0:
            raise self.fail(
                assigns["m"].span, f"multiplier m={multiplier:g}: it must be positive", "value"
            )
        base = Device(
            name=name,
            kind=KIND_BY_LETTER[letter],
            pins=(),
            span=element.span,
            instance=block.prefix[:-1],
            params=params,
            multiplier=params.pop("m", 1.0) * block.multiplier,
        )

        if letter in "rcl":
            return self.passive(element, base, positional, assigns, block)
        if letter in "dqmj":
            return self.semiconductor(element, base, positional, block)
        if letter in "vi":
            return self.source(element, base, positional, assigns, block)
        if letter in "eg":
            return self.controlled(element, base, positional, assigns, block)
        if letter in "fh":
            nodes = self.nodes(element, positional, 2, block)
            if len(positional) > 2 and isinstance(positional[2], Word):
                if positional[2].text == "poly":
                    return self.polynomial(element, base, nodes, positional[3:], block)
            if len(positional) < 3 or not isinstance(positional[2], Word):
                raise self.fail(element.span, f"expected '{USAGE[letter]}'", "syntax")
            gain = self.optional_number(positional[3:4], scope)
            return _with(
                base,
                pins=tuple(zip(("p", "n"), nodes)),
                controls=(block.prefix + positional[2].text,),
                value=gain,
            )
        if letter == "b":
            nodes = self.nodes(element, positional, 2, block)
            expr = next((assigns[k].value for k in ("v", "i", "vol", "cur") if k in assigns), None)
            if expr is None:
                raise self.fail(element.span, f"expected '{USAGE['b']}'", "syntax")
            return _with(
                base,
                pins=tuple(zip(("p", "n"), nodes)),
                expression=_field_text(expr),
                behaviour=self.behaviour_of(expr, block),
            )
        if letter in "sw":
            count = 4 if letter == "s" else 2
            nodes = self.nodes(element, positional, count, block)
            rest = positional[count:]
            controls: tuple[str, ...] = ()
            if letter == "w":
                if not rest or not isinstance(rest[0], Word):
                    raise self.fail(element.span, f"expected '{USAGE['w']}'", "syntax")
                controls = (block.prefix + rest[0].text,)
                rest = rest[1:]
            model, model_name = self.model_or_missing(element, rest[:1], block)
            return _with(
                base,
                pins=tuple(zip(PIN_ROLES[letter], nodes)),
                controls=controls,
                model=model,
                model_name=model_name,
            )
        if letter == "k":
            # two inductors (SPICE3), or more with one coupling among them all (the form
            # PSpice and LTspice accept): the coupling is the last field
            coupled = positional[:-1]
            if len(coupled) < 2 or not all(isinstance(f, Word) for f in coupled):
                raise self.fail(element.span, f"expected '{USAGE['k']}'", "syntax")
            names = tuple(block.prefix + f.text for f in coupled if isinstance(f, Word))
            return _with(base, controls=names, value=scope.number(positional[-1]))
        if letter == "t":
            return self.line(element, base, positional, block)
        raise self.fail(element.span, f"element kind '{letter}' is not handled")

    def temperature_coefficients(self, element: Element) -> tuple[Field, ...]:
        """``TC=a, b`` / ``TC=a b`` / ``TC a b`` as ``tc1=a tc2=b`` (PSpice forms)."""
        fields = list(element.fields)
        out: list[Field] = []
        index = 0
        while index < len(fields):
            item = fields[index]
            index += 1
            bare = isinstance(item, Word) and item.text == "tc"
            if not (bare or (isinstance(item, Assign) and item.key == "tc")):
                out.append(item)
                continue
            values: list[Field] = []
            if isinstance(item, Assign):
                value = item.value
                values.extend(value.items if isinstance(value, Group) else (value,))
            while index < len(fields) and len(values) < 2 and _looks_numeric(fields[index]):
                values.append(fields[index])
                index += 1
            given = {f.key for f in fields if isinstance(f, Assign)}
            for key, value in zip(("tc1", "tc2"), values):
                if key not in given and not isinstance(value, (Assign, Group)):
                    out.append(Assign(key, value, item.span))
        return tuple(out)

    def behaviour_of(self, item: Field, block: _Block) -> Behaviour | None:
        """The behaviour of a value field (None for a plain number)."""
        expression = block.scope.compile(item)
        if expression is None:
            return None
        return self.behaviour(expression, block, item.span)

    def behaviour(self, expression: Expression, block: _Block, span: Span) -> Behaviour:
        """A behavioural value as plain data: what it reads, mapped to flat names."""
        scope = block.scope
        nets: dict[str, str] = {}
        currents: dict[str, str] = {}
        for kind, a, b in sorted(expression.probes, key=lambda p: (p[0], p[1], p[2] or "")):
            if kind == "v":
                for node in (a, b):
                    if node is not None:
                        nets[node] = self.net_named(node, block)
            elif kind == "i":
                currents[a] = block.prefix + a
        names = set(expression.names) | set(expression.constants)
        functions: dict[str, tuple[str, tuple[str, ...], str]] = {}
        pending = list(expression.calls)
        dynamic = expression.dynamic
        while pending and len(functions) < 256:
            name = pending.pop()
            if name in functions:
                continue
            found = scope.find_function(name)
            if found is None:
                continue
            body = found.body
            functions[name] = (name, found.params, body.text)
            names |= (body.names | body.constants) - set(found.params)
            pending.extend(body.calls)
            dynamic = dynamic or body.dynamic
            for kind, a, b in body.probes:
                if kind == "v":
                    for node in (a, b):
                        if node is not None:
                            nets[node] = self.net_named(node, block)
                elif kind == "i":
                    currents[a] = block.prefix + a
        params: dict[str, float] = {}
        for name in sorted(names):
            value = scope.param(name)
            if value is not None:
                params[name] = value
        draft = Behaviour(
            expression.text,
            tuple(nets.items()),
            tuple(currents.items()),
            dynamic,
            tuple(params.items()),
            tuple(functions[name] for name in sorted(functions)),
            None,
        )
        try:
            at_zero: float | None = draft.evaluate(
                dict.fromkeys(draft.reads, 0.0), dict.fromkeys(draft.reads_currents, 0.0)
            )
        except ValueError as exc:
            message = str(exc)
            if "undefined parameter" in message or "unknown function" in message:
                raise self.fail(span, f"in expression '{expression.text}': {message}") from None
            at_zero = None
        return replace(draft, value_at_zero=at_zero)

    def net_named(self, name: str, block: _Block) -> str:
        """The flat net of a node named inside ``block`` (as V(name) reads it)."""
        if name in self.grounds:
            return GROUND
        if name in block.ports:
            return block.ports[name]
        if name in self.global_nets or not block.prefix:
            return name
        return block.prefix + name

    def line(
        self, element: Element, base: Device, positional: Sequence[Field], block: _Block
    ) -> Device:
        """A lossless line: an ideal delay TD (or NL/F) between its two ports."""
        nodes = self.nodes(element, positional, 4, block)
        params = dict(base.params)
        if "td" not in params and "f" in params and params["f"] > 0:
            params["td"] = params.get("nl", 0.25) / params["f"]
        return _with(base, pins=tuple(zip(("p1", "n1", "p2", "n2"), nodes)), params=params)

    def nodes(
        self, element: Element, positional: Sequence[Field], count: int, block: _Block
    ) -> list[str]:
        letter = element.letter
        if len(positional) < count or not all(isinstance(f, Word) for f in positional[:count]):
            found = sum(1 for f in positional[:count] if isinstance(f, Word))
            raise self.fail(
                element.span,
                f"'{element.name}' needs {count} nodes, found {found}: expected '{USAGE[letter]}'",
                "node-count",
            )
        return [self.net(f, block) for f in positional[:count]]

    def optional_number(self, items: Sequence[Field], scope: Scope) -> float | None:
        return scope.number(items[0]) if items else None

    def model_or_missing(
        self, element: Element, items: Sequence[Field], block: _Block
    ) -> tuple[Model | None, str]:
        """The named model, or (None, name) with the name recorded as missing."""
        if not items or not isinstance(items[0], Word):
            raise self.fail(
                element.span,
                f"'{element.name}' needs a model name: expected '{USAGE[element.letter]}'",
                "syntax",
            )
        word = items[0]
        assert isinstance(word, Word)
        model = self.model(word.text, block.scope, word.span)
        if model is None:
            self.missing_model(element, word, KIND_BY_LETTER[element.letter], block)
        return model, word.text

    def missing_model(self, element: Element, word: Word, kind: str, block: _Block) -> None:
        self.note_missing(
            "model",
            word.text,
            word.span,
            f"model '{word.text}' is not defined; '{block.prefix + element.name}' is kept as a "
            f"{kind} of unknown type",
        )

    def passive(
        self,
        element: Element,
        base: Device,
        positional: Sequence[Field],
        assigns: Mapping[str, Assign],
        block: _Block,
    ) -> Device:
        letter = element.letter
        nodes = self.nodes(element, positional, 2, block)
        rest = list(positional[2:])
        model: Model | None = None
        given: Field | None = None
        for item in rest:
            if isinstance(item, Word) and model is None and not _looks_numeric(item):
                found = self.model(item.text, block.scope, item.span)
                if found is not None:
                    model = found
                    continue
            if given is None and isinstance(item, (Word, Expr)):
                given = item
                continue
            raise self.fail(item.span, f"unexpected field: expected '{USAGE[letter]}'", "syntax")
        for alias in PASSIVE_KEYS[letter]:
            if given is None and alias in assigns:
                given = assigns[alias].value
        value: float | None = None
        behaviour: Behaviour | None = None
        if given is not None:
            # Only an expression that reads voltages, currents or time is behavioural; one
            # of parameters only is a plain value (the common case, kept fast).
            expression = (
                block.scope.compile(given)
                if isinstance(given, Expr) and _may_be_behavioural(given.text)
                else None
            )
            if expression is not None and expression.behavioural:
                behaviour = self.behaviour(expression, block, given.span)
            if behaviour is None:
                value = block.scope.number(given)
            else:
                # The rules read the value at 0 V; the behaviour evaluates it at a bias.
                value = behaviour.value_at_zero
        if value is None and model is None and behaviour is None:
            raise self.fail(
                element.span, f"'{element.name}' has no value: expected '{USAGE[letter]}'", "syntax"
            )
        if value is not None and (value < 0 or (value == 0 and letter in "cl")):
            # No part has these values; the rules would divide by them or report nonsense.
            what = {"r": "resistance", "c": "capacitance", "l": "inductance"}[letter]
            least = "not be negative" if letter == "r" else "be positive"
            raise self.fail(
                element.span,
                f"'{element.name}' has {what} {value:g}; it must {least}",
                "value",
            )
        return _with(
            base,
            pins=tuple(zip(PIN_ROLES[letter], nodes)),
            value=value,
            model=model,
            model_name=model.name if model else None,
            expression=behaviour.expression if behaviour else None,
            behaviour=behaviour,
        )

    def semiconductor(
        self, element: Element, base: Device, positional: Sequence[Field], block: _Block
    ) -> Device:
        letter = element.letter
        words = [f for f in positional if isinstance(f, Word)]
        counts = {"d": (2,), "j": (3,), "q": (3, 4, 5), "m": (4, 3, 5)}[letter]
        model: Model | None = None
        for count in counts:
            if len(positional) > count and isinstance(positional[count], Word):
                candidate = positional[count]
                assert isinstance(candidate, Word)
                model = self.model(candidate.text, block.scope, candidate.span)
                if model is not None:
                    break
        else:
            smallest = counts[0] if letter != "m" else 3
            if len(words) <= smallest or len(positional) <= min(counts):
                raise self.fail(
                    element.span,
                    f"'{element.name}' needs {_count_text(counts)} nodes and a model: "
                    f"expected '{USAGE[letter]}'",
                    "node-count",
                )
            # The model is missing: it is named by the last word that is not a number,
            # and the element keeps the kind its letter and node count give.
            named = [
                i for i, f in enumerate(positional) if isinstance(f, Word) and _names_a_model(f)
            ]
            count = named[-1] if named else -1
            if count not in counts:
                guess = next(positional[c] for c in counts if c < len(positional))
                raise self.fail(
                    guess.span, f"model '{_field_text(guess)}' is not defined", "undefined"
                )
            candidate = positional[count]
            assert isinstance(candidate, Word)
            self.missing_model(element, candidate, base.kind, block)
        nodes = self.nodes(element, positional, count, block)
        if model is not None and model.kind != base.kind:
            raise self.fail(
                candidate.span,
                f"model '{model.name}' is a {model.type.upper()} model, not one for "
                f"element '{element.name}' ({base.kind})",
                "model-type",
            )
        if letter == "q":
            roles: tuple[str, ...] = ("c", "b", "e", "s", "t")[:count]
        elif letter == "m":
            roles = ("d", "g", "s", "b", "t")[:count]
            if count == 3 and (model is None or model.type != "vdmos"):
                self.report(
                    Severity.NOTE,
                    element.span,
                    f"'{element.name}' has 3 nodes; its bulk is taken as its source",
                )
        else:
            roles = PIN_ROLES[letter]
        extras = positional[count + 1 :]
        value = None
        if extras and isinstance(extras[0], (Word, Expr)) and _looks_numeric(extras[0]):
            value = block.scope.number(extras[0])  # AREA
        return _with(
            base,
            pins=tuple(zip(roles, nodes)),
            model=model,
            model_name=model.name if model is not None else candidate.text,
            value=value,
        )

    def source(
        self,
        element: Element,
        base: Device,
        positional: Sequence[Field],
        assigns: Mapping[str, Assign],
        block: _Block,
    ) -> Device:
        from drivelint.netlist.waveforms import WaveformError, build_waveform

        nodes = self.nodes(element, positional, 2, block)
        scope = block.scope
        items = list(positional[2:])
        dc: float | None = None
        if "dc" in assigns:
            dc = scope.number(assigns["dc"].value)
        kind: str | None = None
        args: list[float] = []
        index = 0
        while index < len(items):
            item = items[index]
            word = item.text if isinstance(item, Word) else None
            if word == "dc" and index + 1 < len(items) and _looks_numeric(items[index + 1]):
                dc = scope.number(items[index + 1])
                index += 2
            elif word == "dc":
                self.report(
                    Severity.WARNING,
                    item.span,
                    f"'DC' of source '{element.name}' has no value; taken as 0",
                    "waveform",
                )
                dc = 0.0 if dc is None else dc
                index += 1
            elif word == "ac":
                index += 1
                for _ in range(2):
                    if index < len(items) and _looks_numeric(items[index]):
                        index += 1
            elif word in WAVEFORM_KINDS:
                kind = WAVEFORM_ALIASES.get(word, word)
                index += 1
                if index < len(items) and isinstance(items[index], Group):
                    # PWL (t1 v1) (t2 v2) …: every group that follows holds points.
                    while index < len(items) and isinstance(items[index], Group):
                        group = items[index]
                        assert isinstance(group, Group)
                        args.extend(scope.number(a) for a in _flat_values(group))
                        index += 1
                        if kind != "pwl":
                            break
                else:
                    while index < len(items) and _looks_numeric(items[index]):
                        args.append(scope.number(items[index]))
                        index += 1
            elif (
                word in ("tbl", "table")
                and index + 1 < len(items)
                and isinstance(items[index + 1], Group)
            ):
                # LTspice's table source: its value a piecewise-linear function of the
                # voltage across it (from memory: the LTspice help, "Current Source").
                # Read as behavioural, table(V(n+, n-), x1, y1, ...).
                group = items[index + 1]
                assert isinstance(group, Group)
                return self.source_table(element, base, nodes, group, block)
            elif word in UNSUPPORTED_WAVEFORMS:
                self.report(
                    Severity.WARNING,
                    item.span,
                    f"'{word.upper()}' sources are not modelled; "
                    f"'{element.name}' is taken at its DC value",
                    "unsupported",
                )
                index = len(items)
            elif _looks_numeric(item) and dc is None and kind is None:
                dc = scope.number(item)
                index += 1
            elif word is not None and word.startswith("distof"):
                index += 1
            else:
                raise self.fail(
                    item.span,
                    f"unexpected '{_field_text(item)}' in source: "
                    f"expected '{USAGE[element.letter]}'",
                    "syntax",
                )
        if kind == "sin" and len(args) > 3 and args[3] < 0:
            args = self.advance_sine(element, args)
        # r= and td= belong to PWL; elsewhere they are instance parameters of no concern.
        options = (
            {k: v for k, v in base.params.items() if k in ("r", "td")} if kind == "pwl" else {}
        )
        try:
            if kind is not None:
                waveform = build_waveform(kind, args, options, self.transient)  # type: ignore[arg-type]
            else:
                waveform = build_waveform("dc", [dc or 0.0], {}, self.transient)  # type: ignore[arg-type]
        except WaveformError as exc:
            raise self.fail(element.span, f"source '{element.name}': {exc}", "waveform") from None
        return _with(
            base,
            pins=tuple(zip(("p", "n"), nodes)),
            value=dc if dc is not None else (waveform.dc_level() if kind is None else None),
            waveform=waveform,
        )

    def source_table(
        self, element: Element, base: Device, nodes: Sequence[str], group: Group, block: _Block
    ) -> Device:
        from drivelint.netlist.expressions import ExpressionError, compile_expression

        numbers = [block.scope.number(v) for v in _flat_values(group)]
        text = "table(v(p, n), " + ", ".join(f"{n!r}" for n in numbers) + ")"
        behaviour: Behaviour | None = None
        try:
            expression = compile_expression(text, self.limits)
        except ExpressionError as exc:
            raise self.fail(group.span, f"source '{element.name}': {exc.message}") from None
        # The table reads the source's own terminals, named p and n here.
        local = _Block(
            block.scope, block.prefix, {**block.ports, "p": nodes[0], "n": nodes[1]}, block.chain
        )
        behaviour = self.behaviour(expression, local, group.span)
        return _with(base, pins=tuple(zip(("p", "n"), nodes)), expression=text, behaviour=behaviour)

    def advance_sine(self, element: Element, args: list[float]) -> list[float]:
        """A SIN with a negative delay: the same sine started earlier, as a phase.

        ngspice runs the sine from TD on, so a negative TD is a sine already running
        at t = 0: TD = 0 and the phase advanced by 360°·FREQ·|TD| (undamped). A damped
        one is read from t = 0 with a warning, its envelope not shifted.
        """
        values = list(args) + [0.0] * (6 - len(args))
        delay = values[3]
        freq, theta = values[2], values[4]
        values[3] = 0.0
        if freq > 0 and theta == 0:
            values[5] = values[5] + 360.0 * freq * -delay
            how = f"read as TD = 0 with the phase advanced by {360.0 * freq * -delay:g}°"
        else:
            how = "read as TD = 0"
        self.report(
            Severity.WARNING,
            element.span,
            f"source '{element.name}': SIN delay is negative ({delay:g} s); {how}",
            "waveform",
        )
        return values[: max(len(args), 6 if values[5] else 4)]

    def controlled(
        self,
        element: Element,
        base: Device,
        positional: Sequence[Field],
        assigns: Mapping[str, Assign],
        block: _Block,
    ) -> Device:
        if "table" in assigns:
            nodes = self.nodes(element, positional, 2, block)
            points = [f for f in positional[2:] if isinstance(f, Group)]
            return self.table(base, nodes, assigns["table"], points, block)
        behavioural = next((assigns[k] for k in ("value", "vol", "cur") if k in assigns), None)
        if behavioural is not None or (
            len(positional) > 2 and isinstance(positional[2], (Expr, Group))
        ):
            nodes = self.nodes(element, positional, 2, block)
            field_ = behavioural.value if behavioural else positional[2]
            text = _field_text(field_)
            behaviour = self.behaviour_of(field_, block) if not isinstance(field_, Group) else None
            return _with(
                base, pins=tuple(zip(("p", "n"), nodes)), expression=text, behaviour=behaviour
            )
        if len(positional) > 2 and isinstance(positional[2], Word) and positional[2].text == "poly":
            nodes = self.nodes(element, positional, 2, block)
            return self.polynomial(element, base, nodes, positional[3:], block)
        nodes = self.nodes(element, positional, 4, block)
        gain = self.optional_number(positional[4:5], block.scope)
        return _with(base, pins=tuple(zip(("p", "n", "cp", "cn"), nodes)), value=gain)

    def table(
        self,
        base: Device,
        nodes: Sequence[str],
        assign: Assign,
        points: Sequence[Group],
        block: _Block,
    ) -> Device:
        """``TABLE {expr} = (x, y) …`` read as the expression table(expr, x1, y1, …)."""
        from drivelint.netlist.expressions import ExpressionError, compile_expression

        values = [v for group in points for v in _flat_values(group)]
        numbers = [block.scope.number(v) for v in values]
        inner = _field_text(assign.value)
        text = f"table(({inner}), " + ", ".join(f"{n!r}" for n in numbers) + ")"
        behaviour: Behaviour | None = None
        try:
            expression = compile_expression(text, self.limits)
        except ExpressionError as exc:
            self.report(
                Severity.WARNING,
                assign.span,
                f"TABLE of '{base.name}' is not evaluated: {exc.message}",
                "unsupported",
            )
        else:
            behaviour = self.behaviour(expression, block, assign.span)
        return _with(base, pins=tuple(zip(("p", "n"), nodes)), expression=text, behaviour=behaviour)

    def polynomial(
        self,
        element: Element,
        base: Device,
        nodes: Sequence[str],
        rest: Sequence[Field],
        block: _Block,
    ) -> Device:
        """``POLY(n)`` controls and coefficients, read as the polynomial they define.

        The terms come in the SPICE2 order the ngspice manual gives for polynomial
        sources: the constant, each control, then the products of two, three, …
        controls with non-decreasing indices (p0 + p1·a + p2·b + p3·a² + p4·a·b + p5·b² …).
        """
        from drivelint.netlist.expressions import ExpressionError, compile_expression

        if not rest or not isinstance(rest[0], Group) or len(rest[0].items) != 1:
            raise self.fail(element.span, "expected 'POLY(n)' followed by the controls", "syntax")
        dimensions = block.scope.number(rest[0].items[0])
        limit = self.limits.max_poly_dimensions
        if dimensions != int(dimensions) or not 1 <= dimensions <= limit:
            raise self.fail(
                rest[0].span,
                f"POLY({dimensions:g}): expected a whole number of controls from 1 to {limit} "
                "(limit max_poly_dimensions)",
                "limit" if dimensions > limit else "syntax",
            )
        count = int(dimensions)
        by_current = element.letter in "fh"
        width = 1 if by_current else 2
        controls = list(rest[1 : 1 + count * width])
        if len(controls) < count * width or not all(isinstance(c, Word) for c in controls):
            raise self.fail(
                element.span,
                f"POLY({count}) needs {count * width} control "
                f"{'sources' if by_current else 'nodes'} before its coefficients",
                "node-count",
            )
        words = [c.text for c in controls if isinstance(c, Word)]
        if by_current:
            variables = [f"i({w})" for w in words]
        else:
            variables = [f"v({words[2 * k]},{words[2 * k + 1]})" for k in range(count)]
        coefficients = [block.scope.number(c) for c in rest[1 + count * width :]]
        terms: list[str] = []
        degree = 0
        remaining = list(coefficients)
        while remaining:
            for combination in combinations_with_replacement(range(count), degree):
                if not remaining:
                    break
                coefficient = remaining.pop(0)
                if coefficient:
                    factors = "".join(f"*{variables[k]}" for k in combination)
                    terms.append(f"({coefficient!r}){factors}")
            degree += 1
        text = " + ".join(terms) or "0"
        behaviour: Behaviour | None = None
        try:
            expression = compile_expression(text, self.limits)
        except ExpressionError as exc:
            self.report(
                Severity.WARNING,
                element.span,
                f"POLY of '{base.name}' is not evaluated: {exc.message}",
                "unsupported",
            )
        else:
            behaviour = self.behaviour(expression, block, element.span)
        controls_out = tuple(block.prefix + w for w in words) if by_current else ()
        return _with(
            base,
            pins=tuple(zip(("p", "n"), nodes)),
            expression=text,
            behaviour=behaviour,
            controls=controls_out,
        )


def _could_be_wrapper(definition: Subckt) -> bool:
    """The body's element letters allow the one-MOSFET-plus-parasitics shape, or an IGBT
    macro's (one MOSFET and one bipolar transistor, ports named for an IGBT)."""
    letters = [s.letter for s in definition.body if isinstance(s, Element)]
    if letters.count("m") != 1 or not all(letter in "mrlcdq" for letter in letters):
        return False
    return "q" not in letters or (letters.count("q") == 1 and _igbt_ports(definition) is not None)


# Port names of an IGBT model: the trade's usual names for collector, gate and emitter
# (common practice); an "E" that is a Kelvin emitter is named apart (ek, es) and is not one.
IGBT_PORT_NAMES: Mapping[str, frozenset[str]] = {
    "c": frozenset({"c", "col", "coll", "collector"}),
    "g": frozenset({"g", "gate"}),
    "e": frozenset({"e", "em", "emit", "emitter"}),
}


def _igbt_ports(definition: Subckt) -> dict[str, str] | None:
    """Role ("c", "g", "e") -> port name, when the ports are exactly an IGBT's three."""
    names = [p.text for p in definition.ports]
    roles: dict[str, str] = {}
    for port in names:
        role = next((r for r, known in IGBT_PORT_NAMES.items() if port.lower() in known), None)
        if role is None or role in roles:
            return None
        roles[role] = port
    return roles if len(roles) == 3 else None


_DEVICE_FIELDS = Device.__match_args__


def _with(device: Device, **changes: object) -> Device:
    """``dataclasses.replace`` for devices, by position (several times faster; hot path)."""
    return Device(*[changes.get(name, getattr(device, name)) for name in _DEVICE_FIELDS])  # type: ignore[arg-type]


def m_key(missing: Missing) -> tuple[str, str]:
    return (missing.kind, missing.name)


def _flat_values(group: Group) -> list[Field]:
    """The values of a group, with groups inside it (PWL pairs) opened up."""
    out: list[Field] = []
    for item in group.items:
        if isinstance(item, Group):
            out.extend(_flat_values(item))
        elif not isinstance(item, Assign):
            out.append(item)
    return out


def _is_tc(item: Field) -> bool:
    return (isinstance(item, Assign) and item.key == "tc") or (
        isinstance(item, Word) and item.text == "tc"
    )


def _may_be_behavioural(text: str) -> bool:
    """A cheap test before compiling: a reading needs "(" (V(), I(), ddt()) or a name of
    the simulator's state (time, temp)."""
    if "(" in text:
        return True
    lowered = text.lower()
    return "time" in lowered or "temp" in lowered


def _valued_by_expression(element: Element) -> bool:
    if element.letter not in PASSIVE_KEYS:
        return False
    keys = PASSIVE_KEYS[element.letter]
    return any(
        isinstance(f, Expr) or (isinstance(f, Assign) and f.key in keys) for f in element.fields
    )


def _count_text(counts: Sequence[int]) -> str:
    ordered = sorted(set(counts))
    return str(ordered[0]) if len(ordered) == 1 else f"{ordered[0]} to {ordered[-1]}"


def _names_a_model(word: Word) -> bool:
    """A word that is not a number (model names may start with digits: 1n4148, 2sk456)."""
    from drivelint.circuit.scope import _is_plain_number

    return not _is_plain_number(word.text)


def _looks_numeric(item: Field) -> bool:
    if isinstance(item, Expr):
        return True
    if isinstance(item, Word):
        head = item.text.lstrip("+-")
        return bool(head) and (head[0].isdigit() or head[0] == ".")
    return False


def _field_text(item: Field) -> str:
    if isinstance(item, Word):
        return item.raw
    if isinstance(item, Expr):
        return item.text
    if isinstance(item, Group):
        return "(" + " ".join(_field_text(i) for i in item.items) + ")"
    return f"{item.key}={_field_text(item.value)}"


@dataclass(frozen=True, slots=True)
class _WrapperPins:
    """A wrapped MOSFET subcircuit read as one switch: pins, internal R_g, body diode."""

    pins: tuple[tuple[str, str], ...]
    gate_resistance: float | None
    body_diode: str | None


def _series_adjacency(devices: Sequence[Device]) -> dict[str, list[tuple[str, Device]]]:
    """Each net's neighbours through one two-terminal series part (R or L) of a wrapper."""
    adjacency: dict[str, list[tuple[str, Device]]] = {}
    for device in devices:
        if device.kind in SERIES_KINDS and len(device.pins) == 2:
            (_, a), (_, b) = device.pins
            adjacency.setdefault(a, []).append((b, device))
            adjacency.setdefault(b, []).append((a, device))
    return adjacency


def map_wrapper_ports(
    fet: Device, devices: Sequence[Device], ports: Mapping[str, str]
) -> _WrapperPins | None:
    """Map each port of a wrapper to the MOSFET terminal it reaches through series R/L.

    Each port goes to the terminal it reaches in the fewest series steps; a tie, a port
    that reaches no terminal, or a terminal that no port reaches means the subcircuit is
    not a plain wrapper and is left flattened.
    """
    adjacency = _series_adjacency(devices)
    terminals = {role: net for role, net in fet.pins if role in ("d", "g", "s", "b")}
    if fet.model is not None and fet.model.type == "vdmos":
        terminals.pop("b", None)
    distances: dict[str, dict[str, tuple[int, float]]] = {}
    for role, start in terminals.items():
        seen = {start: (0, 0.0)}
        queue = deque([start])
        while queue:
            net = queue.popleft()
            steps, ohms = seen[net]
            for other, device in adjacency.get(net, ()):
                if other not in seen:
                    resistance = device.value or 0.0 if device.kind == "resistor" else 0.0
                    seen[other] = (steps + 1, ohms + resistance)
                    queue.append(other)
        distances[role] = seen
    pins: list[tuple[str, str]] = []
    used: set[str] = set()
    gate_resistance: float | None = None
    for port, outer in ports.items():
        reach = [(d[outer][0], role) for role, d in distances.items() if outer in d]
        if not reach:
            return None
        reach.sort()
        if (
            len(reach) > 1
            and reach[0][0] == reach[1][0]
            and reach[0][1] != "b"
            and reach[1][1] != "b"
        ):
            return None
        role = reach[0][1]
        if role == "b" and terminals.get("b") == terminals.get("s"):
            role = "s"
        pin = role if role not in used else port
        used.add(role)
        pins.append((pin, outer))
        if role == "g":
            ohms = distances["g"][outer][1]
            gate_resistance = ohms if ohms > 0 else None
    if not {"d", "g", "s"} <= used:
        return None
    body = None
    drain, source = terminals.get("d"), terminals.get("s")
    for device in devices:
        if device.kind == "diode" and {n for _, n in device.pins} == {drain, source}:
            body = device.model_name
    order = {"d": 0, "g": 1, "s": 2, "b": 3}
    pins.sort(key=lambda p: order.get(p[0], 9))
    return _WrapperPins(tuple(pins), gate_resistance, body)


def map_igbt_ports(
    fet: Device, bjt: Device, devices: Sequence[Device], ports: Mapping[str, str]
) -> _WrapperPins | None:
    """The outer nets of an IGBT macro's collector, gate and emitter, or None when the
    body is not that shape: the PNP's emitter at the collector port, its base on the
    MOSFET's drain, its collector and the MOSFET's source at the emitter port, the gate
    port on the MOSFET's gate — each directly or through series R/L (the nearest port)."""
    if bjt.model_type != "pnp" or fet.model_type != "nmos":
        return None
    named = {p.lower(): p for p in ports}
    roles = {}
    for role, known in IGBT_PORT_NAMES.items():
        found = [named[n] for n in known if n in named]
        if len(found) != 1:
            return None
        roles[role] = found[0]
    # each port's inner net is its outer net; walk series R/L inside from each terminal
    adjacency = _series_adjacency(devices)

    def reach(start: str | None) -> dict[str, float]:
        if start is None:
            return {}
        seen = {start: 0.0}
        queue = deque([start])
        while queue:
            net = queue.popleft()
            for other, device in adjacency.get(net, ()):
                if other not in seen:
                    ohms = device.value or 0.0 if device.kind == "resistor" else 0.0
                    seen[other] = seen[net] + ohms
                    queue.append(other)
        return seen

    outer = {role: ports[port] for role, port in roles.items()}
    base, drain = bjt.net("b"), fet.net("d")
    if base is None or drain is None or drain not in reach(base):
        return None
    gate = reach(fet.net("g"))
    collector = reach(bjt.net("e"))
    emitter_fet, emitter_bjt = reach(fet.net("s")), reach(bjt.net("c"))
    if (
        outer["g"] not in gate
        or outer["c"] not in collector
        or outer["e"] not in emitter_fet
        or outer["e"] not in emitter_bjt
        or outer["c"] in gate
        or outer["e"] in gate
        or outer["c"] in emitter_fet
    ):
        return None
    ohms = gate[outer["g"]]
    body = None
    for device in devices:
        if device.kind == "diode" and (device.net("a"), device.net("k")) == (
            outer["e"],
            outer["c"],
        ):
            body = device.model_name
    pins = (("d", outer["c"]), ("g", outer["g"]), ("s", outer["e"]))
    return _WrapperPins(pins, ohms if ohms > 0 else None, body)


def find_rails(devices: Iterable[Device]) -> dict[str, float]:
    """Nets held at a known DC voltage by independent sources, through chains of sources."""
    edges: dict[str, list[tuple[str, float]]] = {}
    for device in devices:
        if device.kind != "vsource" or device.waveform is None or device.waveform.kind != "dc":
            continue
        p, n = device.net("p"), device.net("n")
        if p is None or n is None:
            continue
        volts = device.waveform.dc_level()
        edges.setdefault(n, []).append((p, volts))
        edges.setdefault(p, []).append((n, -volts))
    rails = {GROUND: 0.0}
    queue = deque([GROUND])
    while queue:
        net = queue.popleft()
        for other, volts in edges.get(net, ()):
            if other not in rails:
                rails[other] = rails[net] + volts
                queue.append(other)
    del rails[GROUND]
    return dict(sorted(rails.items()))


def elaborate(deck: Deck, options: ElaborateOptions | None = None) -> Circuit:
    """Flatten a deck. Problems become diagnostics on the circuit; never raises for bad input."""
    with paused_gc():
        elaborator = _Elaborator(deck, options or ElaborateOptions())
        return elaborator.run()


def _first_over_bound(statements: Sequence[Statement], bound: int) -> Span | None:
    """Where the flattened device count first passes ``bound``, counted without building.

    Each element counts one; an instance counts what its subcircuit holds, found by name
    as elaboration finds it (the nearest enclosing definition). Counts are memoised per
    definition, so the cost is linear in the statements however deep the nesting.
    Instances elaboration will refuse (undefined, recursive) count nothing.
    """
    memo: dict[tuple[int, int], int] = {}
    scopes: dict[tuple[int, int], Mapping[str, Subckt]] = {}

    def definitions(body: Sequence[Statement], outer: Mapping[str, Subckt]) -> Mapping[str, Subckt]:
        # Instances look names up from where they stand, as the elaborator does; a body
        # without definitions of its own shares its caller's table (and memo entries).
        key = (id(body), id(outer))
        if key not in scopes:
            own = {s.name: s for s in body if isinstance(s, Subckt)}
            scopes[key] = {**outer, **own} if own else outer
        return scopes[key]

    def count(
        body: Sequence[Statement], scope: Mapping[str, Subckt], chain: tuple[int, ...]
    ) -> int:
        total = 0
        for statement in body:
            if isinstance(statement, IfBlock):
                # Which branch applies is decided later; the largest bounds them all.
                total += max(
                    (count(branch, scope, chain) for _, branch in statement.branches), default=0
                )
                if total > bound:
                    return bound + 1
                continue
            if not isinstance(statement, Element):
                continue
            if statement.letter != "x":
                total += 1
                continue
            words = [f for f in statement.fields if isinstance(f, Word) and f.text != "params:"]
            definition = scope.get(words[-1].text) if words else None
            if definition is None or id(definition) in chain or len(chain) > 64:
                continue
            inner = definitions(definition.body, scope)
            key = (id(definition), id(inner))
            if key not in memo:
                memo[key] = count(definition.body, inner, (*chain, id(definition)))
            total += memo[key]
            if total > bound:
                return bound + 1
        return total

    top = definitions(statements, {})
    running = 0
    for statement in statements:
        running += count([statement], top, ())
        if running > bound:
            return statement.span
    return None
