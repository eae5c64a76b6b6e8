"""Source positions and diagnostics shared by every stage of the pipeline.

This module is the floor of the layering: it imports nothing from drivelint.
"""

from __future__ import annotations

import enum
from dataclasses import dataclass


def positional_reduce(self: object) -> tuple[object, tuple[object, ...]]:
    """Pickle a frozen dataclass as its class and its fields in order.

    The default for slotted frozen dataclasses looks its fields up again for every object
    it restores, which made reading the result cache several times slower; rebuilding
    through the constructor does not. Only for classes whose fields are all positional.
    """
    cls = type(self)
    return (cls, tuple(getattr(self, name) for name in cls.__match_args__))  # type: ignore[attr-defined]


@dataclass(frozen=True, slots=True, order=True)
class Span:
    """A position in a source file: 1-based line and column."""

    path: str
    line: int
    column: int = 1

    __reduce__ = positional_reduce

    def __str__(self) -> str:
        return f"{self.path}:{self.line}:{self.column}"


class Severity(enum.IntEnum):
    """Ordered so that ``max()`` gives the worst."""

    NOTE = 1
    WARNING = 2
    ERROR = 3

    @property
    def label(self) -> str:
        return self.name.lower()

    @classmethod
    def parse(cls, text: str) -> Severity:
        try:
            return cls[text.strip().upper()]
        except KeyError:
            choices = ", ".join(s.label for s in cls)
            raise ValueError(f"unknown severity {text!r}; expected one of {choices}") from None


@dataclass(frozen=True, slots=True)
class Diagnostic:
    """A problem with the input itself (syntax, includes, limits), not a design finding.

    ``source_line`` is the text of the offending physical line, kept so the
    diagnostic can be shown without re-reading the file.
    """

    severity: Severity
    span: Span
    message: str
    source_line: str = ""
    code: str = "input"

    __reduce__ = positional_reduce

    def render(self) -> str:
        head = f"{self.span}: {self.severity.label}: {self.message}"
        if not self.source_line:
            return head
        text = self.source_line.rstrip("\r\n").expandtabs(1)
        caret = " " * (max(self.span.column, 1) - 1) + "^"
        return f"{head}\n    {text}\n    {caret}"

    def to_json(self) -> dict[str, object]:
        return {
            "severity": self.severity.label,
            "path": self.span.path,
            "line": self.span.line,
            "column": self.span.column,
            "message": self.message,
            "code": self.code,
        }


class DiagnosticError(Exception):
    """Raised inside a stage to abandon one statement; caught and recorded by that stage."""

    def __init__(self, diagnostic: Diagnostic) -> None:
        super().__init__(diagnostic.message)
        self.diagnostic = diagnostic
