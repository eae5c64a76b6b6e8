"""Read netlist files into a :class:`Deck`.

Reading happens in two passes per file. The first pass is line-level: title, comments,
``+`` continuations and inline comments, producing logical lines that remember where each
of their characters came from. The second pass parses each logical line with the lark
grammar in ``grammar/netlist.lark`` and turns it into a statement. Includes and library
sections are expanded in place, so the deck is one stream of statements whose spans point
into whichever file they came from.
"""

from __future__ import annotations

import bisect
import os
import re
from collections.abc import Iterator, Sequence
from dataclasses import dataclass, field
from pathlib import Path
from typing import Any

from drivelint.diagnostics import Diagnostic, DiagnosticError, Severity, Span, excerpt
from drivelint.limits import Limits
from drivelint.netlist.statements import (
    Assign,
    Deck,
    Directive,
    Element,
    Expr,
    Field,
    FuncCard,
    GlobalCard,
    Group,
    IfBlock,
    Missing,
    ModelCard,
    OptionCard,
    ParamCard,
    Statement,
    Subckt,
    TranCard,
    Word,
)
from drivelint.paths import resolved

DIRECTIVE_PREFIX = "drivelint:"
ELEMENT_LETTERS = frozenset("rclkdqmjvieifghbswxt")
# Element kinds SPICE knows but drivelint does not model; they are skipped with a warning.
UNSUPPORTED_LETTERS = frozenset("oupyzan")
# Analysis, output and control cards: recognised and skipped without comment.
IGNORED_CARDS = frozenset(
    {
        ".op",
        ".ac",
        ".dc",
        ".tf",
        ".noise",
        ".disto",
        ".sens",
        ".pz",
        ".four",
        ".meas",
        ".measure",
        ".save",
        ".print",
        ".plot",
        ".probe",
        ".ic",
        ".nodeset",
        ".temp",
        ".width",
        ".title",
        ".csparam",
        ".protect",
        ".unprotect",
        ".end_of_file",
        ".step",
        ".backanno",
        ".savebias",
        ".loadbias",
        ".sp",
        ".pss",
        ".fft",
        ".net",
        ".wave",
        ".lin",
        ".options_end",
    }
)
OPTION_CARDS = frozenset({".option", ".options", ".opt"})
# .model types of numerical (device-simulation) models, whose sub-lines are a mesh.
NUMERICAL_DEVICES = frozenset({"numd", "nbjt", "numos"})
INCLUDE_CARDS = frozenset({".include", ".inc", ".incl"})

_ASSIGN_START = re.compile(r"([A-Za-z_][A-Za-z0-9_.]*)\s*=(?!=)")
# A flat line (no groups, no embedded expressions) is split by this pattern instead of the
# grammar: same fields, a tenth of the time. tests/netlist/test_reader.py holds the two
# paths to the same output.
_FLAT_CHARS = frozenset("(),")
# ``V=``/``I=`` of B sources, ``VALUE=`` of E/G (the '=' may be left out before a brace, as
# PSpice writes ``VALUE {…}``).
_BEHAVIOURAL = re.compile(r"\s(v|i|value|vol|cur)\s*(?:=\s*|(?=\{))", re.IGNORECASE)
# PSpice's table form of E/G: ``TABLE {expr} [=] (x1,y1) (x2,y2) …``.
_TABLE_FORM = re.compile(r"\stable\s*(?=\{)", re.IGNORECASE)
_TABLE_ITEM = re.compile(r"\{[^{}]*\}|[^\s(),={}]+")
# The same nested-brace pattern as BRACE_EXPR in grammar/netlist.lark.
_BRACED = r"\{(?:[^{}]|\{(?:[^{}]|\{(?:[^{}]|\{[^{}]*\})*\})*\})*\}"
_FLAT_FIELD = re.compile(
    r"\s*(?:([^\s=(),{}']+)(?:\s*=\s*([^\s=(),{}']+|"
    + _BRACED
    + r"|'[^']*'))?|("
    + _BRACED
    + r"|'[^']*'))\s*"
)
_FUNC_HEAD = re.compile(r"\.func\s+([A-Za-z_][A-Za-z0-9_.]*)\s*\(([^)]*)\)\s*=?\s*", re.IGNORECASE)
# A lone '=' in a .if condition, which ngspice reads as '=='.
_LONE_EQUALS = re.compile(r"(?<![=!<>])=(?!=)")


@dataclass(frozen=True, slots=True)
class ReadOptions:
    """How includes are resolved and bounded."""

    root: Path | None = None
    allow_outside_root: bool = False
    search_path: tuple[Path, ...] = ()
    limits: Limits = field(default_factory=Limits)
    # Includes under dot-folders or VCS folders are refused unless this is set.
    allow_hidden_includes: bool = False


@dataclass(slots=True)
class LogicalLine:
    """One statement's text, with a map back to physical positions."""

    text: str
    path: str
    # (offset in text, physical line, physical column of that offset), sorted by offset.
    segments: list[tuple[int, int, int]]
    # Continuation pieces not yet joined onto ``text`` (joined once, by ``finish``, so a
    # statement of many '+' lines is built in linear time).
    pieces: list[str] | None = field(default=None, repr=False)
    extra: int = 0  # characters in ``pieces``

    @property
    def length(self) -> int:
        return len(self.text) + self.extra

    def append(self, piece: str, line: int, column: int) -> None:
        """Add a continuation line's text, after one space."""
        self.segments.append((self.length + 1, line, column))
        if self.pieces is None:
            self.pieces = []
        self.pieces.append(" " + piece)
        self.extra += 1 + len(piece)

    def finish(self) -> LogicalLine:
        if self.pieces:
            self.text = self.text + "".join(self.pieces)
            self.pieces, self.extra = None, 0
        return self

    def span_at(self, offset: int) -> Span:
        if len(self.segments) == 1:
            _, line, column = self.segments[0]
            return Span(self.path, line, column + offset)
        index = bisect.bisect_right(self.segments, (offset, 1 << 62, 0)) - 1
        start, line, column = self.segments[max(index, 0)]
        return Span(self.path, line, column + max(offset - start, 0))

    @property
    def span(self) -> Span:
        start, line, column = self.segments[0]
        return Span(self.path, line, column)


@dataclass(slots=True)
class _OpenIf:
    """An ``.if`` block being collected: its branches so far."""

    span: Span
    branches: list[tuple[Expr | None, list[Statement]]]
    has_else: bool = False

    def block(self) -> IfBlock:
        return IfBlock(tuple((c, tuple(b)) for c, b in self.branches), self.span)


class _LineParser:
    """The lark parser for one logical line, built once per process."""

    _parser: Any = None

    @classmethod
    def get(cls) -> Any:
        if cls._parser is None:
            from drivelint.netlist.parsers import parser

            cls._parser = parser("netlist.lark")
        return cls._parser


def _convert(tree: Any, line: LogicalLine) -> list[Field]:
    """Turn the parse tree of a logical line into fields with physical spans."""
    out: list[Field] = []
    for child in tree.children:
        out.append(_convert_item(child, line))
    return out


def _convert_item(node: Any, line: LogicalLine) -> Field:
    kind = node.data
    if kind == "word":
        token = node.children[0]
        return Word(str(token).lower(), str(token), line.span_at(token.start_pos))
    if kind == "expr":
        token = node.children[0]
        return Expr(str(token)[1:-1], line.span_at(token.start_pos + 1))
    if kind == "assign":
        key = node.children[0]
        value = _convert_item(node.children[1], line)
        return Assign(str(key).lower(), value, line.span_at(key.start_pos))
    if kind == "group":
        items = tuple(_convert_item(child, line) for child in node.children)
        start = node.meta.start_pos if not node.meta.empty else 0
        return Group(items, line.span_at(start))
    raise AssertionError(f"grammar rule without a handler: {kind}")


def split_flat(line: LogicalLine) -> list[Field] | None:
    """Fields of a line without groups or expressions; None if the pattern does not cover it."""
    text = line.text
    out: list[Field] = []
    position = 0
    end = len(text)
    span_at = line.span_at
    for match in _FLAT_FIELD.finditer(text):
        if match.start() != position:
            return None
        position = match.end()
        key, value, bare = match.group(1, 2, 3)
        if bare is not None:
            out.append(Expr(bare[1:-1], span_at(match.start(3) + 1)))
            continue
        key_span = span_at(match.start(1))
        if value is None:
            out.append(Word(key.lower(), key, key_span))
            continue
        if value[0] in "{'":
            field: Field = Expr(value[1:-1], span_at(match.start(2) + 1))
        else:
            field = Word(value.lower(), value, span_at(match.start(2)))
        out.append(Assign(key.lower(), field, key_span))
    return out if position == end else None


# The terminals of grammar/netlist.lark in one pattern: its WS, then one of "=", "(", ")",
# ",", BRACE_EXPR, QUOTE_EXPR, WORD (no two can start with the same character).
_LINE_TOKEN = re.compile(r"[ \t\f\r\n]*(?:([=(),])|(" + _BRACED + r"|'[^']*')|([^\s=(),{}']+))")


def split_grouped(line: LogicalLine) -> list[Field] | None:
    """Fields of any line the grammar accepts, read by hand; None where it is not sure.

    The same fields as lark's tree of ``grammar/netlist.lark`` through ``_convert`` (a
    group's span at the line's start, as there), without importing lark: that costs a
    one-file run about 30 ms. None (every line the grammar refuses) sends the line to
    lark, whose errors are the ones shown. tests/netlist/test_reader.py holds the two
    to the same fields on generated lines. Groups nest on a list, not on the stack.
    """
    text = line.text
    span_at = line.span_at
    # open groups: (items so far, the key that waits for the group as its value, or None)
    stack: list[tuple[list[Field], tuple[str, int] | None]] = [([], None)]
    key: tuple[str, int] | None = None  # a WORD followed by '=': the value comes next
    position = 0
    tokens = list(_LINE_TOKEN.finditer(text))
    index = 0
    while index < len(tokens):
        match = tokens[index]
        index += 1
        if match.start() != position:
            return None
        position = match.end()
        punctuation, expression, word = match.group(1, 2, 3)
        items = stack[-1][0]
        if punctuation == "(":
            stack.append(([], key))
            key = None
            continue
        if punctuation is not None:
            if key is not None:
                return None  # '=' before ')', ',' or another '='
            if punctuation == ")":
                if len(stack) == 1:
                    return None
                group, waiting = stack.pop()
                field: Field = Group(tuple(group), span_at(0))
                if waiting is not None:
                    field = Assign(waiting[0].lower(), field, span_at(waiting[1]))
                stack[-1][0].append(field)
            elif punctuation == "=":
                return None  # an '=' that no WORD comes just before
            continue
        if expression is not None:
            field = Expr(expression[1:-1], span_at(match.start(2) + 1))
        else:
            start = match.start(3)
            following = tokens[index] if index < len(tokens) else None
            if key is None and following is not None and following.group(1) == "=":
                if following.start() != position:
                    return None
                position = following.end()
                index += 1
                key = (word, start)
                continue
            field = Word(word.lower(), word, span_at(start))
        if key is not None:
            field = Assign(key[0].lower(), field, span_at(key[1]))
            key = None
        items.append(field)
    if key is not None or len(stack) != 1:
        return None
    if text[position:].strip(" \t\f\r\n"):
        return None
    return stack[0][0]


def _top_level(text: str) -> Iterator[tuple[int, str]]:
    """(offset, character) for each character outside quoted and braced expressions."""
    braces = 0
    quoted = False
    for offset, char in enumerate(text):
        if char == "'" and not braces:
            quoted = not quoted
        elif quoted:
            continue
        elif char == "{":
            braces += 1
        elif char == "}":
            braces = max(braces - 1, 0)
        elif not braces:
            yield offset, char


def strip_inline_comment(text: str) -> str:
    """Remove a ``;`` comment or a ``$ `` comment, outside quotes and braces."""
    if ";" not in text and "$" not in text:
        return text
    for index, char in _top_level(text):
        if char == ";":
            return text[:index]
        if (
            char == "$"
            and (index == 0 or text[index - 1] in " \t")
            and (index + 1 == len(text) or text[index + 1] in " \t")
        ):
            return text[:index]
    return text


_LINE_BREAK = re.compile(r"\r\n|\r|\n")


def split_physical_lines(text: str) -> tuple[str, ...]:
    """The file's lines as an editor numbers them: broken at LF, CRLF or CR only.

    ``str.splitlines`` also breaks at form feeds, NEL and U+2028, which would number
    every later line past what the file holds.
    """
    lines = _LINE_BREAK.split(text)
    if lines[-1] == "":
        lines.pop()
    return tuple(lines)


def _decode(data: bytes) -> tuple[str, bool]:
    try:
        return data.decode("utf-8-sig"), False
    except UnicodeDecodeError:
        return data.decode("latin-1"), True


class _Reader:
    def __init__(self, options: ReadOptions, cwd: Path) -> None:
        self.options = options
        self.limits = options.limits
        self.cwd = cwd
        self.diagnostics: list[Diagnostic] = []
        self.directives: list[Directive] = []
        self.files: list[str] = []
        self.sources: dict[str, tuple[str, ...]] = {}
        self.inputs: list[tuple[str, str, str]] = []
        self.lines_read = 0  # counting a file again each time it is included
        self.bytes_read = 0
        self.stack: list[tuple[Path, str | None]] = []
        self.title = ""
        # Open .subckt blocks (header statement, body being collected) and .if blocks.
        self.blocks: list[tuple[Element, list[Statement]] | _OpenIf] = []
        self.top: list[Statement] = []
        self.missing: list[Missing] = []

    # -- diagnostics ---------------------------------------------------------------

    def report(self, severity: Severity, span: Span, message: str, code: str = "syntax") -> None:
        lines = self.sources.get(span.path, ())
        text = lines[span.line - 1] if 0 < span.line <= len(lines) else ""
        self.diagnostics.append(Diagnostic(severity, span, message, text, code))

    def fail(self, span: Span, message: str, code: str = "syntax") -> DiagnosticError:
        lines = self.sources.get(span.path, ())
        text = lines[span.line - 1] if 0 < span.line <= len(lines) else ""
        return DiagnosticError(Diagnostic(Severity.ERROR, span, message, text, code))

    def display(self, path: Path) -> str:
        try:
            return os.path.relpath(path, self.cwd) if path.is_relative_to(self.cwd) else str(path)
        except ValueError:
            return str(path)

    # -- files -----------------------------------------------------------------------

    def load(self, path: Path, shown: str, origin: Span | None) -> tuple[str, ...] | None:
        """Read a file's lines, or report why it cannot be read (at ``origin``)."""
        where = origin or Span(shown, 1, 1)
        code = "include" if origin else "file"
        if len(self.files) >= self.limits.max_files:
            self.report(
                Severity.ERROR,
                where,
                f"more than {self.limits.max_files} files read (limit max_files); "
                f"'{shown}' not read",
                "limit",
            )
            return None
        data = read_bounded(path, self.limits.max_file_bytes)
        if isinstance(data, _Refusal):
            self.report(Severity.ERROR, where, data.message.format(shown=shown), data.code or code)
            return None
        self.bytes_read += len(data)
        if self.bytes_read > self.limits.max_total_bytes:
            # Each file is bounded; so is their sum (2,000 files of 32 MB would be 64 GB).
            self.report(
                Severity.ERROR,
                where,
                f"more than {self.limits.max_total_bytes} bytes read from all files "
                f"(limit max_total_bytes); '{shown}' not read",
                "limit",
            )
            return None
        self.inputs.append(("file", str(path), _sha256(data)))
        return self.accept(data, shown, where, code)

    def count_lines(self, count: int, where: Span, shown: str) -> bool:
        """Add ``count`` lines to those read; False once the total passes its bound.

        A small file included a hundred thousand times is read each time: without this
        bound it would build gigabytes of statements before any other limit is reached.
        """
        limit = self.limits.max_lines_read
        over = self.lines_read > limit
        self.lines_read += count
        if self.lines_read <= limit:
            return True
        if not over:  # said once; later includes are skipped in silence
            self.report(
                Severity.ERROR,
                where,
                f"more than {limit} lines read, counting a file again each time it is "
                f"included (limit max_lines_read); '{shown}' and later includes not read",
                "limit",
            )
        return False

    def accept(self, data: bytes, shown: str, where: Span, code: str) -> tuple[str, ...] | None:
        """Check the bytes of a netlist (read from a file or standard input) and keep its lines."""
        refusal = refuse_content(data, self.limits.max_file_bytes)
        if refusal is not None:
            self.report(
                Severity.ERROR, where, refusal.message.format(shown=shown), refusal.code or code
            )
            return None
        text, fallback = _decode(data)
        lines = split_physical_lines(text)
        self.files.append(shown)
        self.sources[shown] = lines
        if fallback:
            self.report(
                Severity.NOTE,
                Span(shown, 1, 1),
                "file is not valid UTF-8; read as Latin-1",
                "encoding",
            )
        return lines

    def logical_lines(
        self, lines: Sequence[str], shown: str, has_title: bool
    ) -> Iterator[LogicalLine]:
        current: LogicalLine | None = None
        comment_line: int | None = None  # the last ';' / '$' comment line, while it is open
        # A statement refused for its length takes its '+' lines with it, so that they
        # are not read as part of the statement before it.
        dropped = False
        for number, raw in enumerate(lines, start=1):
            if has_title and number == 1:
                head = raw.lstrip()[:8].lower()
                if not (head.startswith(".subckt") or head.startswith(".model")):
                    # Reports show the title: no more of it than of any other line.
                    self.title = excerpt(raw.strip())
                    continue
                # A model library checked on its own: its first line is a card, not a
                # title (ngspice would drop it as one, and the library's .ends with it).
                self.report(
                    Severity.NOTE,
                    Span(shown, number, 1),
                    f"first line is a '{head.split()[0]}' card, read as one: the file is taken "
                    "for a library without a title line",
                    "title",
                )
            if len(raw) > self.limits.max_line_chars:
                self.report(
                    Severity.ERROR,
                    Span(shown, number, 1),
                    f"line is {len(raw)} characters long, over the limit of "
                    f"{self.limits.max_line_chars} (limit max_line_chars)",
                    "limit",
                )
                head = raw.lstrip()[:1]
                if head == "*":
                    continue  # a comment line, transparent however long
                if current is not None and head != "+":
                    yield current.finish()
                current, comment_line, dropped = None, None, True
                continue
            stripped = raw.lstrip()
            if not stripped:
                continue
            indent = len(raw) - len(stripped)
            if stripped[0] == "*":
                self.note_directive(stripped, shown, number, indent)
                continue
            if stripped[0] == "+":
                if dropped:
                    continue
                if current is None and comment_line is not None:
                    self.report(
                        Severity.WARNING,
                        Span(shown, number, indent + 1),
                        f"continuation line '+' continues the comment on line {comment_line}; "
                        "it is ignored, as ngspice ignores it",
                    )
                    continue
                if current is None:
                    self.report(
                        Severity.ERROR,
                        Span(shown, number, indent + 1),
                        "continuation line '+' has no statement before it to continue",
                    )
                    continue
                piece = strip_inline_comment(stripped[1:])
                if current.length + len(piece) > self.limits.max_line_chars:
                    self.report(
                        Severity.ERROR,
                        Span(shown, number, indent + 1),
                        "statement is too long (limit max_line_chars)",
                        "limit",
                    )
                    current, dropped = None, True
                    continue
                current.append(piece, number, indent + 2)
                continue
            text = strip_inline_comment(stripped)
            dropped = False
            if current is not None:
                yield current.finish()
                current = None
            if not text.strip():
                # A line of inline comment only (``; …``, ``$ …``). Unlike a '*' line it
                # ends the statement before it, and '+' lines after it continue the
                # comment: what ngspice 39 does (tests/netlist/test_hostile_input.py).
                comment_line = number
                continue
            comment_line = None
            current = LogicalLine(text, shown, [(0, number, indent + 1)])
        if current is not None:
            yield current.finish()

    def note_directive(self, comment: str, shown: str, number: int, indent: int) -> None:
        body = comment[1:].lstrip()
        if body[: len(DIRECTIVE_PREFIX)].lower() != DIRECTIVE_PREFIX:
            return
        text = body[len(DIRECTIVE_PREFIX) :].strip()
        # The column where the directive's own text starts, so offsets into it land right.
        column = indent + 1 + (len(comment.rstrip()) - len(text))
        self.directives.append(Directive(text, Span(shown, number, column), column))

    # -- statements ------------------------------------------------------------------

    def emit(self, statement: Statement) -> None:
        if not self.blocks:
            self.top.append(statement)
            return
        block = self.blocks[-1]
        if isinstance(block, _OpenIf):
            block.branches[-1][1].append(statement)
        else:
            block[1].append(statement)

    def note_missing(self, kind: str, name: str, span: Span, message: str) -> None:
        """Record something the deck names that is not there; the read goes on without it."""
        self.missing.append(Missing(kind, name, span))
        self.report(Severity.WARNING, span, message, "missing")

    # -- .if / .elseif / .else / .endif ------------------------------------------------

    def conditional(self, line: LogicalLine, card: str) -> None:
        rest = line.text[len(card) :]
        start = len(card) + len(rest) - len(rest.lstrip())
        condition = Expr(_LONE_EQUALS.sub("==", rest.strip()), line.span_at(start))
        top = self.blocks[-1] if self.blocks else None
        if card == ".if":
            depth = sum(isinstance(b, _OpenIf) for b in self.blocks)
            if depth >= self.limits.max_if_nesting:
                raise self.fail(
                    line.span,
                    f"'.if' blocks nested deeper than {self.limits.max_if_nesting} "
                    "(limit max_if_nesting)",
                    "limit",
                )
            if not condition.text:
                raise self.fail(line.span, "'.if' needs a condition: expected '.if (EXPRESSION)'")
            self.blocks.append(_OpenIf(line.span, [(condition, [])]))
            return
        if not isinstance(top, _OpenIf):
            raise self.fail(line.span, f"'{card}' without an open '.if'", "if")
        if top.has_else and card != ".endif":
            raise self.fail(
                line.span, f"'{card}' after the '.else' of the '.if' on line {top.span.line}", "if"
            )
        if card == ".elseif":
            if not condition.text:
                raise self.fail(line.span, "'.elseif' needs a condition")
            top.branches.append((condition, []))
        elif card == ".else":
            top.branches.append((None, []))
            top.has_else = True
        else:  # .endif
            self.blocks.pop()
            self.emit(top.block())

    def close_open_ifs(self, span: Span, why: str) -> None:
        """Close the .if blocks on top of the stack, reporting each as unbalanced."""
        while self.blocks and isinstance(self.blocks[-1], _OpenIf):
            open_if = self.blocks.pop()
            assert isinstance(open_if, _OpenIf)
            self.report(
                Severity.ERROR,
                open_if.span,
                f"'.if' has no '.endif' ({why} at {span.path}:{span.line})",
                "if",
            )
            self.emit(open_if.block())

    def read_file(self, path: Path, section: str | None, origin: Span | None) -> bool:
        """Read one file (or one library section of it); False if the section was absent."""
        shown = self.display(path)
        key = (path, section)
        where = origin or Span(shown, 1, 1)
        if key in self.stack:
            chain = " -> ".join(self.display(p) for p, _ in self.stack) + f" -> {shown}"
            self.report(Severity.ERROR, where, f"include cycle: {chain}", "include")
            return True
        if len(self.stack) > self.limits.max_include_depth:
            self.report(
                Severity.ERROR,
                where,
                f"includes nested deeper than {self.limits.max_include_depth} "
                "(limit max_include_depth)",
                "limit",
            )
            return True
        lines = self.sources.get(shown)
        if lines is None:
            lines = self.load(path, shown, origin)
            if lines is None:
                return True
        if not self.count_lines(len(lines), where, shown):
            return True
        self.stack.append(key)
        try:
            return self.read_lines(lines, shown, path, section, has_title=origin is None)
        finally:
            self.stack.pop()

    def read_lines(
        self, lines: Sequence[str], shown: str, path: Path, section: str | None, has_title: bool
    ) -> bool:
        """Read statements from lines; with ``section``, only that ``.lib`` section's."""
        in_control = False
        skipping: str | None = None  # a library section that is not wanted
        inside_wanted = False
        found = section is None
        last: LogicalLine | None = None
        for line in self.logical_lines(lines, shown, has_title):
            last = line
            words = line.text.split()
            card = words[0].lower().split("(", 1)[0] if words else ""
            if in_control:
                in_control = card != ".endc"
                continue
            if card == ".control":
                in_control = True
                continue
            active = skipping is None and (section is None or inside_wanted)
            if card == ".endl":
                if skipping is not None:
                    skipping = None
                elif inside_wanted:
                    return True
                else:
                    self.report(Severity.WARNING, line.span, "'.endl' without a '.lib' section")
                continue
            if card == ".lib" and len(words) == 2:
                name = words[1].lower()
                if (
                    skipping is None
                    and section is not None
                    and not inside_wanted
                    and name == section
                ):
                    inside_wanted = found = True
                elif skipping is None:
                    # A section definition: read only when a `.lib FILE NAME` selects it.
                    skipping = name
                continue
            if not active:
                continue
            if card == ".end":
                break
            try:
                if card == ".lib":
                    self.include(line, path, library=True)
                else:
                    self.statement(line, card, path)
            except DiagnosticError as exc:
                self.diagnostics.append(exc.diagnostic)
        if skipping is not None and last is not None:
            self.report(Severity.ERROR, last.span, f"library section '{skipping}' has no '.endl'")
        if in_control and last is not None:
            self.report(Severity.WARNING, last.span, "'.control' block has no '.endc'")
        return found

    def statement(self, line: LogicalLine, card: str, path: Path) -> None:
        if card.startswith("."):
            if card in INCLUDE_CARDS:
                self.include(line, path, library=False)
            elif card in IGNORED_CARDS:
                return
            elif card in (".param", ".global_param"):
                self.emit(ParamCard(tuple(self.assignments(line, len(card))), line.span))
            elif card in (".if", ".elseif", ".else", ".endif"):
                self.conditional(line, card)
            elif card == ".func":
                self.emit(self.function(line))
            elif card == ".subckt":
                self.open_subckt(line)
            elif card == ".ends":
                self.close_subckt(line)
            elif card == ".model":
                self.model_card(line)
            elif card == ".global":
                fields = self.parse(line)[1:]
                self.emit(GlobalCard(tuple(f for f in fields if isinstance(f, Word)), line.span))
            elif card in OPTION_CARDS or card == ".tran":
                # Analysis and option cards never fail a read: a line that does not
                # parse is a warning and left out.
                try:
                    card_fields = tuple(self.parse(line)[1:])
                except DiagnosticError as exc:
                    d = exc.diagnostic
                    self.report(Severity.WARNING, d.span, f"'{card}' ignored: {d.message}", d.code)
                    return
                if card == ".tran":
                    self.emit(TranCard(card_fields, line.span))
                else:
                    self.emit(OptionCard(card_fields, line.span))
            elif card in (".data", ".alter"):
                self.report(
                    Severity.WARNING,
                    line.span,
                    f"'{card}' is not supported by drivelint; the card is ignored",
                    "unsupported",
                )
            else:
                self.report(
                    Severity.WARNING,
                    line.span,
                    f"unknown control card{_quote_word(card, ' ')} ignored",
                    "unknown-card",
                )
            return
        letter = card[:1]
        if letter in ELEMENT_LETTERS:
            behavioural = None
            if letter in "eg":
                behavioural = self.table_form(line)
            if behavioural is None and letter in "beg":
                behavioural = self.behavioural(line)
            fields = behavioural if behavioural is not None else self.parse(line)
            name = fields[0]
            if not isinstance(name, Word):
                raise self.fail(line.span, "expected an element name at the start of the line")
            if letter in "vi":
                fields = self.pwl_file(fields, path)
            self.emit(Element(name.text, tuple(fields[1:]), line.span))
        elif letter in UNSUPPORTED_LETTERS:
            self.report(
                Severity.WARNING,
                line.span,
                f"element{_quote_word(card, ' ')} of kind '{letter.upper()}' is not modelled "
                "by drivelint; line ignored",
                "unsupported",
            )
        else:
            raise self.fail(
                line.span,
                f"the line{_quote_word(line.text.split()[0], ' ')} does not start a statement: "
                "expected an element name (R C L K D Q M J V I E F G H B S W X …) or a dot-card",
            )

    def behavioural(self, line: LogicalLine) -> list[Field] | None:
        """``B1 n 0 V = u(v(a)-1) * 5``: everything after ``V=`` is one expression.

        Behavioural values are usually written without braces, so the field grammar
        would cut them at the first parenthesis.
        """
        match = _BEHAVIOURAL.search(line.text)
        if match is None:
            return None
        text = line.text
        head = LogicalLine(text[: match.start()], line.path, line.segments)
        fields = self.parse(head)
        # Instance parameters after the expression (tc1=…, m=…) end it.
        cut = len(text)
        state = _Nesting()
        position = match.end()
        for assign in _ASSIGN_START.finditer(text, match.end()):
            _advance(text, position, assign.start(), state)
            position = assign.start()
            if state.top_level and text[assign.start() - 1] in " \t":
                cut = assign.start()
                break
        value = text[match.end() : cut].strip()
        offset = text.index(value, match.end()) if value else match.end()
        if not value:
            raise self.fail(line.span_at(match.end()), f"'{match.group(1)}=' has no expression")
        value, offset = _unwrap(value, offset)
        key = match.group(1).lower()
        fields.append(Assign(key, Expr(value, line.span_at(offset)), line.span_at(match.start(1))))
        if cut < len(text):
            # Parse the tail in place: padding keeps every offset where it was.
            tail = LogicalLine(" " * cut + text[cut:], line.path, line.segments)
            fields.extend(self.parse(tail))
        return fields

    def table_form(self, line: LogicalLine) -> list[Field] | None:
        """``E1 n+ n- TABLE {expr} [=] (x1, y1) (x2, y2) …`` as ``table=`` and its points.

        The points are read as a flat list of values however they are grouped, since
        real libraries are loose with the parentheses around them.
        """
        match = _TABLE_FORM.search(line.text)
        if match is None:
            return None
        head = LogicalLine(line.text[: match.start()], line.path, line.segments)
        fields = self.parse(head)
        brace = match.end()
        depth, end = 0, brace
        for end in range(brace, len(line.text)):
            char = line.text[end]
            depth += (char == "{") - (char == "}")
            if depth == 0:
                break
        if depth:
            raise self.fail(line.span_at(brace), "the TABLE input expression is never closed")
        expression = Expr(line.text[brace + 1 : end], line.span_at(brace + 1))
        points: list[Field] = []
        for item in _TABLE_ITEM.finditer(line.text, end + 1):
            text = item.group()
            span = line.span_at(item.start())
            if text[0] == "{":
                points.append(Expr(text[1:-1], line.span_at(item.start() + 1)))
            else:
                points.append(Word(text.lower(), text, span))
        if len(points) < 2 or len(points) % 2:
            raise self.fail(
                line.span_at(end + 1),
                f"TABLE needs (input, output) pairs after its expression; found {len(points)} "
                "values",
            )
        fields.append(Assign("table", expression, line.span_at(match.start() + 1)))
        fields.append(Group(tuple(points), line.span_at(end + 1)))
        return fields

    def pwl_file(self, fields: list[Field], path: Path) -> list[Field]:
        """``PWL FILE=name``: the file's time-value pairs, read in place of the keyword.

        The file is read as an include is (the same root sandbox, size bound and
        refusal of binary files), and its numbers keep their own spans.
        """
        for index, item in enumerate(fields):
            if not (isinstance(item, Assign) and item.key == "file" and index > 0):
                continue
            before = fields[index - 1]
            if not (isinstance(before, Word) and before.text == "pwl"):
                continue
            value = item.value
            name = value.raw if isinstance(value, Word) else getattr(value, "text", "")
            name = name.strip().strip('"')
            target = self.resolve(name, path, value.span)
            if target is None:
                return fields
            if not target.exists():
                self.note_missing(
                    "include",
                    name,
                    value.span,
                    f"PWL file '{name}' not found; the source is read without its waveform",
                )
                return fields[: index - 1] + fields[index + 1 :]
            shown = self.display(target)
            lines = self.sources.get(shown) or self.load(target, shown, value.span)
            if lines is None:
                return fields[: index - 1] + fields[index + 1 :]
            points: list[Field] = []
            for number, text in enumerate(lines, start=1):
                body = text.split("*", 1)[0].split(";", 1)[0]
                for token in re.finditer(r"[^\s,()]+", body):
                    if len(points) >= self.limits.max_pwl_points:
                        raise self.fail(
                            value.span,
                            f"PWL file '{name}' holds more than {self.limits.max_pwl_points} "
                            "values (limit max_pwl_points)",
                            "limit",
                        )
                    word = token.group()
                    points.append(Word(word.lower(), word, Span(shown, number, token.start() + 1)))
            return [*fields[:index], Group(tuple(points), value.span), *fields[index + 1 :]]
        return fields

    def function(self, line: LogicalLine) -> FuncCard:
        """``.func NAME(A, B) {BODY}`` (also with quotes, or with nothing around the body)."""
        match = _FUNC_HEAD.match(line.text)
        if match is None:
            raise self.fail(line.span, "expected '.func NAME(PARAM, …) {EXPRESSION}'")
        params = tuple(p.lower() for p in re.split(r"[\s,]+", match.group(2).strip()) if p)
        body = line.text[match.end() :].strip()
        offset = line.text.index(body, match.end()) if body else match.end()
        if body[:1] + body[-1:] in ("{}", "''"):
            body, offset = body[1:-1], offset + 1
        if not body.strip():
            raise self.fail(line.span_at(match.end()), f"'.func {match.group(1)}' has no body")
        if len(set(params)) != len(params):
            raise self.fail(line.span, f"'.func {match.group(1)}' names a parameter twice")
        return FuncCard(match.group(1).lower(), params, Expr(body, line.span_at(offset)), line.span)

    def parse(self, line: LogicalLine) -> list[Field]:
        fields: list[Field] | None = None
        if _FLAT_CHARS.isdisjoint(line.text):
            fields = split_flat(line)
        if fields is None:
            fields = self.parse_with_grammar(line)
        if len(line.text) > self.limits.max_word_chars:  # else no word can be too long
            self.check_words(fields)
        return fields

    def check_words(self, fields: Sequence[Field]) -> None:
        """Names and numbers are short: one of half a megabyte would be echoed by every
        report that names the device or net it makes."""
        limit = self.limits.max_word_chars
        for item in fields:
            if isinstance(item, Group):
                self.check_words(item.items)
                continue
            words = [item.value] if isinstance(item, Assign) else [item]
            long = len(item.key) if isinstance(item, Assign) else 0
            long = max([long, *(len(w.raw) for w in words if isinstance(w, Word))])
            if long > limit:
                raise self.fail(
                    item.span,
                    f"a name or value is {long} characters long, over the limit of {limit} "
                    "(limit max_word_chars)",
                    "limit",
                )

    def parse_with_grammar(self, line: LogicalLine, by_hand: bool = True) -> list[Field]:
        """The fields of a line with groups: read by hand (``split_grouped``) where it
        parses, by lark (``by_hand=False``, or when the hand reader passes it on) for the
        error message otherwise."""
        limit = self.limits.max_expression_depth
        too_deep = _group_too_deep(line.text, limit)
        if too_deep is not None:
            # Checked before lark: the tree of a line nested thousands deep would
            # overflow the recursion of every walk over it.
            raise self.fail(
                line.span_at(too_deep),
                f"parentheses nested more than {limit} levels deep (limit max_expression_depth)",
                "limit",
            )
        fields = split_grouped(line) if by_hand else None
        if fields is not None:
            return fields
        from lark.exceptions import UnexpectedCharacters, UnexpectedInput, UnexpectedToken

        try:
            tree = _LineParser.get().parse(line.text)
        except UnexpectedCharacters as exc:
            position = exc.pos_in_stream or 0
            char = line.text[position] if position < len(line.text) else ""
            hint = {
                "{": "an expression in braces that is never closed, or braces nested "
                "(write the expression in one pair of braces)",
                "'": "a quoted expression that is never closed",
            }.get(char, f"unexpected character {char!r}")
            raise self.fail(line.span_at(position), hint) from None
        except UnexpectedToken as exc:
            token = exc.token
            offset = getattr(token, "start_pos", None)
            if token.type == "$END":
                message = "unbalanced parenthesis: the line ends before ')'"
                offset = len(line.text.rstrip()) - 1
            elif token.type == "RPAR":
                message = "unbalanced parenthesis: ')' without '('"
            elif token.type == "EQUAL":
                message = "'=' without a parameter name before it"
            else:
                message = f"unexpected {str(token)!r}: expected a value"
            raise self.fail(line.span_at(offset or 0), message) from None
        except UnexpectedInput as exc:  # pragma: no cover - lark has no other subclasses here
            raise self.fail(line.span, f"cannot parse line: {exc}") from None
        return _convert(tree, line)

    def assignments(self, line: LogicalLine, start: int) -> Iterator[Assign]:
        """``name = expression`` pairs, where an expression may contain spaces.

        One pass over the text: the nesting between two candidate ``name=`` matches is
        carried forward (``_advance``), so a card of many assignments is read in time
        linear in its length.
        """
        text = line.text
        matches: list[re.Match[str]] = []
        state = _Nesting()
        position = start
        for match in _ASSIGN_START.finditer(text, start):
            _advance(text, position, match.start(), state)
            position = match.start()
            before = text[match.start() - 1] if match.start() > 0 else " "
            if state.top_level and not (before.isalnum() or before in "_."):
                matches.append(match)
        if not matches and text[start:].strip():
            raise self.fail(line.span_at(start + 1), "expected name=value after the card")
        for index, match in enumerate(matches):
            end = matches[index + 1].start() if index + 1 < len(matches) else len(text)
            value = text[match.end() : end].strip().rstrip(",").strip()
            value_offset = text.index(value, match.end()) if value else match.end()
            if not value:
                raise self.fail(
                    line.span_at(match.end()), f"parameter '{match.group(1)}' has no value"
                )
            value, value_offset = _unwrap(value, value_offset)
            yield Assign(
                match.group(1).lower(),
                Expr(value, line.span_at(value_offset)),
                line.span_at(match.start()),
            )

    def model_card(self, line: LogicalLine) -> None:
        limit = self.limits.max_expression_depth
        too_deep = _group_too_deep(line.text, limit)
        if too_deep is not None:
            raise self.fail(
                line.span_at(too_deep),
                f"parentheses nested more than {limit} levels deep (limit max_expression_depth)",
                "limit",
            )
        # The parentheses of a model card only group its parameters, and libraries are
        # loose with them (one too many is common): read them as spaces, which keeps
        # every offset.
        text = _parentheses_as_spaces(line.text)
        fields = self.parse(LogicalLine(text, line.path, line.segments))[1:]
        if len(fields) < 2 or not isinstance(fields[0], Word) or not isinstance(fields[1], Word):
            raise self.fail(line.span, "expected '.model NAME TYPE (PARAM=VALUE …)'")
        params: list[Assign] = []
        skipped: list[str] = []
        kind = fields[1].text.split("(", 1)[0]
        if kind in NUMERICAL_DEVICES:
            # Numerical device models (a mesh and doping profile on sub-lines): nothing in
            # them feeds a gate-drive check.
            self.report(
                Severity.WARNING,
                line.span,
                f"'.model {fields[0].raw}' is a numerical device model ({kind}); its "
                "parameters are skipped",
                "unsupported",
            )
            self.emit(ModelCard(fields[0].text, kind, (), line.span))
            return
        items = [
            sub
            for item in fields[2:]
            for sub in (item.items if isinstance(item, Group) else (item,))
        ]
        index = 0
        while index < len(items):
            sub = items[index]
            index += 1
            value = sub.value if isinstance(sub, Assign) else None
            if isinstance(value, Word) and value.raw.startswith("["):
                # An XSPICE array, cntl_array=[0 1]: its items run to the closing bracket.
                while "]" not in value.raw and index < len(items):
                    last = items[index]
                    index += 1
                    if isinstance(last, Word) and "]" in last.raw:
                        break
                assert isinstance(sub, Assign)
                skipped.append(sub.key)
            elif isinstance(sub, Assign):
                params.append(sub)
            elif isinstance(sub, Word):
                # A flag without '=' (VDMOS pchan, LTRA steplimit, ...): set to 1.
                params.append(Assign(sub.text, Word("1", "1", sub.span), sub.span))
            else:
                raise self.fail(sub.span, "expected PARAM=VALUE in the model's parameter list")
        if skipped:
            self.report(
                Severity.WARNING,
                line.span,
                f"'.model {fields[0].raw}': array parameters skipped ({', '.join(skipped)})",
                "unsupported",
            )
        self.emit(ModelCard(fields[0].text, fields[1].text, tuple(params), line.span))

    def open_subckt(self, line: LogicalLine) -> None:
        if sum(not isinstance(b, _OpenIf) for b in self.blocks) >= self.limits.max_subckt_nesting:
            raise self.fail(
                line.span,
                f"subcircuit definitions nested deeper than {self.limits.max_subckt_nesting} "
                "(limit max_subckt_nesting)",
                "limit",
            )
        fields = self.parse(line)
        if len(fields) < 2 or not isinstance(fields[1], Word):
            raise self.fail(line.span, "expected '.subckt NAME PORT … [params: NAME=VALUE …]'")
        self.blocks.append((Element(fields[1].text, tuple(fields[2:]), line.span), []))

    def close_subckt(self, line: LogicalLine) -> None:
        self.close_open_ifs(line.span, "'.ends' comes first")
        if not self.blocks:
            raise self.fail(line.span, "'.ends' without a '.subckt' to close")
        block = self.blocks.pop()
        assert not isinstance(block, _OpenIf)
        header, body = block
        words = line.text.split()
        if len(words) > 1 and words[1].lower() != header.name:
            self.report(
                Severity.WARNING,
                line.span,
                f"'.ends {words[1]}' closes subcircuit '{header.name}'",
            )
        ports: list[Word] = []
        params: list[Assign] = []
        for item in header.fields:
            if isinstance(item, Word) and item.text.startswith("params:"):
                rest = item.text[len("params:") :]
                if rest:
                    raise self.fail(item.span, "expected 'params:' followed by NAME=VALUE")
                continue
            if isinstance(item, Word) and not params:
                ports.append(item)
            elif isinstance(item, Assign):
                params.append(item)
            else:
                raise self.fail(item.span, "expected a port name or NAME=VALUE")
        self.emit(Subckt(header.name, tuple(ports), tuple(params), tuple(body), header.span))

    def include(self, line: LogicalLine, path: Path, library: bool) -> None:
        parts = _split_path_args(line.text)
        card = parts[0].lower() if parts else ""
        args = parts[1:]
        # A quoted name with spaces makes `.lib "a b"` one argument: not a section header
        # (read_lines split it in two), and no section either.
        if not args or (library and len(args) != 2) or (not library and len(args) > 1):
            form = "'.lib FILE SECTION'" if library else "'.include FILE'"
            raise self.fail(line.span, f"expected {form}", "include")
        name = args[0]
        section = args[1].lower() if library else None
        where = line.span_at(len(card) + 1)
        kind = "library" if library else "include"
        if self.lines_read > self.limits.max_lines_read:
            return  # past the bound on lines read (said once, in count_lines)
        if _absent(name, ()):
            # A library at a path of the machine the deck was written on.
            self.inputs.append(("lookup", name, ""))
            self.note_missing(
                kind,
                name,
                where,
                f"{kind} file '{name}' is not on this machine; the deck is read without it",
            )
            return
        target = self.resolve(name, path, where)
        if target is None:
            return
        if not target.exists():
            self.note_missing(
                kind,
                name,
                where,
                f"{kind} file '{name}' not found; the deck is read without it",
            )
            return
        if not self.read_file(target, section, line.span):
            self.report(
                Severity.ERROR,
                line.span,
                f"library section '{section}' not found in '{self.display(target)}'",
                "include",
            )

    def resolve(self, name: str, including: Path, span: Span) -> Path | None:
        try:
            candidate = Path(name).expanduser()
        except RuntimeError:
            # '~user' naming no user, or '~' with no home directory known.
            home = name.split("/", 1)[0]
            raise self.fail(
                span, f"include '{name}': '{home}' does not name a home directory", "include"
            ) from None
        tries = (
            [candidate]
            if candidate.is_absolute()
            else [including.parent / candidate, *(p / candidate for p in self.options.search_path)]
        )
        try:
            found = None
            for attempt in tries:
                # Every lookup is recorded, found or not: a file created later where one
                # was missing (or shadowing a search-path file) must change the result key.
                if attempt.exists():
                    found = attempt
                    self.inputs.append(("lookup", str(attempt.absolute()), str(attempt.resolve())))
                    break
                self.inputs.append(("lookup", str(attempt.absolute()), ""))
            resolved = (found or tries[0]).resolve()
        except RuntimeError:
            raise self.fail(
                span, f"include '{name}' is a loop of symbolic links", "include"
            ) from None
        except (OSError, ValueError) as exc:
            # A name the file system cannot look up: too long, or holding a NUL byte or
            # a character with no encoding in file names.
            reason = exc.strerror if isinstance(exc, OSError) and exc.strerror else str(exc)
            raise self.fail(
                span, f"include '{name}' is not a usable file name: {reason}", "include"
            ) from None
        if found is None:
            # Nothing is read from a name that finds no file, wherever it points: the
            # caller notes it as missing (and the lookups above key the cache on it).
            return resolved
        root = self.options.root
        inside = root is not None and resolved.is_relative_to(root.resolve())
        if root is not None and not inside and not self.options.allow_outside_root:
            self.report(
                Severity.ERROR,
                span,
                f"include '{name}' resolves outside the project root '{self.display(root)}'; "
                "refused (--allow-outside-root permits it)",
                "include",
            )
            return None
        hidden = hidden_part(Path(name), resolved, root.resolve() if inside and root else None)
        if hidden is not None and not self.options.allow_hidden_includes:
            self.report(
                Severity.ERROR,
                span,
                f"include '{name}' is in a hidden or version-control location ('{hidden}'); "
                "refused: such files hold settings and secrets, not netlists",
                "include",
            )
            return None
        return resolved


@dataclass(slots=True)
class _Nesting:
    """Parentheses, braces and quotes open at some point of a line."""

    parens: int = 0
    braces: int = 0
    quoted: bool = False

    @property
    def top_level(self) -> bool:
        return not (self.parens or self.braces or self.quoted)


def _advance(text: str, start: int, end: int, state: _Nesting) -> None:
    """Carry ``state`` over ``text[start:end]``; every character is looked at once."""
    for char in text[start:end]:
        if char == "'":
            state.quoted = not state.quoted
        elif state.quoted:
            continue
        elif char == "(":
            state.parens += 1
        elif char == ")":
            state.parens -= 1
        elif char == "{":
            state.braces += 1
        elif char == "}":
            state.braces -= 1


def _parentheses_as_spaces(text: str) -> str:
    """The text with its parentheses outside braces and quotes turned into spaces."""
    chars = list(text)
    for offset, char in _top_level(text):
        if char in "()":
            chars[offset] = " "
    return "".join(chars)


def _absent(name: str, folders: Sequence[Path]) -> bool:
    """True when ``name`` certainly names no file: absolute and absent, or absent in every
    folder it is looked for in. A name the file system cannot look up is left to
    ``resolve``, which says why."""

    def missing(candidate: Path) -> bool:
        try:
            os.stat(candidate)
        except FileNotFoundError:
            return True
        except (OSError, ValueError):
            raise _Unusable from None
        return False

    try:
        if name.startswith("~"):
            return False
        candidate = Path(name)
        if candidate.is_absolute():
            return not folders and missing(candidate)
        return bool(folders) and all(missing(folder / candidate) for folder in folders)
    except (_Unusable, ValueError):
        return False


class _Unusable(Exception):
    """A file name the file system refuses to look up."""


def _unwrap(value: str, offset: int) -> tuple[str, int]:
    """An expression without its outer quotes, or its outer braces when they are one pair."""
    if value[0] == "'" and value[-1] == "'" and len(value) > 1:
        return value[1:-1], offset + 1
    if value[0] == "{" and value[-1] == "}":
        depth = 0
        for index, char in enumerate(value):
            depth += (char == "{") - (char == "}")
            if depth == 0:
                if index == len(value) - 1:
                    return value[1:-1], offset + 1
                break
    return value, offset


# Folders of version-control systems; names starting with '.' are refused as well.
VCS_FOLDERS = frozenset({".git", ".hg", ".svn", ".bzr", "_darcs", "cvs", ".pijul", ".fossil"})


def hidden_part(written: Path, resolved: Path, root: Path | None) -> str | None:
    """The first dot-file, dot-folder or version-control folder on an include's way, if any.

    Checked on the name as written, on the resolved file's name, and on the folders between
    the project root and the file (the folders above the root are the user's business).
    """
    parts = [p for p in written.parts if p not in (".", "..", "/", "~")]
    below = resolved.relative_to(root).parts if root is not None else (resolved.name,)
    for part in (*parts, *below, resolved.name):
        if part.startswith(".") and part not in (".", "..") or part.lower() in VCS_FOLDERS:
            return part
    return None


@dataclass(frozen=True, slots=True)
class _Refusal:
    """Why a file is not read, and the diagnostic code to report it with."""

    message: str  # with {shown} for the file's name
    code: str = ""  # "" : the caller's code (file or include)


def _sha256(data: bytes) -> str:
    import hashlib

    return hashlib.sha256(data).hexdigest()


def read_bounded(path: Path, max_bytes: int) -> bytes | _Refusal:
    """A regular file's bytes, at most ``max_bytes``; never blocks on a FIFO or a device.

    The file is opened without blocking and checked on the open descriptor, so a FIFO or a
    device swapped in after a check cannot hang the read.
    """
    import stat

    try:
        flags = os.O_RDONLY | getattr(os, "O_NONBLOCK", 0) | getattr(os, "O_NOCTTY", 0)
        fd = os.open(path, flags)
    except FileNotFoundError:
        return _Refusal("file '{shown}' not found")
    except IsADirectoryError:
        return _Refusal("'{shown}' is a directory, not a netlist")
    except OSError as exc:
        return _Refusal(f"cannot read '{{shown}}': {exc.strerror or exc}")
    try:
        info = os.fstat(fd)
        if stat.S_ISDIR(info.st_mode):
            return _Refusal("'{shown}' is a directory, not a netlist")
        if not stat.S_ISREG(info.st_mode):
            return _Refusal("'{shown}' is not a regular file (a FIFO, socket or device); not read")
        if info.st_size > max_bytes:
            return _Refusal(_too_big(info.st_size, max_bytes), "limit")
        chunks = []
        total = 0
        while total <= max_bytes:  # the size can grow between fstat and the read
            chunk = os.read(fd, min(1 << 20, max_bytes + 1 - total))
            if not chunk:
                break
            chunks.append(chunk)
            total += len(chunk)
        return b"".join(chunks)
    except OSError as exc:
        return _Refusal(f"cannot read '{{shown}}': {exc.strerror or exc}")
    finally:
        os.close(fd)


def _too_big(size: int, max_bytes: int) -> str:
    return (
        f"'{{shown}}' is {size} bytes, over the limit of {max_bytes} bytes (limit max_file_bytes)"
    )


# C0 control characters that text files do not hold (TAB, LF, VT, FF, CR and ESC aside).
_CONTROL_BYTES = bytes(b for b in range(32) if b not in (9, 10, 11, 12, 13, 27)) + b"\x7f"


def refuse_content(data: bytes, max_bytes: int) -> _Refusal | None:
    """Why these bytes are not a netlist to read: too large, binary; or None."""
    if len(data) > max_bytes:
        return _Refusal(_too_big(len(data), max_bytes), "limit")
    if b"\x00" in data:
        return _Refusal("'{shown}' is a binary file, not a netlist")
    # Text with a stray control character is still text; a file that is mostly control
    # bytes is not (an image, an archive, a compiled model without NULs).
    sample = data[: 1 << 16]
    controls = len(sample) - len(sample.translate(None, _CONTROL_BYTES))
    if sample and controls * 20 > len(sample):
        return _Refusal("'{shown}' is a binary file (mostly control bytes), not a netlist")
    return None


_PLAIN_NAME = re.compile(r"[.]?[A-Za-z0-9_$#\[\]<>+\-]{1,40}")


def _quote_word(word: str, before: str = "") -> str:
    """A line's first word as a message quotes it (after ``before``), when it looks like a
    SPICE name; else nothing. A word such as ``TOKEN=…`` from a file that is not a netlist
    must not carry its value into a report."""
    return f"{before}'{word}'" if _PLAIN_NAME.fullmatch(word) else ""


def _group_too_deep(text: str, limit: int) -> int | None:
    """Offset of the first '(' nested deeper than ``limit``, outside braces and quotes."""
    depth = 0
    for offset, char in _top_level(text):
        if char == "(":
            depth += 1
            if depth > limit:
                return offset
        elif char == ")":
            depth = max(depth - 1, 0)
    return None


def _split_path_args(text: str) -> list[str]:
    """Split ``.include "a b.lib"`` style arguments, honouring quotes."""
    out: list[str] = []
    for match in re.finditer(r'"([^"]*)"|\'([^\']*)\'|(\S+)', text):
        out.append(next(g for g in match.groups() if g is not None))
    return out


def read_deck(
    path: str | Path, options: ReadOptions | None = None, text: str | bytes | None = None
) -> Deck:
    """Read a top-level netlist and everything it includes. Never raises for bad input.

    ``text`` is the netlist itself (standard input, or a test's string): it goes through the
    same size, NUL and binary checks as a file's bytes.
    """
    options = options or ReadOptions()
    cwd = Path.cwd()
    reader = _Reader(options, cwd)
    target = Path(path)
    if text is not None:
        shown = str(path)
        data = text.encode("utf-8", "surrogatepass") if isinstance(text, str) else text
        absolute = resolved(target)
        loaded = reader.accept(data, shown, Span(shown, 1, 1), "file")
    else:
        shown = reader.display(target.absolute()) if target.is_absolute() else str(path)
        absolute = resolved(target)
        reader.inputs.append(("lookup", str(target.absolute()), str(absolute)))
        loaded = reader.load(absolute, shown, None)
    if loaded is not None and reader.count_lines(len(loaded), Span(shown, 1, 1), shown):
        reader.stack.append((absolute, None))
        try:
            reader.read_lines(loaded, shown, absolute, None, has_title=True)
        except DiagnosticError as exc:
            reader.diagnostics.append(exc.diagnostic)
        reader.stack.pop()
    while reader.blocks:
        end = Span(shown, max(len(reader.sources.get(shown, ())), 1), 1)
        reader.close_open_ifs(end, "the deck ends")
        if reader.blocks:
            block = reader.blocks.pop()
            assert not isinstance(block, _OpenIf)
            header = block[0]
            reader.report(Severity.ERROR, header.span, f"subcircuit '{header.name}' has no '.ends'")
    return Deck(
        path=shown,
        title=reader.title,
        statements=tuple(reader.top),
        files=tuple(reader.files),
        directives=tuple(reader.directives),
        diagnostics=tuple(reader.diagnostics),
        sources=reader.sources,
        missing=tuple(reader.missing),
        inputs=tuple(reader.inputs),
    )
