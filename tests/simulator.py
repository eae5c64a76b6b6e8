"""Running ngspice for the tests: one transient run, its vectors read back.

ngspice 39 (Debian's package) is the independent simulator the cross-checks compare
drivelint with. A run copies the netlist into a folder, inserts a ``.control`` block
(``run`` then ``wrdata``) before its ``.end``, runs ``ngspice -b`` and parses what it wrote.
Tests that need it skip, with the reason, where ngspice is not installed.
"""

from __future__ import annotations

import bisect
import shutil
import subprocess
from collections.abc import Sequence
from dataclasses import dataclass
from pathlib import Path

import pytest

NGSPICE = shutil.which("ngspice")
TIMEOUT_S = 30.0
SKIP_REASON = "ngspice is not installed (Debian package 'ngspice'); cannot simulate"


@dataclass(frozen=True, slots=True)
class Waves:
    """The vectors one ngspice run wrote, keyed by the expressions the test asked for."""

    log: str
    time: tuple[float, ...]
    data: dict[str, tuple[float, ...]]

    def __getitem__(self, name: str) -> tuple[float, ...]:
        return self.data[name]

    def index(self, t: float) -> int:
        """Index of the first stored point at or after time ``t``."""
        return min(bisect.bisect_left(self.time, t), len(self.time) - 1)

    def at(self, name: str, t: float) -> float:
        return self.data[name][self.index(t)]

    def between(self, name: str, t0: float, t1: float) -> list[float]:
        return list(
            self.data[name][bisect.bisect_left(self.time, t0) : bisect.bisect_left(self.time, t1)]
        )

    def integral(self, name: str, t0: float, t1: float) -> float:
        """Trapezoidal integral of ``name`` from ``t0`` to ``t1`` on the simulator's grid."""
        lo, hi = self.index(t0), self.index(t1)
        t, y = self.time, self.data[name]
        return sum((t[i + 1] - t[i]) * (y[i] + y[i + 1]) / 2 for i in range(lo, hi))


def with_control(text: str, control: Sequence[str]) -> str:
    """The netlist with ``control`` inserted before its final ``.end`` line."""
    lines = text.splitlines()
    for index in range(len(lines) - 1, -1, -1):
        if lines[index].strip().lower() == ".end":
            return "\n".join([*lines[:index], *control, *lines[index:]]) + "\n"
    raise AssertionError("netlist has no .end line")


def run_transient(
    text: str, vectors: Sequence[str], workdir: Path, saves: Sequence[str] = ()
) -> Waves:
    """Simulate ``text`` (which carries its own ``.tran``) and return ``vectors`` over time."""
    if NGSPICE is None:
        pytest.skip(SKIP_REASON)
    control = [".control", "set wr_singlescale", "set wr_vecnames"]
    if saves:
        # device currents are only kept when asked for by name
        control.append("save all " + " ".join(saves))
    control += ["run", "wrdata vectors.txt " + " ".join(vectors), "quit", ".endc"]
    workdir.mkdir(parents=True, exist_ok=True)
    (workdir / "deck.cir").write_text(with_control(text, control), encoding="utf-8")
    proc = subprocess.run(
        [NGSPICE, "-b", "deck.cir"],
        cwd=workdir,
        capture_output=True,
        text=True,
        timeout=TIMEOUT_S,
        check=False,
    )
    log = proc.stdout + proc.stderr
    assert proc.returncode == 0, f"ngspice exited with {proc.returncode}:\n{log[-3000:]}"
    written = workdir / "vectors.txt"
    assert written.is_file(), f"ngspice wrote no vectors:\n{log[-3000:]}"
    rows = written.read_text(encoding="utf-8").splitlines()[1:]
    table = [tuple(float(cell) for cell in row.split()) for row in rows if row.strip()]
    columns = list(zip(*table, strict=True))
    # wr_singlescale: column 0 is time, then one column per requested vector
    return Waves(log, columns[0], {name: columns[i + 1] for i, name in enumerate(vectors)})
