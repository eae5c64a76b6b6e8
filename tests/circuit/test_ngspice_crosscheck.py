"""The reader and elaborator, checked against ngspice as an independent simulator.

Each deck in ``tests/decks`` is run once by ngspice 39 in batch mode (a copy of the deck
with a ``.control`` block added before ``.end``) and once through drivelint. ngspice tells
us which device instances it built and their multipliers (``show all : m``: one "device"
row per group of instances, K coupling elements included; ngspice manual, "show"), and
the DC operating point of every node (``op``, then ``write`` of an ASCII raw file; ngspice
manual, "write" and the ``filetype`` variable).

What ngspice counts, and how it is mapped (ngspice manual, "Subcircuits"; naming checked
on ngspice 39: a flattened device is ``<letter>.<instance path>.<name>``, a node
``<instance path>.<node>``):

* a device inside a subcircuit is ``r.x1.r1`` in ngspice and ``x1.r1`` in drivelint;
* a K element is a device on both sides (ngspice's "mutual" type, drivelint's "coupling");
* a wrapper subcircuit (one MOSFET plus R/L/C/D parasitics) is ONE device in drivelint and
  all of its inner devices in ngspice. The count is corrected by each wrapper's inner
  device count, taken from the subcircuit's body as read, and ngspice's names under the
  wrapper's instance path are folded into the wrapper's name before the name sets are
  compared (decks 12, 13 and 17 hold wrappers, one level down in 13);
* ``E``/``G`` with ``VALUE=`` are split by ngspice into two devices (itself plus a B
  source, ``be1`` for ``e1``); an R, C or L whose value is an expression of node
  voltages or time becomes B/E/F sources around a plain part (``br1`` for ``r1``;
  ``bc1``, ``ec1``, ``cc1`` for ``c1``; ``bl1``, ``fl1``, ``ll1`` for ``l1``), and a
  ``POLY`` source becomes one XSPICE device ``a$poly$e1`` (names as ngspice 39 lists
  them). Each drivelint device is mapped to the ngspice instances it stands for
  (``ngspice_names``) before the sets are compared; the older decks write behavioural
  sources as ``B`` elements.
"""

from __future__ import annotations

import json
import re
import shutil
import subprocess
from collections.abc import Callable, Iterable, Mapping
from dataclasses import dataclass
from pathlib import Path

import pytest
from click.testing import CliRunner

from drivelint.circuit.model import Circuit, Device
from drivelint.cli import main
from drivelint.diagnostics import Severity
from drivelint.netlist.reader import read_deck
from drivelint.netlist.statements import Element, Statement, Subckt
from drivelint.pipeline import LoadOptions, load_circuit

DECKS_DIR = Path(__file__).resolve().parent.parent / "decks"
# The dialect decks that ngspice 39 reads join the cross-check (tests/dialects: each
# one's expected reading says whether ngspice reads it, and a test there confirms it).
DIALECTS_DIR = Path(__file__).resolve().parent.parent / "dialects"
DIALECT_DECKS = sorted(
    deck
    for deck in DIALECTS_DIR.glob("*.cir")
    if json.loads(deck.with_suffix(".expect.json").read_text())["ngspice"]
)
DECKS = sorted(DECKS_DIR.glob("*.cir")) + DIALECT_DECKS
NGSPICE = shutil.which("ngspice")
NO_NGSPICE = "ngspice is not installed (Debian package 'ngspice'); cross-check skipped"
needs_ngspice = pytest.mark.skipif(NGSPICE is None, reason=NO_NGSPICE)

# Added before `.end` of each copied deck. `quit 0` because ngspice -b exits 1 after a
# control block when no .plot/.print card ran; failures are caught from its output instead.
CONTROL_BLOCK = """.control
set filetype=ascii
op
write {raw}
show all : m > {listing}
quit 0
.endc
"""
END_CARD = re.compile(r"^\s*\.end\s*$", re.IGNORECASE)
# ngspice accepts a lot with a warning only (a resistor with one node gets 1 mOhm, a
# floating node is solved by gmin stepping), so a deck counts as valid SPICE only when
# ngspice neither errs nor warns about it.
PROBLEM = re.compile(r"\b(error|warning|fatal|interrupted)\b", re.IGNORECASE)
# Relative tolerance asked of the rail voltages; 0 V rails are compared absolutely.
REL_TOL = 1e-6
ABS_TOL = 1e-12
# Kinds whose `m` ngspice reports as the instance multiplier. Its controlled sources
# show m=0 or none at all, so they are no reference for it.
MULTIPLIED_KINDS = frozenset(
    {"resistor", "capacitor", "inductor", "diode", "bjt", "mosfet", "jfet"}
)


@dataclass(frozen=True, slots=True)
class NgspiceRun:
    """What one ngspice batch run built and solved."""

    multipliers: Mapping[str, float | None]  # instance name as ngspice spells it -> m
    voltages: Mapping[str, float]  # node name -> operating-point volts
    output: str  # stdout + stderr, for messages

    @property
    def devices(self) -> frozenset[str]:
        return frozenset(self.multipliers)


def deck_id(path: Path) -> str:
    return path.stem


def with_control_block(text: str, raw: str, listing: str) -> str:
    """The deck with our control block inserted before its `.end` card (else appended).

    The ngspice manual (".end") wants `.end` as the last line, and the decks keep to it:
    ngspice 39 does go on reading element lines after `.end`, which drivelint does not.
    """
    lines = text.splitlines()
    block = CONTROL_BLOCK.format(raw=raw, listing=listing).splitlines()
    at = next((i for i, line in enumerate(lines) if END_CARD.match(line)), len(lines))
    return "\n".join([*lines[:at], *block, *lines[at:]]) + "\n"


def parse_raw(text: str) -> dict[str, float]:
    """Node voltages from an ASCII raw file of a one-point operating-point analysis."""
    head, _, values = text.partition("Values:")
    names: list[str] = []
    in_variables = False
    for line in head.splitlines():
        if line.startswith("Variables:"):
            in_variables = True
            continue
        if in_variables and line.strip():
            _, name, kind = line.split()[:3]
            names.append(name if kind == "voltage" else "")
    numbers = values.split()[1:]  # the first token is the point index
    assert len(numbers) == len(names), "raw file: variable and value counts differ"
    voltages: dict[str, float] = {}
    for name, number in zip(names, numbers, strict=True):
        match = re.fullmatch(r"v\((.+)\)", name)
        if match:
            voltages[match.group(1)] = float(number)
    return voltages


def parse_show(text: str) -> dict[str, float | None]:
    """Instance name -> `m` from ngspice's `show all : m` listing.

    Each group is a "device" row of names followed by rows of values in the same
    columns; `?????????` stands where a device has no such parameter.
    """
    multipliers: dict[str, float | None] = {}
    names: list[str] = []
    for line in text.splitlines():
        words = line.split()
        if words and words[0] == "device":
            names = words[1:]
            multipliers.update((name, None) for name in names)
        elif words and words[0] == "m" and len(words) == len(names) + 1:
            for name, value in zip(names, words[1:], strict=True):
                multipliers[name] = None if value.startswith("?") else float(value)
    return multipliers


def poly_elements(deck: Path) -> frozenset[str]:
    """Names of the POLY controlled sources of a deck (top level), as read."""
    return frozenset(
        s.name
        for s in read_deck(deck).statements
        if isinstance(s, Element) and any(getattr(f, "text", None) == "poly" for f in s.fields)
    )


def ngspice_names(device: Device, polys: frozenset[str]) -> frozenset[str]:
    """The ngspice instances (in drivelint's naming) one drivelint device stands for."""
    path, _, last = device.name.rpartition(".")
    prefix = path + "." if path else ""
    if last in polys:
        return frozenset({prefix + "a$poly$" + last})
    if device.behaviour is not None and device.kind in ("vcvs", "vccs"):
        return frozenset({device.name, prefix + "b" + last})
    if device.behaviour is not None and device.kind == "resistor":
        return frozenset({prefix + "b" + last})
    if device.behaviour is not None and device.kind == "capacitor":
        return frozenset(prefix + letter + last for letter in "bce")
    if device.behaviour is not None and device.kind == "inductor":
        return frozenset(prefix + letter + last for letter in "bfl")
    return frozenset({device.name})


def run_ngspice(deck: Path, workdir: Path) -> NgspiceRun:
    """Run a copy of the deck (the decks folder is copied, so includes resolve alike)."""
    copy = workdir / deck.name
    raw, listing = f"{deck.stem}.raw", f"{deck.stem}.show"
    # Latin-1 both ways keeps every byte as it is (a BOM, a cp1252 deck).
    text = deck.read_bytes().decode("latin-1")
    copy.write_bytes(with_control_block(text, raw, listing).encode("latin-1"))
    assert NGSPICE is not None
    result = subprocess.run(
        [NGSPICE, "-b", copy.name], cwd=workdir, capture_output=True, text=True, timeout=30
    )
    output = result.stdout + result.stderr
    assert result.returncode == 0, f"ngspice failed on {deck.name}:\n{output}"
    problems = [line for line in output.splitlines() if PROBLEM.search(line)]
    assert not problems, f"ngspice complained about {deck.name}:\n{output}"
    raw_text = (workdir / raw).read_text()
    assert "Plotname: Operating Point" in raw_text
    return NgspiceRun(parse_show((workdir / listing).read_text()), parse_raw(raw_text), output)


@pytest.fixture(scope="module")
def ngspice(tmp_path_factory: pytest.TempPathFactory) -> Callable[[Path], NgspiceRun]:
    """One ngspice run per deck, shared by the tests of this module."""
    if NGSPICE is None:
        pytest.skip(NO_NGSPICE)
    workdir = tmp_path_factory.mktemp("decks")
    shutil.copytree(DECKS_DIR, workdir, dirs_exist_ok=True)
    shutil.copytree(DIALECTS_DIR, workdir, dirs_exist_ok=True)
    runs: dict[Path, NgspiceRun] = {}

    def get(deck: Path) -> NgspiceRun:
        if deck not in runs:
            runs[deck] = run_ngspice(deck, workdir)
        return runs[deck]

    return get


def drivelint_circuit(deck: Path) -> Circuit:
    return load_circuit(deck, LoadOptions())


def drivelint_name(ngspice_name: str) -> str:
    """`r.x1.r1` -> `x1.r1`: ngspice puts the element letter before a flattened name.

    A subcircuit defined inside another is expanded in two steps, and ngspice 39 then
    writes the letter twice (`r.x1.r.xbl.rb` for `x1.xbl.rb`, deck 14): every one-letter
    segment before the last is such a letter (the decks name no instance `x` alone).
    """
    *path, last = ngspice_name.split(".")
    return ".".join([*(s for s in path if len(s) > 1), last])


def subckt_sizes(deck: Path) -> dict[str, int]:
    """Device lines in each subcircuit's own body, from the deck as read."""
    sizes: dict[str, int] = {}

    def visit(statements: Iterable[Statement]) -> None:
        for statement in statements:
            if isinstance(statement, Subckt):
                sizes[statement.name] = sum(isinstance(s, Element) for s in statement.body)
                visit(statement.body)

    visit(read_deck(deck).statements)
    return sizes


def wrappers(circuit: Circuit) -> dict[str, Device]:
    return {name: d for name, d in circuit.devices.items() if d.wrapper is not None}


def fold_wrappers(names: Iterable[str], wrapper_names: Iterable[str]) -> frozenset[str]:
    """Map each ngspice device inside a wrapper instance to the wrapper's own name."""
    prefixes = tuple(w + "." for w in wrapper_names)
    return frozenset(next((p[:-1] for p in prefixes if name.startswith(p)), name) for name in names)


def test_the_deck_set_is_there() -> None:
    # A cross-check on two decks says little; the brief asks for about a dozen.
    assert len(DECKS) >= 12
    assert any((DECKS_DIR / "inc").iterdir())


def test_ngspice_listing_and_raw_parsers_on_known_text() -> None:
    # Layouts as ngspice 39 prints them ("show" and ASCII "write"): the parsers must
    # pair names with values by column and by position.
    listing = (
        " Resistor: Simple linear resistor\n"
        "     device               r.x1.r1                    r9\n"
        "      model                     R                     R\n"
        "          m                     2                     1\n"
        " Vsource: Independent voltage source\n"
        "     device                    v1\n"
        "          m             ?????????\n"
    )
    assert parse_show(listing) == {"r.x1.r1": 2.0, "r9": 1.0, "v1": None}
    raw = (
        "Plotname: Operating Point\nNo. Variables: 3\nVariables:\n"
        "\t0\tv(n1)\tvoltage\n\t1\ti(v1)\tcurrent\n\t2\tv(x1.mid)\tvoltage\n"
        "Values:\n 0\t5.0e+00\n\t-1.0e-03\n\t2.5e+00\n"
    )
    assert parse_raw(raw) == {"n1": 5.0, "x1.mid": 2.5}
    assert drivelint_name("r.x1.x2.r1") == "x1.x2.r1"
    assert drivelint_name("r.x1.r.xbl.rb") == "x1.xbl.rb"
    assert drivelint_name("vbus") == "vbus"


@needs_ngspice
@pytest.mark.parametrize("deck", DECKS, ids=deck_id)
def test_device_instances_match_ngspice(deck: Path, ngspice: Callable[[Path], NgspiceRun]) -> None:
    run = ngspice(deck)
    circuit = drivelint_circuit(deck)
    wrapped = wrappers(circuit)
    sizes = subckt_sizes(deck)
    # Count: every drivelint device is one ngspice instance, except a wrapper, which is
    # as many as its subcircuit body holds.
    polys = poly_elements(deck)
    expected = sum(len(ngspice_names(d, polys)) for d in circuit.devices.values()) + sum(
        sizes[d.wrapper.subckt] - 1 for d in wrapped.values() if d.wrapper
    )
    assert len(run.devices) == expected
    # Names: the same instances, wrapper bodies folded into the wrapper's name.
    names = fold_wrappers((drivelint_name(n) for n in run.devices), wrapped)
    assert names == frozenset().union(*(ngspice_names(d, polys) for d in circuit.devices.values()))


@needs_ngspice
@pytest.mark.parametrize("deck", DECKS, ids=deck_id)
def test_rails_match_ngspice_operating_point(
    deck: Path, ngspice: Callable[[Path], NgspiceRun]
) -> None:
    run = ngspice(deck)
    circuit = drivelint_circuit(deck)
    assert circuit.rails, "every deck holds at least one net with a DC source"
    for net, volts in circuit.rails.items():
        assert net in run.voltages, f"rail '{net}' is not a node ngspice solved"
        assert run.voltages[net] == pytest.approx(volts, rel=REL_TOL, abs=ABS_TOL), net


# Decks whose multipliers drivelint knowingly reads differently from ngspice (none now).
MULTIPLIER_XFAIL: dict[str, str] = {}


@needs_ngspice
@pytest.mark.parametrize(
    "deck",
    [
        pytest.param(
            deck,
            marks=pytest.mark.xfail(strict=True, reason=MULTIPLIER_XFAIL[deck.stem])
            if deck.stem in MULTIPLIER_XFAIL
            else (),
        )
        for deck in DECKS
    ],
    ids=deck_id,
)
def test_multipliers_match_ngspice(deck: Path, ngspice: Callable[[Path], NgspiceRun]) -> None:
    # Paralleled parts (m=) multiply gate charge and current, so the multiplier each
    # device ends up with must be ngspice's (ngspice manual, "Subcircuit Calls" and each
    # device's m instance parameter).
    run = ngspice(deck)
    by_name = {drivelint_name(n): m for n, m in run.multipliers.items()}
    circuit = drivelint_circuit(deck)
    compared = 0
    for name, device in circuit.devices.items():
        if device.kind not in MULTIPLIED_KINDS or device.behaviour is not None:
            continue
        # A wrapper is compared with the MOSFET inside it.
        reference = by_name[device.wrapper.inner_device if device.wrapper else name]
        assert reference is not None, f"ngspice shows no m for '{name}'"
        assert device.multiplier == pytest.approx(reference), name
        compared += 1
    assert compared > 0


@pytest.mark.parametrize("deck", DECKS, ids=deck_id)
def test_netlist_command_reads_each_deck_cleanly(deck: Path) -> None:
    result = CliRunner().invoke(main, ["netlist", str(deck), "--format", "json"])
    assert result.exit_code == 0, result.output
    payload = json.loads(result.output)
    errors = [d for d in payload["diagnostics"] if d["severity"] == Severity.ERROR.label]
    assert errors == []
    assert len(payload["devices"]) == len(drivelint_circuit(deck).devices)
    assert payload["rails"] == dict(drivelint_circuit(deck).rails)
