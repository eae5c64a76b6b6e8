"""The expression language of ``{...}`` / ``'...'`` values and ``.param`` right-hand sides.

Text is parsed by the grammar ``grammar/expr.lark`` (read by hand in
``descent.py`` when it parses, by lark otherwise) and compiled into nested
closures; no Python ``eval`` is involved at any point. Operator precedence and the
power operator follow ngspice's front end (see the grammar file's header).

An expression that reads node voltages or branch currents (``V(n)``, ``V(a,b)``,
``I(Vsense)``), the simulation time or temperature, or a time-dependent function
(``ddt``, ``sdt``, ``delay``) is *behavioural*: it compiles like any other, lists what it
reads in ``probes`` and ``dynamic``, and evaluates only against a lookup that can answer
those readings (see :class:`Environment`). User functions (``.func``) are looked up at
evaluation time through the same lookup, with their recursion depth bounded.
"""

from __future__ import annotations

import math
import operator
import re
from collections.abc import Callable, Mapping, Sequence
from dataclasses import dataclass, field
from functools import lru_cache
from typing import TYPE_CHECKING, Any, Final, NoReturn, TypeAlias

from drivelint.limits import Limits
from drivelint.netlist import descent
from drivelint.netlist.values import parse_number

if TYPE_CHECKING:
    from lark import Lark, UnexpectedInput

# A token of either parser: lark's, or the hand-written reader's (both str, with
# ``type`` and ``start_pos``).
Token: TypeAlias = Any

Lookup: TypeAlias = Callable[[str], float | None]
_Run: TypeAlias = Callable[[Lookup], float]
# A behavioural reading: ("v", node, other node or None), ("i", source, None), or
# ("time", "", None) / ("temp", "", None).
Probe: TypeAlias = tuple[str, str, str | None]


class ExpressionError(Exception):
    """An expression that cannot be read or evaluated; ``offset`` is 0-based in its text."""

    def __init__(self, message: str, offset: int = 0) -> None:
        super().__init__(message)
        self.message = message
        self.offset = offset

    def __reduce__(self) -> tuple[type[ExpressionError], tuple[str, int]]:
        # Keep the offset when the error crosses a process boundary (--jobs).
        return (type(self), (self.message, self.offset))


class BehaviouralValue(ExpressionError):
    """Raised when a behavioural expression is evaluated without node voltages to read.

    Not an error in the netlist: the value exists in the simulator, only not here.
    """


@dataclass(frozen=True, slots=True)
class UserFunction:
    """A ``.func NAME(PARAMS) BODY`` definition, compiled."""

    name: str
    params: tuple[str, ...]
    body: Expression


class Environment:
    """A lookup for behavioural expressions and user functions.

    Called with a name it answers a parameter (as a plain lookup does); ``probe``
    answers a node voltage, branch current, time or temperature; ``function`` finds a
    ``.func`` definition. Subclass or pass callables; any of them may be None.
    """

    __slots__ = ("params", "probes", "functions", "depth", "limit")

    def __init__(
        self,
        params: Lookup,
        probes: Callable[[str, str, str | None], float | None] | None = None,
        functions: Callable[[str], UserFunction | None] | None = None,
        limit: int = 64,
        depth: int = 0,
    ) -> None:
        self.params = params
        self.probes = probes
        self.functions = functions
        self.limit = limit
        self.depth = depth

    def __call__(self, name: str) -> float | None:
        return self.params(name)

    def probe(self, kind: str, a: str, b: str | None) -> float | None:
        return None if self.probes is None else self.probes(kind, a, b)

    def function(self, name: str) -> UserFunction | None:
        return None if self.functions is None else self.functions(name)

    def inner(self, bound: Mapping[str, float]) -> Environment:
        """The environment of a function body: its arguments first, then the caller's."""
        outer = self.params

        def params(name: str) -> float | None:
            value = bound.get(name)
            return value if value is not None else outer(name)

        return Environment(params, self.probes, self.functions, self.limit, self.depth + 1)


@dataclass(frozen=True)
class Expression:
    """A compiled expression, ready to be evaluated against any parameter scope.

    ``names`` are the parameters it refers to. ``constants`` are the names it uses
    as the built-in constants ``pi`` / ``e``: a parameter of that name, if the
    scope has one, is used instead, so a dependency analysis should treat these
    as references too when such a parameter exists.
    """

    text: str
    names: frozenset[str]
    constants: frozenset[str]
    _run: _Run = field(repr=False, compare=False)
    probes: frozenset[Probe] = frozenset()
    dynamic: bool = False  # reads time, temperature or a time-dependent function
    calls: frozenset[str] = frozenset()  # user functions it calls

    def evaluate(self, lookup: Lookup) -> float:
        """Value of the expression; ``lookup(name)`` gives a parameter's value or None.

        A behavioural expression needs an :class:`Environment` that answers its
        readings; a plain lookup raises :class:`BehaviouralValue` instead.
        """
        return self._run(lookup)

    @property
    def behavioural(self) -> bool:
        """Reads node voltages, branch currents, time or temperature."""
        return bool(self.probes) or self.dynamic


def compile_expression(text: str, limits: Limits = Limits()) -> Expression:  # noqa: B008
    """Parse and compile ``text`` (without its braces or quotes); cached by (text, limits)."""
    return _compile_cached(text, limits)


# ---------------------------------------------------------------------------
# Built-in constants and functions


_CONSTANTS: Final = {"pi": math.pi, "e": math.e}


class _DomainError(Exception):
    """A function argument outside its domain; re-raised with the call's offset."""


def _fmt(value: float) -> str:
    return f"{value:.6g}"


def _sqrt(x: float) -> float:
    if x < 0:
        raise _DomainError(f"sqrt of a negative value ({_fmt(x)})")
    return math.sqrt(x)


def _logarithm(name: str, function: Callable[[float], float]) -> Callable[[float], float]:
    def log(x: float) -> float:
        if x <= 0:
            raise _DomainError(f"{name} of a non-positive value ({_fmt(x)})")
        return function(x)

    return log


def _bounded(
    name: str, function: Callable[[float], float], low: float, high: float, *, open_: bool = False
) -> Callable[[float], float]:
    def bounded(x: float) -> float:
        outside = not (low < x < high) if open_ else not (low <= x <= high)
        if outside:
            interval = f"({_fmt(low)}, {_fmt(high)})" if open_ else f"[{_fmt(low)}, {_fmt(high)}]"
            raise _DomainError(f"{name} is undefined for {_fmt(x)}; it needs {interval}")
        return function(x)

    return bounded


def _acosh(x: float) -> float:
    if x < 1:
        raise _DomainError(f"acosh is undefined for {_fmt(x)}; it needs a value of at least 1")
    return math.acosh(x)


def _magnitude_power(base: float, exponent: float) -> float:
    """``|base| ** exponent``: the ``**`` / ``^`` operator and pwr() of ngspice.

    The ngspice manual ("Syntax of expressions") defines ``**`` as "power, like
    pwr" and pwr(x, y) as pow(fabs(x), y); ngspice 39 agrees ((-2)^3 = 8).
    """
    magnitude = abs(base)
    if magnitude == 0 and exponent < 0:
        raise _DomainError("division by zero: zero raised to a negative power")
    return math.pow(magnitude, exponent)


def _pow(base: float, exponent: float) -> float:
    """pow(): the C library's pow, sign kept (ngspice manual)."""
    if base == 0 and exponent < 0:
        raise _DomainError("division by zero: zero raised to a negative power")
    if base < 0 and not exponent.is_integer():
        raise _DomainError(
            f"pow of a negative base ({_fmt(base)}) to a non-integer power ({_fmt(exponent)})"
        )
    return math.pow(base, exponent)


def _sign(x: float) -> float:
    return 1.0 if x > 0 else -1.0 if x < 0 else 0.0


def _signed_power(base: float, exponent: float) -> float:
    """pwrs(x, y) = sgn(x)·|x|^y (ngspice manual, B source functions)."""
    return _sign(base) * _magnitude_power(base, exponent)


def _limit(x: float, a: float, b: float) -> float:
    """The middle one of the three values: limit(x, lo, hi) clamps x when lo <= hi.

    PSpice and ngspice's B sources document LIMIT(x, min, max); LTspice documents the
    intermediate value of its three arguments, which is the same for min <= max and
    does not depend on the order of the bounds, so that reading is kept.
    """
    return sorted((x, a, b))[1]


def _step(x: float) -> float:
    """u(x) / stp(x): 1 for x > 0, else 0 (ngspice manual, B source: u is the unit step)."""
    return 1.0 if x > 0 else 0.0


def _table(*values: float) -> float:
    """table(x, x1, y1, x2, y2, …): linear interpolation, held flat beyond the ends.

    The PSpice TABLE and LTspice table() forms; the points are sorted by x first.
    """
    x, rest = values[0], values[1:]
    if len(rest) < 2 or len(rest) % 2:
        raise _DomainError(f"table needs x, y pairs after its input; got {len(rest)} values")
    points = sorted(zip(rest[0::2], rest[1::2], strict=True))
    if x <= points[0][0]:
        return points[0][1]
    if x >= points[-1][0]:
        return points[-1][1]
    for (x0, y0), (x1, y1) in zip(points, points[1:], strict=False):
        if x0 <= x <= x1:
            return y0 if x1 == x0 else y0 + (y1 - y0) * (x - x0) / (x1 - x0)
    return points[-1][1]  # pragma: no cover - the loop covers every x inside


@dataclass(frozen=True, slots=True)
class _Function:
    """A built-in function: how many arguments it takes, and what it computes."""

    arity: int
    variadic: bool  # arity is then the least number of arguments
    apply: Callable[..., float]


def _unary(function: Callable[[float], float]) -> _Function:
    return _Function(1, False, function)


_FUNCTIONS: Final[dict[str, _Function]] = {
    "sqrt": _unary(_sqrt),
    "exp": _unary(math.exp),
    # log is the natural logarithm, as in ngspice (manual: "ln(x), log(x)").
    "log": _unary(_logarithm("log", math.log)),
    "ln": _unary(_logarithm("ln", math.log)),
    "log10": _unary(_logarithm("log10", math.log10)),
    "abs": _unary(abs),
    "sgn": _unary(_sign),
    "sin": _unary(math.sin),
    "cos": _unary(math.cos),
    "tan": _unary(math.tan),
    "asin": _unary(_bounded("asin", math.asin, -1.0, 1.0)),
    "acos": _unary(_bounded("acos", math.acos, -1.0, 1.0)),
    "atan": _unary(math.atan),
    "arctan": _unary(math.atan),
    "sinh": _unary(math.sinh),
    "cosh": _unary(math.cosh),
    "tanh": _unary(math.tanh),
    "asinh": _unary(math.asinh),
    "acosh": _unary(_acosh),
    "atanh": _unary(_bounded("atanh", math.atanh, -1.0, 1.0, open_=True)),
    "floor": _unary(lambda x: float(math.floor(x))),
    "ceil": _unary(lambda x: float(math.ceil(x))),
    "int": _unary(lambda x: float(math.trunc(x))),
    # nint rounds half-way cases to even (ngspice manual), as Python's round does.
    "nint": _unary(lambda x: float(round(x))),
    "min": _Function(2, True, lambda *args: min(args)),
    "max": _Function(2, True, lambda *args: max(args)),
    "pow": _Function(2, False, _pow),
    "pwr": _Function(2, False, _magnitude_power),
    "pwrs": _Function(2, False, _signed_power),
    "sqr": _unary(lambda x: x * x),
    "fabs": _unary(abs),
    "sign": _unary(_sign),
    "limit": _Function(3, False, _limit),
    "uramp": _unary(lambda x: x if x > 0 else 0.0),
    "u": _unary(_step),
    "stp": _unary(_step),
    "hypot": _Function(2, False, math.hypot),
    "atan2": _Function(2, False, math.atan2),
    "table": _Function(3, True, _table),
    "tbl": _Function(3, True, _table),
    # Statistical functions of Monte Carlo decks read at their nominal value (the first
    # argument), which is what one operating point of the design uses.
    "agauss": _Function(3, False, lambda nominal, *_: nominal),
    "gauss": _Function(3, False, lambda nominal, *_: nominal),
    "aunif": _Function(2, False, lambda nominal, *_: nominal),
    "unif": _Function(2, False, lambda nominal, *_: nominal),
}

# Time- or state-dependent functions: their value at the DC operating point (t = 0,
# nothing integrated yet, a delay passing its input through), and they make the
# expression behavioural.
_DYNAMIC_FUNCTIONS: Final[dict[str, _Function]] = {
    "ddt": _unary(lambda x: 0.0),
    "sdt": _unary(lambda x: 0.0),
    "idt": _Function(1, True, lambda *args: args[1] if len(args) > 1 else 0.0),
    "delay": _Function(2, True, lambda x, *_: x),
    "absdelay": _Function(2, True, lambda x, *_: x),
}
# if(c, a, b) (PSpice, LTspice) and ngspice's ternary_fcn(c, a, b): only the chosen
# branch is evaluated, as with c ? a : b.
_CONDITIONALS: Final = frozenset({"if", "ternary_fcn"})
# Names that read the simulator's state rather than a parameter.
_DYNAMIC_NAMES: Final = {"time": "time", "temp": "temp", "temper": "temp"}

FUNCTION_NAMES: Final = frozenset(_FUNCTIONS) | frozenset(_DYNAMIC_FUNCTIONS) | _CONDITIONALS
"""Every built-in function name (lower case)."""


# ---------------------------------------------------------------------------
# Compiled nodes


@dataclass(frozen=True, slots=True)
class _Node:
    run: _Run
    depth: int
    offset: int
    names: frozenset[str] = frozenset()
    constants: frozenset[str] = frozenset()
    constant: bool = False
    probes: frozenset[Probe] = frozenset()
    dynamic: bool = False
    calls: frozenset[str] = frozenset()


def _no_parameters(name: str) -> float | None:
    return None


def _overflow(offset: int, what: str) -> NoReturn:
    raise ExpressionError(f"overflow: {what} is too large for a floating-point number", offset)


def _make(run: _Run, children: Sequence[_Node], offset: int, dynamic: bool = False) -> _Node:
    """A node over ``children``; folded to a constant when they all are and it evaluates."""
    depth = 1 + max((child.depth for child in children), default=0)
    names = frozenset().union(*(child.names for child in children))
    constants = frozenset().union(*(child.constants for child in children))
    probes: frozenset[Probe] = frozenset().union(*(child.probes for child in children))
    calls = frozenset().union(*(child.calls for child in children))
    dynamic = dynamic or any(child.dynamic for child in children)
    if children and all(child.constant for child in children) and not dynamic:
        try:
            value = run(_no_parameters)
        except ExpressionError:
            # Keep it unfolded: the error belongs to evaluation, with its offset.
            pass
        else:
            return _Node(lambda lookup: value, depth, offset, names, constants, True)
    return _Node(run, depth, offset, names, constants, False, probes, dynamic, calls)


def _read_probe(lookup: Lookup, probe: Probe, offset: int) -> float:
    """A behavioural reading from the lookup, or BehaviouralValue when it cannot answer."""
    reader = getattr(lookup, "probe", None)
    value = reader(*probe) if reader is not None else None
    if value is None:
        kind, a, b = probe
        what = {"time": "the simulation time", "temp": "the temperature"}.get(kind)
        if what is None:
            what = f"{kind.upper()}({a}{', ' + b if b else ''})"
        raise BehaviouralValue(f"behavioural: the value depends on {what}", offset)
    return float(value)


Item: TypeAlias = "_Node | Token | tuple[_Node, ...] | None"


def _token(item: Item) -> Token:
    assert isinstance(item, str), item
    return item


def _node(item: Item) -> _Node:
    assert isinstance(item, _Node), item
    return item


def _compile_number(items: list[Item]) -> _Node:
    token = _token(items[0])
    value = parse_number(str(token))
    assert value is not None, token
    if not math.isfinite(value):
        raise ExpressionError(f"number {token} is out of range", token.start_pos or 0)
    return _Node(lambda lookup: value, 1, token.start_pos or 0, constant=True)


def _compile_name(items: list[Item]) -> _Node:
    token = _token(items[0])
    name = str(token).lower()
    offset = token.start_pos or 0
    fallback = _CONSTANTS.get(name)
    state = _DYNAMIC_NAMES.get(name)
    if state is not None:
        reading: Probe = (state, "", None)

        def run_state(lookup: Lookup) -> float:
            # A parameter of the same name wins, as for pi and e.
            value = lookup(name)
            return float(value) if value is not None else _read_probe(lookup, reading, offset)

        return _Node(run_state, 1, offset, names=frozenset({name}), dynamic=True)

    def run(lookup: Lookup) -> float:
        value = lookup(name)
        if value is None:
            if fallback is not None:
                return fallback
            raise ExpressionError(f"undefined parameter '{name}'", offset)
        value = float(value)
        if not math.isfinite(value):
            raise ExpressionError(f"parameter '{name}' has no finite value ({value})", offset)
        return value

    if fallback is not None:
        return _Node(run, 1, offset, constants=frozenset({name}))
    return _Node(run, 1, offset, names=frozenset({name}))


def _compile_prefix(items: list[Item]) -> _Node:
    sign = _token(items[0])
    operand = _node(items[1])
    inner = operand.run
    run: _Run
    if sign.type == "MINUS":

        def run(lookup: Lookup) -> float:
            return -inner(lookup)

    elif sign.type == "PLUS":
        run = inner
    else:

        def run(lookup: Lookup) -> float:
            return 0.0 if inner(lookup) else 1.0

    return _make(run, [operand], sign.start_pos or 0)


def _operands(items: list[Item]) -> tuple[_Node, list[tuple[Token, _Node]]]:
    """Split a flat chain ``a op b op c`` into its head and (operator, operand) pairs."""
    head = _node(items[0])
    pairs = [(_token(items[i]), _node(items[i + 1])) for i in range(1, len(items), 2)]
    return head, pairs


def _compile_sum(items: list[Item]) -> _Node:
    head, pairs = _operands(items)
    first = head.run
    rest = tuple((op.type == "PLUS", node.run, op.start_pos or 0) for op, node in pairs)

    def run(lookup: Lookup) -> float:
        total = first(lookup)
        for plus, term, offset in rest:
            total = total + term(lookup) if plus else total - term(lookup)
            if not math.isfinite(total):
                _overflow(offset, "the sum")
        return total

    return _make(run, [head, *(node for _, node in pairs)], head.offset)


def _compile_product(items: list[Item]) -> _Node:
    head, pairs = _operands(items)
    first = head.run
    rest = tuple((op.type == "STAR", node.run, op.start_pos or 0) for op, node in pairs)

    def run(lookup: Lookup) -> float:
        product = first(lookup)
        for multiply, factor, offset in rest:
            value = factor(lookup)
            if multiply:
                product *= value
            elif value == 0:
                raise ExpressionError("division by zero", offset)
            else:
                product /= value
            if not math.isfinite(product):
                _overflow(offset, "the product" if multiply else "the quotient")
        return product

    return _make(run, [head, *(node for _, node in pairs)], head.offset)


def _compile_power(items: list[Item]) -> _Node:
    head, pairs = _operands(items)
    first = head.run
    rest = tuple((node.run, op.start_pos or 0) for op, node in pairs)

    def run(lookup: Lookup) -> float:
        # Left to right, as ngspice evaluates 2^3^2 (= 64).
        value = first(lookup)
        for exponent, offset in rest:
            try:
                value = _magnitude_power(value, exponent(lookup))
            except _DomainError as error:
                raise ExpressionError(str(error), offset) from None
            except OverflowError:
                _overflow(offset, "the power")
            if not math.isfinite(value):
                _overflow(offset, "the power")
        return value

    return _make(run, [head, *(node for _, node in pairs)], head.offset)


_COMPARISONS: Final[dict[str, Callable[[float, float], bool]]] = {
    "==": operator.eq,
    "!=": operator.ne,
    "<": operator.lt,
    "<=": operator.le,
    ">": operator.gt,
    ">=": operator.ge,
}


def _compile_comparison(items: list[Item]) -> _Node:
    head, pairs = _operands(items)
    first = head.run
    rest = tuple((_COMPARISONS[str(op)], node.run) for op, node in pairs)

    def run(lookup: Lookup) -> float:
        # One precedence level, left to right: 3 == 3 < 2 is (3 == 3) < 2 = 1.
        value = first(lookup)
        for compare, operand in rest:
            value = 1.0 if compare(value, operand(lookup)) else 0.0
        return value

    return _make(run, [head, *(node for _, node in pairs)], head.offset)


def _compile_conjunction(items: list[Item]) -> _Node:
    nodes = [_node(item) for item in items[::2]]
    runs = tuple(node.run for node in nodes)

    def run(lookup: Lookup) -> float:
        # Short-circuit, so a guard such as x != 0 && 1/x > 2 never divides by zero.
        for operand in runs:
            if not operand(lookup):
                return 0.0
        return 1.0

    return _make(run, nodes, nodes[0].offset)


def _compile_disjunction(items: list[Item]) -> _Node:
    nodes = [_node(item) for item in items[::2]]
    runs = tuple(node.run for node in nodes)

    def run(lookup: Lookup) -> float:
        for operand in runs:
            if operand(lookup):
                return 1.0
        return 0.0

    return _make(run, nodes, nodes[0].offset)


def _compile_ternary(items: list[Item]) -> _Node:
    condition, when_true, when_false = (_node(item) for item in items)
    test, yes, no = condition.run, when_true.run, when_false.run

    def run(lookup: Lookup) -> float:
        return yes(lookup) if test(lookup) else no(lookup)

    return _make(run, [condition, when_true, when_false], condition.offset)


def _compile_arguments(items: list[Item]) -> tuple[_Node, ...]:
    return tuple(_node(item) for item in items)


def _plural(count: int) -> str:
    return "argument" if count == 1 else "arguments"


def _compile_call(items: list[Item]) -> _Node:
    token = _token(items[0])
    arguments = items[1]
    assert arguments is None or isinstance(arguments, tuple)
    args: tuple[_Node, ...] = arguments or ()
    name = str(token).lower()
    offset = token.start_pos or 0
    if name in _CONDITIONALS:
        return _compile_conditional_call(name, args, offset)
    function = _FUNCTIONS.get(name)
    dynamic = False
    if function is None:
        function = _DYNAMIC_FUNCTIONS.get(name)
        dynamic = function is not None
    if function is None:
        return _compile_user_call(str(token), args, offset)
    count = len(args)
    if function.variadic and count < function.arity:
        raise ExpressionError(
            f"expected at least {function.arity} {_plural(function.arity)} to {name}, got {count}",
            offset,
        )
    if not function.variadic and count != function.arity:
        raise ExpressionError(
            f"expected {function.arity} {_plural(function.arity)} to {name}, got {count}", offset
        )
    apply = function.apply
    runs = tuple(arg.run for arg in args)

    def run(lookup: Lookup) -> float:
        values = [argument(lookup) for argument in runs]
        try:
            value = apply(*values)
        except _DomainError as error:
            raise ExpressionError(str(error), offset) from None
        except OverflowError:
            _overflow(offset, f"the result of {name}()")
        except ValueError:
            shown = ", ".join(_fmt(v) for v in values)
            raise ExpressionError(f"{name}({shown}) is undefined", offset) from None
        if not math.isfinite(value):
            _overflow(offset, f"the result of {name}()")
        return float(value)

    return _make(run, args, offset, dynamic)


def _compile_conditional_call(name: str, args: tuple[_Node, ...], offset: int) -> _Node:
    if len(args) != 3:
        raise ExpressionError(f"expected 3 arguments to {name}, got {len(args)}", offset)
    test, yes, no = (arg.run for arg in args)

    def run(lookup: Lookup) -> float:
        return yes(lookup) if test(lookup) else no(lookup)

    return _make(run, args, offset)


def _compile_user_call(spelled: str, args: tuple[_Node, ...], offset: int) -> _Node:
    """A call of a ``.func`` user function, found through the lookup when evaluated."""
    name = spelled.lower()
    runs = tuple(arg.run for arg in args)

    def run(lookup: Lookup) -> float:
        finder = getattr(lookup, "function", None)
        definition: UserFunction | None = finder(name) if finder is not None else None
        if definition is None:
            raise ExpressionError(f"unknown function '{spelled}'", offset)
        if len(runs) != len(definition.params):
            count = len(definition.params)
            raise ExpressionError(
                f"function '{name}' takes {count} {_plural(count)}, got {len(runs)}", offset
            )
        assert isinstance(lookup, Environment)
        if lookup.depth >= lookup.limit:
            raise ExpressionError(
                f"user functions call each other more than {lookup.limit} levels deep "
                "(limit max_function_depth)",
                offset,
            )
        bound = {param: argument(lookup) for param, argument in zip(definition.params, runs)}
        try:
            return definition.body.evaluate(lookup.inner(bound))
        except BehaviouralValue:
            raise
        except ExpressionError as error:
            raise ExpressionError(f"in function '{name}': {error.message}", offset) from None

    node = _make(run, args, offset)
    return _Node(
        run,
        node.depth,
        offset,
        node.names,
        node.constants,
        False,
        node.probes,
        node.dynamic,
        node.calls | {name},
    )


def _compile_probe(items: list[Item]) -> _Node:
    token = _token(items[0])
    kind = str(token)[0].lower()
    first = str(_token(items[1])).lower()
    second = str(_token(items[2])).lower() if items[2] is not None else None
    if kind == "i" and second is not None:
        raise ExpressionError("I(...) reads one source's current: expected I(name)", 0)
    probe: Probe = (kind, first, second)
    offset = token.start_pos or 0

    def run(lookup: Lookup) -> float:
        return _read_probe(lookup, probe, offset)

    return _Node(run, 1, offset, probes=frozenset({probe}))


# One handler per tree the grammar can build; tests check this table against it.
_HANDLERS: Final[dict[str, Callable[[list[Item]], _Node | tuple[_Node, ...]]]] = {
    "number": _compile_number,
    "name": _compile_name,
    "prefix": _compile_prefix,
    "power": _compile_power,
    "product": _compile_product,
    "sum": _compile_sum,
    "comparison": _compile_comparison,
    "conjunction": _compile_conjunction,
    "disjunction": _compile_disjunction,
    "ternary": _compile_ternary,
    "call": _compile_call,
    "probe": _compile_probe,
    "arguments": _compile_arguments,
}


# ---------------------------------------------------------------------------
# Parsing


_parser: Lark | None = None


def _grammar() -> Lark:
    """The expression parser, built on first use and shared by the whole process."""
    global _parser
    if _parser is None:
        from drivelint.netlist.parsers import parser

        _parser = parser("expr.lark")
    return _parser


def _depth_error(limit: int, offset: int) -> ExpressionError:
    return ExpressionError(
        f"expression is nested more than {limit} levels deep (limit max_expression_depth)",
        offset,
    )


def _check_parentheses(text: str, limit: int) -> None:
    """Balance and nesting of parentheses and braces, checked before lark sees the text."""
    opened: list[tuple[str, int]] = []
    closers = {")": "(", "}": "{"}
    for offset, char in enumerate(text):
        if char in "({":
            opened.append((char, offset))
            if len(opened) > limit:
                raise _depth_error(limit, offset)
        elif char in closers:
            if not opened or opened[-1][0] != closers[char]:
                kind = "parenthesis" if char == ")" else "brace"
                raise ExpressionError(
                    f"unbalanced {kind}: '{char}' has no matching '{closers[char]}'", offset
                )
            opened.pop()
    if opened:
        char, offset = opened[-1]
        kind = "parenthesis" if char == "(" else "brace"
        raise ExpressionError(f"unbalanced {kind}: '{char}' is never closed", offset)


# The parser waits for an operand exactly when it would take a number or a name
# there (+, - and '(' also start operands, but they can follow one too).
_OPERANDS: Final = frozenset({"NUMBER", "NAME"})
_OPERAND_STARTS: Final = frozenset({"NUMBER", "NAME", "LPAR", "LBRACE", "PROBE", "BANG"})

# Characters people type from other languages, with what to write instead.
_CHARACTER_HINTS: Final = {
    "=": "; to compare write '=='",
    "%": "; modulo ('%') is not supported",
    "\\": "; integer division ('\\') is not supported",
    "}": "; a '}' without its '{'",
    "'": "; quotes cannot be nested inside an expression",
    '"': "; strings are not values",
}


def _previous_token(text: str, offset: int) -> str | None:
    """Text of the last token that ends at or before ``offset``."""
    from lark import UnexpectedInput

    previous = None
    try:
        for token in _grammar().lex(text[:offset]):
            previous = str(token)
    except UnexpectedInput:
        pass
    return previous


def _syntax_error(text: str, error: UnexpectedInput) -> ExpressionError:
    """Turn lark's error into a message that says what was expected."""
    from lark import UnexpectedCharacters, UnexpectedToken

    if isinstance(error, UnexpectedCharacters):
        offset = error.pos_in_stream or 0
        char = text[offset] if offset < len(text) else ""
        hint = _CHARACTER_HINTS.get(char, "")
        return ExpressionError(f"unexpected character '{char}'{hint}", offset)
    assert isinstance(error, UnexpectedToken)
    token = error.token
    if token.type == "PROBED":
        # Lexed as a node name only because nothing else matched: a stray character.
        offset = token.start_pos or 0
        char = text[offset] if offset < len(text) else ""
        hint = _CHARACTER_HINTS.get(char, "")
        return ExpressionError(f"unexpected character '{char}'{hint}", offset)
    expected = set(error.expected)
    at_end = token.type == "$END"
    offset = len(text) if at_end else (token.start_pos or 0)
    previous = _previous_token(text, offset)
    found = "the end of the expression" if at_end else f"'{token}'"
    if expected & _OPERANDS:
        if previous is None:
            return ExpressionError(f"expected an operand, found {found}", offset)
        return ExpressionError(f"expected an operand after '{previous}', found {found}", offset)
    if at_end and expected == {"COLON"}:
        return ExpressionError("expected ':' to complete the conditional 'c ? a : b'", offset)
    if token.type in _OPERAND_STARTS:
        return ExpressionError(f"expected an operator between '{previous}' and '{token}'", offset)
    if token.type == "COLON":
        return ExpressionError("':' without a matching '?'", offset)
    if token.type == "COMMA":
        return ExpressionError("',' outside the argument list of a function call", offset)
    return ExpressionError(f"unexpected {found}", offset)


def _is_tree(child: object) -> bool:
    """A rule's node of either parser's tree (tokens are strings; absent parts None)."""
    return child is not None and not isinstance(child, str)


def _compile_tree(root: Any, limit: int) -> _Node:
    """Post-order compile without recursion, stopping as soon as nesting passes ``limit``.

    ``root`` is lark's tree or the hand-written reader's (``descent.Tree``): the same
    shape, ``data`` and ``children``.
    """
    done: dict[int, _Node | tuple[_Node, ...]] = {}
    stack: list[tuple[Any, bool]] = [(root, False)]
    while stack:
        tree, children_done = stack.pop()
        if not children_done:
            stack.append((tree, True))
            stack.extend((child, False) for child in tree.children if _is_tree(child))
            continue
        items: list[Item] = [
            done.pop(id(child)) if _is_tree(child) else child for child in tree.children
        ]
        handler = _HANDLERS.get(str(tree.data))
        if handler is None:
            raise AssertionError(f"no compiler for grammar rule {tree.data!r}")
        result = handler(items)
        if isinstance(result, _Node) and result.depth > limit:
            raise _depth_error(limit, result.offset)
        done[id(tree)] = result
    result = done[id(root)]
    assert isinstance(result, _Node)
    return result


# A bare number, by far the most common .param value, skips the parser.
_PLAIN_NUMBER: Final = re.compile(
    r"\s*([+-]?(?:\d+\.?\d*|\.\d+)(?:[eE][+-]?\d+)?(?:[A-Za-z_][A-Za-z0-9_]*)?)\s*"
)


@lru_cache(maxsize=16384)
def _compile_cached(text: str, limits: Limits) -> Expression:
    if len(text) > limits.max_expression_chars:
        raise ExpressionError(
            f"expression is {len(text)} characters long; the limit (max_expression_chars) "
            f"is {limits.max_expression_chars}",
            limits.max_expression_chars,
        )
    if not text.strip():
        return _fail_empty()
    plain = _PLAIN_NUMBER.fullmatch(text)
    if plain is not None:
        value = parse_number(plain.group(1))
        if value is not None and math.isfinite(value):
            return Expression(text, frozenset(), frozenset(), lambda lookup: value)
    _check_parentheses(text, limits.max_expression_depth)
    tree: Any = descent.parse(text)
    if tree is None:
        # Not read by hand: lark reads it, or says what is wrong with it.
        from lark import UnexpectedInput

        try:
            tree = _grammar().parse(text)
        except UnexpectedInput as error:
            raise _syntax_error(text, error) from None
    root = _compile_tree(tree, limits.max_expression_depth)
    return Expression(
        text, root.names, root.constants, root.run, root.probes, root.dynamic, root.calls
    )


def _fail_empty() -> NoReturn:
    raise ExpressionError("empty expression", 0)
