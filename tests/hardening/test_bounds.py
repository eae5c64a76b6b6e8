"""Bounds that hold in every command, and inputs that used to hang, blow up or pass clean.

Guards, each named in its test: an include that is a FIFO hung `netlist` and `stages` for
ever (and `check` for its time bound); a 1.3 KB netlist of 30 nested levels took a minute
and gigabytes; `netlist` and `stages` ignored the configuration and had no time bound;
standard input skipped the size bound and the NUL check; a literal 1e400 became infinity
and hid a finding; zero capacitance crashed a rule, negative capacitance was accepted; an
empty netlist passed in silence.
"""

from __future__ import annotations

import json
import os
import subprocess
import sys
from pathlib import Path

import pytest

ROOT = Path(__file__).resolve().parents[2]
EXAMPLES = ROOT / "examples"
FLAWED = EXAMPLES / "mower48v_hbridge_wrapped_fets.cir"
COMMANDS = ("netlist", "stages", "check")


def drivelint(
    *args: str, cwd: Path, stdin: bytes | None = None, timeout: float = 120
) -> subprocess.CompletedProcess[str]:
    """A real process with a time-out: a hang fails the test instead of stalling the suite."""
    env = {**os.environ, "XDG_CACHE_HOME": str(cwd / ".cache-home")}
    return subprocess.run(
        [sys.executable, "-m", "drivelint", *args],
        cwd=cwd,
        input=stdin if stdin is not None else b"",
        capture_output=True,
        timeout=timeout,
        env=env,
        check=False,
    )  # type: ignore[call-overload, no-any-return]


def text_of(run: subprocess.CompletedProcess[bytes]) -> str:
    return run.stdout.decode(errors="replace") + run.stderr.decode(errors="replace")


def no_traceback(run: subprocess.CompletedProcess[bytes]) -> None:
    assert "Traceback" not in text_of(run), text_of(run)[-3000:]


@pytest.mark.skipif(not hasattr(os, "mkfifo"), reason="no FIFOs here")
@pytest.mark.parametrize("command", COMMANDS)
def test_a_fifo_include_is_refused_at_once(tmp_path: Path, command: str) -> None:
    os.mkfifo(tmp_path / "pipe.inc")
    (tmp_path / "deck.cir").write_text("t\n.include pipe.inc\nR1 a 0 1k\nV1 a 0 DC 5\n.end\n")
    run = drivelint(command, "--allow-outside-root", "deck.cir", cwd=tmp_path, timeout=60)
    no_traceback(run)
    assert "not a regular file" in text_of(run)
    assert run.returncode == (1 if command == "check" else 2)


@pytest.mark.skipif(not hasattr(os, "mkfifo"), reason="no FIFOs here")
@pytest.mark.parametrize("command", COMMANDS)
def test_a_fifo_or_device_named_as_the_netlist_is_refused(tmp_path: Path, command: str) -> None:
    os.mkfifo(tmp_path / "pipe.cir")
    run = drivelint(command, "pipe.cir", "/dev/zero", cwd=tmp_path, timeout=60)
    no_traceback(run)
    assert text_of(run).count("not a regular file") == 2


def nested_fan_out(levels: int = 30) -> str:
    """Each level instantiates the one below twice: 2^levels resistors in ~1.3 KB."""
    lines = ["deep fan-out"]
    for level in range(levels):
        lines.append(f".subckt L{level} a b")
        if level == 0:
            lines.append("R1 a b 1k")
        else:
            lines += [f"X1 a m L{level - 1}", f"X2 m b L{level - 1}"]
        lines.append(".ends")
    return "\n".join([*lines, f"X0 in 0 L{levels - 1}", "V1 in 0 DC 1", ".end"]) + "\n"


@pytest.mark.parametrize("command", COMMANDS)
def test_nested_fan_out_stops_at_the_device_bound_at_once(tmp_path: Path, command: str) -> None:
    (tmp_path / "deep.cir").write_text(nested_fan_out())
    run = drivelint(command, "--format", "json", "deep.cir", cwd=tmp_path, timeout=60)
    no_traceback(run)
    assert "limit max_devices" in text_of(run)
    assert run.returncode == (1 if command == "check" else 2)


@pytest.mark.parametrize("command", ["netlist", "stages"])
def test_netlist_and_stages_read_the_configuration_and_its_limits(
    tmp_path: Path, command: str
) -> None:
    (tmp_path / "drivelint.toml").write_text("[limits]\nmax_devices = 5\n")
    (tmp_path / "deck.cir").write_text(FLAWED.read_text())
    run = drivelint(command, "deck.cir", cwd=tmp_path)
    no_traceback(run)
    assert run.returncode == 2 and "more than 5 devices" in text_of(run)


def slow_deck(legs: int = 40_000) -> str:
    return "slow\nV1 a 0 DC 5\n" + "".join(f"R{n} a n{n} 1k\nC{n} n{n} 0 1n\n" for n in range(legs))


@pytest.mark.parametrize("command", COMMANDS)
def test_every_command_has_the_per_file_time_bound(tmp_path: Path, command: str) -> None:
    (tmp_path / "drivelint.toml").write_text("[limits]\nmax_seconds_per_file = 1\n")
    (tmp_path / "slow.cir").write_text(slow_deck())
    (tmp_path / "quick.cir").write_text("quick\nR1 a 0 1k\nV1 a 0 DC 5\n.end\n")
    args = ["--no-cache", "--jobs", "1"] if command == "check" else []
    run = drivelint(command, *args, "quick.cir", "slow.cir", cwd=tmp_path)
    no_traceback(run)
    out = text_of(run)
    assert "took longer than 1 s (limit max_seconds_per_file)" in out
    # The other file was still handled.
    assert ("2 files" if command == "check" else "quick.cir") in out


def test_standard_input_has_the_size_bound_and_the_nul_check(tmp_path: Path) -> None:
    (tmp_path / "drivelint.toml").write_text("[limits]\nmax_file_bytes = 1000\n")
    big = FLAWED.read_bytes()
    assert len(big) > 1000
    run = drivelint("check", "--no-cache", "--format", "json", "-", cwd=tmp_path, stdin=big)
    no_traceback(run)
    (entry,) = json.loads(run.stdout)["files"]
    assert entry["status"] == "error"
    assert "limit max_file_bytes" in entry["diagnostics"][0]["message"]
    nul = b"t\nR1 a 0 1k\n" + b"* padding\n" * 10 + b"R2 a\x00 0 1k\n"
    (tmp_path / "drivelint.toml").write_text("")
    run = drivelint("check", "--no-cache", "-", cwd=tmp_path, stdin=nul)
    assert run.returncode == 1 and "is a binary file" in text_of(run)


def test_a_large_literal_is_an_error_like_its_braced_form(tmp_path: Path) -> None:
    """1e400 as a bare value became infinity; as {1e400} it was an error already."""
    text = FLAWED.read_text()
    for value in ("1e400", "{1e400}"):
        deck = tmp_path / "deck.cir"
        deck.write_text(text.replace(".end", f"R_BIG bus 0 {value}\n.end"))
        run = drivelint("check", "--no-cache", "--format", "json", "deck.cir", cwd=tmp_path)
        (entry,) = json.loads(run.stdout)["files"]
        assert run.returncode == 1 and entry["status"] == "error", value
        assert any("1e400" in d["message"] for d in entry["diagnostics"])


@pytest.mark.parametrize(
    "line, message",
    [
        ("C_HOLD boot sw 0", "capacitance 0; it must be positive"),
        ("C_HOLD boot sw -220n", "capacitance -2.2e-07; it must be positive"),
        ("L_BAD sw out 0", "inductance 0; it must be positive"),
        ("R_BAD g s -10k", "resistance -10000; it must not be negative"),
        ("R_BAD g s 10k m=0", "multiplier m=0: it must be positive"),
    ],
)
def test_physically_impossible_values_are_diagnostics(line: str, message: str) -> None:
    from drivelint.pipeline import check_text

    deck = "leg\nVB bus 0 DC 48\nVA aux 0 DC 12\nD1 aux boot dfast\n.model dfast D (BV=100)\n"
    deck += "M1 bus g sw sw nfet\n.model nfet NMOS (VTO=3)\nVG g sw PULSE(0 12 0 1n 1n 5u 10u)\n"
    deck += f"{line}\n.end\n"
    result = check_text(deck)
    codes = [d.code for d in result.diagnostics]
    assert "internal-error" not in codes
    assert any(message in d.message and d.code == "value" for d in result.diagnostics), [
        d.message for d in result.diagnostics
    ]


@pytest.mark.parametrize("text", ["", "title only\n", "title\n* a comment\n.end\n", "\n\n\n"])
def test_an_empty_netlist_says_so_and_is_not_clean(tmp_path: Path, text: str) -> None:
    (tmp_path / "empty.cir").write_text(text)
    run = drivelint("check", "--no-cache", "--format", "json", "empty.cir", cwd=tmp_path)
    assert run.returncode == 1
    (entry,) = json.loads(run.stdout)["files"]
    assert entry["status"] == "error"
    assert [d["code"] for d in entry["diagnostics"]] == ["empty"]
    assert (
        "holds no devices"
        in drivelint("check", "--no-cache", "empty.cir", cwd=tmp_path).stdout.decode()
    )


@pytest.mark.parametrize("command", COMMANDS)
def test_a_file_included_again_and_again_is_bounded(tmp_path: Path, command: str) -> None:
    """Each include of a file reads it again: 100,000 includes of a 1,000-line file built
    gigabytes of statements before any other bound was reached."""
    (tmp_path / "drivelint.toml").write_text("[limits]\nmax_lines_read = 20000\n")
    (tmp_path / "cell.inc").write_text("".join(f"R{i} a b 1k\n" for i in range(1000)))
    (tmp_path / "x.cir").write_text("t\n" + ".include cell.inc\n" * 100_000)
    run = drivelint(command, "x.cir", cwd=tmp_path, timeout=60)
    no_traceback(run)
    assert text_of(run).count("(limit max_lines_read)") == 1


def test_the_bytes_of_all_included_files_are_bounded(tmp_path: Path) -> None:
    """Each file was bounded but not their sum: 2,000 includes of 32 MB would be 64 GB."""
    (tmp_path / "drivelint.toml").write_text("[limits]\nmax_total_bytes = 100000\n")
    for index in range(5):
        (tmp_path / f"b{index}.inc").write_text("* " + "x" * 40_000 + "\n")
    includes = "".join(f".include b{index}.inc\n" for index in range(5))
    (tmp_path / "x.cir").write_text(f"t\n{includes}R1 a 0 1k\nV1 a 0 DC 5\n.end\n")
    run = drivelint("netlist", "x.cir", cwd=tmp_path)
    no_traceback(run)
    out = text_of(run)
    assert out.count("(limit max_total_bytes)") == 3  # b2, b3, b4: past 100,000 bytes
    for index in (2, 3, 4):
        assert f"'b{index}.inc' not read" in out


@pytest.mark.parametrize("command", COMMANDS)
def test_a_loop_of_symbolic_links_is_a_diagnostic(tmp_path: Path, command: str) -> None:
    (tmp_path / "loop_a").symlink_to("loop_b")
    (tmp_path / "loop_b").symlink_to("loop_a")
    (tmp_path / "x.cir").write_text("t\n.include loop_a\nR1 a 0 1k\nV1 a 0 DC 5\n.end\n")
    run = drivelint(command, "x.cir", "loop_a", cwd=tmp_path)
    no_traceback(run)
    out = text_of(run)
    assert "internal error" not in out
    assert "loop of symbolic links" in out and "Too many levels of symbolic links" in out
