"""Source positions and diagnostics shared by every stage of the pipeline.

This module is the floor of the layering: it imports nothing from drivelint.
"""

from __future__ import annotations

import enum
from dataclasses import dataclass


def positional_reduce(self: object) -> tuple[object, tuple[object, ...]]:
    """Serialise a frozen dataclass as its class and its fields in order.

    Results travel from worker processes to the parent this way; the default for slotted
    frozen dataclasses looks its fields up again for every object it restores, which was
    several times slower than rebuilding through the constructor. Only for classes whose
    fields are all positional.
    """
    cls = type(self)
    return (cls, tuple(getattr(self, name) for name in cls.__match_args__))  # type: ignore[attr-defined]


# Characters a report must never pass on raw: C0 controls but TAB (ESC starts terminal
# escape sequences, CR and LF forge lines), DEL, C1 controls (CSI, OSC), the Unicode line
# and paragraph separators, and the bidirectional overrides that make text read otherwise
# than it is.
_UNPRINTABLE = {
    code: f"\\x{code:02x}" if code < 0x100 else f"\\u{code:04x}"
    for code in (
        *(c for c in range(0x20) if c != 0x09),
        0x7F,
        *range(0x80, 0xA0),
        0x2028,
        0x2029,
        *range(0x202A, 0x202F),
        *range(0x2066, 0x206A),
    )
}

# How much of a netlist line a report may quote, and how long a message may grow.
EXCERPT_CHARS = 120
MESSAGE_CHARS = 1_000


_LINE_BREAKS_KEPT = {k: v for k, v in _UNPRINTABLE.items() if k not in (0x0A, 0x0D)}


def printable(text: str, keep_line_breaks: bool = False) -> str:
    """``text`` with every control character written as a visible escape (``\\x1b``);
    with ``keep_line_breaks``, CR and LF are left for the caller's own escaping."""
    return text.translate(_LINE_BREAKS_KEPT if keep_line_breaks else _UNPRINTABLE)


def excerpt(line: str, limit: int = EXCERPT_CHARS) -> str:
    """The start of a source line, at most ``limit`` characters, marked with … where cut."""
    line = line.rstrip("\r\n")
    return line if len(line) <= limit else line[:limit] + "…"


def quoted_line(line: str, column: int) -> str:
    """A source line as a terminal report shows it: a printable excerpt, and a caret under
    ``column`` when the column falls inside the excerpt."""
    line = line.rstrip("\r\n").expandtabs(1)
    text = printable(excerpt(line))
    if column - 1 > EXCERPT_CHARS:
        return f"    {text}"
    caret = len(printable(line[: max(column - 1, 0)]))
    return f"    {text}\n    {' ' * caret}^"


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

    def __post_init__(self) -> None:
        # A message may quote what it is about (a name, a path); never at length.
        if len(self.message) > MESSAGE_CHARS:
            object.__setattr__(self, "message", self.message[:MESSAGE_CHARS] + "…")

    def headline(self) -> str:
        """Position, severity and message, printable: what machine-readable reports carry."""
        return f"{printable(str(self.span))}: {self.severity.label}: {printable(self.message)}"

    def render(self) -> str:
        """For a terminal: the headline, and a short excerpt of the line with a caret."""
        if not self.source_line:
            return self.headline()
        return f"{self.headline()}\n{quoted_line(self.source_line, self.span.column)}"

    def shortened(self) -> Diagnostic:
        """The same diagnostic keeping no more of its line than a report would quote."""
        if len(self.source_line) <= EXCERPT_CHARS + 1:
            return self
        from dataclasses import replace

        return replace(self, source_line=self.source_line[: EXCERPT_CHARS + 1])

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
