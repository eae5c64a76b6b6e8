"""The parts library: ratings of parts by the model or subcircuit name a netlist uses.

A library is TOML::

    [part.NFET_A]
    kind = "nmos"
    vgs_max = "20 V"
    qg = "38 nC"

Keys are matched case-insensitively. Kinds and the driver's pin roles are checked when the
file is loaded; quantities are parsed when first asked for, so a run that needs none of
them never pays for unit parsing.
"""

from __future__ import annotations

import re
import tomllib
from collections.abc import Iterable, Mapping
from dataclasses import dataclass, field
from pathlib import Path

PART_KINDS = frozenset(
    {"nmos", "pmos", "npn", "pnp", "diode", "zener", "driver", "capacitor", "resistor"}
)
PIN_ROLES = frozenset(
    {"boot", "switch", "high_out", "low_out", "supply", "ground", "high_in", "low_in", "enable"}
)


class PartsError(ValueError):
    """A parts file that cannot be used; the message names the file and the key."""


@dataclass(frozen=True, slots=True)
class Part:
    name: str
    kind: str
    values: Mapping[str, str | float]
    pins: Mapping[str, str]  # port name (lower case) -> role
    origin: str  # "path:line" of the part's table

    def raw(self, key: str) -> str | float | None:
        return self.values.get(key)


@dataclass(frozen=True, slots=True)
class PartsLibrary:
    parts: Mapping[str, Part] = field(default_factory=dict)
    files: tuple[str, ...] = ()

    def get(self, name: str | None) -> Part | None:
        return self.parts.get(name.lower()) if name else None

    def merged(self, other: PartsLibrary) -> PartsLibrary:
        """``other`` wins where both define a part."""
        return PartsLibrary({**self.parts, **other.parts}, (*self.files, *other.files))


_TABLE = re.compile(r"^\s*\[\s*part\.\"?([^\]\"]+)\"?\s*\]", re.MULTILINE)


def load_parts(path: Path, shown: str | None = None) -> PartsLibrary:
    """Load one parts file; raises :class:`PartsError` naming the file and key."""
    shown = shown or str(path)
    try:
        text = path.read_text(encoding="utf-8")
    except OSError as exc:
        raise PartsError(f"{shown}: cannot read parts file: {exc.strerror}") from None
    try:
        data = tomllib.loads(text)
    except tomllib.TOMLDecodeError as exc:
        raise PartsError(f"{shown}: not valid TOML: {exc}") from None
    lines = {
        m.group(1).strip().lower(): text.count("\n", 0, m.start()) + 1
        for m in _TABLE.finditer(text)
    }
    unknown = set(data) - {"part"}
    if unknown:
        raise PartsError(
            f"{shown}: unknown top-level key '{sorted(unknown)[0]}' (expected [part.NAME] tables)"
        )
    parts: dict[str, Part] = {}
    for name, table in data.get("part", {}).items():
        key = name.lower()
        where = f"{shown}:{lines.get(key, 1)}"
        if not isinstance(table, dict):
            raise PartsError(f"{where}: part.{name} must be a table")
        kind = str(table.get("kind", "")).lower()
        if kind not in PART_KINDS:
            raise PartsError(
                f"{where}: part.{name}.kind = {table.get('kind')!r}; expected one of "
                + ", ".join(sorted(PART_KINDS))
            )
        pins: dict[str, str] = {}
        for port, role in dict(table.get("pins", {})).items():
            if str(role).lower() not in PIN_ROLES:
                raise PartsError(
                    f"{where}: part.{name}.pins.{port} = {role!r}; expected one of "
                    + ", ".join(sorted(PIN_ROLES))
                )
            pins[str(port).lower()] = str(role).lower()
        values = {
            str(k).lower(): v
            for k, v in table.items()
            if k not in ("kind", "pins") and isinstance(v, (str, int, float))
        }
        parts[key] = Part(key, kind, values, pins, where)
    return PartsLibrary(parts, (shown,))


def load_libraries(paths: Iterable[Path]) -> PartsLibrary:
    library = PartsLibrary()
    for path in paths:
        library = library.merged(load_parts(path))
    return library
