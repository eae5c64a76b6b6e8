"""The expression language: precedence, functions, errors, bounds, and ngspice agreement."""

from __future__ import annotations

import dataclasses
import math
import pickle
import re
import shutil
import subprocess
from collections.abc import Callable
from pathlib import Path
from typing import Any

import pytest
from hypothesis import given, settings
from hypothesis import strategies as st
from lark.grammar import Terminal

from drivelint.limits import Limits
from drivelint.netlist import expressions
from drivelint.netlist.expressions import ExpressionError, compile_expression
from drivelint.netlist.resources import grammar_path


def value_of(text: str, **parameters: float) -> float:
    return compile_expression(text).evaluate(parameters.get)


def error_of(text: str, limits: Limits = Limits(), **parameters: float) -> ExpressionError:  # noqa: B008
    with pytest.raises(ExpressionError) as caught:
        compile_expression(text, limits).evaluate(parameters.get)
    return caught.value


# ---------------------------------------------------------------------------
# Precedence and associativity.
#
# Source: ngspice manual, ".param Parametric netlists" - "Syntax of expressions"
# (operator table: unary - and !, then ** / ^, then * /, then + -, then all six
# comparisons on one level, then &&, then ||, then c?x:y; "For equal precedence
# binary ops, evaluation goes left to right"). Where ngspice 39 itself departs
# from that table - it applies a power before a unary minus, -2^2 = -4 - we follow
# ngspice 39; the ngspice test below confirms every case on the simulator.

PRECEDENCE_CASES = [
    ("1+2*3", 7.0),  # * before +
    ("(1+2)*3", 9.0),
    ("2*3^2", 18.0),  # power before *
    ("10-2-3", 5.0),  # left to right
    ("24/4/2", 3.0),  # left to right
    ("2^3^2", 64.0),  # left to right: (2^3)^2, as ngspice 39 evaluates it
    ("2**3**2", 64.0),
    ("2^(3^2)", 512.0),
    ("-2^2", -4.0),  # power before unary minus (ngspice 39)
    ("-2**2", -4.0),
    ("(-2)^2", 4.0),
    ("2^-1", 0.5),  # the exponent may carry a sign
    ("2^-1^2", 0.25),  # (2^-1)^2, as ngspice 39
    ("-3^2^0.5", -3.0),
    ("2*-3", -6.0),
    ("2 - -3", 5.0),
    ("--2", 2.0),
    ("+2", 2.0),
    ("!0+1", 2.0),  # unary not before +
    ("!2", 0.0),
    ("3 == 3 < 2", 1.0),  # comparisons share one level, left to right
    ("1 < 2 == 0", 0.0),
    ("1+2 > 2", 1.0),  # + before comparison
    ("2 >= 2", 1.0),
    ("2 <= 1", 0.0),
    ("2 != 2", 0.0),
    ("2 == 2", 1.0),
    ("2 > 3", 0.0),
    ("2 < 3", 1.0),
    ("0 && 0 || 1", 1.0),  # && before ||
    ("1 || 0 && 0", 1.0),
    ("1 && 2", 1.0),  # logical results are 1 or 0
    ("0 || 0", 0.0),
    ("1 ? 2 : 3", 2.0),
    ("0 ? 2 : 3", 3.0),
    ("1 ? 0 : 1 ? 5 : 6", 0.0),  # ternary is right-associative
    ("0 ? 7 : 1 ? 5 : 6", 5.0),
    ("1+2 > 2 ? 5 : 6", 5.0),  # ternary is the loosest
    ("1 || 0 ? 8 : 9", 8.0),
]


@pytest.mark.parametrize(("text", "expected"), PRECEDENCE_CASES)
def test_precedence_and_associativity(text: str, expected: float) -> None:
    assert value_of(text) == expected


def test_numbers_take_spice_scale_factors() -> None:
    # ngspice manual, Table 2.2 "Ngspice scale factors", inside an expression.
    assert value_of("2*1k") == 2000.0
    assert value_of("10u/2") == 5e-6
    assert value_of("1MEG*2 + 3u*1e6") == pytest.approx(2_000_003.0, rel=1e-15)
    assert value_of("1.5e3k") == 1.5e6
    assert value_of("10uF") == 1e-5
    assert value_of("4k7") == 4000.0  # SPICE3: letters after the scale factor ignored


def test_negative_base_powers_follow_ngspice() -> None:
    # ngspice manual, "Syntax of expressions": ** and ^ are "power, like pwr", and
    # pwr(x, y) = pow(fabs(x), y); pow(x, y) is the C library's pow. ngspice 39
    # prints (-2)^3 = 8 and pow(-2, 3) = -8.
    assert value_of("(-2)^3") == 8.0
    assert value_of("(-8)^(1/3)") == pytest.approx(2.0, rel=1e-15)
    assert value_of("pwr(-2, 3)") == 8.0
    assert value_of("pow(-2, 3)") == -8.0
    assert value_of("0^0") == 1.0  # C pow(0, 0) = 1


def test_short_circuit_skips_the_unused_operand() -> None:
    # C semantics of && || ?: (the manual: "precedence close to the one of the C
    # language"); a guard keeps the division from being evaluated.
    assert value_of("x != 0 && 1/x > 2", x=0.0) == 0.0
    assert value_of("x == 0 || 1/x > 2", x=0.0) == 1.0
    assert value_of("x > 0 ? log(x) : -1", x=0.0) == -1.0


# ---------------------------------------------------------------------------
# Functions, each against Python's math module as the reference.

ONE_ARGUMENT: list[tuple[str, Callable[[float], float], float]] = [
    ("sqrt", math.sqrt, 2.0),
    ("exp", math.exp, 1.5),
    ("log", math.log, 7.0),  # natural log, as ngspice (manual: "ln(x), log(x)")
    ("ln", math.log, 7.0),
    ("log10", math.log10, 200.0),
    ("abs", abs, -3.25),
    ("sin", math.sin, 1.0),
    ("cos", math.cos, 1.0),
    ("tan", math.tan, 1.0),
    ("asin", math.asin, 0.5),
    ("acos", math.acos, 0.5),
    ("atan", math.atan, 1.0),
    ("arctan", math.atan, 1.0),
    ("sinh", math.sinh, 1.0),
    ("cosh", math.cosh, 1.0),
    ("tanh", math.tanh, 1.0),
    ("asinh", math.asinh, 1.0),
    ("acosh", math.acosh, 2.0),
    ("atanh", math.atanh, 0.5),
    ("floor", math.floor, -2.5),
    ("ceil", math.ceil, -2.5),
    ("int", math.trunc, -2.7),  # toward zero (manual: "rounded towards 0")
    ("int", math.trunc, 2.7),
    ("nint", round, 2.5),  # half-way to even (manual), as Python's round
    ("nint", round, 3.5),
    ("sgn", lambda x: math.copysign(1.0, x), -3.0),
]


@pytest.mark.parametrize(("name", "reference", "argument"), ONE_ARGUMENT)
def test_one_argument_functions(
    name: str, reference: Callable[[float], float], argument: float
) -> None:
    assert value_of(f"{name}({argument!r})") == reference(argument)
    assert value_of(f"{name.upper()}(x)", x=argument) == reference(argument)


def test_functions_of_several_arguments() -> None:
    # Python's builtins and math as the reference.
    assert value_of("min(3, 2)") == min(3.0, 2.0)
    assert value_of("max(3, 4)") == max(3.0, 4.0)
    assert value_of("min(5, 2, 3)") == 2.0
    assert value_of("max(1, 7, 3, -1)") == 7.0
    assert value_of("pow(2, 0.5)") == math.pow(2.0, 0.5)
    assert value_of("pwr(-3, 2)") == math.pow(3.0, 2.0)
    assert value_of("sgn(0)") == 0.0
    assert value_of("sgn(4)") == 1.0


def test_constants_unless_a_parameter_shadows_them() -> None:
    assert value_of("pi") == math.pi
    assert value_of("e") == math.e
    assert value_of("2*PI") == 2 * math.pi
    assert value_of("e", e=5.0) == 5.0  # a parameter named e wins
    assert value_of("pi + 1", pi=3.0) == 4.0


def test_names_are_the_parameters_referenced() -> None:
    compiled = compile_expression("sqrt(Lout*C.out) + max(a, 2*pi) - e")
    assert compiled.names == frozenset({"lout", "c.out", "a"})  # lower-cased
    assert compiled.constants == frozenset({"pi", "e"})
    assert compile_expression("2*3").names == frozenset()


def test_identifiers_are_case_insensitive() -> None:
    assert value_of("RLoad*2", rload=5.0) == 10.0


def test_compiled_expressions_are_cached_and_immutable() -> None:
    first = compile_expression("a*2+1")
    assert compile_expression("a*2+1") is first
    assert compile_expression("a*2+1", Limits(max_expression_depth=10)) is not first
    with pytest.raises(dataclasses.FrozenInstanceError):
        first.text = "b"  # type: ignore[misc]
    # One compiled form serves many scopes, e.g. one per subcircuit instance.
    assert first.evaluate({"a": 1.0}.get) == 3.0
    assert first.evaluate({"a": 10.0}.get) == 21.0


# ---------------------------------------------------------------------------
# Errors: message and offset of the offending token.

SYNTAX_ERRORS = [
    ("1+", "expected an operand after '+'", 2),
    ("1 + * 2", "expected an operand after '+', found '*'", 4),
    ("*3", "expected an operand, found '*'", 0),
    ("1 2", "expected an operator between '1' and '2'", 2),
    ("x y", "expected an operator between 'x' and 'y'", 2),
    ("(1+2", "unbalanced parenthesis", 0),
    ("1+2)", "unbalanced parenthesis", 3),
    ("()", "expected an operand after '(', found ')'", 1),
    ("pow(1)", "expected 2 arguments to pow", 0),
    ("sqrt()", "expected 1 argument to sqrt", 0),
    ("sqrt(1, 2)", "expected 1 argument to sqrt", 0),
    ("max(1)", "expected at least 2 arguments to max", 0),
    ("f(1,)", "expected an operand after ','", 4),
    ("a ? b", "expected ':'", 5),
    ("a : b", "':' without a matching '?'", 2),
    ("1, 2", "',' outside the argument list", 1),
    ("1 $ 2", "unexpected character '$'", 2),
    ("x = 2", "to compare write '=='", 2),
    ("1 % 2", "modulo ('%') is not supported", 2),
    ("", "empty expression", 0),
    ("   ", "empty expression", 0),
    ("1e999", "out of range", 0),
]


@pytest.mark.parametrize(("text", "message", "offset"), SYNTAX_ERRORS)
def test_syntax_errors(text: str, message: str, offset: int) -> None:
    with pytest.raises(ExpressionError) as caught:
        compile_expression(text)
    assert message in caught.value.message
    assert caught.value.offset == offset
    assert str(caught.value) == caught.value.message


EVALUATION_ERRORS = [
    ("1/0", "division by zero", 1),
    ("2 * 3 / (x - 2)", "division by zero", 6),
    ("log(0)", "log of a non-positive value", 0),
    ("1 + ln(-1)", "ln of a non-positive value", 4),
    ("log10(0)", "log10 of a non-positive value", 0),
    ("sqrt(-4)", "sqrt of a negative value", 0),
    ("exp(1000)", "overflow", 0),
    ("1e308 * 10", "overflow", 6),
    ("1e308 + 1e308", "overflow", 6),
    ("10 ^ 400", "overflow", 3),
    ("0 ^ -1", "division by zero", 2),
    ("pow(-8, 1/3)", "negative base", 0),
    ("asin(2)", "asin is undefined", 0),
    ("acosh(0.5)", "acosh is undefined", 0),
    ("atanh(1)", "atanh is undefined", 0),
    ("cosh(1000)", "overflow", 0),
    ("2 * rload", "undefined parameter 'rload'", 4),
]


@pytest.mark.parametrize(("text", "message", "offset"), EVALUATION_ERRORS)
def test_evaluation_errors(text: str, message: str, offset: int) -> None:
    error = error_of(text, x=2.0)
    assert message in error.message
    assert error.offset == offset


def test_errors_survive_pickling_with_their_offset() -> None:
    # Batch runs send errors between worker processes.
    error = pickle.loads(pickle.dumps(error_of("1 + 1/0")))
    assert isinstance(error, ExpressionError)
    assert (error.message, error.offset) == ("division by zero", 5)


def test_non_finite_parameter_values_are_refused() -> None:
    error = error_of("1 + x", x=math.inf)
    assert "'x'" in error.message
    assert error.offset == 4


# ---------------------------------------------------------------------------
# Bounds: limits.max_expression_chars and limits.max_expression_depth.


def test_length_limit() -> None:
    limits = Limits(max_expression_chars=20)
    assert compile_expression("1+" * 9 + "1", limits).evaluate(lambda n: None) == 10.0
    error = error_of("1+" * 10 + "1", limits)
    assert "max_expression_chars" in error.message


def test_depth_limit_counts_parentheses_unary_chains_calls_and_ternaries() -> None:
    limits = Limits(max_expression_depth=8)
    assert compile_expression("(" * 8 + "1" + ")" * 8, limits).evaluate(lambda n: None) == 1.0
    for deep in (
        "(" * 9 + "1" + ")" * 9,
        "-" * 12 + "1",
        "abs(" * 9 + "1" + ")" * 9,
        "1 ? " * 12 + "1" + " : 0" * 12,
    ):
        error = error_of(deep, limits)
        assert "max_expression_depth" in error.message, deep


def test_hostile_nesting_gives_an_error_not_a_recursion_error() -> None:
    # With the length bound lifted, only the depth bound stands between a hostile
    # input and Python's recursion limit.
    # Python's default recursion limit is 1,000 frames; these go 3 to 10 times deeper.
    limits = Limits(max_expression_chars=10_000_000)
    for hostile in (
        "(" * 10_000 + "1" + ")" * 10_000,
        "-" * 5_000 + "1",
        "sqrt(" * 10_000 + "1" + ")" * 10_000,
        "1?" * 3_000 + "1" + ":0" * 3_000,
    ):
        error = error_of(hostile, limits)
        assert "max_expression_depth" in error.message
    # Under the default limits the length bound stops them first.
    assert "max_expression_chars" in error_of("(" * 10_000 + "1" + ")" * 10_000).message
    assert "max_expression_chars" in error_of("+".join(["1"] * 100_000)).message


def test_a_long_flat_sum_is_not_deep() -> None:
    # 5,000 terms, far past Python's recursion limit if each + nested: a flat
    # chain, so it evaluates once the length bound allows it.
    limits = Limits(max_expression_chars=10_000_000)
    text = "+".join(["1"] * 5_000)
    assert compile_expression(text, limits).evaluate(lambda n: None) == 5_000.0
    text = "*".join(["x"] * 3_000)
    assert compile_expression(text, limits).evaluate({"x": 1.0}.get) == 1.0
    text = "^".join(["x"] * 3_000)
    assert compile_expression(text, limits).evaluate({"x": 1.0}.get) == 1.0


# ---------------------------------------------------------------------------
# Properties.

EXPRESSION_ALPHABET = "0123456789.eEkKmMgGuUnNpPfFtTlL+-*/^()!<>=&|?:, \tabxyzpiqrsoSQRT_$"


@settings(max_examples=300, deadline=None)
@given(st.text(alphabet=EXPRESSION_ALPHABET, max_size=40))
def test_random_text_raises_only_expression_errors(text: str) -> None:
    try:
        compiled = compile_expression(text)
        compiled.evaluate(lambda name: 1.5 if name in {"a", "b"} else None)
    except ExpressionError as error:
        assert isinstance(error.message, str) and error.message
        assert 0 <= error.offset <= len(text)


class Overflow(Exception):
    """The reference computation left the finite doubles or divided by zero."""


# An arithmetic tree: ("num", text, value) | ("name", name) | ("neg", tree)
# | (op, left, right) with op in + - * / ^. Each has a precedence level, used to
# print it with the fewest parentheses the documented precedence allows.
ArithmeticTree = tuple[Any, ...]
LEVEL = {"+": 1, "-": 1, "*": 2, "/": 2, "neg": 3, "^": 4, "num": 5, "name": 5}
VALUES = {"a": 1.5, "b": -0.25, "c": 1e3}

SUFFIX_DECADES = {"k": 3, "meg": 6, "m": -3, "u": -6, "n": -9, "p": -12}


@st.composite
def number_leaves(draw: st.DrawFn) -> tuple[str, str, float]:
    if draw(st.booleans()):
        x = draw(st.floats(min_value=0.0, max_value=1e6, allow_nan=False))
        return ("num", repr(x), x)
    mantissa = draw(st.integers(min_value=0, max_value=999))
    suffix = draw(st.sampled_from(sorted(SUFFIX_DECADES)))
    # Reference value from the decimal meaning of the suffix (ngspice manual,
    # Table 2.2), not from the code under test.
    return ("num", f"{mantissa}{suffix}", float(f"{mantissa}e{SUFFIX_DECADES[suffix]}"))


leaves = st.one_of(number_leaves(), st.sampled_from(sorted(VALUES)).map(lambda n: ("name", n)))
trees = st.recursive(
    leaves,
    lambda children: st.one_of(
        st.tuples(st.just("neg"), children),
        st.tuples(st.sampled_from(["+", "-", "*", "/", "^"]), children, children),
    ),
    max_leaves=12,
)


def level(tree: ArithmeticTree) -> int:
    return LEVEL[tree[0]]


def render(tree: ArithmeticTree, extra: Callable[[], bool]) -> str:
    kind = tree[0]
    if kind == "num":
        text = tree[1]
    elif kind == "name":
        text = tree[1]
    elif kind == "neg":
        operand = render(tree[1], extra)
        text = f"-{operand}" if level(tree[1]) >= LEVEL["neg"] else f"-({operand})"
    elif kind == "^":
        # The base is an operand or a power chain; the exponent a bare operand.
        left, right = render(tree[1], extra), render(tree[2], extra)
        if level(tree[1]) < LEVEL["^"]:
            left = f"({left})"
        if level(tree[2]) < LEVEL["num"]:
            right = f"({right})"
        text = f"{left}^{right}"
    else:
        left, right = render(tree[1], extra), render(tree[2], extra)
        if level(tree[1]) < LEVEL[kind]:
            left = f"({left})"
        if level(tree[2]) <= LEVEL[kind]:  # left-associative: a-(b-c) keeps its parentheses
            right = f"({right})"
        text = f"{left} {kind} {right}"
    return f"({text})" if extra() else text


def reference(tree: ArithmeticTree) -> float:
    """The tree's value computed directly with Python floats."""
    kind = tree[0]
    if kind == "num":
        return float(tree[2])
    if kind == "name":
        return VALUES[tree[1]]
    if kind == "neg":
        return -reference(tree[1])
    left, right = reference(tree[1]), reference(tree[2])
    if kind == "+":
        result = left + right
    elif kind == "-":
        result = left - right
    elif kind == "*":
        result = left * right
    elif kind == "/":
        if right == 0:
            raise Overflow
        result = left / right
    else:
        # ngspice manual: ** / ^ is "like pwr", pwr(x, y) = pow(fabs(x), y).
        if left == 0 and right < 0:
            raise Overflow
        try:
            result = math.pow(abs(left), right)
        except OverflowError:
            raise Overflow from None
    if not math.isfinite(result):
        raise Overflow
    return result


def names_in(tree: ArithmeticTree) -> set[str]:
    if tree[0] == "name":
        return {tree[1]}
    if tree[0] == "num":
        return set()
    return set().union(*(names_in(child) for child in tree[1:]))


@settings(max_examples=200, deadline=None)
@given(trees, st.data())
def test_random_arithmetic_trees_match_python(tree: ArithmeticTree, data: st.DataObject) -> None:
    text = render(tree, lambda: data.draw(st.booleans(), label="extra parentheses"))
    compiled = compile_expression(text)
    assert compiled.names == names_in(tree)
    try:
        expected = reference(tree)
    except Overflow:
        with pytest.raises(ExpressionError):
            compiled.evaluate(VALUES.get)
        return
    assert compiled.evaluate(VALUES.get) == expected, text


# ---------------------------------------------------------------------------
# Structure.


def test_every_tree_the_grammar_builds_has_a_compiler() -> None:
    # A rule whose tree had no handler would pass through unnoticed; compare the
    # handler table with the trees the grammar can build, both ways.
    parser = expressions._grammar()
    built = set()
    for rule in parser.rules:
        name = str(rule.alias or rule.origin.name)
        if name.startswith("_"):
            continue  # lark's helper rules are spliced into their parent
        kept = [s for s in rule.expansion if not (isinstance(s, Terminal) and s.filter_out)]
        if rule.options.expand1 and rule.alias is None and len(kept) == 1:
            continue  # a ?rule with one child is replaced by that child
        built.add(name)
    assert built == set(expressions._HANDLERS)


def test_grammar_file_is_found_in_the_source_checkout() -> None:
    path = grammar_path("expr.lark")
    assert path.is_file()
    assert path.name == "expr.lark"
    assert path.parent.name == "grammar"


# ---------------------------------------------------------------------------
# Cross-check against ngspice 39's own expression evaluator.

NGSPICE = shutil.which("ngspice")

# (.param name, expression). Results are kept away from 0 because ngspice
# replaces a zero resistance by 1 mOhm; min/max take two arguments because
# ngspice 39 mis-evaluates three (it returns the last one).
NGSPICE_PARAMS = [
    ("p1", "2*3+4^2"),
    ("p2", "2^3^2"),
    ("p3", "-2^2+10"),
    ("p4", "2**3**2"),
    ("p5", "2^-1^2"),
    ("p6", "-3^2^0.5+10"),
    ("p7", "(3 == 3 < 2)+1"),
    ("p8", "(0 && 0 || 1)+1"),
    ("p9", "0 ? 7 : 1 ? 5 : 6"),
    ("p10", "sqrt(2)*1k"),
    ("p11", "exp(1.5)+log(7)+ln(3)+log10(200)"),
    ("p12", "abs(-3)+min(3,2)+max(3,4)"),
    ("p13", "pow(2,0.5)+pwr(-2,3)"),
    ("p14", "sin(1)+cos(1)+tan(1)+atan(1)+10"),
    ("p15", "floor(2.5)+ceil(2.5)+int(-2.7)+10"),
    ("p16", "(-2)^3+10"),
    ("p17", "10u/2*1MEG"),
    ("p18", "p1*p2/3.3k"),
    ("p19", "p10 > 1k ? p10 : 1"),
    ("p20", "!0 + (2 != 3) + (4 >= 4)"),
    ("p21", "nint(2.5)+nint(3.5)+sgn(-3)+5"),
    ("p22", "sinh(1)+cosh(1)+tanh(1)+asin(0.5)+acos(0.5)"),
]


@pytest.mark.skipif(NGSPICE is None, reason="ngspice is not installed (CI has it)")
def test_ngspice_evaluates_the_same_values(tmp_path: Path) -> None:
    lines = ["drivelint expression cross-check", "V1 1 0 1"]
    for i, (name, text) in enumerate(NGSPICE_PARAMS, start=1):
        lines.append(f".param {name}={{{text}}}")
        lines.append(f"R{i} 1 0 {{{name}}}")
    lines += [".control", "set numdgt=17", "op"]
    lines += [f"print @r{i}[resistance]" for i in range(1, len(NGSPICE_PARAMS) + 1)]
    lines += ["quit 0", ".endc", ".end"]
    deck = tmp_path / "expressions.cir"
    deck.write_text("\n".join(lines) + "\n")
    assert NGSPICE is not None
    result = subprocess.run(
        [NGSPICE, "-b", str(deck)], capture_output=True, text=True, timeout=60, check=False
    )
    found = dict(re.findall(r"@r(\d+)\[resistance\]\s*=\s*(\S+)", result.stdout))
    assert len(found) == len(NGSPICE_PARAMS), result.stdout + result.stderr

    scope: dict[str, float] = {}
    for i, (name, text) in enumerate(NGSPICE_PARAMS, start=1):
        scope[name] = compile_expression(text).evaluate(scope.get)
        # ngspice passes values between its stages as text, so allow a little
        # more than double rounding.
        assert scope[name] == pytest.approx(float(found[str(i)]), rel=1e-9), (name, text)


# ---------------------------------------------------------------------------
# Dialect forms (issue 8). Function semantics: the ngspice manual's lists of
# expression and B-source functions (chapters ".param" and "B source (ASRC)", section
# numbers from memory), checked against ngspice 39 by the decks of tests/dialects where
# ngspice has the function; limit, uramp, u, stp, table and if come from other dialects.

from drivelint.netlist.expressions import (  # noqa: E402
    BehaviouralValue,
    Environment,
    UserFunction,
)


@pytest.mark.parametrize(
    ("text", "value"),
    [
        ("{25p * {4}}", 100e-12),
        ("1 | 0", 1.0),
        ("1 & 0", 0.0),
        ("sqr(3)", 9.0),
        ("pwrs(-2, 2)", -4.0),
        ("pwr(-2, 3)", 8.0),
        ("limit(-5, 0, 10)", 0.0),
        ("limit(5, 10, 0)", 5.0),
        ("uramp(-1) + uramp(2)", 2.0),
        ("u(0) + u(1) + stp(2)", 2.0),
        ("hypot(3, 4)", 5.0),
        ("atan2(0, -1)", math.pi),
        ("max(1, 5, 3, 2)", 5.0),
        ("table(0, 1, 10, 2, 20)", 10.0),
        ("table(1.25, 1, 10, 2, 20)", 12.5),
        ("if(0, 1/0, 7)", 7.0),
        ("ternary_fcn(1, 3, 4)", 3.0),
        ("agauss(5, 1, 3)", 5.0),
    ],
)
def test_dialect_functions(text: str, value: float) -> None:
    assert compile_expression(text).evaluate(lambda name: None) == pytest.approx(value)


def test_behavioural_readings_are_listed_and_need_an_environment() -> None:
    expression = compile_expression("V(sw) + (V(pwm, 0) > 2.5 ? 12 : 0) + I(vsense)*0")
    assert expression.probes == {("v", "sw", None), ("v", "pwm", "0"), ("i", "vsense", None)}
    assert expression.behavioural and not expression.dynamic
    with pytest.raises(BehaviouralValue):
        expression.evaluate(lambda name: None)
    volts = {"sw": 48.0, "pwm": 5.0}
    env = Environment(
        lambda name: None, lambda kind, a, b: volts.get(a, 0.0) if kind == "v" else 1.0
    )
    assert expression.evaluate(env) == 60.0  # type: ignore[arg-type]


@pytest.mark.parametrize("text", ["time*2", "temp + 1", "ddt(v(a))", "delay(v(a), 1u)"])
def test_time_and_state_make_a_value_dynamic(text: str) -> None:
    assert compile_expression(text).dynamic


def test_user_functions_arity_and_depth() -> None:
    square = UserFunction("sq", ("x",), compile_expression("x*x"))
    loop = UserFunction("f", ("x",), compile_expression("f(x)"))
    table = {"sq": square, "f": loop}
    env = Environment(lambda name: None, None, table.get, limit=8)
    assert compile_expression("sq(3) + 1").evaluate(env) == 10.0  # type: ignore[arg-type]
    with pytest.raises(ExpressionError, match="takes 1 argument, got 2"):
        compile_expression("sq(1, 2)").evaluate(env)  # type: ignore[arg-type]
    with pytest.raises(ExpressionError, match="max_function_depth"):
        compile_expression("f(1)").evaluate(env)  # type: ignore[arg-type]
    with pytest.raises(ExpressionError, match="unknown function 'nope'"):
        compile_expression("nope(1)").evaluate(env)  # type: ignore[arg-type]
