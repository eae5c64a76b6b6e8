"""The reader's output: a deck of statements, each keeping the span it came from."""

from __future__ import annotations

from dataclasses import dataclass
from typing import TypeAlias

from drivelint.diagnostics import Diagnostic, Span


@dataclass(frozen=True, slots=True)
class Word:
    """A bare token: a name, a node, a number with its suffix. ``text`` is lower-case."""

    text: str
    raw: str
    span: Span


@dataclass(frozen=True, slots=True)
class Expr:
    """An embedded expression, ``{…}`` or ``'…'``; ``text`` is what is inside."""

    text: str
    span: Span


@dataclass(frozen=True, slots=True)
class Group:
    """A parenthesised list of fields, as in ``PULSE(0 5 1u)`` or ``D(IS=1e-14)``."""

    items: tuple[Field, ...]
    span: Span


@dataclass(frozen=True, slots=True)
class Assign:
    """``key=value``; ``key`` is lower-case."""

    key: str
    value: Field
    span: Span


Field: TypeAlias = Word | Expr | Group | Assign


@dataclass(frozen=True, slots=True)
class Element:
    """An element line: its name (lower-case, first letter is the kind) and its fields."""

    name: str
    fields: tuple[Field, ...]
    span: Span

    @property
    def letter(self) -> str:
        return self.name[0]


@dataclass(frozen=True, slots=True)
class ModelCard:
    """``.model NAME TYPE (params)``."""

    name: str
    type: str
    params: tuple[Assign, ...]
    span: Span


@dataclass(frozen=True, slots=True)
class ParamCard:
    """``.param``: each assignment's value is kept as expression text."""

    assigns: tuple[Assign, ...]
    span: Span


@dataclass(frozen=True, slots=True)
class GlobalCard:
    """``.global`` nets."""

    nets: tuple[Word, ...]
    span: Span


@dataclass(frozen=True, slots=True)
class OptionCard:
    """``.option`` / ``.options`` fields."""

    fields: tuple[Field, ...]
    span: Span


@dataclass(frozen=True, slots=True)
class TranCard:
    """``.tran TSTEP TSTOP …``: the reader keeps it because source defaults depend on it."""

    fields: tuple[Field, ...]
    span: Span


@dataclass(frozen=True, slots=True)
class Subckt:
    """``.subckt NAME ports params: …`` with its body, up to ``.ends``."""

    name: str
    ports: tuple[Word, ...]
    params: tuple[Assign, ...]
    body: tuple[Statement, ...]
    span: Span


@dataclass(frozen=True, slots=True)
class FuncCard:
    """``.func NAME(PARAMS) BODY``: a user function; ``body`` is expression text."""

    name: str
    params: tuple[str, ...]
    body: Expr
    span: Span


@dataclass(frozen=True, slots=True)
class IfBlock:
    """``.if (c) … .elseif (c) … .else … .endif``: the branches in order.

    Each branch is its condition (None for ``.else``) and its statements. Which one
    applies is decided by elaboration, where the parameters are known.
    """

    branches: tuple[tuple[Expr | None, tuple[Statement, ...]], ...]
    span: Span


@dataclass(frozen=True, slots=True)
class Missing:
    """Something the netlist names that is not there: what kind, its name, where named."""

    kind: str  # "include", "library", "subckt" or "model"
    name: str
    span: Span

    def describe(self) -> str:
        what = {"include": "include file", "library": "library file"}.get(self.kind, self.kind)
        return f"{what} '{self.name}'"


@dataclass(frozen=True, slots=True)
class Directive:
    """A ``* drivelint: …`` comment; ``text`` is what follows the prefix."""

    text: str
    span: Span
    column: int


Statement: TypeAlias = (
    Element
    | ModelCard
    | ParamCard
    | GlobalCard
    | OptionCard
    | TranCard
    | Subckt
    | FuncCard
    | IfBlock
)


@dataclass(frozen=True, slots=True)
class Deck:
    """One top-level netlist with everything it included, in reading order."""

    path: str
    title: str
    statements: tuple[Statement, ...]
    files: tuple[str, ...]
    directives: tuple[Directive, ...]
    diagnostics: tuple[Diagnostic, ...]
    sources: dict[str, tuple[str, ...]]
    missing: tuple[Missing, ...] = ()
    # What the result depends on besides the text: ("file", path, sha256) for each file
    # read, ("lookup", candidate, resolved path or "") for each include lookup, found or not.
    inputs: tuple[tuple[str, str, str], ...] = ()

    def line_text(self, span: Span) -> str:
        lines = self.sources.get(span.path, ())
        return lines[span.line - 1] if 0 < span.line <= len(lines) else ""
