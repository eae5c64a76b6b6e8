"""The lark parsers load from generated tables, never from a cache file.

Guards: lark's ``cache=True`` kept the built parser as a serialised object at a predictable
name in the shared temporary folder, where another local user could plant one and run code
as whoever ran drivelint. The tables now live in ``drivelint/netlist/parse_tables.py``
(literals only), made by ``scripts/generate_parse_tables.py``.
"""

from __future__ import annotations

import ast
import functools
import json
import re
from pathlib import Path
from typing import Any

import pytest
from hypothesis import given, settings
from hypothesis import strategies as st

from drivelint.netlist import parsers

ROOT = Path(__file__).resolve().parent.parent.parent
PACKAGE = ROOT / "drivelint"


def test_tables_are_literals_only() -> None:
    """The generated module holds data, not code: a version string and one JSON string."""
    source = (PACKAGE / "netlist" / "parse_tables.py").read_text(encoding="utf-8")
    tree = ast.parse(source)
    assigned = {}
    for node in tree.body:
        if isinstance(node, ast.Expr) and isinstance(node.value, ast.Constant):
            continue  # the docstring
        if isinstance(node, ast.Assign):
            (target,) = node.targets
            assert isinstance(target, ast.Name)
            assigned[target.id] = ast.literal_eval(node.value)
            continue
        raise AssertionError(f"unexpected statement in parse_tables.py: {ast.dump(node)[:80]}")
    assert set(assigned) == {"LARK_VERSION", "TABLES_JSON"}
    assert all(isinstance(v, str) for v in assigned.values())
    assert set(json.loads(assigned["TABLES_JSON"])) == set(parsers.GRAMMARS)


def test_tables_are_current() -> None:
    """A grammar edited (or lark upgraded) without regenerating the tables fails here."""
    import lark

    from drivelint.netlist.parse_tables import LARK_VERSION

    if LARK_VERSION != lark.__version__:
        pytest.fail(
            f"tables made with lark {LARK_VERSION}, lark {lark.__version__} installed: "
            "run python scripts/generate_parse_tables.py"
        )
    tables = parsers._tables()
    for name in parsers.GRAMMARS:
        assert tables[name]["digest"] == parsers.grammar_digest(name), (
            f"{name} changed since its tables were made: "
            "run python scripts/generate_parse_tables.py"
        )
        assert parsers._from_tables(name) is not None


def test_the_json_form_restores_tuples_and_integer_keys() -> None:
    data = {"a": (1, (2, 3)), "b": {0: "x", 7: (None, True)}, "c": [{"k": 1.5}]}
    text = json.dumps(parsers.to_plain(data))
    assert json.loads(text, object_hook=parsers._restore) == data


def _outcome(parser: Any, text: str) -> object:
    from lark.exceptions import UnexpectedInput

    try:
        return parser.parse(text)
    except UnexpectedInput as exc:
        return (type(exc).__name__, getattr(exc, "pos_in_stream", None))


def _corpus_lines() -> list[str]:
    lines = []
    for pattern in ("examples/*.cir", "tests/decks/*.cir", "tests/decks/inc/*"):
        for path in sorted(ROOT.glob(pattern)):
            for line in path.read_text(encoding="utf-8").splitlines():
                line = line.strip()
                if line and line[0] not in "*+":
                    lines.append(line)
    return lines


@pytest.mark.parametrize("name", sorted(parsers.GRAMMARS))
def test_loaded_tables_parse_like_the_grammar(name: str) -> None:
    """Every line of the examples and test decks parses to the same tree (or error) both ways."""
    loaded = parsers._from_tables(name)
    built = parsers.build_from_grammar(name)
    assert loaded is not None
    corpus = _corpus_lines()
    if name == "expr.lark":
        corpus = [m for line in corpus for m in re.findall(r"\{([^{}]*)\}", line)]
        corpus += ["1+2*3", "-(a**2)^b", "max(1, min(2, 3))", "a ? b : c", "1e3k", "((", ")"]
    assert len(corpus) > 20
    for text in corpus:
        assert _outcome(loaded, text) == _outcome(built, text), text


_built = functools.lru_cache(maxsize=None)(parsers.build_from_grammar)


@settings(max_examples=150, deadline=None)
@given(st.text(alphabet="ab1.2e(){}'=,+-*/^ ?:!<>&|", max_size=30))
def test_loaded_tables_agree_on_random_text(text: str) -> None:
    for name in parsers.GRAMMARS:
        loaded = parsers.parser(name)
        assert _outcome(loaded, text) == _outcome(_built(name), text)
