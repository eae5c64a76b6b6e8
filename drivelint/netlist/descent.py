"""A hand-written reader of the expression grammar, for expressions that parse.

``grammar/expr.lark`` stays the definition of the language and lark its reference
parser. Importing lark and loading its tables costs about 30 ms, a fifth of a whole
one-file ``check``, so the common case, an expression that parses, is read here by
recursive descent into the very tree lark builds: the same rule names (``sum``,
``power``, ``prefix`` …), the same flat operator chains, the same tokens with the same
types and offsets, ``None`` where an optional part is absent. Anything this reader does
not accept (every syntax error, and nesting deeper than it cares to recurse) returns
None, and the caller asks lark, whose error messages are the ones users see.
``tests/netlist/test_descent.py`` holds the two to the same trees, and to the same
refusals, on generated text.
"""

from __future__ import annotations

import re
from typing import Final

# The terminals of grammar/expr.lark, pattern for pattern.
_NUMBER: Final = re.compile(r"(?:\d+\.?\d*|\.\d+)(?:[eE][+-]?\d+)?(?:[A-Za-z_][A-Za-z0-9_]*)?")
_NAME: Final = re.compile(r"[A-Za-z_][A-Za-z0-9_.]*")
_PROBE: Final = re.compile(r"[vViI]\s*\(")
_PROBED: Final = re.compile(r"[^\s,()]+")
_SPACE: Final = re.compile(r"\s+")
_PREFIXES: Final = {"-": "MINUS", "+": "PLUS", "!": "BANG"}
# Operators after an operand, longest first where one is the start of another.
_OPERATORS: Final = (
    ("||", "OROR"),
    ("|", "OROR"),
    ("&&", "ANDAND"),
    ("&", "ANDAND"),
    ("==", "COMPARE"),
    ("!=", "COMPARE"),
    ("<=", "COMPARE"),
    (">=", "COMPARE"),
    ("<", "COMPARE"),
    (">", "COMPARE"),
    ("+", "PLUS"),
    ("-", "MINUS"),
    ("**", "POWER"),
    ("^", "POWER"),
    ("*", "STAR"),
    ("/", "SLASH"),
)
# Binary levels, loosest first: (rule name, operator types).
_LEVELS: Final = (
    ("disjunction", frozenset({"OROR"})),
    ("conjunction", frozenset({"ANDAND"})),
    ("comparison", frozenset({"COMPARE"})),
    ("sum", frozenset({"PLUS", "MINUS"})),
    ("product", frozenset({"STAR", "SLASH"})),
)
# Parentheses deeper than this are left to lark (each level is a dozen Python frames).
MAX_NESTING: Final = 40


class Token(str):
    """A terminal: its text, with lark's ``type`` and ``start_pos``."""

    __slots__ = ("type", "start_pos")
    type: str
    start_pos: int

    def __new__(cls, kind: str, text: str, start: int) -> Token:
        token = super().__new__(cls, text)
        token.type = kind
        token.start_pos = start
        return token


class Tree:
    """A rule's node: lark's ``data`` (the rule name) and ``children``."""

    __slots__ = ("data", "children")

    def __init__(self, data: str, children: list[Tree | Token | None]) -> None:
        self.data = data
        self.children = children


Child = Tree | Token | None


class _Refused(Exception):
    """Not accepted here: lark decides."""


class _Reader:
    def __init__(self, text: str) -> None:
        self.text = text
        self.position = 0
        self.depth = 0

    def skip(self) -> None:
        match = _SPACE.match(self.text, self.position)
        if match is not None:
            self.position = match.end()

    def peek(self) -> str:
        self.skip()
        return self.text[self.position : self.position + 1]

    def expect(self, char: str) -> None:
        if self.peek() != char:
            raise _Refused
        self.position += 1

    def operator(self) -> Token | None:
        """The binary operator at the position, without taking it."""
        self.skip()
        text, at = self.text, self.position
        for spelled, kind in _OPERATORS:
            if text.startswith(spelled, at):
                return Token(kind, spelled, at)
        return None

    def conditional(self) -> Child:
        condition = self.level(0)
        if self.peek() != "?":
            return condition
        self.position += 1
        when_true = self.conditional()
        self.expect(":")
        when_false = self.conditional()
        return Tree("ternary", [condition, when_true, when_false])

    def level(self, index: int) -> Child:
        if index == len(_LEVELS):
            return self.prefixed()
        name, kinds = _LEVELS[index]
        head = self.level(index + 1)
        children: list[Child] = [head]
        while True:
            token = self.operator()
            if token is None or token.type not in kinds:
                break
            self.position += len(token)
            children += [token, self.level(index + 1)]
        return head if len(children) == 1 else Tree(name, children)

    def signs(self) -> list[Token]:
        """The prefix operators before an operand (a loop: ``- - - 1`` costs no frames)."""
        found: list[Token] = []
        while (char := self.peek()) in _PREFIXES:
            found.append(Token(_PREFIXES[char], char, self.position))
            self.position += 1
        return found

    @staticmethod
    def signed(signs: list[Token], operand: Child) -> Child:
        for sign in reversed(signs):
            operand = Tree("prefix", [sign, operand])
        return operand

    def prefixed(self) -> Child:
        signs = self.signs()
        return self.signed(signs, self.power())

    def power(self) -> Child:
        children: list[Child] = [self.atom()]
        while True:
            token = self.operator()
            if token is None or token.type != "POWER":
                break
            self.position += len(token)
            signs = self.signs()
            children += [token, self.signed(signs, self.atom())]
        return children[0] if len(children) == 1 else Tree("power", children)

    def atom(self) -> Child:
        self.skip()
        text, at = self.text, self.position
        char = text[at : at + 1]
        if char in ("(", "{"):
            self.depth += 1
            if self.depth > MAX_NESTING:
                raise _Refused
            self.position += 1
            inner = self.conditional()
            self.expect(")" if char == "(" else "}")
            self.depth -= 1
            return inner
        probe = _PROBE.match(text, at)
        if probe is not None:
            return self.probe(Token("PROBE", probe.group(), at), probe.end())
        number = _NUMBER.match(text, at)
        if number is not None:
            self.position = number.end()
            return Tree("number", [Token("NUMBER", number.group(), at)])
        name = _NAME.match(text, at)
        if name is None:
            raise _Refused
        self.position = name.end()
        token = Token("NAME", name.group(), at)
        if self.peek() != "(":
            return Tree("name", [token])
        self.position += 1
        if self.peek() == ")":
            self.position += 1
            return Tree("call", [token, None])
        arguments: list[Child] = [self.conditional()]
        while self.peek() == ",":
            self.position += 1
            arguments.append(self.conditional())
        self.expect(")")
        return Tree("call", [token, Tree("arguments", arguments)])

    def probed(self) -> Token:
        self.skip()
        match = _PROBED.match(self.text, self.position)
        if match is None:
            raise _Refused
        self.position = match.end()
        return Token("PROBED", match.group(), match.start())

    def probe(self, opening: Token, end: int) -> Tree:
        self.position = end
        first = self.probed()
        second = None
        if self.peek() == ",":
            self.position += 1
            second = self.probed()
        self.expect(")")
        return Tree("probe", [opening, first, second])


def parse(text: str) -> Child:
    """The tree lark's expression parser builds for ``text``, or None where it is not sure.

    None never means the text is wrong; it means: ask lark.
    """
    reader = _Reader(text)
    try:
        tree = reader.conditional()
        reader.skip()
    except (_Refused, RecursionError):
        return None
    return tree if reader.position == len(text) else None
