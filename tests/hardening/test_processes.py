"""Ctrl-C and a killed parent: real processes, real signals.

Guards: SIGINT exited 1 (the findings code) instead of 130; SIGKILL of the parent left its
worker processes running as orphans.
"""

from __future__ import annotations

import os
import signal
import subprocess
import sys
import time
from pathlib import Path

import pytest

pytestmark = pytest.mark.skipif(
    not sys.platform.startswith("linux"), reason="reads process parents from /proc"
)

LEG = """XL{n} vbus sw{n} g{n} LEG
V{n} g{n} 0 PULSE(0 5 0 10n 10n 2u 5u)
R{n} sw{n} 0 10
"""
SUBCKT = """.subckt LEG d s g
M1 d g s s NFET_A
C1 d s 1n
R1 g s 10k
.ends LEG
.model NFET_A NMOS (VTO=3 KP=20)
"""


def slow_library(folder: Path, files: int = 24, legs: int = 3000) -> None:
    """Files that each take a noticeable time to check, so the run is caught mid-way."""
    folder.mkdir()
    (folder / "drivelint.toml").write_text("")
    body = "".join(LEG.format(n=n) for n in range(legs))
    for index in range(files):
        text = f"slow {index}\nVBUS vbus 0 DC 48\n{SUBCKT}{body}.end\n"
        (folder / f"slow_{index:02d}.cir").write_text(text)


def children(pid: int) -> set[int]:
    found = set()
    for entry in Path("/proc").iterdir():
        if not entry.name.isdigit():
            continue
        try:
            fields = (entry / "stat").read_text().rsplit(")", 1)[1].split()
        except OSError:
            continue
        if int(fields[1]) == pid:
            found.add(int(entry.name))
    return found


def alive(pid: int) -> bool:
    try:
        state = (Path("/proc") / str(pid) / "stat").read_text().rsplit(")", 1)[1].split()[0]
    except OSError:
        return False
    return state != "Z"


def start(folder: Path, tmp_path: Path) -> tuple[subprocess.Popen[bytes], set[int]]:
    env = {**os.environ, "XDG_CACHE_HOME": str(tmp_path / "cache")}
    process = subprocess.Popen(
        [sys.executable, "-m", "drivelint", "check", "--jobs", "2", "--no-cache", str(folder)],
        stdout=subprocess.DEVNULL,
        stderr=subprocess.PIPE,
        env=env,
    )
    deadline = time.monotonic() + 30
    workers: set[int] = set()
    while time.monotonic() < deadline and len(workers) < 2:
        time.sleep(0.1)
        workers = children(process.pid)
        assert process.poll() is None, "finished before the workers started"
    assert len(workers) >= 2, "the pool never started"
    time.sleep(0.5)  # the workers are busy now
    return process, workers


def wait_gone(pids: set[int], seconds: float) -> set[int]:
    deadline = time.monotonic() + seconds
    while time.monotonic() < deadline:
        left = {p for p in pids if alive(p)}
        if not left:
            return left
        time.sleep(0.1)
    return {p for p in pids if alive(p)}


def test_ctrl_c_exits_130_and_takes_the_workers_down(tmp_path: Path) -> None:
    folder = tmp_path / "lib"
    slow_library(folder)
    process, workers = start(folder, tmp_path)
    process.send_signal(signal.SIGINT)
    _, err = process.communicate(timeout=30)
    assert process.returncode == 130, err.decode(errors="replace")[-2000:]
    assert b"interrupted" in err and b"Traceback" not in err
    assert wait_gone(workers, 10) == set()


def test_workers_do_not_outlive_a_killed_parent(tmp_path: Path) -> None:
    folder = tmp_path / "lib"
    slow_library(folder)
    process, workers = start(folder, tmp_path)
    process.kill()
    process.wait(timeout=30)
    left = wait_gone(workers, 10)
    for pid in left:  # do not leave them behind whatever happens
        os.kill(pid, signal.SIGKILL)
    assert left == set()


def test_jobs_are_capped(monkeypatch: pytest.MonkeyPatch, tmp_path: Path) -> None:
    """--jobs 100000 asked for a pool of that many processes."""
    import multiprocessing

    from drivelint import batch

    asked: list[int] = []
    real = multiprocessing.Pool

    def pool(processes: int, *args: object) -> object:
        asked.append(processes)
        return real(min(processes, 2), *args)  # type: ignore[arg-type]

    monkeypatch.setattr(multiprocessing, "Pool", pool)
    folder = tmp_path / "lib"
    folder.mkdir()
    for index in range(3):
        (folder / f"d{index}.cir").write_text(f"d{index}\nR1 a 0 1k\nV1 a 0 DC 5\n.end\n")
    options = batch.BatchOptions(jobs=100_000)
    results, _ = batch.run_batch(batch.plan(sorted(folder.glob("*.cir")), options), options)
    assert asked == [3] and len(results) == 3
