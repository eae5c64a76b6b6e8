"""Hostile input: whatever the text or bytes, reading and elaborating end in diagnostics.

The contract (DESIGN §3 "every error names file, line and column … never a traceback"):
``read_deck`` and ``load_circuit`` never raise for any input, and every diagnostic's line
lies within the lines of the file it names, its column at 1 or more. Lines are counted the
way an editor and ngspice count them, by Python's universal-newlines reading (PEP 278:
LF, CRLF or CR end a line), independently of the reader's own splitting.

Three valid decks of our own are mutated at random (hypothesis); the directed cases below
pin the hostile shapes the property tests would take long to hit by chance, each with the
diagnostic it must produce.
"""

from __future__ import annotations

import contextlib
import io
import math
import shutil
import signal
import subprocess
from collections.abc import Callable, Iterable, Iterator, Sequence
from pathlib import Path

import pytest
from click.testing import CliRunner
from hypothesis import HealthCheck, given, settings
from hypothesis import strategies as st

from drivelint.cli import main
from drivelint.diagnostics import Diagnostic, Severity
from drivelint.limits import Limits
from drivelint.netlist.reader import ReadOptions, read_deck
from drivelint.pipeline import LoadOptions, load_circuit

# --------------------------------------------------------------------------- valid decks
# Syntax per the ngspice manual ("Circuit description": title line, '*' comments, '+'
# continuations; .subckt/.ends with params:, .param, .model, PULSE/PWL/SIN/EXP sources).
# test_valid_decks_simulate_in_ngspice checks that ngspice itself accepts all three.

HALF_BRIDGE = """\
48 V bootstrap half-bridge with a driver subcircuit
* bootstrap: RBOOT + DBOOT from VDD charge CBOOT between vb and sw
.param VIN=48 VDD=12 FSW=200k DUTY=0.45 DEAD=50n
.param PER={1/FSW} TON={DUTY*PER-DEAD}
VIN  vin 0 DC {VIN}
VDD  vdd 0 DC {VDD}
VHI  hin 0 PULSE(0 5 {PER/2} 10n 10n {TON} {PER})
VLO  lin 0 PULSE(0 5 0 10n 10n
+ {TON} {PER})
XDRV vb ho sw vdd hin lin 0 lo HB_DRIVER params: RSRC=4 RSNK=2
RBOOT vdd ba 2.2
DBOOT ba vb DFAST_200
CBOOT vb sw {220n*1.0}
RGH ho gh 4.7
RGL lo gl 4.7
XQH vin gh sw NFET_WRAP
XQL sw gl 0 NFET_WRAP
LOUT sw out 10u
COUT out 0 47u
RLOAD out 0 2.4
.subckt HB_DRIVER vb ho vs vdd hin lin com lo params: RSRC=5 RSNK=2
BHON hon com V = u(V(hin,com)-2.5)*u(V(vb,vs)-8)
BHOF hoff com V = 1 - V(hon,com)
SHU vb ho hon com SWSRC
SHD ho vs hoff com SWSNK
BLON lon com V = u(V(lin,com)-2.5)
BLOF loff com V = 1 - V(lon,com)
SLU vdd lo lon com SWSRC
SLD lo com loff com SWSNK
RQB vb vs 150k
RHI hin com 100k
RLI lin com 100k
.model SWSRC SW (VT=0.5 VH=0.1 RON={RSRC} ROFF=100meg)
.model SWSNK SW (VT=0.5 VH=0.1 RON={RSNK} ROFF=100meg)
.ends HB_DRIVER
.subckt NFET_WRAP d g s
RG g gi 1.5
LD d di 1n
M1 di gi s NFET_100V
.model NFET_100V VDMOS (VTO=3 KP=20 RD=5m RS=2m
+ CGS=1.8n CGDMAX=0.5n CGDMIN=20p BV=100)
.ends NFET_WRAP
.model DFAST_200 D (IS=1n N=1.5 RS=0.2 BV=200 TT=20n CJO=15p)
.tran 10n 200u
.end
"""

PULSE_TRANSFORMER = """\
isolated gate drive through a pulse transformer
.options reltol=1e-3 gmin=1e-12
.global vcc
.param VCC=15 NT=1 LM=200u RATIO='NT*1.0'
VCC vcc 0 {VCC}
VCTL ctl 0 PWL(0 0 1u 0 1.01u 5 3u 5 3.01u 0 5u 0) r=0 td=0
QTOP vcc ctl e QN_GEN
QBOT 0 ctl e QP_GEN
CDC e pri 1u
LPRI pri 0 {LM}
LSEC sec ref {LM*RATIO**2}
KPT LPRI LSEC 0.995
RSEC sec g 10
DCL g ref DZ15
XFET dc g ref SWITCH_NMOS
VDC dc 0 DC 400
RREF ref 0 {VCC>10 ? 1k : 2k}
VSN sn 0 SIN(0 1 100k 0 0 0)
VEX ex 0 EXP(0 1 1u 100n 2u 200n)
REX ex 0 {max(1k, 2*500)}
EAMP a 0 sn 0 2
GTR b 0 sn 0 1m
FMIR c 0 VSN 1
HTR d 0 VSN 10
RA a 0 1k
RB b 0 1k
RC c 0 1k
RD d 0 1k
.subckt SWITCH_NMOS d g s
.param RGI=2
RGI g gi {RGI}
M1 d gi s s NM_GEN W=10u L=1u
.ends
.model QN_GEN NPN (BF=100 IS=1e-14)
.model QP_GEN PNP (BF=80 IS=1e-14)
.model DZ15 D (BV=15 IBV=1m)
.model NM_GEN NMOS (VTO=2.5 KP=50u LEVEL=1)
.tran 1n 10u uic
.end
"""

PHASE_LEG = """\
phase leg with nested subcircuits and a level shifter
.param VBUS=400 RGATE=3.3
VBUS bus 0 DC {VBUS}
VPWM pwm 0 PULSE(0 3.3 0 5n 5n 2u 5u)
XLEG bus sw 0 pwm LEG params: RG={RGATE}
LLOAD sw 0 1m
RDMP sw 0 10k
.subckt LEG hv out lv in params: RG=10
.subckt HALF d s g params: RGH=1
RG g gi {RGH}
MH d gi s s NM_LEG
RGS gi s 10k
.model NM_LEG NMOS (VTO=4 KP=2)
.ends HALF
XHI hv out ghi HALF params: RGH={RG}
XLO out lv glo HALF params: RGH={RG/2}
XSH in ghi out LVL_SHIFT
ELO glo lv in 0 4
.ends LEG
.subckt LVL_SHIFT in out ref
.param GAIN=5
EG out ref in 0 {GAIN}
RBL out ref 100k
.ends LVL_SHIFT
.control
run
.endc
.tran 5n 50u
.end
"""

DECKS = {"half_bridge": HALF_BRIDGE, "pulse_transformer": PULSE_TRANSFORMER, "phase_leg": PHASE_LEG}
# Devices after flattening, counted by hand from the decks above (wrapper subcircuits
# of one MOSFET plus series R/L count as one transistor).
DEVICE_COUNTS = {"half_bridge": 25, "pulse_transformer": 24, "phase_leg": 9}


# --------------------------------------------------------------------------- the contract


def physical_lines(text: str) -> list[str]:
    """Lines as universal-newlines reading gives them (PEP 278), without their endings."""
    return [line.rstrip("\n") for line in io.StringIO(text, newline=None)]


def decoded(data: bytes) -> str:
    # The reader's documented decoding: UTF-8 (a BOM dropped), else Latin-1.
    try:
        return data.decode("utf-8-sig")
    except UnicodeDecodeError:
        return data.decode("latin-1")


def assert_contract(
    diagnostics: Iterable[Diagnostic],
    top: str,
    top_lines: Sequence[str],
    sources: dict[str, tuple[str, ...]],
) -> None:
    for diagnostic in diagnostics:
        assert isinstance(diagnostic, Diagnostic)
        span = diagnostic.span
        lines = top_lines if span.path == top else sources.get(span.path, ())
        assert 1 <= span.line <= max(len(lines), 1), (span, len(lines), diagnostic.message)
        assert span.column >= 1, (span, diagnostic.message)
        if lines:
            assert diagnostic.source_line == lines[span.line - 1], (span, diagnostic.message)
        assert diagnostic.message.strip(), span
        diagnostic.render()
        diagnostic.to_json()


def check_text(text: str, limits: Limits | None = None) -> list[Diagnostic]:
    """Read and load ``text`` given as a string; check the contract on both."""
    limits = limits or Limits()
    # Text with a NUL is refused whole, like a file (it used to pass on standard input).
    lines = [] if "\x00" in text else physical_lines(text)
    deck = read_deck("deck.cir", ReadOptions(limits=limits), text=text)
    assert_contract(deck.diagnostics, "deck.cir", lines, deck.sources)
    circuit = load_circuit("deck.cir", LoadOptions(root=Path.cwd(), limits=limits), text=text)
    assert_contract(circuit.diagnostics, "deck.cir", lines, circuit.sources)
    return list(circuit.diagnostics)


def check_file(path: Path, limits: Limits | None = None) -> list[Diagnostic]:
    """Read and load the file at ``path``; check the contract on both."""
    limits = limits or Limits()
    data = path.read_bytes()
    lines = [] if b"\x00" in data else physical_lines(decoded(data))
    top = str(path)
    deck = read_deck(path, ReadOptions(root=path.parent, limits=limits))
    assert deck.path == top
    assert_contract(deck.diagnostics, top, lines, deck.sources)
    circuit = load_circuit(path, LoadOptions(root=path.parent, limits=limits))
    assert_contract(circuit.diagnostics, top, lines, circuit.sources)
    return list(circuit.diagnostics)


def messages(diagnostics: Iterable[Diagnostic], severity: Severity | None = None) -> str:
    return "\n".join(
        str(d.span) + " " + d.message
        for d in diagnostics
        if severity is None or d.severity is severity
    )


# --------------------------------------------------------------------------- mutations

# Characters that mean something to the reader or the expression grammar.
SYNTAX_CHARS = "(){}'\"=+-*/^!?:,;$. \t\\&|<>%"
HOSTILE_FRAGMENTS = (
    "1e400",
    "-1e400",
    "1e-400",
    "9" * 5000,
    "1e" + "9" * 5000,
    "{1e400}",
    "{" + "9" * 400 + "}",
    "(",
    ")",
    "{",
    "}",
    "'",
    '"',
    "((",
    "))",
    "{{",
    "}}",
    "=",
    "==",
    "+",
    ",",
    ";",
    " $ ",
    "params:",
    "PULSE(",
    "PWL(0",
    "SIN()",
    "EXP(1 2 3 2)",
    "{1/0}",
    "{sqrt(-1)}",
    "{x}",
    "{2^1e3}",
    "{exp(1e6)}",
    "\x00",
    "\x0c",
    "\x85",
    "\u2028",
    "\r",
    "\u00b5",
    "\u2603",
    "{" + "(" * 10_000 + "1" + ")" * 10_000 + "}",
    "(" * 10_000 + "1" + ")" * 10_000,
    "{" + "-" * 10_000 + "1}",
    "(" * 10_000,
    "x" * 20_000,
)
HOSTILE_LINES = (
    "+ R9 a b 1k",
    "+",
    ".ends",
    ".ends NOPE",
    ".subckt",
    ".subckt (",
    ".subckt LOOP a",
    "XLOOP a LOOP",
    "X9 a b NOPE",
    "X8",
    ".param",
    ".param x=",
    ".param a={b} b={a}",
    ".model",
    ".model M9 NMOS (",
    ".tran 0 0",
    ".tran -1 1e400",
    ".tran",
    ".lib",
    ".endl",
    ".control",
    ".endc",
    ".end",
    ".include",
    ".global",
    "M9 d g s b",
    "Q9",
    "V9 a 0 PULSE(1)",
    "V8 a 0 PWL(1 0 0 1)",
    "V7 a 0 SIN(0 1 -1)",
    "K9 LA LB 2",
    "B9 a b V=",
    "E9 a b",
    "F9 a b VX",
    "S9 a b c d NOPE",
    "; only a comment",
    "$ only a comment",
    "*",
    "\x00",
)


def _index(draw: Callable, lines: Sequence[str], extra: int = 0) -> int:
    return draw(st.integers(0, max(len(lines) - 1 + extra, 0)))


def _column(draw: Callable, line: str) -> int:
    return draw(st.integers(0, len(line)))


def delete_line(draw: Callable, lines: list[str]) -> None:
    if lines:
        del lines[_index(draw, lines)]


def duplicate_line(draw: Callable, lines: list[str]) -> None:
    if lines:
        i = _index(draw, lines)
        lines.insert(_index(draw, lines, 1), lines[i])


def swap_lines(draw: Callable, lines: list[str]) -> None:
    if lines:
        i, j = _index(draw, lines), _index(draw, lines)
        lines[i], lines[j] = lines[j], lines[i]


def garble_line(draw: Callable, lines: list[str]) -> None:
    if lines:
        i = _index(draw, lines)
        start = _column(draw, lines[i])
        stop = draw(st.integers(start, len(lines[i])))
        junk = draw(st.text(alphabet=SYNTAX_CHARS, max_size=8))
        lines[i] = lines[i][:start] + junk + lines[i][stop:]


def insert_unicode(draw: Callable, lines: list[str]) -> None:
    if lines:
        i = _index(draw, lines)
        at = _column(draw, lines[i])
        lines[i] = lines[i][:at] + draw(st.text(max_size=12)) + lines[i][at:]


def insert_fragment(draw: Callable, lines: list[str]) -> None:
    if lines:
        i = _index(draw, lines)
        at = _column(draw, lines[i])
        lines[i] = lines[i][:at] + draw(st.sampled_from(HOSTILE_FRAGMENTS)) + lines[i][at:]


def insert_line(draw: Callable, lines: list[str]) -> None:
    lines.insert(_index(draw, lines, 1), draw(st.sampled_from(HOSTILE_LINES)))


def truncate_line(draw: Callable, lines: list[str]) -> None:
    if lines:
        i = _index(draw, lines)
        lines[i] = lines[i][: _column(draw, lines[i])]


def continue_line(draw: Callable, lines: list[str]) -> None:
    if lines:
        i = _index(draw, lines)
        lines[i] = "+" + lines[i]


MUTATIONS = (
    delete_line,
    duplicate_line,
    swap_lines,
    garble_line,
    insert_unicode,
    insert_fragment,
    insert_line,
    truncate_line,
    continue_line,
)


@st.composite
def mutated_decks(draw: Callable) -> str:
    lines = DECKS[draw(st.sampled_from(sorted(DECKS)))].splitlines()
    for _ in range(draw(st.integers(1, 6))):
        draw(st.sampled_from(MUTATIONS))(draw, lines)
    return "\n".join(lines) + draw(st.sampled_from(("", "\n", "\r\n")))


@st.composite
def mutated_bytes(draw: Callable) -> bytes:
    data = bytearray(draw(mutated_decks()).encode("utf-8"))
    for _ in range(draw(st.integers(0, 4))):
        at = draw(st.integers(0, len(data)))
        data[at:at] = draw(st.binary(min_size=1, max_size=8))
    return bytes(data)


# Decks assembled from the statement vocabulary, well-formed enough to get past the reader,
# so that the elaborator meets odd but parseable circuits: models of every type, subcircuits
# that wrap one transistor in random series parts, sources with odd waveform arguments.
PRELUDE = (
    ".model MD D (IS=1e-14 BV=100)",
    ".model MQ NPN (BF=100)",
    ".model MP PNP",
    ".model MM NMOS (VTO=2 KP=1)",
    ".model MV VDMOS (pchan VTO=-2)",
    ".model MS SW (VT=1)",
    ".model MW CSW (IT=1m)",
    ".model MR R (R=1)",
    ".param x=1 y={x*2} z='y/x'",
)
NODES = ("a", "b", "c", "0", "gnd", "p", "q", "vcc")
NUMBERS = (
    "0",
    "1",
    "5",
    "-1",
    "1k",
    "2.5",
    "1u",
    "1e400",
    "-1e400",
    "1e-400",
    "{x}",
    "{y*2}",
    "'z/2'",
    "1e308",
    "-1e308",
    "1e-320",
    "1e30",
    "-1e31",
    "1e-31",
    "{1/0}",
    "{sqrt(-1)}",
    "{pi}",
    "{min(1,2)}",
    "{w}",
    "{x>0 ? 1 : 0}",
)
MODELS = ("MD", "MQ", "MP", "MM", "MV", "MS", "MW", "MR", "NOPE")
LETTERS = "rclkdqmjvieifghbswx"


@st.composite
def waveform_field(draw: Callable) -> str:
    kind = draw(st.sampled_from(("PULSE", "PWL", "SIN", "EXP", "SFFM", "DC", "AC")))
    numbers = draw(st.lists(st.sampled_from(NUMBERS), max_size=9))
    if kind in ("DC", "AC"):
        return " ".join([kind, *numbers[:1]])
    options = draw(st.sampled_from(("", " r=0", " r=1u", " td=1n", " r=-1", " x=1")))
    return f"{kind}({' '.join(numbers)}){options}"


NODE_COUNTS = {
    "r": 2,
    "c": 2,
    "l": 2,
    "k": 0,
    "d": 2,
    "q": 3,
    "m": 4,
    "j": 3,
    "v": 2,
    "i": 2,
    "e": 4,
    "g": 4,
    "f": 2,
    "h": 2,
    "b": 2,
    "s": 4,
    "w": 2,
    "x": 2,
}


@st.composite
def element_line(draw: Callable, names: Sequence[str], subckts: dict[str, int]) -> str:
    letter = draw(st.sampled_from(LETTERS + "xxxxxx"))  # instances weighted up
    fields = [letter.upper() + draw(st.sampled_from(names))]
    if letter == "x" and subckts:
        subckt = draw(st.sampled_from(sorted(subckts)))
        count = draw(st.one_of(st.just(subckts[subckt]), st.integers(0, 5)))
        fields += draw(st.lists(st.sampled_from(NODES), min_size=count, max_size=count))
        fields.append(subckt)
        fields += draw(st.lists(st.sampled_from(("w=2", "v={x}", "m=2", "u=1")), max_size=2))
        return " ".join(fields)
    count = draw(st.one_of(st.just(NODE_COUNTS[letter]), st.integers(0, 5)))
    fields += draw(st.lists(st.sampled_from(NODES), min_size=count, max_size=count))
    tail = st.one_of(
        st.sampled_from(NUMBERS),
        st.sampled_from(MODELS),
        waveform_field(),
        st.sampled_from(
            (
                "m=2",
                "m=0",
                "w=1u",
                "l=1u",
                "v={x}",
                "V=V(a)*2",
                "i=1m",
                "poly",
                "value={x}",
                "L1",
                "LA",
                "V1",
                "VA",
                "x=2",
                "params:",
                "(1 2)",
            )
        ),
    )
    fields += draw(st.lists(tail, max_size=4))
    return " ".join(fields)


@st.composite
def subckt_body(draw: Callable, ports: Sequence[str], known: dict[str, int]) -> list[str]:
    """Mostly a transistor with series R/L to the ports: the wrapper shape, or nearly."""
    inner = (*ports, "di", "gi", "si", "x1")
    lines = []
    if draw(st.booleans()):
        terminals = draw(st.permutations(("di", "gi", "si", "bi")))
        model = draw(st.sampled_from(("MM", "MV")))
        lines.append(f"M0 {' '.join(terminals[: draw(st.sampled_from((3, 4)))])} {model}")
        for number, port in enumerate(ports, start=1):
            usual = terminals[(number - 1) % 4]
            target = draw(st.one_of(st.just(usual), st.sampled_from((*terminals, "x1"))))
            part = draw(st.sampled_from(("R", "R", "L", "C", "D")))
            value = {"R": draw(st.sampled_from(("1", "0", "{w}"))), "L": "1n", "C": "1p", "D": "MD"}
            lines.append(f"{part}{number} {port} {target} {value[part]}")
        if draw(st.booleans()):
            return lines
    for number in range(draw(st.integers(1, 6))):
        letter = draw(st.sampled_from("rrrlllmmdcx" if known else "rrrlllmmdc"))
        if letter == "x":
            name = draw(st.sampled_from(sorted(known)))
            nodes = draw(
                st.lists(st.sampled_from(inner), min_size=known[name], max_size=known[name])
            )
            lines.append(f"X{number} {' '.join(nodes)} {name}")
            continue
        count = 4 if letter == "m" else 2
        count = draw(st.one_of(st.just(count), st.just(3)))
        nodes = draw(st.lists(st.sampled_from(inner), min_size=count, max_size=count))
        tail = {
            "r": draw(st.sampled_from(("2", "0", "{w}", "-1"))),
            "l": "1n",
            "c": "1p",
            "d": "MD",
            "m": draw(st.sampled_from(("MM", "MV"))),
        }[letter]
        lines.append(f"{letter.upper()}{number} {' '.join(nodes)} {tail}")
    return lines


@st.composite
def assembled_decks(draw: Callable) -> str:
    lines = ["assembled", *PRELUDE]
    names = ("1", "2", "3", "A", "B")
    subckts: dict[str, int] = {}
    for index in range(draw(st.integers(0, 4))):
        ports = draw(
            st.lists(
                st.sampled_from(("d", "g", "s", "b", "a")), min_size=1, max_size=5, unique=True
            )
        )
        params = draw(st.sampled_from(("", " params: w=1", " params: w={x} v=2", " w=3")))
        lines.append(f".subckt S{index} {' '.join(ports)}{params}")
        lines += draw(subckt_body(ports, dict(subckts)))
        lines.append(".ends")
        subckts[f"S{index}"] = len(ports)
    for _ in range(draw(st.integers(1, 15))):
        lines.append(draw(element_line(names, subckts)))
    if draw(st.booleans()):
        lines.append(".tran " + " ".join(draw(st.lists(st.sampled_from(NUMBERS), max_size=3))))
    return "\n".join(lines) + "\n"


# Source arguments at the edges of the float range, for the waveform arithmetic.
EDGE_NUMBERS = (
    "0",
    "1",
    "-1",
    "5",
    "7",
    "1n",
    "1u",
    "1e15",
    "1e30",
    "-1e30",
    "1e-30",
    "1e-300",
    "2.2e-308",
    "1e-320",
    "1e308",
    "-1e308",
)
# Thresholds and times a check may ask about; times stay within the waveform bound.
EDGE_FLOATS = (0.0, -0.0, 1.0, -1.0, 2.5, 1e-308, 1e-320, 1e30, -1e30, 7.0, 1e-9)


@contextlib.contextmanager
def finishes_within(seconds: float) -> Iterator[None]:
    """Turn a hang into a test failure (POSIX interval timer, main thread)."""

    def hung(signum: int, frame: object) -> None:
        raise AssertionError(f"did not finish within {seconds} s")

    previous = signal.signal(signal.SIGALRM, hung)
    signal.setitimer(signal.ITIMER_REAL, seconds)
    try:
        yield
    finally:
        signal.setitimer(signal.ITIMER_REAL, 0)
        signal.signal(signal.SIGALRM, previous)


@pytest.fixture(scope="module")
def workdir(tmp_path_factory: pytest.TempPathFactory) -> Path:
    # Module-scoped: hypothesis re-runs the body many times inside one test call.
    return tmp_path_factory.mktemp("hostile")


# --------------------------------------------------------------------------- the decks


@pytest.mark.parametrize("name", sorted(DECKS))
def test_valid_decks_read_without_errors(name: str) -> None:
    diagnostics = check_text(DECKS[name])
    assert not messages(diagnostics, Severity.ERROR)
    circuit = load_circuit("deck.cir", LoadOptions(root=Path.cwd()), text=DECKS[name])
    assert len(circuit.devices) == DEVICE_COUNTS[name]


@pytest.mark.parametrize("name", sorted(DECKS))
def test_valid_decks_simulate_in_ngspice(name: str, tmp_path: Path) -> None:
    # Independent check that the starting decks are valid SPICE: ngspice 39 runs their
    # operating point (the .tran replaced by .op to keep it fast) and exits 0.
    if shutil.which("ngspice") is None:
        pytest.skip("ngspice is not installed; it cross-checks that the decks are valid")
    text = "\n".join(
        ".op" if line.startswith(".tran") else line for line in DECKS[name].splitlines()
    )
    path = tmp_path / f"{name}.cir"
    path.write_text(text + "\n", encoding="utf-8")
    run = subprocess.run(
        ["ngspice", "-b", str(path)], capture_output=True, text=True, timeout=60, check=False
    )
    assert run.returncode == 0, run.stdout + run.stderr
    assert "No. of Data Rows : 1" in run.stdout


# --------------------------------------------------------------------------- properties


@settings(deadline=None, max_examples=250, suppress_health_check=[HealthCheck.too_slow])
@given(mutated_decks())
def test_mutated_text_never_raises(text: str) -> None:
    check_text(text)


@settings(deadline=None, max_examples=120, suppress_health_check=[HealthCheck.too_slow])
@given(assembled_decks())
def test_assembled_statements_never_raise(text: str) -> None:
    check_text(text)


@settings(deadline=None, max_examples=150, suppress_health_check=[HealthCheck.too_slow])
@given(
    kind=st.sampled_from(("PULSE", "PWL", "SIN", "EXP")),
    args=st.lists(st.sampled_from(EDGE_NUMBERS), max_size=8),
    option=st.sampled_from(("", " r=0", " td=1n")),
    tran=st.sampled_from(("", ".tran 1n 1u", ".tran 1e-15 1e-15", ".tran 1e-30 1e30")),
    probes=st.lists(st.sampled_from(EDGE_FLOATS), min_size=1, max_size=4),
)
def test_source_waveforms_answer_every_question(
    kind: str, args: list[str], option: str, tran: str, probes: list[float]
) -> None:
    # What a check asks of a control waveform must not raise or hang either.
    text = f"edge\nV1 a 0 {kind}({' '.join(args)}){option}\nR1 a 0 1k\n{tran}\n"
    check_text(text)
    circuit = load_circuit("deck.cir", LoadOptions(root=Path.cwd()), text=text)
    source = circuit.devices.get("v1")
    if source is None or source.waveform is None:
        assert messages(circuit.diagnostics, Severity.ERROR)  # refused, and said why
        return
    wave = source.waveform
    with finishes_within(5.0):
        wave.to_json()
        low, high = wave.low(), wave.high()
        # Rounding where the extremes are computed: a few ulps of the values involved, no
        # more (an EXP whose fall starts as its rise does still adds and takes V2 - V1).
        from drivelint.netlist.waveforms import _VALUE_FIELDS

        levels = [abs(getattr(wave, n)) for n in _VALUE_FIELDS.get(wave.kind, ())]
        levels = [v for v in levels if isinstance(v, float) and math.isfinite(v)]
        slack = 1e-9 * max(abs(low), abs(high), *levels, 1e-300)
        for x in probes:
            assert low - slack <= wave.value_at(abs(x)) <= high + slack
            assert wave.longest_time_above(x) >= 0.0
            assert wave.longest_time_below(x) >= 0.0
            for duty in (wave.duty_above(x), wave.duty_below(x)):
                assert duty is None or 0.0 <= duty <= 1.0


@settings(
    deadline=None,
    max_examples=120,
    suppress_health_check=[HealthCheck.too_slow, HealthCheck.function_scoped_fixture],
)
@given(data=mutated_bytes())
def test_mutated_bytes_read_from_a_file_never_raise(data: bytes, workdir: Path) -> None:
    path = workdir / "mutated.cir"
    path.write_bytes(data)
    diagnostics = check_file(path)
    if b"\x00" in data:
        # The whole file is refused in one diagnostic, on its line 1, wherever the NUL is.
        assert [d.message for d in diagnostics] == [f"'{path}' is a binary file, not a netlist"]


@settings(
    deadline=None,
    max_examples=60,
    suppress_health_check=[HealthCheck.too_slow, HealthCheck.function_scoped_fixture],
)
@given(data=mutated_bytes(), fmt=st.sampled_from(("text", "json")))
def test_cli_netlist_exits_0_or_2_on_mutated_files(data: bytes, fmt: str, workdir: Path) -> None:
    # DESIGN §9: exit 2 for input errors; 1 is for findings, and `netlist` has none.
    path = workdir / "cli.cir"
    path.write_bytes(data)
    result = CliRunner().invoke(main, ["netlist", "--format", fmt, str(path)])
    assert result.exception is None or isinstance(result.exception, SystemExit), result.output
    assert result.exit_code in (0, 2), result.output
    assert "Traceback" not in result.output
    circuit = load_circuit(path, LoadOptions(root=path.parent))
    failed = any(d.severity is Severity.ERROR for d in circuit.diagnostics)
    assert result.exit_code == (2 if failed else 0)


# --------------------------------------------------------------------------- directed cases


def nested_subckts(depth: int) -> str:
    opens = "".join(f".subckt S{i} p\n" for i in range(depth))
    return "nested definitions\n" + opens + "R1 p 0 1k\n" + ".ends\n" * depth + "X1 n S0\n"


def chained_instances(depth: int) -> str:
    body = "".join(f".subckt S{i} p\nX{i} p S{i + 1}\n.ends\n" for i in range(depth))
    return "chained instances\n" + body + f".subckt S{depth} p\nR1 p 0 1k\n.ends\nX1 n S0\n"


SELF_THROUGH_THREE = """\
a subcircuit instantiating itself through three levels
.subckt A p
XB p B
.ends A
.subckt B p
XC p C
.ends B
.subckt C p
XA p A
.ends C
X1 n A
"""

# (deck, text that must appear in "path:line:col message" of some diagnostic, or None
# when the point is only that nothing is raised and the spans hold).
DIRECTED = {
    # 20,001 characters: the length bound answers first, at the first character past it.
    "expression nested 10,000 deep": (
        "t\nR1 a 0 {" + "(" * 10_000 + "1" + ")" * 10_000 + "}\n",
        "deck.cir:2:4105 in expression '((((",
    ),
    ".param nested 10,000 deep": (
        "t\n.param x=" + "(" * 10_000 + "1" + ")" * 10_000 + "\nR1 a 0 {x}\n",
        "expression is 20001 characters long; the limit (max_expression_chars) is 4096",
    ),
    # Within the length bound, the depth bound stops it at the 65th '(' (column 9 + 64).
    "expression nested 2,000 deep": (
        "t\nR1 a 0 {" + "(" * 2000 + "1" + ")" * 2000 + "}\n",
        "deck.cir:2:73 in expression '(((",
    ),
    "unary minus 4,000 deep": ("t\nR1 a 0 {" + "-" * 4000 + "1}\n", "limit max_expression_depth"),
    "negation 4,000 deep in a .param": (
        "t\n.param p=" + "!" * 4000 + "1\nR1 a 0 {p}\n",
        "limit max_expression_depth",
    ),
    "conditional nested 1,000 deep": (
        "t\nR1 a 0 {" + "1?" * 1000 + "1" + ":1" * 1000 + "}\n",
        "limit max_expression_depth",
    ),
    "source arguments nested 10,000 deep": (
        "t\nV1 a 0 PULSE" + "(" * 10_000 + "0 5" + ")" * 10_000 + "\n",
        "deck.cir:2:77 parentheses nested more than 64 levels deep (limit max_expression_depth)",
    ),
    "model parameters nested 10,000 deep": (
        "t\n.model DX D" + "(" * 10_000 + "IS=1" + ")" * 10_000 + "\nD1 a 0 DX\n",
        "deck.cir:2:76 parentheses nested more than 64 levels deep",
    ),
    "never-closed parentheses": ("t\nV1 a 0 PULSE" + "(" * 10_000 + "\n", "max_expression_depth"),
    "subckt definitions nested 100 deep": (
        nested_subckts(100),
        "deck.cir:18:1 subcircuit definitions nested deeper than 16",
    ),
    "instances chained 100 deep": (chained_instances(100), "nested deeper than 32 instances"),
    "self-instantiation through 3 levels": (
        SELF_THROUGH_THREE,
        "deck.cir:9:1 subcircuit 'a' instantiates itself: a -> b -> c -> a",
    ),
    "'+' continuation right after the title": (
        "t\n+ R1 a 0 1k\nR2 a 0 1k\n",
        "deck.cir:2:1 continuation line '+' has no statement before it to continue",
    ),
    "'.ends' without '.subckt'": (
        "t\nR1 a 0 1k\n.ends\n",
        "deck.cir:3:1 '.ends' without a '.subckt'",
    ),
    "'.subckt' without '.ends'": (
        "t\n.subckt OPEN a\nR1 a 0 1\n",
        "subcircuit 'open' has no '.ends'",
    ),
    "huge literal numbers": ("t\nR1 a 0 1e400\nR2 a 0 " + "9" * 5000 + "\nR3 a 0 1e-400\n", None),
    "huge exponent": ("t\nR1 a 0 1e" + "9" * 5000 + "\nR2 a 0 1e" + "9" * 5000 + "k\n", None),
    "huge number in braces": ("t\nR1 a 0 {1e400}\n", "deck.cir:2:9 in expression '1e400': number"),
    "5000-digit parameter": (
        "t\n.param big=" + "9" * 5000 + "\nR1 a 0 {big}\n",
        "deck.cir:2:4108 in expression '9999",
    ),
    "out-of-range .param": (
        "t\n.param big=1e400\nR1 a 0 {big}\n",
        "deck.cir:2:12 in expression '1e400': number 1e400 is out of range",
    ),
    ".tran with zero step": (
        "t\nV1 a 0 PULSE(0 5)\n.tran 0 1u\n",
        "deck.cir:3:7 .tran TSTEP is 0.0; expected a time > 0 s",
    ),
    ".tran with huge stop": (
        "t\nV1 a 0 PULSE(0 5)\n.tran 1n " + "9" * 5000 + "\n",
        "deck.cir:3:10 '.tran' ignored: a name or value is 5000 characters long",  # max_word_chars
    ),
    # 1/TSTOP, the default SIN frequency, would overflow to infinity.
    ".tran with a subnormal stop": (
        "t\nV1 a 0 SIN(0 1)\n.tran 1n 1e-320\n",
        "deck.cir:3:10 .tran TSTOP is 9.99989e-321 s; expected a time from 1e-30 s to 1e+30 s",
    ),
    "SIN phase of 1e308 degrees": (
        "t\nV1 a 0 SIN(0 1 1k 0 0 1e308)\n",
        "deck.cir:2:1 source 'v1': SIN value 6 is 1e+308; expected a magnitude of at most 1e+30",
    ),
    "PULSE period of 1e-320 s": ("t\nV1 a 0 PULSE(0 1 0 1n 1n 1u 1e-320)\n", None),
    "PWL repeating over 1e-308 s": ("t\nV1 a 0 PWL(0 0 1e-308 1) r=0\n", None),
    "SIN frequency of 1e-320 Hz": (
        "t\nV1 a 0 SIN(0 1 1e-320)\n",
        "SIN FREQ is 9.99989e-321 Hz; expected a frequency of at least 1e-30 Hz",
    ),
    "MOSFET with four fields and no model": (
        "t\nM1 d g s b\n",
        "deck.cir:2:10 model 'b' is not defined",
    ),
    "line of inline comment only": ("t\n; note\n$ note\nR1 a 0 1k\n", None),
    "form feed, NEL and U+2028 inside a line": (
        "t\nR1 a 0 1k\x0c\x85\u2028\n.ends\n",
        "deck.cir:3:1 '.ends' without a '.subckt'",
    ),
    "CR-only line ends": ("t\rR1 a 0 1k\r.ends\r", "deck.cir:3:1 '.ends' without a '.subckt'"),
    "NUL inside text": ("t\nR1 a\x00 0 1k\n\x00\n", None),
    "200,000-character line": ("t\nR1 a 0 1k " + "x" * 200_000 + "\n", "deck.cir:2:11"),
    "line over the default max_line_chars": (
        "t\nR1 a 0 " + "1" * 1_000_001 + "\n",
        "deck.cir:2:1 line is 1000008 characters long",
    ),
    "only a title": ("just a title", None),
    "empty": ("", None),
}


@pytest.mark.parametrize("name", sorted(DIRECTED))
def test_directed_hostile_text(name: str) -> None:
    text, expected = DIRECTED[name]
    diagnostics = check_text(text)
    if expected is not None:
        assert expected in messages(diagnostics), messages(diagnostics)


def test_inline_comment_line_ends_the_statement_as_in_ngspice(tmp_path: Path) -> None:
    # ngspice 39 (cross-checked below when installed): a '*' line inside a continued
    # statement is transparent, but a ';' or '$' comment line ends the statement, and the
    # '+' line after it continues the comment, so R1 keeps m=1 and draws 1 mA from 1 V.
    text = "t\nV1 a 0 1\nR1 a 0 1k\n; a note\n+ m=2\n* a star note\n+ tc1=0\n.op\n.end\n"
    circuit = load_circuit("deck.cir", LoadOptions(root=Path.cwd()), text=text)
    r1 = circuit.devices["r1"]
    assert (r1.value, r1.multiplier) == (1000.0, 1.0)
    assert "deck.cir:5:1 continuation line '+' continues the comment on line 4" in messages(
        circuit.diagnostics, Severity.WARNING
    )
    assert not messages(circuit.diagnostics, Severity.ERROR)
    if shutil.which("ngspice") is None:
        pytest.skip("ngspice is not installed; it cross-checks the comment-line rule")
    path = tmp_path / "comment.cir"
    path.write_text(text, encoding="utf-8")
    run = subprocess.run(
        ["ngspice", "-b", str(path)], capture_output=True, text=True, timeout=60, check=False
    )
    branch = next(line for line in run.stdout.splitlines() if "v1#branch" in line)
    assert float(branch.split()[-1]) == pytest.approx(-1e-3)  # 1 V across 1 kOhm, m=1


INCLUDE_NAMES = {
    # an .include line: what its diagnostic at line 2, column 10 (the name) must say.
    # (A NUL in the name cannot get this far: text holding a NUL is refused whole.)
    ".include " + "n" * 300: "is not a usable file name: File name too long",  # ENAMETOOLONG
    ".include ~no_such_user_here/x.lib": "'~no_such_user_here' does not name a home directory",
}


@pytest.mark.parametrize("line", sorted(INCLUDE_NAMES))
def test_include_names_no_file_system_can_hold(line: str) -> None:
    diagnostics = check_text(f"t\n{line}\nR1 a 0 1k\n")
    assert "deck.cir:2:10 include '" in messages(diagnostics)
    assert INCLUDE_NAMES[line] in messages(diagnostics)


def test_lib_with_one_quoted_argument() -> None:
    diagnostics = check_text('t\n.lib "a b"\n')
    assert messages(diagnostics) == "deck.cir:2:1 expected '.lib FILE SECTION'"


def test_instances_multiplying_past_max_devices() -> None:
    # Nine levels of ten instances each would flatten to 10^9 resistors.
    levels = [".subckt L0 p\nR1 p 0 1\n.ends"]
    for level in range(1, 10):
        body = "\n".join(f"X{j} p L{level - 1}" for j in range(10))
        levels.append(f".subckt L{level} p\n{body}\n.ends")
    text = "fan-out\n" + "\n".join(levels) + "\nX1 n L9\n"
    with finishes_within(10.0):
        diagnostics = check_text(text, Limits(max_devices=1000))
    # Counted before building: the instance that passes the bound is named, nothing is built.
    assert messages(diagnostics) == (
        "deck.cir:113:1 the netlist flattens to more than 1000 devices (limit max_devices); "
        "not elaborated"
    )


def test_messages_quote_a_hostile_expression_in_brief() -> None:
    # The caret shows where; the message need not carry 20,000 parentheses.
    diagnostics = check_text("t\nR1 a 0 {" + "(" * 10_000 + "1" + ")" * 10_000 + "}\n")
    assert [len(d.message) < 200 for d in diagnostics] == [True]


def test_exponential_settling_below_float_resolution_answers() -> None:
    # TAU1 = 1e-300 s: after TD2 the value is exactly 0.0 in floats (V1 is lost next to V2),
    # so the search for where it crosses 0 never met a float time that does.
    text = "t\nV1 a 0 EXP(2.2250738585072014e-308 9.69632754671975 7.011429223556288 1e-300)\n"
    check_text(text)
    wave = load_circuit("deck.cir", LoadOptions(root=Path.cwd()), text=text).devices["v1"].waveform
    assert wave is not None
    with finishes_within(5.0):
        longest = wave.longest_time_above(0.0)
    # Checked against the waveform's own values on either side of the answer. The fall
    # is computed without cancellation, so V1 (> 0) survives and the run never ends.
    if math.isinf(longest):
        assert wave.value_at(1e300) > 0.0
    else:
        assert wave.value_at(longest * 0.999) > 0.0 >= wave.value_at(longest * 1.001)


def test_expression_errors_point_at_their_column() -> None:
    # The caret of a .param or params: value error sits on the failing operator; the
    # expected column is found in the text itself (1-based, as editors count).
    lines = [
        "t",
        ".param x=1/0 y={2/0}  z = 2*(3/0)",
        ".subckt S p params: q=4/0",
        "R1 p 0 {q}",
        ".ends",
        "X1 n S",
        "R1 a 0 {x}",
        "R2 a 0 {y}",
        "R3 a 0 {z}",
    ]
    diagnostics = check_text("\n".join(lines) + "\n")
    found = sorted(
        (d.span.line, d.span.column) for d in diagnostics if "division by zero" in d.message
    )
    expected = sorted(
        (number, lines[number - 1].index(f"{digit}/0") + 2)
        for number, digit in ((2, "1"), (2, "2"), (2, "3"), (3, "4"))
    )
    assert found == expected


OUT_OF_RANGE = {
    # deck body: (drivelint reports an error, ngspice 39 stops with an error)
    # A bare literal: ngspice reads it as infinity; drivelint refuses it as it refuses
    # {1e400} (an infinite resistor hid a finding and passed clean).
    "R1 a 0 1e400": (True, False),
    "R1 a 0 {1e400}": (True, True),
    ".param big=1e400\nR1 a 0 {big}": (True, True),
}


@pytest.mark.parametrize("body", sorted(OUT_OF_RANGE))
def test_out_of_range_literals_agree_with_ngspice(body: str, tmp_path: Path) -> None:
    text = f"out of range\nV1 a 0 1\n{body}\n.op\n.end\n"
    ours, theirs = OUT_OF_RANGE[body]
    assert bool(messages(check_text(text), Severity.ERROR)) is ours
    if shutil.which("ngspice") is None:
        pytest.skip("ngspice is not installed; it cross-checks out-of-range numbers")
    path = tmp_path / "range.cir"
    path.write_text(text, encoding="utf-8")
    run = subprocess.run(
        ["ngspice", "-b", str(path)], capture_output=True, text=True, timeout=60, check=False
    )
    assert (run.returncode != 0) is theirs, run.stdout + run.stderr


def test_line_over_a_configured_limit() -> None:
    # The refused line's '+' continuation goes with it, not onto R1 before it.
    limits = Limits(max_line_chars=150)
    text = "t\nR1 a 0 1k\nR2 a 0 " + "2" * 200 + "\n+ m=3\nR3 a 0 2k\n"
    diagnostics = check_text(text, limits)
    assert messages(diagnostics) == (
        "deck.cir:3:1 line is 207 characters long, over the limit of 150 (limit max_line_chars)"
    )
    circuit = load_circuit("deck.cir", LoadOptions(root=Path.cwd(), limits=limits), text=text)
    assert {name: d.value for name, d in circuit.devices.items()} == {"r1": 1e3, "r3": 2e3}


def test_statement_over_the_limit_through_continuations() -> None:
    limits = Limits(max_line_chars=100)
    text = "t\nR1 a 0 1k\nR2 a 0\n+ " + "2" * 60 + "\n+ " + "3" * 60 + "\n+ 4\nR3 a 0 2k\n"
    diagnostics = check_text(text, limits)
    assert messages(diagnostics) == "deck.cir:5:1 statement is too long (limit max_line_chars)"
    circuit = load_circuit("deck.cir", LoadOptions(root=Path.cwd(), limits=limits), text=text)
    assert sorted(circuit.devices) == ["r1", "r3"]


def test_nul_bytes_in_a_file_are_one_diagnostic(tmp_path: Path) -> None:
    path = tmp_path / "binary.cir"
    path.write_bytes(HALF_BRIDGE.encode() + b"\x00\x01\x02")
    diagnostics = check_file(path)
    assert messages(diagnostics) == f"{path}:1:1 '{path}' is a binary file, not a netlist"


def test_nul_bytes_after_the_first_64_kib(tmp_path: Path) -> None:
    """Guards: the NUL check looked only at the first 64 KiB; a NUL past it is refused too."""
    path = tmp_path / "late_nul.cir"
    padding = "* padding\n" * 7000
    path.write_bytes((HALF_BRIDGE.replace(".end\n", "") + padding + "R\x00 a b\n").encode())
    diagnostics = check_file(path)
    assert messages(diagnostics) == f"{path}:1:1 '{path}' is a binary file, not a netlist"


def test_invalid_utf8_is_read_as_latin1(tmp_path: Path) -> None:
    path = tmp_path / "latin.cir"
    path.write_bytes(b"t\nR\xb51 a 0 1k\n\xff\xfe\n")
    diagnostics = check_file(path)
    assert "file is not valid UTF-8; read as Latin-1" in messages(diagnostics, Severity.NOTE)
    assert f"{path}:3:1" in messages(diagnostics, Severity.ERROR)


def test_cli_on_directed_cases(tmp_path: Path) -> None:
    runner = CliRunner()
    for number, name in enumerate(sorted(DIRECTED)):
        path = tmp_path / f"case{number}.cir"
        path.write_text(DIRECTED[name][0], encoding="utf-8")
        result = runner.invoke(main, ["netlist", "--format", "json", str(path)])
        assert result.exception is None or isinstance(result.exception, SystemExit), name
        assert result.exit_code in (0, 2), (name, result.output[-2000:])


def test_a_pulse_period_far_below_its_edges_stays_within_its_levels() -> None:
    """PULSE(0 1 0 0 0 0 1e-300) under .tran 1n: 1e300 periods by t = 1 s, whose product
    rounds by more than a period; the value stays within what high() says it reaches."""
    from drivelint.netlist.waveforms import Pulse

    wave = Pulse(
        notes=(), defaulted=(), v1=0.0, v2=1.0, td=0.0, tr=1e-9, tf=1e-9, pw=1e-6, per=1e-300
    )
    assert wave.low() <= wave.value_at(1.0) <= wave.high() + 1e-9 * 1e-300
