"""A hostile-input campaign: structured netlists, configurations and parts files.

Byte mutations of real netlists found nothing; what failed was structure. These strategies
build what an attacker (or a careless export) writes: subcircuit hierarchies that fan out
or recurse, parameters that refer to each other, includes that are missing, cyclic,
hidden, binary or FIFOs, sources with extreme waveforms, directives, and configuration and
parts files with every key given a value of any type. Each run must end with no traceback,
within its time bound, and with the documented exit code:

    0  nothing at or above the failing severity      (every file clean, or only notes)
    1  findings at or above it, or a file with status error
    2  a configuration or parts-library error that stopped the run
"""

from __future__ import annotations

import os
import re
import resource
import shutil
import signal
import subprocess
import sys
from collections.abc import Iterator
from contextlib import contextmanager
from pathlib import Path
from typing import Any

import pytest
from hypothesis import HealthCheck, given, settings
from hypothesis import strategies as st

from drivelint.config import ConfigError, load_config
from drivelint.diagnostics import Severity
from drivelint.pipeline import check_path
from drivelint.ratings.parts import (
    PART_KEY_TABLE,
    PART_KINDS,
    PIN_ROLES,
    PartsError,
    load_libraries,
)
from drivelint.report.status import STATUSES, file_status

SECONDS = 20.0  # per example, far above what any of them needs; a hang fails


@contextmanager
def finishes_within(seconds: float) -> Iterator[None]:
    def hung(signum: int, frame: object) -> None:
        raise AssertionError(f"did not finish within {seconds} s")

    previous = signal.signal(signal.SIGALRM, hung)
    signal.setitimer(signal.ITIMER_REAL, seconds)
    try:
        yield
    finally:
        signal.setitimer(signal.ITIMER_REAL, 0)
        signal.signal(signal.SIGALRM, previous)


# -- netlists -------------------------------------------------------------------------------

NUMBERS = st.sampled_from(
    [
        "0",
        "1",
        "-1",
        "10k",
        "4.7u",
        "220n",
        "1e400",
        "1e-400",
        "-220n",
        "1meg",
        "2.2",
        "1e308",
        "{1/0}",
        "{x}",
        "{p1*2}",
        "{sqrt(-1)}",
        "'p2+1'",
        "abc",
        "1e3k",
        "{9**9**9}",
        "5mil",
    ]
)
NETS = st.sampled_from(["0", "a", "b", "g", "sw", "boot", "bus", "aux", "out", "gnd"])
PARAM_VALUES = st.sampled_from(["1", "{p1+1}", "{p2*p1}", "2k", "{p0}", "{1e400}", "{-p1}"])


@st.composite
def element(draw: Any, index: int, subckts: list[str]) -> str:
    kind = draw(st.sampled_from("RCLDMQVEX" if subckts else "RCLDMQVE"))
    name = f"{kind}{index}"
    n = [draw(NETS) for _ in range(4)]
    if kind in "RCL":
        extra = draw(st.sampled_from(["", " m=2", " m=0", " m=-1"]))
        return f"{name} {n[0]} {n[1]} {draw(NUMBERS)}{extra}"
    if kind == "D":
        return f"{name} {n[0]} {n[1]} {draw(st.sampled_from(['dmod', 'dz', 'nomodel']))}"
    if kind == "M":
        return f"{name} {n[0]} {n[1]} {n[2]} {n[2]} {draw(st.sampled_from(['nfet', 'pfet', 'x']))}"
    if kind == "Q":
        return f"{name} {n[0]} {n[1]} {n[2]} npnmod"
    if kind == "E":
        return f"{name} {n[0]} {n[1]} {n[2]} {n[3]} {draw(NUMBERS)}"
    if kind == "X":
        target = draw(st.sampled_from([*subckts, "missing_cell"]))
        return f"{name} {n[0]} {n[1]} {target} params: k={draw(NUMBERS)}"
    wave = draw(
        st.sampled_from(
            [
                f"DC {draw(NUMBERS)}",
                f"PULSE(0 {draw(NUMBERS)} 0 1n 1n {draw(NUMBERS)} {draw(NUMBERS)})",
                f"PWL(0 0 {draw(NUMBERS)} 5 r=0)",
                f"SIN(0 5 {draw(NUMBERS)})",
                "PULSE(0 5",
                f"EXP(0 5 0 {draw(NUMBERS)} 1u {draw(NUMBERS)})",
            ]
        )
    )
    return f"{name} {n[0]} {n[1]} {wave}"


@st.composite
def netlist(draw: Any, includes: list[str]) -> str:
    lines = ["campaign deck"]
    lines += [
        ".model dmod D (BV=100 TT=20n IS=1n)",
        ".model dz D (BV=15)",
        ".model nfet NMOS (VTO=3 KP=20)",
        ".model pfet PMOS (VTO=-3)",
        ".model npnmod NPN (BF=100)",
    ]
    for number in range(draw(st.integers(0, 3))):
        lines.append(f".param p{number}={draw(PARAM_VALUES)} x={draw(PARAM_VALUES)}")
    subckts: list[str] = []
    for level in range(draw(st.integers(0, 4))):
        name = f"cell{level}"
        # Bodies may instantiate earlier cells (fan-out), or themselves (recursion).
        callable_ = [*subckts, name] if draw(st.booleans()) else list(subckts)
        body = [draw(element(j, callable_)) for j in range(draw(st.integers(0, 4)))]
        fan = draw(st.integers(0, 3)) if subckts else 0
        body += [f"XF{j} a b {subckts[-1]}" for j in range(fan)]
        lines += [f".subckt {name} a b params: k=1", *body, f".ends {name}"]
        subckts.append(name)
    for include in includes:
        lines.append(f".include {include}")
    lines += [draw(element(i, subckts)) for i in range(draw(st.integers(0, 12)))]
    lines += draw(
        st.lists(
            st.sampled_from(
                [
                    "* drivelint: part M1 qg=38n vgs_max=20",
                    "* drivelint: part M1 qg=-1 vgs_max=nan",
                    "* drivelint: conditions fsw=100k duty_max=0.95",
                    "* drivelint: conditions fsw=-1 duty_max=7",
                    "* drivelint: accept dc-hold M1 -- fitted",
                    "* drivelint: accept nonsense",
                    ".tran 1n 1m",
                    ".tran 0 1e400",
                    ".lib nowhere.lib sect",
                    "+ continuation",
                    ".ends",
                    ".control\nrun\n",
                    "\x1b]0;title\x07 R9 a b 1",
                ]
            ),
            max_size=3,
        )
    )
    if draw(st.booleans()):
        lines.append(".end")
    return "\n".join(lines) + "\n"


INCLUDE_KINDS = ["good", "missing", "cycle", "hidden", "binary", "fifo", "outside", "dir"]


def make_includes(folder: Path, kinds: list[str]) -> list[str]:
    names = []
    for index, kind in enumerate(kinds):
        name = f"inc{index}.inc"
        path = folder / name
        if kind == "good":
            path.write_text(f"R_inc{index} a 0 1k\nC_inc{index} boot sw 100n\n")
        elif kind == "cycle":
            path.write_text(f"R_c{index} a 0 1k\n.include {name}\n")
        elif kind == "hidden":
            name = f".env{index}"
            (folder / name).write_text("TOKEN=campaign-secret\n")
        elif kind == "binary":
            path.write_bytes(bytes(range(256)) * 4)
        elif kind == "fifo" and hasattr(os, "mkfifo"):
            os.mkfifo(path)
        elif kind == "outside":
            name = "../../outside.inc"
        elif kind == "dir":
            path.mkdir()
        names.append(name)
    return names


# -- real designs with values an engineer (or an exporter) could write ----------------------

EXAMPLES = Path(__file__).resolve().parents[2] / "examples"
DESIGNS = sorted(EXAMPLES.glob("*.cir"))
_NUMBER_TOKEN = re.compile(r"(?<![A-Za-z_.])(\d+\.?\d*(?:e[+-]?\d+)?)([a-z]*)(?![A-Za-z_(])", re.I)
MAGNITUDES = st.one_of(
    st.sampled_from(["0", "1e-15", "1e-300", "1e300", "1e15", "1meg", "1k", "470n", "2.2u", "1m"]),
    st.floats(min_value=1e-18, max_value=1e18).map(lambda x: f"{x:.6g}"),
)


@st.composite
def revalued_design(draw: Any) -> str:
    """An example design with some of its numbers replaced: the structure a rule sees is
    real, the magnitudes are anything a netlist can hold."""
    text = DESIGNS[draw(st.integers(0, len(DESIGNS) - 1))].read_text(encoding="utf-8")
    lines = text.split("\n")
    for index, line in enumerate(lines):
        if index == 0 or not line.strip() or line.lstrip()[0] in "*.":
            continue
        if draw(st.integers(0, 3)) == 0:
            lines[index] = _NUMBER_TOKEN.sub(
                lambda m: draw(MAGNITUDES) if draw(st.booleans()) else m.group(0), line
            )
    return "\n".join(lines)


# -- configurations and parts files -----------------------------------------------------------

ANY_VALUE = st.one_of(
    st.sampled_from(
        ['"1 kHz"', '"-5 V"', '"nan"', "inf", "-1", "0", "1.5", "true", '"9**9**9 Hz"']
    ),
    st.sampled_from(['"warning"', '"error"', '["a", "b"]', "[1, 2]", "{ a = 1 }", '"x"', "3"]),
)
CONFIG_KEYS = [
    "fail_on",
    "ground",
    "exclude",
    "parts",
    "include_paths",
    "allow_outside_root",
    "suffixes",
    "colour",
]
TABLES = {
    "limits": ["max_devices", "max_file_bytes", "max_seconds_per_file", "max_nothing"],
    "conditions": ["fsw", "duty_max", "v_bus", "ambient", "on_time_max", "speed"],
    "rule.bootstrap-capacitor-small": ["margin", "severity", "enabled", "bogus"],
    "rule.dc-hold": ["severity", "enabled"],
    "rule.no-such-rule": ["severity"],
}


@st.composite
def configuration(draw: Any) -> str:
    lines = [
        f"{key} = {draw(ANY_VALUE)}"
        for key in draw(st.lists(st.sampled_from(CONFIG_KEYS), max_size=3, unique=True))
    ]
    for table in draw(st.lists(st.sampled_from(sorted(TABLES)), max_size=3, unique=True)):
        lines.append(f"[{table}]")
        for key in draw(st.lists(st.sampled_from(TABLES[table]), max_size=3, unique=True)):
            lines.append(f"{key} = {draw(ANY_VALUE)}")
    if draw(st.booleans()):
        lines += ["[[conditions_for]]", f"glob = {draw(ANY_VALUE)}", f"fsw = {draw(ANY_VALUE)}"]
    return "\n".join(lines) + "\n"


@st.composite
def parts_file(draw: Any) -> str:
    lines = []
    for name in draw(
        st.lists(st.sampled_from(["nfet", "dmod", "dz", "cell0", "NFET"]), max_size=3, unique=True)
    ):
        lines.append(f"[part.{name}]")
        kind = draw(st.sampled_from([*sorted(PART_KINDS), "widget", "3"]))
        lines.append(f'kind = "{kind}"' if kind != "3" else "kind = 3")
        keys = [*sorted(PART_KEY_TABLE), "vgs_mx", "colour"]
        for key in draw(st.lists(st.sampled_from(keys), max_size=4, unique=True)):
            value = draw(
                st.one_of(
                    ANY_VALUE, st.sampled_from(['"20 V"', '"45 nC"', '"175 degC"', '"35 ns"'])
                )
            )
            lines.append(f"{key} = {value}")
        if draw(st.booleans()):
            role = draw(st.sampled_from([*sorted(PIN_ROLES), "bootx"]))
            lines.append(f'pins = {{ A = "{role}" }}')
    return "\n".join(lines) + "\n"


# -- the runs ---------------------------------------------------------------------------------


def expected_exit(results: list[Any], fail_on: Severity) -> int:
    """The README's exit codes, computed from the results."""
    if any(file_status(r) == "error" for r in results):
        return 1
    # A file checked in part counts as a warning (README, exit codes).
    if fail_on <= Severity.WARNING and any(file_status(r) == "partial" for r in results):
        return 1
    return 1 if any(f.severity >= fail_on for r in results for f in r.findings) else 0


@pytest.fixture(scope="module")
def arena(tmp_path_factory: pytest.TempPathFactory) -> Path:
    return tmp_path_factory.mktemp("campaign")


_counter = iter(range(10**9))


def fresh_project(arena: Path) -> Path:
    folder = arena / f"p{next(_counter)}" / "proj"
    folder.mkdir(parents=True)
    (folder.parent / "outside.inc").write_text("R_out a 0 1\n")
    return folder


@settings(
    max_examples=60,
    deadline=None,
    suppress_health_check=[HealthCheck.too_slow, HealthCheck.function_scoped_fixture],
)
@given(data=st.data())
def test_structured_netlists_never_raise(arena: Path, data: st.DataObject) -> None:
    folder = fresh_project(arena)
    (folder / "drivelint.toml").write_text("[limits]\nmax_devices = 20000\n")
    kinds = data.draw(st.lists(st.sampled_from(INCLUDE_KINDS), max_size=3))
    text = data.draw(netlist(make_includes(folder, kinds)))
    deck = folder / "deck.cir"
    deck.write_text(text, encoding="utf-8")
    with finishes_within(SECONDS):
        result = check_path(deck)
    codes = [d.code for d in result.diagnostics]
    assert "internal-error" not in codes, [d.message for d in result.diagnostics]
    for diagnostic in result.diagnostics:
        assert diagnostic.span.line >= 1 and diagnostic.span.column >= 1
        assert "campaign-secret" not in diagnostic.message + diagnostic.source_line
    assert file_status(result) in STATUSES


@settings(
    max_examples=60,
    deadline=None,
    suppress_health_check=[HealthCheck.too_slow, HealthCheck.function_scoped_fixture],
)
@given(config=configuration(), parts=parts_file())
def test_configurations_and_parts_files_load_or_fail_cleanly(
    arena: Path, config: str, parts: str
) -> None:
    folder = fresh_project(arena)
    (folder / "drivelint.toml").write_text(config)
    (folder / "parts.toml").write_text(parts)
    with finishes_within(SECONDS):
        try:
            loaded = load_config(folder / "drivelint.toml")
        except ConfigError as exc:
            assert str(exc).startswith(f"{folder / 'drivelint.toml'}:"), str(exc)
            return
        try:
            load_libraries([folder / "parts.toml"])
        except PartsError as exc:
            assert str(exc).startswith(f"{folder / 'parts.toml'}:"), str(exc)
            return
    for value, _ in loaded.conditions.values():
        assert value == value and abs(value) != float("inf")


@settings(
    max_examples=60,
    deadline=None,
    suppress_health_check=[HealthCheck.too_slow, HealthCheck.function_scoped_fixture],
)
@given(
    text=revalued_design(),
    conditions=st.lists(
        st.sampled_from(
            [
                "fsw = '1 Hz'",
                "fsw = '1 GHz'",
                "duty_max = 0",
                "duty_max = 1",
                "v_bus = '1 mV'",
                "v_bus = '100 kV'",
                "on_time_max = '1 fs'",
                "ambient = '-100 degC'",  # the coldest and hottest ambient a configuration takes
                "ambient = '300 degC'",
                "load_current = 0",
            ]
        ),
        max_size=3,
        unique_by=lambda c: c.split()[0],
    ),
)
def test_real_designs_with_any_magnitudes_never_crash_a_rule(
    arena: Path, text: str, conditions: list[str]
) -> None:
    folder = fresh_project(arena)
    (folder / "drivelint.toml").write_text("[conditions]\n" + "\n".join(conditions) + "\n")
    shutil.copy(EXAMPLES / "parts.toml", folder / "parts.toml")
    deck = folder / "deck.cir"
    deck.write_text(text, encoding="utf-8")
    with finishes_within(SECONDS):
        result = check_path(deck)
    crashes = [d.message for d in result.diagnostics if d.code == "internal-error"]
    assert crashes == []
    for finding in result.findings:
        finding.to_json()
        assert finding.message and finding.fix


def _limit_memory() -> None:
    two_gib = 2 * 1024**3
    resource.setrlimit(resource.RLIMIT_AS, (two_gib, two_gib))


@settings(
    max_examples=12,
    deadline=None,
    suppress_health_check=[HealthCheck.too_slow, HealthCheck.function_scoped_fixture],
)
@given(data=st.data())
def test_the_command_line_gives_the_documented_exit_code(arena: Path, data: st.DataObject) -> None:
    """Whole runs in a child process capped at 2 GiB and a time-out."""
    folder = fresh_project(arena)
    config = data.draw(st.one_of(st.just("[limits]\nmax_devices = 20000\n"), configuration()))
    (folder / "drivelint.toml").write_text(config)
    if data.draw(st.booleans()):
        (folder / "parts.toml").write_text(data.draw(parts_file()))
    kinds = data.draw(st.lists(st.sampled_from(INCLUDE_KINDS), max_size=2))
    (folder / "deck.cir").write_text(data.draw(netlist(make_includes(folder, kinds))))
    fmt = data.draw(st.sampled_from(["text", "json", "sarif", "junit", "github", "html"]))
    run = subprocess.run(
        [
            sys.executable,
            "-m",
            "drivelint",
            "check",
            "--no-cache",
            "--jobs",
            "1",
            "--format",
            fmt,
            "deck.cir",
        ],
        cwd=folder,
        capture_output=True,
        timeout=120,
        preexec_fn=_limit_memory,  # noqa: PLW1509
        env={**os.environ, "XDG_CACHE_HOME": str(folder / ".c")},
        check=False,
    )
    err = run.stderr.decode(errors="replace")
    assert "Traceback" not in err, err[-3000:]
    try:
        loaded = load_config(folder / "drivelint.toml")
        load_libraries(loaded.parts)
    except (ConfigError, PartsError):
        assert run.returncode == 2, err[-2000:]
        return
    # A bad parts.toml beside the netlist is that file's error (exit 1), not the run's.
    result = check_path(folder / "deck.cir", loaded)
    assert run.returncode == expected_exit([result], loaded.fail_on), err[-2000:]
    assert b"campaign-secret" not in run.stdout
