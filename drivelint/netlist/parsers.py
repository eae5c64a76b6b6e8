"""The two lark parsers (a netlist line, an expression), built once per process.

Building an LALR parser from its grammar costs tens of milliseconds, which a pre-commit
run would pay on every start. lark can keep the built tables in a cache file, but that
file is a serialised Python object at a predictable name in the shared temporary folder,
and loading one runs whatever it says: anyone who can write there could plant one and
run code as the user. So the tables are generated at development time into
``parse_tables.py`` (plain Python literals, no code), checked by a test to match what the
grammar gives today, and loaded from there. When the grammar file or the installed lark
differ from what the tables were made from, the parser is built from the grammar instead:
slower, never wrong.
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

    try:
        from drivelint.netlist.parse_tables import TABLES
    except ImportError:
        return None
    entry = TABLES.get(name)
    if entry is None or entry.get("digest") != grammar_digest(name):
        return None
    # Lark.load takes the serialised form as a dict of literals: no object loading.
    return Lark.load({"data": entry["data"], "memo": entry["memo"]})


def serialised(name: str) -> dict[str, Any]:
    """The tables of ``name`` as plain data, for ``scripts/generate_parse_tables.py``."""
    from lark.grammar import Rule
    from lark.lexer import TerminalDef

    data, memo = build_from_grammar(name).memo_serialize([TerminalDef, Rule])
    return {"digest": grammar_digest(name), "data": data, "memo": memo}
