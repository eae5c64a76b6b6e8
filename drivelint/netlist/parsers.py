"""The two lark parsers (a netlist line, an expression), built once per process.

Building an LALR parser from its grammar costs tens of milliseconds, which a pre-commit
run would pay on every start. lark can keep the built tables in a cache file, but that
file is a serialised Python object at a predictable name in the shared temporary folder,
and loading one runs whatever it says: anyone who can write there could plant one and
run code as the user. So the tables are generated at development time into
``parse_tables.py`` (one JSON string, no code), checked by a test to parse exactly as the
grammar does today, and loaded from there: about 11 ms for both parsers (the same tables
as Python literals took 25 ms to import). When the grammar file or the installed lark
differ from what the tables were made from, the parser is built from the grammar
instead: slower, never wrong.
"""

from __future__ import annotations

import hashlib
from collections.abc import Mapping
from typing import Any

from drivelint.netlist.resources import grammar_path

# grammar file -> the options its parser is built with (one place, used by both paths).
GRAMMARS: Mapping[str, Mapping[str, Any]] = {
    "netlist.lark": {
        "parser": "lalr",
        "lexer": "contextual",
        "maybe_placeholders": False,
    },
    "expr.lark": {
        "parser": "lalr",
        "lexer": "contextual",
        # Tokens carry their offsets, which is all the errors need, so trees skip
        # position propagation.
        "propagate_positions": False,
        "maybe_placeholders": True,
    },
}

_BUILT: dict[str, Any] = {}


def grammar_digest(name: str) -> str:
    """What the tables of ``name`` depend on: the grammar text, the options, lark's version."""
    import lark

    text = grammar_path(name).read_bytes()
    options = repr(sorted(GRAMMARS[name].items())).encode()
    return hashlib.sha256(text + b"\0" + options + b"\0" + lark.__version__.encode()).hexdigest()


def build_from_grammar(name: str) -> Any:
    from lark import Lark

    return Lark(grammar_path(name).read_text(encoding="utf-8"), **GRAMMARS[name])


def parser(name: str) -> Any:
    """The parser for grammar file ``name``: from the generated tables when they are current."""
    found = _BUILT.get(name)
    if found is None:
        found = _from_tables(name) or build_from_grammar(name)
        _BUILT[name] = found
    return found


def _from_tables(name: str) -> Any:
    from lark import Lark

    entry = _tables().get(name)
    if entry is None or entry.get("digest") != grammar_digest(name):
        return None
    # Lark.load takes the serialised form as a dict of plain data: no object loading.
    return Lark.load({"data": entry["data"], "memo": entry["memo"]})


_TABLES: list[dict[str, Any]] = []


def _tables() -> dict[str, Any]:
    """Both grammars' tables, read once per process."""
    if not _TABLES:
        import json

        try:
            from drivelint.netlist.parse_tables import TABLES_JSON
        except ImportError:
            _TABLES.append({})
        else:
            _TABLES.append(json.loads(TABLES_JSON, object_hook=_restore))
    return _TABLES[0]


# lark's tables hold tuples and integer-keyed mappings, which JSON has not: they are written
# as one-key objects with these keys, and restored on loading.
_TUPLE = "__tuple__"
_INT_KEYS = "__int_keys__"


def _restore(obj: dict[str, Any]) -> Any:
    if len(obj) == 1:
        if _TUPLE in obj:
            return tuple(obj[_TUPLE])
        if _INT_KEYS in obj:
            return {int(k): v for k, v in obj[_INT_KEYS]}
    return obj


def to_plain(value: Any) -> Any:
    """lark's serialised tables as JSON-ready data (see ``_restore``)."""
    if isinstance(value, tuple):
        return {_TUPLE: [to_plain(v) for v in value]}
    if isinstance(value, list):
        return [to_plain(v) for v in value]
    if isinstance(value, dict):
        if value and all(type(k) is int for k in value):
            return {_INT_KEYS: [[k, to_plain(v)] for k, v in value.items()]}
        if not all(type(k) is str for k in value):
            raise TypeError("a table mapping with keys that are neither all str nor all int")
        if len(value) == 1 and next(iter(value)) in (_TUPLE, _INT_KEYS):
            raise TypeError("a table mapping that looks like an encoded one")
        return {k: to_plain(v) for k, v in value.items()}
    if value is None or type(value) in (str, int, float, bool):
        return value
    raise TypeError(f"cannot write {type(value).__name__} into the tables")


def serialised(name: str) -> dict[str, Any]:
    """The tables of ``name`` as plain data, for ``scripts/generate_parse_tables.py``."""
    from lark.grammar import Rule
    from lark.lexer import TerminalDef

    data, memo = build_from_grammar(name).memo_serialize([TerminalDef, Rule])
    return {"digest": grammar_digest(name), "data": data, "memo": memo}
