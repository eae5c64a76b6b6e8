"""Results as plain JSON data and back: the typed, field-checked codec of the result cache
and of the JSON report's records.

Encoding writes a dataclass as ``[tag, field, …]`` in field order. Decoding builds only
the result dataclasses listed in ``_namespace``, field by field, each value checked
against the field's type hint; anything else is a :class:`CodecError`, never code run.

Two options serve the JSON report, whose text must be strict JSON and whose objects are
written with sorted keys: ``strict=True`` writes a non-finite float as the string
``"inf"``, ``"-inf"`` or ``"nan"``, and a mapping as a list of ``[key, value]`` pairs (so
sorting an object's keys cannot reorder a mapping the renderers read in order). The
decoder takes either form wherever the type hint says float or mapping (no cached type
has a union of a float and a string, so the string form is never ambiguous).
"""

from __future__ import annotations

import dataclasses
import enum
import math
import types
import typing
from collections.abc import Callable, Mapping
from typing import Any


class CodecError(ValueError):
    """Data that does not hold what the codec's types say."""


# -- encoding -------------------------------------------------------------------------------


def encode(value: Any, strict: bool = False) -> Any:
    """Result objects as JSON data: a dataclass is ``[tag, field, …]`` in field order.

    ``strict``: non-finite floats as strings and mappings as ``[key, value]`` pairs (see the
    module docstring), for text that is strict JSON and may have its keys sorted.
    """
    if value is None or type(value) in (str, int, bool):
        return value
    if type(value) is float:
        if strict and not math.isfinite(value):
            return "nan" if value != value else ("inf" if value > 0 else "-inf")
        return value
    if isinstance(value, enum.Enum):
        return value.value
    if dataclasses.is_dataclass(value) and not isinstance(value, type):
        names = _FIELDS.get(type(value))
        if names is None:
            raise CodecError(f"{type(value).__name__} is not a cached type")
        return [type(value).__name__, *(encode(getattr(value, n), strict) for n in names)]
    if isinstance(value, tuple | list):
        return [encode(v, strict) for v in value]
    if isinstance(value, frozenset | set):
        return sorted(encode(v, strict) for v in value)
    if isinstance(value, Mapping):
        out = {}
        for key, item in value.items():
            if type(key) is not str:
                raise CodecError("mapping with a key that is not a string")
            out[key] = encode(item, strict)
        return [[k, v] for k, v in out.items()] if strict else out
    raise CodecError(f"cannot cache a {type(value).__name__}")


# -- decoding -------------------------------------------------------------------------------

Decoder = Callable[[Any], Any]
_FIELDS: dict[type, tuple[str, ...]] = {}
_KEYWORDS: dict[type, tuple[str, ...]] = {}
_BY_TAG: dict[str, type] = {}
_DECODERS: dict[object, Decoder] = {}
_HINTS: dict[type, dict[str, Any]] = {}
_NON_FINITE = {"inf": math.inf, "-inf": -math.inf, "nan": math.nan}


def _namespace() -> dict[str, Any]:
    """The classes a result holds, for resolving their string annotations."""
    from drivelint.checks.base import Finding
    from drivelint.checks.runner import CheckResult
    from drivelint.circuit import model as circuit_model
    from drivelint.diagnostics import Diagnostic, Severity, Span
    from drivelint.netlist import waveforms
    from drivelint.netlist.statements import Directive
    from drivelint.ratings.values import Value
    from drivelint.stages import model as stage_model

    names: dict[str, Any] = {
        "CheckResult": CheckResult,
        "Finding": Finding,
        "Diagnostic": Diagnostic,
        "Severity": Severity,
        "Span": Span,
        "Directive": Directive,
        "Value": Value,
        "Waveform": waveforms.Waveform,
    }
    for module in (circuit_model, stage_model):
        for name, item in vars(module).items():
            if isinstance(item, type) and dataclasses.is_dataclass(item):
                names[name] = item
    return names


def _subclasses(cls: type) -> list[type]:
    """``cls`` and its subclasses, as their modules define them.

    A slotted dataclass is a new class made from the one written, which stays behind in
    ``__subclasses__`` until collected; only the one its module names counts.
    """
    import sys

    out = []
    if getattr(sys.modules.get(cls.__module__), cls.__qualname__, None) is cls:
        out.append(cls)
    subclasses: list[type] = cls.__subclasses__()
    for sub in subclasses:
        out.extend(c for c in _subclasses(sub) if c not in out)
    return out


def _register(cls: type) -> None:
    if cls in _FIELDS:
        return
    fields = [f for f in dataclasses.fields(cls) if f.init]
    # Positional fields first, then keyword-only ones (their count is kept in _KEYWORDS).
    names = tuple(f.name for f in fields if not f.kw_only)
    keywords = tuple(f.name for f in fields if f.kw_only)
    _FIELDS[cls] = names + keywords
    _KEYWORDS[cls] = keywords
    if _BY_TAG.setdefault(cls.__name__, cls) is not cls:
        raise TypeError(f"two cached classes named {cls.__name__}")
    module = __import__(cls.__module__, fromlist=["_"])
    try:  # a record of plain types (a brief, a report's header) needs no result class
        _HINTS[cls] = typing.get_type_hints(cls, vars(module))
    except NameError:
        _HINTS[cls] = typing.get_type_hints(cls, vars(module), _namespace())


def _fail(what: str) -> typing.NoReturn:
    raise CodecError(what)


def _decoder(hint: Any) -> Decoder:
    found = _DECODERS.get(hint)
    if found is None:
        found = _make_decoder(hint)
        _DECODERS[hint] = found
    return found


def _make_decoder(hint: Any) -> Decoder:  # noqa: C901 - one branch per kind of type
    origin = typing.get_origin(hint)
    args = typing.get_args(hint)
    if hint is type(None) or hint is None:
        return lambda v: v if v is None else _fail("expected null")
    if hint is str:
        return lambda v: v if type(v) is str else _fail("expected a string")
    if hint is bool:
        return lambda v: v if type(v) is bool else _fail("expected a boolean")
    if hint is int:
        return lambda v: v if type(v) is int else _fail("expected an integer")
    if hint is float:

        def decode_float(v: Any) -> float:
            kind = type(v)
            if kind is float:
                return v  # type: ignore[no-any-return]
            if kind is int:
                return float(v)
            if kind is str and v in _NON_FINITE:
                return _NON_FINITE[v]
            _fail("expected a number")

        return decode_float
    if isinstance(hint, type) and issubclass(hint, enum.Enum):
        enum_type = hint

        def decode_enum(v: Any) -> Any:
            if type(v) not in (int, str):
                _fail("expected an enumeration value")
            try:
                return enum_type(v)
            except ValueError:
                _fail(f"not a {enum_type.__name__}")

        return decode_enum
    if isinstance(hint, type) and dataclasses.is_dataclass(hint):
        return _dataclass_decoder(hint)
    if origin in (typing.Union, types.UnionType):
        members = [_decoder(a) for a in args]
        optional = type(None) in args
        if optional and len(args) == 2:
            inner = members[0] if args[1] is type(None) else members[1]
            return lambda v: None if v is None else inner(v)

        def decode_union(v: Any) -> Any:
            for member in members:
                try:
                    return member(v)
                except CodecError:
                    continue
            _fail("no member of the union fits")

        return decode_union
    if origin is tuple:
        if len(args) == 2 and args[1] is Ellipsis:
            item = _decoder(args[0])
            return lambda v: tuple(map(item, v)) if type(v) is list else _fail("expected a list")
        items = [_decoder(a) for a in args]

        def decode_fixed(v: Any) -> Any:
            if type(v) is not list or len(v) != len(items):
                _fail("expected a list of fixed length")
            return tuple(d(x) for d, x in zip(items, v))

        return decode_fixed
    if origin in (frozenset, set):
        item = _decoder(args[0])
        return lambda v: frozenset(map(item, v)) if type(v) is list else _fail("expected a list")
    if origin in (Mapping, dict, typing.Mapping) or (
        isinstance(origin, type) and issubclass(origin, Mapping)
    ):
        if args[0] is not str:
            raise TypeError(f"cannot cache {hint}: keys must be strings")
        value = _decoder(args[1])

        def decode_mapping(v: Any) -> Any:
            if type(v) is dict:
                return {k: value(x) for k, x in v.items()}
            if type(v) is list:  # the strict form: [[key, value], ...]
                out = {}
                for pair in v:
                    if type(pair) is not list or len(pair) != 2 or type(pair[0]) is not str:
                        _fail("expected [key, value] pairs")
                    out[pair[0]] = value(pair[1])
                return out
            _fail("expected an object")

        return decode_mapping
    raise TypeError(f"no cache decoder for {hint!r}")


def _dataclass_decoder(base: type) -> Decoder:
    classes = [c for c in _subclasses(base) if dataclasses.is_dataclass(c)]
    classes = [c for c in classes if not getattr(c, "__abstractmethods__", None)]
    for cls in classes:
        _register(cls)
    # Placeholder first: a class whose fields refer back to it must find a decoder.
    table: dict[str, tuple[type, list[Decoder], tuple[str, ...]]] = {}

    def decode(v: Any) -> Any:
        if type(v) is not list or not v or type(v[0]) is not str:
            _fail(f"expected a {base.__name__}")
        entry = table.get(v[0])
        if entry is None:
            _fail(f"{v[0]!r} is not a {base.__name__}")
        cls, fields, keywords = entry
        if len(v) != len(fields) + 1:
            _fail(f"{cls.__name__}: wrong number of fields")
        values = [d(x) for d, x in zip(fields, v[1:])]
        if not keywords:
            return cls(*values)
        split = len(values) - len(keywords)
        return cls(*values[:split], **dict(zip(keywords, values[split:])))

    _DECODERS[base] = decode
    for cls in classes:
        hints = _HINTS[cls]
        table[cls.__name__] = (cls, [_decoder(hints[n]) for n in _FIELDS[cls]], _KEYWORDS[cls])
    return decode


def decode_result(data: Any) -> Any:
    """A :class:`CheckResult` from its encoded form; :class:`CodecError` if it is not one."""
    from drivelint.checks.runner import CheckResult

    try:
        return _decoder(CheckResult)(data)
    except CodecError:
        raise
    except (ValueError, TypeError, KeyError, AttributeError, RecursionError) as exc:
        # A constructor's own check (a Value's unit, a Severity) refused what was stored.
        raise CodecError(f"{type(exc).__name__}: {exc}") from None


def prepare() -> None:
    """Build the decoders now (before the entries are read, and before workers fork)."""
    from drivelint.checks.runner import CheckResult

    _decoder(CheckResult)


# -- records keyed by field name ------------------------------------------------------------


def fields_json(value: Any) -> dict[str, Any]:
    """A flat dataclass (a report's header) as an object keyed by its field names, each
    value in the strict form; :func:`from_fields` reads it back."""
    cls = type(value)
    _register(cls)
    return {name: encode(getattr(value, name), strict=True) for name in _FIELDS[cls]}


def from_fields(cls: type, data: Any) -> Any:
    """``cls`` from :func:`fields_json`'s object: exactly its fields, each checked by type."""
    _register(cls)
    names = _FIELDS[cls]
    if type(data) is not dict:
        _fail(f"expected an object for {cls.__name__}")
    if set(data) != set(names):
        unknown = sorted(set(data) - set(names))
        lacking = sorted(set(names) - set(data))
        _fail(
            f"{cls.__name__}: "
            + "; ".join(
                part
                for part in (
                    f"unknown field(s) {', '.join(unknown)}" if unknown else "",
                    f"missing field(s) {', '.join(lacking)}" if lacking else "",
                )
                if part
            )
        )
    hints = _HINTS[cls]
    try:
        values = {name: _decoder(hints[name])(data[name]) for name in names}
        return cls(**values)
    except CodecError as exc:
        raise CodecError(f"{cls.__name__}: {exc}") from None
    except (ValueError, TypeError) as exc:
        raise CodecError(f"{cls.__name__}: {exc}") from None
