"""Running a testbench deck in ngspice, within a time and an output bound.

``ngspice -b deck.cir`` runs the deck's ``.tran`` and prints each ``.meas`` result as
``name = value``; those lines are all that is read back. The run's working directory is
the deck's own folder, and nothing is written there: the output comes back through a pipe,
read up to a bound (the rest is discarded), and a run past its time bound is killed.
"""

from __future__ import annotations

import os
import re
import shutil
import signal
import subprocess
import threading
from collections.abc import Iterable
from dataclasses import dataclass, field
from pathlib import Path

DEFAULT_TIMEOUT = 120.0  # seconds per deck
MAX_OUTPUT = 4 * 1024 * 1024  # bytes of ngspice output kept
MAX_RAW_BYTES = 256 * 1024 * 1024  # bytes of a waveform run's raw file read back
_RESULT = re.compile(
    r"^\s*([A-Za-z_][A-Za-z0-9_]*)\s*=\s*([-+]?(?:\d+\.?\d*|\.\d+)(?:[eE][-+]?\d+)?)(?=\s|$)"
)
# ngspice reports a card it cannot evaluate as "Error: measure  NAME …" and then repeats
# the card with "failed!".
_FAILED = re.compile(
    r"(?:error:\s*measure\s+([A-Za-z_][A-Za-z0-9_]*))|"
    r"(?:^\s*\.meas\w*\s+\w+\s+([A-Za-z_][A-Za-z0-9_]*)\b.*failed)",
    re.IGNORECASE,
)


def find_ngspice() -> str | None:
    return shutil.which("ngspice")


# Lines of ngspice's output that mean the run may not be what the deck says.
_TROUBLE = re.compile(r"error|warning|fatal|timestep too small|unrecognized|unknown", re.I)
# The steps of a gmin or source stepping that found the operating point: ngspice's own
# convergence aid, reported step by step ("Trying gmin = … Warning: Further gmin
# increment"); once it says the stepping completed, those steps are not trouble.
_STEPPING = re.compile(r"^\s*Trying (?:gmin|source)", re.I)
_STEPPING_DONE = re.compile(r"(?:gmin|source) stepping completed", re.I)
MAX_TROUBLE = 20


@dataclass(frozen=True, slots=True)
class RunResult:
    values: dict[str, float] = field(default_factory=dict)
    failed: tuple[str, ...] = ()  # cards ngspice could not evaluate
    error: str | None = None  # why the run did not complete; None when it did
    log_tail: str = ""
    trouble: tuple[str, ...] = ()  # ngspice's warnings and errors, the first few


def _stop(process: subprocess.Popen[bytes]) -> None:
    """Kill the run and anything it started (one process group, created for the run)."""
    try:
        os.killpg(process.pid, signal.SIGKILL)
    except (ProcessLookupError, PermissionError, AttributeError):
        process.kill()
    process.wait()


def parse_results(text: str, names: Iterable[str]) -> tuple[dict[str, float], tuple[str, ...]]:
    """The ``name = value`` lines of the cards asked for, and the cards that failed."""
    wanted = {n.lower() for n in names}
    values: dict[str, float] = {}
    failed: set[str] = set()
    for line in text.splitlines():
        match = _RESULT.match(line)
        if match and match.group(1).lower() in wanted and match.group(1).lower() not in values:
            values[match.group(1).lower()] = float(match.group(2))
            continue
        bad = _FAILED.search(line)
        name = (bad.group(1) or bad.group(2)).lower() if bad else ""
        if name in wanted:
            failed.add(name)
    return values, tuple(sorted(failed - set(values)))


@dataclass(frozen=True, slots=True)
class _Finished:
    code: int
    text: str
    truncated: bool


def _run(
    arguments: list[str],
    cwd: Path,
    timeout: float,
    max_output: int,
    extra_env: dict[str, str] | None = None,
) -> _Finished | str:
    """Run ngspice with ``arguments`` in ``cwd``: its exit code and output (bounded), or
    why it did not finish. Never raises for anything ngspice does."""
    try:
        process = subprocess.Popen(
            arguments,
            cwd=cwd,
            stdin=subprocess.DEVNULL,
            stdout=subprocess.PIPE,
            stderr=subprocess.STDOUT,
            env={**os.environ, "LC_ALL": "C", **(extra_env or {})},
            start_new_session=True,  # its own process group, so a stop ends all of it
        )
    except OSError as exc:
        return f"cannot start ngspice: {exc.strerror or exc}"
    kept = bytearray()
    truncated = [False]

    def drain() -> None:
        assert process.stdout is not None
        while chunk := process.stdout.read(65536):
            room = max_output - len(kept)
            if room > 0:
                kept.extend(chunk[:room])
            if len(chunk) > room:
                truncated[0] = True

    reader = threading.Thread(target=drain, daemon=True)
    reader.start()
    try:
        code = process.wait(timeout=timeout)
    except subprocess.TimeoutExpired:
        _stop(process)
        reader.join(timeout=5)
        return f"ngspice ran longer than {timeout:g} s and was stopped"
    reader.join(timeout=5)
    return _Finished(code, kept.decode("utf-8", "replace"), truncated[0])


def run_deck(
    deck: Path,
    names: Iterable[str],
    timeout: float = DEFAULT_TIMEOUT,
    max_output: int = MAX_OUTPUT,
    executable: str | None = None,
) -> RunResult:
    """Run one deck; never raises for anything ngspice does."""
    program = executable or find_ngspice()
    if program is None:
        return RunResult(error="ngspice is not on the PATH")
    finished = _run([program, "-b", deck.name], deck.parent, timeout, max_output)
    if isinstance(finished, str):
        return RunResult(error=finished)
    text = finished.text
    values, failed = parse_results(text, names)
    lines = text.splitlines()
    tail = "\n".join(lines[-20:])
    # A card that cannot be evaluated is in ``failed``; everything else ngspice warns about
    # is kept as it says it.
    stepped = any(_STEPPING_DONE.search(line) for line in lines)
    trouble = tuple(
        line.strip()
        for line in lines
        if _TROUBLE.search(line)
        and not _FAILED.search(line)
        and not (stepped and _STEPPING.match(line))
    )[:MAX_TROUBLE]
    error: str | None = None
    if finished.code != 0:
        error = f"ngspice exited with status {finished.code}"
    elif finished.truncated and not values:
        error = f"ngspice wrote more than {max_output} bytes"
    return RunResult(values, failed, error, tail, trouble)


def run_vectors(
    deck: Path,
    vectors: Iterable[str],
    timeout: float = DEFAULT_TIMEOUT,
    max_raw_bytes: int = MAX_RAW_BYTES,
    executable: str | None = None,
) -> dict[str, tuple[float, ...]] | str:
    """Run the deck once more for its saved vectors (the waveform file): ngspice writes
    them to an ASCII raw file in a private temporary folder, read back within a bound and
    then removed; nothing is written beside the deck. (ngspice evaluates no ``.meas`` card
    in a run that writes a raw file, so this is a second run.) The time vector is
    ``"time"``. Returns why it could not when it could not."""
    import tempfile

    from drivelint.testbench.waveform import RawError, read_ascii_raw

    program = executable or find_ngspice()
    if program is None:
        return "ngspice is not on the PATH"
    with tempfile.TemporaryDirectory(prefix="drivelint-wave-") as folder:
        raw = Path(folder) / "wave.raw"
        finished = _run(
            [program, "-b", "-r", str(raw), deck.name],
            deck.parent,
            timeout,
            MAX_OUTPUT,
            {"SPICE_ASCIIRAWFILE": "1"},
        )
        if isinstance(finished, str):
            return finished
        if finished.code != 0 or not raw.is_file():
            return f"ngspice exited with status {finished.code} and wrote no vectors"
        try:
            return read_ascii_raw(raw, {"time", *(v.lower() for v in vectors)}, max_raw_bytes)
        except RawError as exc:
            return str(exc)
