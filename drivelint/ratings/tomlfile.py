"""Reading the TOML files people write (configuration, parts libraries) with line numbers.

``tomllib`` gives data without positions, so errors could name the key but not the line.
:class:`KeyLines` finds the line where each table and key is written, by reading the
text's headers and assignments the way TOML defines them (inline tables and arrays count
as the line their key is on). A file is read like a netlist: a regular file, bounded in
size, UTF-8; anything else is one error naming the file (and the line, for bad bytes).
"""

from __future__ import annotations

import re
import tomllib
from collections.abc import Sequence
from pathlib import Path
from typing import Any

MAX_TOML_BYTES = 4 * 1024 * 1024

_BARE = r"[A-Za-z0-9_-]+"
_QUOTED = r'"(?:[^"\\]|\\.)*"|\'[^\']*\''
_KEY = rf"(?:{_BARE}|{_QUOTED})(?:\s*\.\s*(?:{_BARE}|{_QUOTED}))*"
_HEADER = re.compile(rf"^\s*(\[\[?)\s*({_KEY})\s*\]\]?")
_ASSIGN = re.compile(rf"^\s*({_KEY})\s*=")
_PART = re.compile(rf"{_BARE}|{_QUOTED}")


def _key_parts(text: str) -> tuple[str, ...]:
    out = []
    for match in _PART.finditer(text):
        token = match.group()
        if token[0] in "\"'":
            token = token[1:-1]
        out.append(token)
    return tuple(out)


class KeyLines:
    """Line numbers of the tables and keys of a TOML text, by their path.

    A path is a tuple of keys, with the index of an array-of-tables entry where one
    occurs: ``("conditions_for", 1, "fsw")``.
    """

    def __init__(self, text: str) -> None:
        self.lines: dict[tuple[str | int, ...], int] = {}
        counts: dict[tuple[str | int, ...], int] = {}
        table: tuple[str | int, ...] = ()
        depth = 0  # brackets still open from a multi-line array or inline table
        in_string: str | None = None
        for number, line in enumerate(text.splitlines(), start=1):
            if in_string is not None:
                if in_string in line:
                    in_string = None
                continue
            if depth == 0:
                header = _HEADER.match(line)
                if header:
                    keys = _key_parts(header.group(2))
                    if header.group(1) == "[[":
                        index = counts.get(keys, 0)
                        counts[keys] = index + 1
                        table = (*keys, index)
                    else:
                        table = self._resolve(keys, counts)
                    self.lines.setdefault(table, number)
                    continue
                assign = _ASSIGN.match(line)
                if assign:
                    path = (*table, *_key_parts(assign.group(1)))
                    self.lines.setdefault(path, number)
            for quote in ('"""', "'''"):
                if line.count(quote) % 2 == 1:
                    in_string = quote
            code = re.sub(_QUOTED, "", line).split("#", 1)[0]
            depth += code.count("[") + code.count("{")
            depth = max(depth - code.count("]") - code.count("}"), 0)

    def _resolve(
        self, keys: tuple[str, ...], counts: dict[tuple[str | int, ...], int]
    ) -> tuple[str | int, ...]:
        """``[a.b]`` under the latest ``[[a]]`` entry, as TOML nests it."""
        out: list[str | int] = []
        for key in keys:
            out.append(key)
            index = counts.get(tuple(out))
            if index is not None:
                out.append(index - 1)
        return tuple(out)

    def line(self, path: Sequence[str | int]) -> int:
        """The line of ``path``, else of its nearest ancestor that is written, else 1."""
        key = tuple(path)
        while key:
            found = self.lines.get(key)
            if found is not None:
                return found
            key = key[:-1]
        return 1


def read_toml(path: Path, shown: str) -> tuple[dict[str, Any], KeyLines, str]:
    """The data, key lines and text of a TOML file; raises ValueError with a message that
    names ``shown`` (and the line where there is one)."""
    from drivelint.netlist.reader import read_bounded

    data = read_bounded(path, MAX_TOML_BYTES)
    if not isinstance(data, bytes):
        message = data.message.format(shown=shown)
        if data.code == "limit":
            message = f"'{shown}' is larger than {MAX_TOML_BYTES} bytes"
        raise ValueError(f"{shown}: cannot read: {message}")
    try:
        text = data.decode("utf-8")
    except UnicodeDecodeError as exc:
        line = data.count(b"\n", 0, exc.start) + 1
        raise ValueError(f"{shown}:{line}: not UTF-8 text (byte {exc.start})") from None
    if text.startswith("\ufeff"):
        text = text[1:]
    try:
        parsed = tomllib.loads(text)
    except tomllib.TOMLDecodeError as exc:
        raise ValueError(f"{shown}: not valid TOML: {exc}") from None
    except RecursionError:
        # tomllib reads nested arrays and tables recursively.
        raise ValueError(f"{shown}: arrays or tables nested too deeply") from None
    return parsed, KeyLines(text), text
