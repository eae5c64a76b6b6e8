"""The result cache: one JSON file per checked netlist, validated on load.

An entry is plain data, never code: loading one builds only the result dataclasses listed
here, field by field, each value checked against the field's type. Anything unexpected —
a truncated or foreign file, a wrong type, an entry whose stored key is not the key asked
for, an input that changed — is a miss, never an error.

Entry format (``CACHE_FORMAT``)::

    {"format": 2, "key": "<sha256 of everything the result depends on>",
     "inputs": [["file", PATH, SHA256], ["lookup", CANDIDATE, RESOLVED or ""], ...],
     "result": [<CheckResult as [tag, field, field, ...]>]}

``inputs`` are what reading found besides the netlist itself: each file read (by content)
and each include lookup (by where it led, or that nothing was there), so a file created
where one was missing, a retargeted symbolic link or a shadowing search-path file all
miss.
"""

from __future__ import annotations

import dataclasses
import enum
import hashlib
import json
import os
import stat
import types
import typing
from collections.abc import Callable, Mapping
from pathlib import Path
from typing import Any

CACHE_FORMAT = 2
# An entry larger than this is not read (a result is a few kB; a planted file could be huge).
MAX_ENTRY_BYTES = 16 * 1024 * 1024


class CacheFormatError(ValueError):
    """An entry that does not hold what the format says."""


def default_cache_dir() -> Path:
    """drivelint's folder in the user cache directory of this platform."""
    import platformdirs

    return Path(platformdirs.user_cache_dir("drivelint", appauthor=False))


def private_folder(path: Path) -> bool:
    """Make ``path`` (mode 0700) if needed; True if it is a folder only this user can write.

    A cache folder someone else can write could serve them a planted answer; it is then
    not used at all.
    """
    try:
        path.mkdir(mode=0o700, parents=True, exist_ok=True)
        info = os.lstat(path)
    except OSError:
        return False
    if not stat.S_ISDIR(info.st_mode):
        return False
    if not hasattr(os, "getuid"):
        return True  # Windows: access is by ACL, which st_mode does not show
    if info.st_uid != os.getuid():
        return False
    return not info.st_mode & (stat.S_IWGRP | stat.S_IWOTH)


def digest(*parts: bytes) -> str:
    h = hashlib.sha256()
    for part in parts:
        h.update(len(part).to_bytes(8, "big"))
        h.update(part)
    return h.hexdigest()


# -- what an entry depends on ---------------------------------------------------------------


def file_digest(path: Path, max_bytes: int = 1 << 30) -> str:
    """The content digest of a regular file; "missing" when there is none to read."""
    from drivelint.netlist.reader import read_bounded

    data = read_bounded(path, max_bytes)
    return hashlib.sha256(data).hexdigest() if isinstance(data, bytes) else "missing"


def lookup_outcome(candidate: str) -> str:
    """Where an include lookup of ``candidate`` leads now ("" when nothing is there)."""
    path = Path(candidate)
    try:
        return str(path.resolve()) if path.exists() else ""
    except (OSError, ValueError, RuntimeError):  # RuntimeError: a symbolic-link loop
        return ""


def inputs_unchanged(inputs: object) -> bool:
    if not isinstance(inputs, list):
        return False
    for item in inputs:
        if not (isinstance(item, list) and len(item) == 3 and all(type(x) is str for x in item)):
            return False
        kind, path, value = item
        if kind == "file":
            if file_digest(Path(path)) != value:
                return False
        elif kind == "lookup":
            if lookup_outcome(path) != value:
                return False
        else:
            return False
    return True


# -- encoding -------------------------------------------------------------------------------


def encode(value: Any) -> Any:
    """Result objects as JSON data: a dataclass is ``[tag, field, …]`` in field order."""
    if value is None or type(value) in (str, int, float, bool):
        return value
    if isinstance(value, enum.Enum):
        return value.value
    if dataclasses.is_dataclass(value) and not isinstance(value, type):
        names = _FIELDS.get(type(value))
        if names is None:
            raise CacheFormatError(f"{type(value).__name__} is not a cached type")
        return [type(value).__name__, *(encode(getattr(value, n)) for n in names)]
    if isinstance(value, tuple | list):
        return [encode(v) for v in value]
    if isinstance(value, frozenset | set):
        return sorted(encode(v) for v in value)
    if isinstance(value, Mapping):
        out = {}
        for key, item in value.items():
            if type(key) is not str:
                raise CacheFormatError("mapping with a key that is not a string")
            out[key] = encode(item)
        return out
    raise CacheFormatError(f"cannot cache a {type(value).__name__}")


# -- decoding -------------------------------------------------------------------------------

Decoder = Callable[[Any], Any]
_FIELDS: dict[type, tuple[str, ...]] = {}
_KEYWORDS: dict[type, tuple[str, ...]] = {}
_BY_TAG: dict[str, type] = {}
_DECODERS: dict[object, Decoder] = {}
_HINTS: dict[type, dict[str, Any]] = {}


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
    namespace = _namespace()
    module = __import__(cls.__module__, fromlist=["_"])
    _HINTS[cls] = typing.get_type_hints(cls, vars(module), namespace)


def _fail(what: str) -> typing.NoReturn:
    raise CacheFormatError(what)


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
                except CacheFormatError:
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
            if type(v) is not dict:
                _fail("expected an object")
            return {k: value(x) for k, x in v.items()}

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
    """A :class:`CheckResult` from its encoded form; :class:`CacheFormatError` if it is not one."""
    from drivelint.checks.runner import CheckResult

    try:
        return _decoder(CheckResult)(data)
    except CacheFormatError:
        raise
    except (ValueError, TypeError, KeyError, AttributeError, RecursionError) as exc:
        # A constructor's own check (a Value's unit, a Severity) refused what was stored.
        raise CacheFormatError(f"{type(exc).__name__}: {exc}") from None


def prepare() -> None:
    """Build the decoders now (before the entries are read, and before workers fork)."""
    from drivelint.checks.runner import CheckResult

    _decoder(CheckResult)


# -- entries --------------------------------------------------------------------------------


def entry_path(folder: Path, key: str) -> Path:
    return folder / key[:2] / f"{key}.json"


def read_entry(folder: Path, key: str) -> Any | None:
    """The result stored under ``key``, if the entry is whole, is for ``key``, and its inputs
    are unchanged; else None."""
    from drivelint.netlist.reader import read_bounded

    data = read_bounded(entry_path(folder, key), MAX_ENTRY_BYTES)
    if not isinstance(data, bytes):
        return None
    try:
        entry = json.loads(data)
    except (ValueError, RecursionError):
        return None
    if (
        type(entry) is not dict
        or entry.get("format") != CACHE_FORMAT
        or entry.get("key") != key
        or not inputs_unchanged(entry.get("inputs"))
    ):
        return None
    try:
        return decode_result(entry.get("result"))
    except (CacheFormatError, RecursionError):
        return None


def write_entry(folder: Path, key: str, inputs: list[tuple[str, str, str]], result: Any) -> None:
    """Keep ``result`` under ``key``, atomically; a cache that cannot be written costs speed."""
    import tempfile

    entry = {
        "format": CACHE_FORMAT,
        "key": key,
        "inputs": [list(item) for item in inputs],
        "result": encode(result),
    }
    # ASCII: a file name that is not UTF-8 (surrogate escapes) stays representable.
    text = json.dumps(entry, separators=(",", ":"))
    target = entry_path(folder, key)
    try:
        target.parent.mkdir(mode=0o700, exist_ok=True)
        fd, temporary = tempfile.mkstemp(dir=target.parent, prefix=".tmp-")
        try:
            with os.fdopen(fd, "w", encoding="utf-8") as handle:
                handle.write(text)
            os.replace(temporary, target)
        except BaseException:
            Path(temporary).unlink(missing_ok=True)
            raise
    except OSError:
        pass
