"""A testbench folder's index, read for the HTML report's links, defensively.

``drivelint testbench --output DIR`` leaves ``DIR/testbench.json``: a list of records
``{"rule", "device", "path", "deck", "fixed_deck", "claims": {key: number}, "measured":
…, "waveform": "<path relative to DIR or null>"}``, and for some records a waveform file
``{"time": [s…], "series": {name: [values…]}, "units": {name: unit}, "claim": key}``.

Everything here is untrusted input to a page that may be mailed around: each file is read
bounded (size, records, points, series) from a regular file only; a record or waveform
that does not fit the format is dropped with a note the page shows, never an exception.
What reaches the page is numbers and relative links to files inside ``DIR``: names are
kept only when they are short words, units only from a fixed list, and the text a record
carries (fix descriptions, reasons) is not shown at all.
"""

from __future__ import annotations

import json
import math
import os
import re
from collections.abc import Mapping
from dataclasses import dataclass, field
from pathlib import Path
from urllib.parse import quote

INDEX_NAME = "testbench.json"
MAX_INDEX_BYTES = 8 << 20
MAX_RECORDS = 20_000
MAX_WAVEFORM_BYTES = 16 << 20
MAX_POINTS = 200_000
MAX_SERIES = 8
MAX_NAME_CHARS = 40
# What a simulated series may be measured in (SI units as the reports write them).
UNITS = frozenset({"V", "A", "s", "C", "F", "W", "Ohm", "Hz", "K", "1", ""})
_WORD = re.compile(r"[A-Za-z0-9_.:()\-]{1,40}")
_RULE = re.compile(r"[a-z0-9][a-z0-9\-]{0,63}")
STATUSES = frozenset({"confirmed", "not confirmed", "not measured"})


@dataclass(frozen=True, slots=True)
class Series:
    name: str
    unit: str
    values: tuple[float, ...]


@dataclass(frozen=True, slots=True)
class SimWaveform:
    """A simulated waveform: a shared time axis and up to MAX_SERIES series on it."""

    time: tuple[float, ...]
    series: tuple[Series, ...]
    claim: str | None  # the finding value it shows (checked against the finding's keys)


@dataclass(frozen=True, slots=True)
class Measured:
    value: float
    status: str | None = None  # one of STATUSES, else None


@dataclass(frozen=True, slots=True)
class BenchRecord:
    """What the page may show of one testbench record."""

    rule: str
    device: str
    path: str
    deck: str | None  # href relative to the report, or None
    fixed_deck: str | None
    claims: Mapping[str, float] = field(default_factory=dict)
    measured: Mapping[str, Measured] = field(default_factory=dict)
    waveform: SimWaveform | None = None
    notes: tuple[str, ...] = ()  # why a link or a waveform is not shown


@dataclass(frozen=True, slots=True)
class Testbench:
    folder: str  # as given, for the page
    records: tuple[BenchRecord, ...] = ()
    notes: tuple[str, ...] = ()

    def record_for(self, rule: str, device: str, netlist: str) -> BenchRecord | None:
        """The record of a finding (its rule, its device, the netlist it is in)."""
        wanted = _same_file_key(netlist)
        for record in self.records:
            if (
                record.rule == rule
                and record.device == device
                and _same_file_key(record.path) == wanted
            ):
                return record
        return None


def _same_file_key(path: str) -> str:
    try:
        return str(Path(path).resolve())
    except (OSError, RuntimeError, ValueError):
        return os.path.normpath(path)


class _Bad(ValueError):
    """One thing in a testbench file that does not fit its format."""


def _read(path: Path, limit: int) -> bytes:
    """A regular file's bytes, at most ``limit``; a FIFO or device is refused, not read."""
    import stat

    flags = os.O_RDONLY | getattr(os, "O_NONBLOCK", 0) | getattr(os, "O_NOCTTY", 0)
    try:
        fd = os.open(path, flags)
    except OSError as exc:
        raise _Bad(f"cannot open: {exc.strerror or type(exc).__name__}") from None
    try:
        info = os.fstat(fd)
        if not stat.S_ISREG(info.st_mode):
            raise _Bad("not a regular file")
        if info.st_size > limit:
            raise _Bad(f"{info.st_size} bytes, over the {limit} bytes read")
        data = os.read(fd, limit + 1)
        if len(data) > limit:
            raise _Bad(f"over the {limit} bytes read")
        return data
    except OSError as exc:
        raise _Bad(f"cannot read: {exc.strerror or type(exc).__name__}") from None
    finally:
        os.close(fd)


def _refuse_constant(text: str) -> float:
    raise _Bad(f"'{text}' is not a number JSON allows")


def _json(data: bytes) -> object:
    try:
        return json.loads(data.decode("utf-8"), parse_constant=_refuse_constant)
    except UnicodeDecodeError:
        raise _Bad("not UTF-8 text") from None
    except RecursionError:
        raise _Bad("nested too deeply") from None
    except json.JSONDecodeError as exc:
        raise _Bad(f"not valid JSON (line {exc.lineno}, column {exc.colno})") from None


def _number(value: object) -> float:
    if isinstance(value, bool) or not isinstance(value, (int, float)):
        raise _Bad("expected a number")
    number = float(value)
    if not math.isfinite(number):
        raise _Bad("a number is not finite")
    return number


def _string(value: object, what: str, limit: int = 4096) -> str:
    if not isinstance(value, str) or not value or len(value) > limit or "\x00" in value:
        raise _Bad(f"{what}: expected a short string")
    return value


def inside(folder: Path, relative: str) -> Path | None:
    """``relative`` as a file inside ``folder`` (also when written with ``folder`` in front,
    as the testbench command prints its paths), or None when it is absolute, leaves the
    folder (``..``, a link pointing out) or is not a regular file."""
    given = Path(relative)
    if given.is_absolute() or relative.startswith(("~", "\\")) or ":" in given.parts[0]:
        return None
    top = folder.resolve()
    for candidate in (folder / given, given):
        try:
            resolved = candidate.resolve()
        except (OSError, RuntimeError):
            continue
        if resolved.is_relative_to(top) and resolved.is_file():
            return resolved
    return None


def _href(target: Path, report_folder: Path) -> str:
    """A relative link from the report's folder to ``target``, percent-encoded."""
    relative = os.path.relpath(target, report_folder.resolve())
    return quote(Path(relative).as_posix(), safe="/", errors="surrogateescape")


def load_testbench(folder: Path, report_folder: Path, shown: str | None = None) -> Testbench:
    """The records of ``folder``'s index; whatever cannot be used becomes a note."""
    shown = shown or str(folder)
    index = folder / INDEX_NAME
    try:
        payload = _json(_read(index, MAX_INDEX_BYTES))
        if not isinstance(payload, list):
            raise _Bad("expected a list of records")
    except _Bad as exc:
        return Testbench(shown, (), (f"{shown}/{INDEX_NAME} not used: {exc}",))
    notes: list[str] = []
    if len(payload) > MAX_RECORDS:
        notes.append(f"{shown}/{INDEX_NAME}: only the first {MAX_RECORDS} records are read")
    records = []
    for number, item in enumerate(payload[:MAX_RECORDS], 1):
        try:
            records.append(_record(item, folder, report_folder))
        except _Bad as exc:
            notes.append(f"{shown}/{INDEX_NAME}: record {number} not used: {exc}")
    return Testbench(shown, tuple(records), tuple(notes[:50]))


def _record(item: object, folder: Path, report_folder: Path) -> BenchRecord:
    if not isinstance(item, dict):
        raise _Bad("expected an object")
    rule = _string(item.get("rule"), "rule", 64)
    if not _RULE.fullmatch(rule):
        raise _Bad("rule: not a rule id")
    device = _string(item.get("device"), "device", 256).lower()
    path = _string(item.get("path"), "path")
    notes: list[str] = []
    links: dict[str, str | None] = {}
    for key in ("deck", "fixed_deck"):
        raw = item.get(key)
        links[key] = None
        if raw is None:
            continue
        where = inside(folder, _string(raw, key))
        if where is None:
            notes.append(f"{key.replace('_', ' ')} not linked: not a file inside the folder")
        else:
            links[key] = _href(where, report_folder)
    claims: dict[str, float] = {}
    given_claims = item.get("claims", {})
    if not isinstance(given_claims, dict):
        raise _Bad("claims: expected an object")
    for key, value in list(given_claims.items())[:64]:
        if isinstance(key, str) and _WORD.fullmatch(key):
            try:
                claims[key] = _number(value)
            except _Bad:
                continue
    measured = _measured(item.get("measured"))
    waveform = None
    raw_wave = item.get("waveform")
    if raw_wave is not None:
        try:
            where = inside(folder, _string(raw_wave, "waveform"))
            if where is None:
                raise _Bad("not a file inside the folder")
            waveform = _waveform(_json(_read(where, MAX_WAVEFORM_BYTES)))
        except _Bad as exc:
            notes.append(f"simulated waveform not shown: {exc}")
    return BenchRecord(
        rule,
        device,
        path,
        links["deck"],
        links["fixed_deck"],
        claims,
        measured,
        waveform,
        tuple(notes),
    )


def _measured(given: object) -> dict[str, Measured]:
    """``{claim: number}`` or the testbench's ``{claim: {"measured": number, "status": …}}``."""
    out: dict[str, Measured] = {}
    if not isinstance(given, dict):
        return out
    for key, value in list(given.items())[:64]:
        if not isinstance(key, str) or not _WORD.fullmatch(key):
            continue
        try:
            if isinstance(value, dict):
                status = value.get("status")
                out[key] = Measured(
                    _number(value.get("measured")),
                    status if isinstance(status, str) and status in STATUSES else None,
                )
            else:
                out[key] = Measured(_number(value))
        except _Bad:
            continue
    return out


def _waveform(data: object) -> SimWaveform:
    if not isinstance(data, dict):
        raise _Bad("expected an object")
    time = data.get("time")
    if not isinstance(time, list) or not 2 <= len(time) <= MAX_POINTS:
        raise _Bad(f"time: expected a list of 2 to {MAX_POINTS} numbers")
    times = tuple(_number(t) for t in time)
    if any(b < a for a, b in zip(times, times[1:], strict=False)) or times[-1] <= times[0]:
        raise _Bad("time: must rise")
    series = data.get("series")
    if not isinstance(series, dict) or not series:
        raise _Bad("series: expected an object of named lists")
    units = data.get("units", {})
    if not isinstance(units, dict):
        raise _Bad("units: expected an object")
    out = []
    for index, (name, values) in enumerate(list(series.items())[:MAX_SERIES], 1):
        if not isinstance(values, list) or len(values) != len(times):
            raise _Bad("series: each must have one value per time")
        shown = name if isinstance(name, str) and _WORD.fullmatch(name) else f"series {index}"
        unit = units.get(name, "")
        out.append(
            Series(
                shown,
                unit if isinstance(unit, str) and unit in UNITS else "",
                tuple(_number(v) for v in values),
            )
        )
    claim = data.get("claim")
    return SimWaveform(
        times, tuple(out), claim if isinstance(claim, str) and _WORD.fullmatch(claim) else None
    )
