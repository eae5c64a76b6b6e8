"""The design's own netlist as statements that can be written out again, with local edits.

A testbench starts from what the designer wrote: every statement the reader kept, in
reading order (so included files and library sections come out inlined), each copied
from its own physical lines — the line its span names and the ``+`` continuations after
it. The design's analysis cards (``.tran``) are dropped, and so are its ``.control``
blocks and output cards, which the reader never keeps. An :class:`Edit` replaces one
statement or adds statements after it, in its scope; a field inside a statement (a value,
a model name, a node) is replaced at its span, so the rest of the line stays as written.
"""

from __future__ import annotations

from collections.abc import Iterable, Mapping, Sequence
from dataclasses import dataclass

from drivelint.circuit.model import GROUND, Circuit
from drivelint.diagnostics import Span
from drivelint.netlist.statements import (
    Deck,
    Element,
    Expr,
    Field,
    ModelCard,
    Statement,
    Subckt,
    TranCard,
    Word,
)

# Cards the reader skips without keeping a statement but that change what a simulator
# does; a deck that had them says so in its header rather than dropping them silently.
UNCARRIED_CARDS = (".ic", ".nodeset", ".temp")


class DesignError(ValueError):
    """A statement that cannot be edited at its span (the message names file and line)."""


@dataclass(frozen=True, slots=True)
class Edit:
    """What a testbench changes at one statement of the design.

    ``lines`` replaces the whole statement; ``fields`` replaces single fields at their
    spans (the rest of the statement stays as written); ``after`` adds statements right
    after it, in its scope. Two edits of one statement merge (a fix and a probe on the
    same diode); two whole replacements of one statement cannot.
    """

    lines: tuple[str, ...] | None = None
    fields: tuple[tuple[Field, str], ...] = ()
    after: tuple[str, ...] = ()
    note: str = ""  # why, written as a comment above the change

    def merged(self, other: Edit) -> Edit:
        if self.lines is not None and other.lines is not None:
            raise DesignError("two edits replace the same statement")
        if (self.lines is not None and other.fields) or (other.lines is not None and self.fields):
            raise DesignError("a statement replaced whole cannot also have fields edited")
        notes = "; ".join(n for n in (self.note, other.note) if n)
        return Edit(
            self.lines if self.lines is not None else other.lines,
            self.fields + other.fields,
            self.after + other.after,
            notes,
        )


def merge_edits(*groups: Mapping[Span, Edit]) -> dict[Span, Edit]:
    out: dict[Span, Edit] = {}
    for group in groups:
        for span, edit in group.items():
            out[span] = out[span].merged(edit) if span in out else edit
    return out


class Design:
    """The statements of one read deck, indexed by span, and the circuit they elaborate to."""

    def __init__(self, deck: Deck, circuit: Circuit) -> None:
        self.deck = deck
        self.circuit = circuit
        self.by_span: dict[Span, Statement] = {}
        self.scope_of: dict[Span, Subckt | None] = {}
        self.subckts: dict[str, Subckt] = {}
        self._index(deck.statements, None)
        self.devices_by_span: dict[Span, list[str]] = {}
        for name, device in circuit.devices.items():
            self.devices_by_span.setdefault(device.span, []).append(name)
        for name, instance in circuit.instances.items():
            self.devices_by_span.setdefault(instance.span, []).append(name)

    def _index(self, statements: Iterable[Statement], parent: Subckt | None) -> None:
        for statement in statements:
            self.by_span.setdefault(statement.span, statement)
            self.scope_of.setdefault(statement.span, parent)
            if isinstance(statement, Subckt):
                self.subckts.setdefault(statement.name, statement)
                self._index(statement.body, statement)

    # -- looking things up -----------------------------------------------------------------

    def statement_of(self, name: str) -> Statement | None:
        """The statement that produced a flattened device (or instance) of the circuit."""
        device = self.circuit.devices.get(name)
        instance = self.circuit.instances.get(name)
        span = device.span if device else instance.span if instance else None
        return self.by_span.get(span) if span else None

    def element_of(self, name: str) -> Element | None:
        statement = self.statement_of(name)
        return statement if isinstance(statement, Element) else None

    def model_card(self, name: str, scope_span: Span) -> ModelCard | None:
        """The ``.model`` card ``name`` as seen from the statement at ``scope_span``:
        the innermost enclosing subcircuit first, then outward, then the top level."""
        scope = self.scope_of.get(scope_span)
        while True:
            body = scope.body if scope is not None else self.deck.statements
            for statement in body:
                if isinstance(statement, ModelCard) and statement.name == name:
                    return statement
            if scope is None:
                return None
            scope = self.scope_of.get(scope.span)

    def produced_by(self, statement: Statement) -> tuple[str, ...]:
        """Every flattened device the statement produced (one per subcircuit instance)."""
        return tuple(sorted(set(self.devices_by_span.get(statement.span, ()))))

    def design_tran(self) -> TranCard | None:
        for statement in self.deck.statements:
            if isinstance(statement, TranCard):
                return statement
        return None

    def uses_uic(self) -> bool:
        """Whether the design's own ``.tran`` starts from its ``IC=`` values (``uic``)."""
        tran = self.design_tran()
        return tran is not None and any(
            isinstance(f, Word) and f.text == "uic" for f in tran.fields
        )

    def uncarried(self) -> tuple[str, ...]:
        """Cards in the design's files that a deck built from statements cannot carry."""
        found: set[str] = set()
        for lines in self.deck.sources.values():
            for raw in lines:
                word = raw.split(None, 1)[0].lower() if raw.strip() else ""
                if word in UNCARRIED_CARDS:
                    found.add(word)
        return tuple(sorted(found))

    def local_net(self, net: str, scope: str) -> str | None:
        """The name a flattened net has inside the instance ``scope`` ("" for the top
        level), or None when it cannot be named there."""
        if net == GROUND or not scope or net in self.circuit.global_nets:
            return net
        if net.startswith(scope + ".") and "." not in net[len(scope) + 1 :]:
            return net[len(scope) + 1 :]
        instance = self.circuit.instances.get(scope)
        if instance is not None:
            for port, outer in instance.ports:
                if outer == net:
                    return port
        return None

    # -- text ------------------------------------------------------------------------------

    def numbered_lines(self, statement: Statement) -> list[tuple[int, str]]:
        """The statement's physical lines with their numbers: the line its span names and
        the ``+`` continuations after it (comment and blank lines between are skipped)."""
        source = self.deck.sources.get(statement.span.path, ())
        start = statement.span.line
        if not 0 < start <= len(source):
            raise DesignError(f"{statement.span}: the statement's line is not in the source")
        out = [(start, source[start - 1])]
        for number in range(start + 1, len(source) + 1):
            stripped = source[number - 1].lstrip()
            if not stripped or stripped[0] == "*":
                continue
            if stripped[0] != "+":
                break
            out.append((number, source[number - 1]))
        return out

    def lines(self, statement: Statement) -> tuple[str, ...]:
        return tuple(text for _, text in self.numbered_lines(statement))

    def raw_name(self, statement: Element) -> str:
        """The element's name as written (the reader keeps it in lower case)."""
        first = self.numbered_lines(statement)[0][1].split()
        return first[0] if first and first[0].lower() == statement.name else statement.name

    def with_fields(
        self, statement: Statement, changes: Sequence[tuple[Field, str]]
    ) -> tuple[str, ...]:
        """The statement's lines with each field's text replaced at its span."""
        numbered = self.numbered_lines(statement)
        by_number = {number: text for number, text in numbered}
        ordered = sorted(changes, key=lambda c: (c[0].span.line, c[0].span.column), reverse=True)
        for field, text in ordered:
            span = field.span
            line = by_number.get(span.line) if span.path == statement.span.path else None
            extent = _extent(field, line) if line is not None else None
            if line is None or extent is None:
                raise DesignError(f"{span}: cannot edit this field where it is written")
            start, end = extent
            by_number[span.line] = line[:start] + text + line[end:]
        return tuple(by_number[number] for number, _ in numbered)

    def render(self, edits: Mapping[Span, Edit]) -> list[str]:
        """Every statement of the design in reading order, with ``edits`` applied."""
        out: list[str] = []
        current = [self.deck.path]

        def emit(statements: Sequence[Statement]) -> None:
            for statement in statements:
                if isinstance(statement, TranCard):
                    continue  # the design's own analysis; the testbench writes its own
                path = statement.span.path
                if path != current[0]:
                    out.append(f"* (statements from {path})")
                    current[0] = path
                edit = edits.get(statement.span)
                if isinstance(statement, Subckt):
                    out.extend(self.lines(statement))
                    emit(statement.body)
                    out.append(f".ends {statement.name}")
                elif edit is not None and (edit.lines is not None or edit.fields):
                    out.append(f"* testbench: {edit.note}" if edit.note else "* testbench:")
                    out.extend(f"* was: {line.strip()}" for line in self.lines(statement))
                    if edit.lines is not None:
                        out.extend(edit.lines)
                    else:
                        out.extend(self.with_fields(statement, edit.fields))
                else:
                    out.extend(self.lines(statement))
                if edit is not None and edit.after:
                    if edit.lines is None and not edit.fields and edit.note:
                        out.append(f"* testbench: {edit.note}")
                    out.extend(edit.after)

        emit(self.deck.statements)
        return out


def _extent(field: Field, line: str) -> tuple[int, int] | None:
    """Where a field is written in its physical line (0-based start, end), if exact."""
    start = field.span.column - 1
    if isinstance(field, Word):
        end = start + len(field.raw)
        return (start, end) if line[start:end] == field.raw else None
    if isinstance(field, Expr):
        # The span points inside the delimiters; replace them too.
        end = start + len(field.text)
        if start < 1 or line[start:end] != field.text or end >= len(line) + 1:
            return None
        opening, closing = line[start - 1], line[end : end + 1]
        if (opening, closing) in (("{", "}"), ("'", "'")):
            return start - 1, end + 1
    return None
