"""Parameter scopes: global ``.param``, subcircuit defaults, instance overrides, local ``.param``.

Parameters are evaluated lazily and memoised per scope, so the order of definitions does
not matter (as in SPICE) and each value is computed once per subcircuit instance.
"""

from __future__ import annotations

import math
import re
from dataclasses import dataclass, field
from typing import TYPE_CHECKING

from drivelint.diagnostics import Diagnostic, DiagnosticError, Severity, Span
from drivelint.limits import Limits
from drivelint.netlist.statements import Expr, Field, FuncCard, Group, ModelCard, Subckt, Word

if TYPE_CHECKING:
    from drivelint.netlist.expressions import Expression, UserFunction


@dataclass(slots=True)
class ParamDef:
    """A parameter's definition: either a number already known or an expression to evaluate."""

    span: Span
    text: str | None = None
    value: float | None = None
    scope: Scope | None = None  # where ``text`` is evaluated; defaults to the owning scope


@dataclass(slots=True)
class Scope:
    """One level of the hierarchy: the top level, or one subcircuit instance."""

    limits: Limits
    line_text: object  # Callable[[Span], str], kept loose to avoid a cycle in typing
    parent: Scope | None = None
    params: dict[str, ParamDef] = field(default_factory=dict)
    subckts: dict[str, Subckt] = field(default_factory=dict)
    models: dict[str, ModelCard] = field(default_factory=dict)
    funcs: dict[str, FuncCard] = field(default_factory=dict)
    _values: dict[str, float] = field(default_factory=dict)
    _busy: list[str] = field(default_factory=list)
    _compiled: dict[str, UserFunction] = field(default_factory=dict)

    # -- look-ups through the hierarchy ---------------------------------------------

    def find_subckt(self, name: str) -> Subckt | None:
        scope: Scope | None = self
        while scope is not None:
            found = scope.subckts.get(name)
            if found is not None:
                return found
            scope = scope.parent
        return None

    def find_model(self, name: str) -> tuple[ModelCard, Scope] | None:
        scope: Scope | None = self
        while scope is not None:
            found = scope.models.get(name)
            if found is not None:
                return found, scope
            scope = scope.parent
        return None

    def forget(self, name: str) -> None:
        """Drop a memoised value (its definition has just been replaced)."""
        self._values.pop(name, None)

    def find_function(self, name: str) -> UserFunction | None:
        """A ``.func`` visible here, compiled once per defining scope."""
        from drivelint.netlist.expressions import (
            ExpressionError,
            UserFunction,
            compile_expression,
        )

        scope: Scope | None = self
        while scope is not None:
            card = scope.funcs.get(name)
            if card is not None:
                compiled = scope._compiled.get(name)
                if compiled is None:
                    try:
                        body = compile_expression(card.body.text, self.limits)
                    except ExpressionError as exc:
                        raise self.error(
                            Span(
                                card.body.span.path,
                                card.body.span.line,
                                card.body.span.column + exc.offset,
                            ),
                            f"in '.func {name}': {exc.message}",
                        ) from None
                    compiled = UserFunction(name, card.params, body)
                    scope._compiled[name] = compiled
                return compiled
            scope = scope.parent
        return None

    def environment(self, depth: int = 0) -> object:
        """The lookup expressions of this scope are evaluated with: parameters, .func.

        A parameter value that reads the temperature (``temper``, e.g. a model
        parameter) is taken at the nominal 27 °C, where ngspice evaluates it for the
        operating point (ngspice manual, ".options": TEMP and TNOM default to 27 °C).
        Node voltages and time have no value here.
        """
        from drivelint.netlist.expressions import Environment

        return Environment(
            lambda name: self.param(name, depth),
            _nominal_temperature,
            self.find_function,
            self.limits.max_function_depth,
        )

    def param(self, name: str, depth: int = 0) -> float | None:
        scope: Scope | None = self
        while scope is not None:
            if name in scope._values:
                return scope._values[name]
            definition = scope.params.get(name)
            if definition is not None:
                return scope._evaluate_param(name, definition, depth)
            scope = scope.parent
        return None

    def _evaluate_param(self, name: str, definition: ParamDef, depth: int) -> float:
        if definition.value is not None:
            self._values[name] = definition.value
            return definition.value
        if name in self._busy:
            chain = " -> ".join([*self._busy[self._busy.index(name) :], name])
            raise self.error(definition.span, f"circular parameter definition: {chain}", "param")
        if depth > self.limits.max_param_recursion:
            raise self.error(
                definition.span,
                f"parameters refer to each other more than {self.limits.max_param_recursion} "
                "levels deep (limit max_param_recursion)",
                "limit",
            )
        where = definition.scope or self
        self._busy.append(name)
        try:
            assert definition.text is not None
            value = where.evaluate_text(definition.text, definition.span, depth + 1)
        finally:
            self._busy.pop()
        self._values[name] = value
        return value

    # -- evaluation ------------------------------------------------------------------

    def error(self, span: Span, message: str, code: str = "value") -> DiagnosticError:
        text = self.line_text(span) if callable(self.line_text) else ""
        return DiagnosticError(Diagnostic(Severity.ERROR, span, message, text, code))

    def evaluate_text(self, text: str, span: Span, depth: int = 0) -> float:
        from drivelint.netlist.expressions import ExpressionError, compile_expression
        from drivelint.netlist.values import parse_number

        stripped = text.strip()
        number = parse_number(stripped)
        # A literal too large for a float (1e400) goes on to the expression compiler,
        # which reports it: in braces or a .param, ngspice 39 refuses it as well.
        if number is not None and math.isfinite(number) and _is_plain_number(stripped):
            return number
        try:
            expression = compile_expression(stripped, self.limits)
            if expression.calls or expression.dynamic:
                return expression.evaluate(self.environment(depth))  # type: ignore[arg-type]
            return expression.evaluate(lambda name: self.param(name, depth))
        except ExpressionError as exc:
            offset = max(exc.offset, 0) + (len(text) - len(text.lstrip()))
            raise self.error(
                Span(span.path, span.line, span.column + offset),
                f"in expression '{_excerpt(stripped)}': {exc.message}",
            ) from None

    def compile(self, item: Field) -> Expression | None:
        """The compiled expression of a value field, or None for a plain number."""
        from drivelint.netlist.expressions import ExpressionError, compile_expression
        from drivelint.netlist.values import parse_number

        if isinstance(item, Word):
            if parse_number(item.text) is not None:
                return None
            text, span = item.text, item.span
        elif isinstance(item, Expr):
            text, span = item.text, item.span
        else:
            return None
        stripped = text.strip()
        if _is_plain_number(stripped):
            return None
        try:
            return compile_expression(stripped, self.limits)
        except ExpressionError as exc:
            offset = max(exc.offset, 0) + (len(text) - len(text.lstrip()))
            raise self.error(
                Span(span.path, span.line, span.column + offset),
                f"in expression '{_excerpt(stripped)}': {exc.message}",
            ) from None

    def number(self, item: Field) -> float:
        """The value of a field that must be a number: ``10u``, ``{2*x}``, ``'x/2'``, ``rval``."""
        if isinstance(item, Word):
            from drivelint.netlist.values import parse_number

            value = parse_number(item.text)
            if value is not None and not math.isfinite(value):
                # 1e400 read as a literal is what {1e400} is: no float holds it.
                raise self.error(
                    item.span, f"number '{_excerpt(item.text)}' is too large for a float value"
                )
            if value is not None:
                return value
            return self.evaluate_text(item.text, item.span)
        if isinstance(item, Expr):
            return self.evaluate_text(item.text, item.span)
        if isinstance(item, Group):
            raise self.error(item.span, "expected a number, found a parenthesised list")
        raise self.error(item.span, f"expected a number, found '{item.key}=…'")


def _nominal_temperature(kind: str, a: str, b: str | None) -> float | None:
    return 27.0 if kind == "temp" else None


_EXCERPT_CHARS = 60


def _excerpt(text: str) -> str:
    """The expression as quoted in a message: a hostile 20 kB one is cut, the caret shows where."""
    return text if len(text) <= _EXCERPT_CHARS else text[: _EXCERPT_CHARS - 1] + "…"


_PLAIN_NUMBER = re.compile(r"[+-]?(?:\d+\.?\d*|\.\d+)(?:[eE][+-]?\d+)?[a-zA-Z]*")


def _is_plain_number(text: str) -> bool:
    """True for a number with an optional suffix (``4.7k``, ``10uF``), not ``2*x``."""
    return _PLAIN_NUMBER.fullmatch(text) is not None
