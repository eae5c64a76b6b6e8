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
from typing import TypeVar

from drivelint._gc import paused_gc
from drivelint.circuit.model import (
    GROUND,
    KIND_BY_LETTER,
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
    GlobalCard,
    Group,
    ModelCard,
    ParamCard,
    Statement,
    Subckt,
    TranCard,
    Word,
)

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
    "k": "K<name> L<a> L<b> COUPLING",
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
}
WAVEFORM_KINDS = frozenset({"pulse", "pwl", "sin", "exp"})
UNSUPPORTED_WAVEFORMS = frozenset({"sffm", "am", "trnoise", "trrandom", "pat"})
# Parts allowed beside the one MOSFET in a wrapper subcircuit.
WRAPPER_PASSIVES = frozenset({"resistor", "inductor", "capacitor", "diode"})
SERIES_KINDS = frozenset({"resistor", "inductor"})


@dataclass(frozen=True, slots=True)
class ElaborateOptions:
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

    def new_scope(self, parent: Scope | None, statements: Iterable[Statement]) -> Scope:
        scope = Scope(self.limits, self.deck.line_text, parent)
        for statement in statements:
            if isinstance(statement, ParamCard):
                for assign in statement.assigns:
                    assert isinstance(assign.value, Expr)
                    # The value's span, so an error's offset in the text lands on its column.
                    scope.params[assign.key] = ParamDef(assign.value.span, text=assign.value.text)
            elif isinstance(statement, ModelCard):
                self.define(scope.models, statement, "model")
            elif isinstance(statement, Subckt):
                self.define(scope.subckts, statement, "subcircuit")
            elif isinstance(statement, GlobalCard) and parent is None:
                self.global_nets.update(w.text for w in statement.nets)
            elif isinstance(statement, TranCard) and parent is None and self.tran is None:
                self.tran = statement
        return scope

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
        top = self.new_scope(None, self.deck.statements)
        self.transient = self.transient_settings(top)
        over = _first_over_bound(self.deck.statements, self.limits.max_devices)
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
                self.flatten(self.deck.statements, _Block(top, "", {}, ()))
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
        )

    def transient_settings(self, scope: Scope) -> object:
        from drivelint.netlist.waveforms import TransientSettings, WaveformError, check_tran_time

        card = self.tran
        if not isinstance(card, TranCard):
            return TransientSettings()
        numbers: list[float] = []
        for item in card.fields:
            if isinstance(item, Word) and item.text == "uic":
                continue
            try:
                number = scope.number(item)
            except DiagnosticError as exc:
                self.record(exc)
                return TransientSettings()
            if len(numbers) < 2:
                # Only TSTEP and TSTOP feed the source defaults; each is checked here,
                # where its span is known, against the waveform module's bounds.
                try:
                    check_tran_time(("tstep", "tstop")[len(numbers)], number)
                except WaveformError as exc:
                    self.report(Severity.ERROR, item.span, str(exc), "tran")
                    return TransientSettings()
            numbers.append(number)
        return TransientSettings(
            tstep=numbers[0] if numbers else None,
            tstop=numbers[1] if len(numbers) > 1 else None,
        )

    def flatten(self, statements: Sequence[Statement], block: _Block) -> None:
        seen: set[str] = set()
        for statement in statements:
            if not isinstance(statement, Element):
                continue
            if statement.name in seen:
                self.report(
                    Severity.ERROR,
                    statement.span,
                    f"duplicate element name '{statement.name}'; this line is ignored",
                )
                continue
            seen.add(statement.name)
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
            raise self.fail(
                name_word.span, f"subcircuit '{name_word.text}' is not defined", "undefined"
            )
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
        scope = self.new_scope(block.scope, definition.body)
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
        self.flatten(definition.body, inner)
        self.collapse_wrapper(name, definition, ports, before, element.span)

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
        if len(transistors) != 1 or any(
            d.kind not in WRAPPER_PASSIVES for d in added if d is not transistors[0]
        ):
            return
        fet = transistors[0]
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

    # -- devices -------------------------------------------------------------------------------

    def device(self, element: Element, block: _Block) -> Device:
        letter = element.letter
        positional = [f for f in element.fields if not isinstance(f, Assign)]
        assigns = {f.key: f for f in element.fields if isinstance(f, Assign)}
        name = block.prefix + element.name
        scope = block.scope
        params: dict[str, float] = {}
        for key, assign in assigns.items():
            if letter in "eb" and key in ("value", "vol", "v", "i", "cur"):
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
            return self.passive(element, base, positional, block)
        if letter in "dqmj":
            return self.semiconductor(element, base, positional, block)
        if letter in "vi":
            return self.source(element, base, positional, assigns, block)
        if letter in "eg":
            return self.controlled(element, base, positional, assigns, block)
        if letter in "fh":
            nodes = self.nodes(element, positional, 2, block)
            if len(positional) < 3 or not isinstance(positional[2], Word):
                raise self.fail(element.span, f"expected '{USAGE[letter]}'", "syntax")
            gain = self.optional_number(positional[3:4], scope)
            return replace(
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
            return replace(base, pins=tuple(zip(("p", "n"), nodes)), expression=_field_text(expr))
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
            model = self.required_model(element, rest[:1], block)
            return replace(
                base,
                pins=tuple(zip(PIN_ROLES[letter], nodes)),
                controls=controls,
                model=model,
                model_name=model.name if model else None,
            )
        if letter == "k":
            if len(positional) < 3 or not all(isinstance(f, Word) for f in positional[:2]):
                raise self.fail(element.span, f"expected '{USAGE['k']}'", "syntax")
            names = tuple(block.prefix + f.text for f in positional[:2] if isinstance(f, Word))
            return replace(base, controls=names, value=scope.number(positional[2]))
        raise self.fail(element.span, f"element kind '{letter}' is not handled")

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

    def required_model(self, element: Element, items: Sequence[Field], block: _Block) -> Model:
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
            raise self.fail(word.span, f"model '{word.text}' is not defined", "undefined")
        return model

    def passive(
        self, element: Element, base: Device, positional: Sequence[Field], block: _Block
    ) -> Device:
        letter = element.letter
        nodes = self.nodes(element, positional, 2, block)
        rest = list(positional[2:])
        model: Model | None = None
        value: float | None = None
        for item in rest:
            if isinstance(item, Word) and model is None and not _looks_numeric(item):
                found = self.model(item.text, block.scope, item.span)
                if found is not None:
                    model = found
                    continue
            if value is None and isinstance(item, (Word, Expr)):
                value = block.scope.number(item)
                continue
            raise self.fail(item.span, f"unexpected field: expected '{USAGE[letter]}'", "syntax")
        key = {"r": "r", "c": "c", "l": "l"}[letter]
        for alias in (key, {"r": "resistance", "c": "capacitance", "l": "inductance"}[letter]):
            if value is None and alias in base.params:
                value = base.params[alias]
        if value is None and model is None:
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
        return replace(
            base,
            pins=tuple(zip(PIN_ROLES[letter], nodes)),
            value=value,
            model=model,
            model_name=model.name if model else None,
        )

    def semiconductor(
        self, element: Element, base: Device, positional: Sequence[Field], block: _Block
    ) -> Device:
        letter = element.letter
        words = [f for f in positional if isinstance(f, Word)]
        counts = {"d": (2,), "j": (3,), "q": (3, 4, 5), "m": (4, 3, 5)}[letter]
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
            # The first place a model name could stand that the line reaches.
            guess = next(positional[c] for c in counts if c < len(positional))
            raise self.fail(guess.span, f"model '{_field_text(guess)}' is not defined", "undefined")
        nodes = self.nodes(element, positional, count, block)
        kind = model.kind
        if kind != base.kind:
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
            if count == 3 and model.type != "vdmos":
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
        return replace(
            base,
            pins=tuple(zip(roles, nodes)),
            model=model,
            model_name=model.name,
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
        kind: str | None = None
        args: list[float] = []
        index = 0
        while index < len(items):
            item = items[index]
            word = item.text if isinstance(item, Word) else None
            if word == "dc" and index + 1 < len(items):
                dc = scope.number(items[index + 1])
                index += 2
            elif word == "ac":
                index += 1
                for _ in range(2):
                    if index < len(items) and _looks_numeric(items[index]):
                        index += 1
            elif word in WAVEFORM_KINDS:
                kind = word
                index += 1
                if index < len(items) and isinstance(items[index], Group):
                    group = items[index]
                    assert isinstance(group, Group)
                    args = [scope.number(a) for a in group.items if not isinstance(a, Assign)]
                    index += 1
                else:
                    while index < len(items) and _looks_numeric(items[index]):
                        args.append(scope.number(items[index]))
                        index += 1
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
        return replace(
            base,
            pins=tuple(zip(("p", "n"), nodes)),
            value=dc if dc is not None else (waveform.dc_level() if kind is None else None),
            waveform=waveform,
        )

    def controlled(
        self,
        element: Element,
        base: Device,
        positional: Sequence[Field],
        assigns: Mapping[str, Assign],
        block: _Block,
    ) -> Device:
        behavioural = next((assigns[k] for k in ("value", "vol", "cur") if k in assigns), None)
        if behavioural is not None or (
            len(positional) > 2 and isinstance(positional[2], (Expr, Group))
        ):
            nodes = self.nodes(element, positional, 2, block)
            text = _field_text(behavioural.value if behavioural else positional[2])
            return replace(base, pins=tuple(zip(("p", "n"), nodes)), expression=text)
        if len(positional) > 2 and isinstance(positional[2], Word) and positional[2].text == "poly":
            nodes = self.nodes(element, positional, 2, block)
            return replace(base, pins=tuple(zip(("p", "n"), nodes)), expression="poly")
        nodes = self.nodes(element, positional, 4, block)
        gain = self.optional_number(positional[4:5], block.scope)
        return replace(base, pins=tuple(zip(("p", "n", "cp", "cn"), nodes)), value=gain)


def _could_be_wrapper(definition: Subckt) -> bool:
    """The body's element letters allow the one-MOSFET-plus-parasitics shape."""
    letters = [s.letter for s in definition.body if isinstance(s, Element)]
    return letters.count("m") == 1 and all(letter in "mrlcd" for letter in letters)


def _count_text(counts: Sequence[int]) -> str:
    ordered = sorted(set(counts))
    return str(ordered[0]) if len(ordered) == 1 else f"{ordered[0]} to {ordered[-1]}"


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
    pins: tuple[tuple[str, str], ...]
    gate_resistance: float | None
    body_diode: str | None


def map_wrapper_ports(
    fet: Device, devices: Sequence[Device], ports: Mapping[str, str]
) -> _WrapperPins | None:
    """Map each port of a wrapper to the MOSFET terminal it reaches through series R/L.

    Each port goes to the terminal it reaches in the fewest series steps; a tie, a port
    that reaches no terminal, or a terminal that no port reaches means the subcircuit is
    not a plain wrapper and is left flattened.
    """
    adjacency: dict[str, list[tuple[str, Device]]] = {}
    for device in devices:
        if device.kind in SERIES_KINDS and len(device.pins) == 2:
            (_, a), (_, b) = device.pins
            adjacency.setdefault(a, []).append((b, device))
            adjacency.setdefault(b, []).append((a, device))
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
