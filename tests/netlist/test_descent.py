"""The hand-written expression reader against lark, the grammar's reference parser.

``descent.parse`` must build, for every text it accepts, the tree lark builds from
``grammar/expr.lark`` (rule names, flat chains, token types, texts and offsets, None for
absent optional parts), and accept nothing lark refuses. It may refuse what lark
accepts (lark then reads it); the tests count how often, so a reader that refused
everything would fail.
"""

from __future__ import annotations

from typing import Any

import pytest
from hypothesis import given, settings
from hypothesis import strategies as st
from lark.exceptions import UnexpectedInput

from drivelint.netlist import descent
from drivelint.netlist.parsers import parser


def plain(node: Any) -> Any:
    """Either parser's tree as nested tuples."""
    if node is None:
        return None
    if isinstance(node, str):
        return (node.type, str(node), node.start_pos)
    return (str(node.data), tuple(plain(child) for child in node.children))


def by_lark(text: str) -> Any:
    try:
        return plain(parser("expr.lark").parse(text))
    except UnexpectedInput:
        return "refused"


def agree(text: str) -> bool:
    """True when the hand reader built lark's tree; False when it passed the text on."""
    mine = descent.parse(text)
    reference = by_lark(text)
    if mine is None:
        return False
    assert reference != "refused", f"accepted what lark refuses: {text!r}"
    assert plain(mine) == reference, text
    return True


# Worked cases: each line of the grammar's header, and the dialect forms it names.
CASES = [
    "1",
    "a+b*c",
    "2^3^2",
    "-2^2",
    "2^-1",
    "2**-x**2",
    "3 == 3 < 2",
    "a ? b : c ? d : e",
    "a ? b ? c : d : e",
    "a || b && c | d & e",
    "!a",
    "- - -1",
    "+x",
    "(1+2)*{3}",
    "{25p * {a}}",
    "max(a, b)",
    "f()",
    "f (1)",
    "V(out)",
    "v (a, b) - i(Vsense)",
    "V(n+1)",
    "1.5k*2meg/.5e-3",
    "x.y + _z",
    "vv(x)",
    "a != b",
    "a<=b>=c<d>e",
    "  pi * e\t",
]

REFUSED = ["", "1 +", "(1", "1)", "a = b", "a ! b", "2 (3)", "v()", "v(a b)", "1,2", "a ?", "a : b"]


@pytest.mark.parametrize("text", CASES)
def test_worked_cases_match_lark(text: str) -> None:
    assert agree(text), f"passed {text!r} on to lark"


@pytest.mark.parametrize("text", REFUSED)
def test_what_lark_refuses_is_passed_on(text: str) -> None:
    assert by_lark(text) == "refused"
    assert descent.parse(text) is None


def test_deep_nesting_is_passed_on_not_overflowed() -> None:
    deep = "(" * (descent.MAX_NESTING + 1) + "1" + ")" * (descent.MAX_NESTING + 1)
    assert descent.parse(deep) is None
    shallow = "(" * descent.MAX_NESTING + "1" + ")" * descent.MAX_NESTING
    assert agree(shallow)
    # prefix operators are a loop: a long run of them is read by hand
    assert agree("-" * 300 + "1")
    assert descent.parse("-" * 5000 + "1") is not None


# Generated text: well-formed expressions, and the same with a fragment spliced in.
_atoms = st.sampled_from(
    ["1", "2.5", ".5", "1e3", "3k", "2meg", "1e", "a", "vin", "x.y", "_b", "v", "pi", "I"]
)
_ops = st.sampled_from(
    ["+", "-", "*", "/", "^", "**", "==", "!=", "<", "<=", ">", ">=", "&&", "&", "||", "|"]
)
_spaces = st.sampled_from(["", "", " ", "  ", "\t"])


def _extend(inner: st.SearchStrategy[str]) -> st.SearchStrategy[str]:
    return st.one_of(
        st.tuples(inner, _spaces, _ops, _spaces, inner).map("".join),
        st.tuples(st.sampled_from(["-", "+", "!", "- "]), inner).map("".join),
        inner.map(lambda x: f"({x})"),
        inner.map(lambda x: f"{{{x}}}"),
        st.tuples(inner, inner, inner).map(lambda t: f"{t[0]} ? {t[1]} : {t[2]}"),
        st.tuples(st.sampled_from(["max", "f", "limit"]), st.lists(inner, max_size=3)).map(
            lambda t: f"{t[0]}({', '.join(t[1])})"
        ),
        st.tuples(
            st.sampled_from(["v(", "V (", "i(", "v("]),
            st.sampled_from(["out", "n+1", "a.b", "3"]),
            st.sampled_from(["", ", ref", ",0"]),
        ).map(lambda t: f"{t[0]}{t[1]}{t[2]})"),
    )


_expressions = st.recursive(_atoms, _extend, max_leaves=12)
_fragments = st.sampled_from(
    ["(", ")", "{", "}", ",", "?", ":", "!", "=", "v(", "(,", "1", "a", " ", "^", "*", "'"]
)


@settings(max_examples=600, deadline=None)
@given(_expressions)
def test_well_formed_expressions_match_lark(text: str) -> None:
    assert agree(text), f"passed a well-formed {text!r} on to lark"


@settings(max_examples=600, deadline=None)
@given(_expressions, st.integers(min_value=0), _fragments)
def test_spliced_text_is_never_accepted_wrongly(text: str, at: int, fragment: str) -> None:
    position = at % (len(text) + 1)
    agree(text[:position] + fragment + text[position:])


@settings(max_examples=400, deadline=None)
@given(st.text(alphabet="av1.e(){},?:!=<>|&+-*/^ 'k_", max_size=14))
def test_arbitrary_text_is_never_accepted_wrongly(text: str) -> None:
    agree(text)
