"""The parts library: ratings of parts by the model or subcircuit name a netlist uses.

A library is TOML::

    [part.NFET_A]
    kind = "nmos"
    vgs_max = "20 V"
    qg = "38 nC"

Keys are matched case-insensitively. Everything is checked when the file is loaded —
kinds, pin roles, every key against :data:`PART_KEY_TABLE` (unit, kinds, range) — so a
typo or an impossible value is one error naming ``parts.toml:line``, never a silently
ignored key or a crash inside a rule.
"""

from __future__ import annotations

import math
from collections.abc import Iterable, Mapping
from dataclasses import dataclass, field
from pathlib import Path

# "igbt": an IGBT (collector, gate, emitter) judged like an N-channel switch, V_GE for V_GS
# and V_CE for V_DS; "sic-nmos": an N-channel silicon-carbide MOSFET, whose gate wants a
# higher on-level and tolerates less below the source than a silicon part.
SWITCH_KINDS = frozenset({"nmos", "pmos", "igbt", "sic-nmos"})
# The technology a switch kind names (see ratings.technology); plain MOSFETs name none.
SWITCH_TECHNOLOGY = {"igbt": "igbt", "sic-nmos": "sic"}
BJT_KINDS = frozenset({"npn", "pnp"})
DIODE_KINDS = frozenset({"diode", "zener"})
SEMICONDUCTOR_KINDS = SWITCH_KINDS | BJT_KINDS | DIODE_KINDS | {"driver"}
PART_KINDS = SEMICONDUCTOR_KINDS | {"capacitor", "resistor"}
PIN_ROLES = frozenset(
    {
        "boot",
        "switch",
        "high_out",
        "low_out",
        "supply",
        "ground",
        "high_in",
        "low_in",
        # inputs that command their output on while low (an inverting input)
        "high_in_active_low",
        "low_in_active_low",
        "enable",
        # the negative supply its outputs sink to (VEE): a turn-off level below the switch node
        "negative",
    }
)


@dataclass(frozen=True, slots=True)
class KeySpec:
    """A parts-library key: its unit, the part kinds it applies to, its allowed range."""

    unit: str
    kinds: frozenset[str]
    low: float = 0.0  # values must be above this (or equal, with ``closed``) ...
    high: float = math.inf  # ... and at most this
    closed: bool = False
    signed: bool = False  # a negative value is read as its magnitude (vgs_min = "-8 V")
    help: str = ""


def _keys() -> dict[str, KeySpec]:
    switch, bjt, diode, driver = SWITCH_KINDS, BJT_KINDS, DIODE_KINDS, frozenset({"driver"})
    semi = SEMICONDUCTOR_KINDS
    passive = frozenset({"capacitor", "resistor"})
    return {
        # switches
        "vds_max": KeySpec("V", switch, help="drain-source voltage rating"),
        "vgs_max": KeySpec("V", switch, help="gate-source voltage rating (positive)"),
        "vgs_min": KeySpec("V", switch, signed=True, help="gate-source rating, negative side"),
        "vgs_on": KeySpec("V", switch, help="V_GS the switch needs to be fully on"),
        "vgs_plateau": KeySpec("V", switch, help="Miller plateau voltage"),
        "vgs_qg": KeySpec("V", switch, help="V_GS at which qg is specified"),
        "vth": KeySpec("V", switch, signed=True, help="gate threshold voltage"),
        "qg": KeySpec("C", switch, help="total gate charge at vgs_qg"),
        "qgd": KeySpec("C", switch, help="gate-drain (Miller) charge"),
        "qgs": KeySpec("C", switch, help="gate-source charge"),
        "crss": KeySpec("F", switch, help="reverse transfer (gate-drain) capacitance C_rss"),
        "gfs": KeySpec("S", switch, help="forward transconductance g_fs"),
        "rds_on": KeySpec("Ohm", switch, help="on-resistance"),
        "rg_internal": KeySpec("Ohm", switch, closed=True, help="internal gate resistance"),
        "t_off": KeySpec(
            "s", switch, closed=True, help="turn-off time in this drive, t_d(off) + t_f"
        ),
        # bipolar transistors
        "vceo_max": KeySpec("V", bjt, help="collector-emitter voltage rating, base open"),
        # diodes and Zeners (the body diode of a switch too)
        "vrrm": KeySpec("V", diode, help="repetitive reverse voltage rating"),
        "vf": KeySpec("V", diode | switch | driver, help="forward voltage"),
        "vz": KeySpec("V", diode, help="Zener voltage"),
        # 0 for a Schottky, which stores no minority carriers
        "trr": KeySpec("s", diode | switch, closed=True, help="reverse recovery time"),
        "qrr": KeySpec("C", diode | switch, closed=True, help="reverse recovery charge"),
        "ir_leak": KeySpec("A", diode | driver, closed=True, help="reverse leakage current"),
        # driver ICs
        "i_source": KeySpec("A", driver, help="output source current"),
        "i_sink": KeySpec("A", driver, help="output sink current"),
        "r_source": KeySpec("Ohm", driver, help="output pull-up resistance"),
        "r_sink": KeySpec("Ohm", driver, help="output pull-down resistance"),
        "r_hold_unpowered": KeySpec(
            "Ohm", driver, help="passive pull-down of the high output to its return, unpowered"
        ),
        "uvlo": KeySpec("V", driver, help="supply under-voltage lockout threshold"),
        "uvlo_boot": KeySpec("V", driver, help="boot supply under-voltage lockout threshold"),
        "iq_boot": KeySpec("A", driver, closed=True, help="boot supply quiescent current"),
        "vs_min": KeySpec(
            "V", driver, signed=True, help="switch pin below the common, transient rating"
        ),
        "vbs_max": KeySpec("V", driver, help="boot supply rating, boot pin to switch pin"),
        "q_levelshift": KeySpec("C", driver, closed=True, help="level-shifter charge per cycle"),
        "t_prop": KeySpec("s", driver, closed=True, help="propagation delay"),
        "t_prop_mismatch": KeySpec("s", driver, closed=True, help="delay mismatch"),
        # a driver that never drives both outputs on and holds them apart at least this
        # long (0 s: an interlock that adds no dead time of its own)
        "dead_time_min": KeySpec(
            "s", driver, closed=True, help="built-in dead time / shoot-through interlock"
        ),
        # thermal and power, any semiconductor
        "rth_ja": KeySpec("K/W", semi, help="junction-to-ambient thermal resistance"),
        "rth_jc": KeySpec("K/W", semi, help="junction-to-case thermal resistance"),
        "tj_max": KeySpec("K", semi, high=1000.0, help="maximum junction temperature"),
        "p_max": KeySpec("W", semi | passive, help="power rating"),
        # any part
        "v_max": KeySpec("V", PART_KINDS, help="voltage rating"),
        "c": KeySpec("F", frozenset({"capacitor"}), help="capacitance"),
        "tolerance": KeySpec("1", PART_KINDS, 0.0, 1.0, True, help="relative tolerance"),
    }


# Every key a parts file may hold besides kind and pins: unit, kinds, range. One table,
# documented in the README's parts section; directives' `part` keys are a subset.
PART_KEY_TABLE: Mapping[str, KeySpec] = _keys()


class PartsError(ValueError):
    """A parts file that cannot be used; the message names the file, line and key."""


@dataclass(frozen=True, slots=True)
class Part:
    """A parts-library entry: its kind, ratings and values (SI units) and pin roles."""

    name: str
    kind: str
    values: Mapping[str, str | float]  # key -> value in SI units (checked at load)
    pins: Mapping[str, str]  # port name (lower case) -> role
    origin: str  # "path:line" of the part's table

    def raw(self, key: str) -> str | float | None:
        return self.values.get(key)


@dataclass(frozen=True, slots=True)
class PartsLibrary:
    """The parts of every parts file in force, by name, with the files they came from."""

    parts: Mapping[str, Part] = field(default_factory=dict)
    files: tuple[str, ...] = ()

    def get(self, name: str | None) -> Part | None:
        return self.parts.get(name.lower()) if name else None

    def merged(self, other: PartsLibrary) -> PartsLibrary:
        """``other`` wins where both define a part."""
        return PartsLibrary({**self.parts, **other.parts}, (*self.files, *other.files))


def _suggest(word: str, choices: Iterable[str]) -> str:
    import difflib

    close = difflib.get_close_matches(word, sorted(choices), n=1, cutoff=0.6)
    return f" (did you mean '{close[0]}'?)" if close else ""


_LOADED: dict[tuple[object, ...], PartsLibrary] = {}


def load_parts(path: Path, shown: str | None = None) -> PartsLibrary:
    """Load one parts file; raises :class:`PartsError` naming the file, line and key.

    Every key is checked here: an unknown key (with the nearest known one suggested), a
    key that does not apply to the part's kind, a value that is not a finite quantity in
    the key's unit or is out of its range, a bad kind or pin role.
    """
    import os

    shown = shown or str(path)
    try:
        info = os.stat(path)
        signature: tuple[object, ...] = (str(path), shown, info.st_mtime_ns, info.st_size)
    except OSError:
        signature = ()
    if signature and signature in _LOADED:
        return _LOADED[signature]
    library = _load(path, shown)
    if signature:
        _LOADED[signature] = library
    return library


def _load(path: Path, shown: str) -> PartsLibrary:
    from drivelint.ratings.tomlfile import read_toml
    from drivelint.ratings.units import UnitError, parse_quantity

    try:
        data, lines, _ = read_toml(path, shown)
    except ValueError as exc:
        message = str(exc).replace(f"{shown}: cannot read:", f"{shown}: cannot read parts file:")
        raise PartsError(message) from None

    def fail(keys: tuple[str, ...], message: str) -> PartsError:
        return PartsError(f"{shown}:{lines.line(keys)}: {'.'.join(keys)}: {message}")

    unknown = set(data) - {"part"}
    if unknown:
        first = sorted(unknown)[0]
        raise PartsError(
            f"{shown}:{lines.line((first,))}: unknown top-level key '{first}' "
            "(expected [part.NAME] tables)"
        )
    tables = data.get("part", {})
    if not isinstance(tables, dict):
        raise fail(("part",), "expected [part.NAME] tables")
    parts: dict[str, Part] = {}
    for name, table in tables.items():
        key = name.lower()
        where = f"{shown}:{lines.line(('part', name))}"
        if not isinstance(table, dict):
            raise fail(("part", name), "must be a table")
        if key in parts:
            raise fail(("part", name), f"part '{name}' is defined twice (names ignore case)")
        kind_raw = table.get("kind")
        kind = kind_raw.lower() if isinstance(kind_raw, str) else ""
        if kind not in PART_KINDS:
            raise fail(
                ("part", name, "kind"),
                f"{kind_raw!r}; expected one of " + ", ".join(sorted(PART_KINDS)),
            )
        pins: dict[str, str] = {}
        given_pins = table.get("pins", {})
        if not isinstance(given_pins, dict):
            raise fail(("part", name, "pins"), "expected a table of PORT = ROLE")
        if given_pins and kind != "driver":
            raise fail(("part", name, "pins"), f"pin roles are for drivers, not {kind} parts")
        for port, role in given_pins.items():
            if not isinstance(role, str) or role.lower() not in PIN_ROLES:
                raise fail(
                    ("part", name, "pins", port),
                    f"{role!r}; expected one of " + ", ".join(sorted(PIN_ROLES)),
                )
            pins[str(port).lower()] = role.lower()
        values: dict[str, str | float] = {}
        for item, raw in table.items():
            if item in ("kind", "pins"):
                continue
            lowered = item.lower()
            spec = PART_KEY_TABLE.get(lowered)
            keys = ("part", name, item)
            if spec is None:
                raise fail(keys, "unknown key" + _suggest(lowered, PART_KEY_TABLE))
            if kind not in spec.kinds:
                raise fail(
                    keys,
                    f"does not apply to a {kind} part (it is for: {', '.join(sorted(spec.kinds))})",
                )
            if isinstance(raw, bool) or not isinstance(raw, (str, int, float)):
                raise fail(keys, f"expected a quantity string such as '1 {spec.unit}'")
            try:
                value = parse_quantity(raw, spec.unit, bare_celsius=True)
            except UnitError as exc:
                raise fail(keys, str(exc)) from None
            problem = out_of_range(abs(value) if spec.signed else value, spec)
            if problem:
                raise fail(keys, problem)
            values[lowered] = value
        parts[key] = Part(key, kind, values, pins, where)
    return PartsLibrary(parts, (shown,))


def out_of_range(value: float, spec: KeySpec) -> str | None:
    if value < spec.low or (value == spec.low and not spec.closed) or value > spec.high:
        above = "at least" if spec.closed else "above"
        top = "" if math.isinf(spec.high) else f" and at most {spec.high:g}"
        return f"{value:g} {spec.unit} is out of range: must be {above} {spec.low:g}{top}"
    return None


def load_libraries(paths: Iterable[Path]) -> PartsLibrary:
    library = PartsLibrary()
    for path in paths:
        library = library.merged(load_parts(path))
    return library
