"""Whole-`check` benchmark on generated inverters: time, growth and peak memory, against ngspice.

    python bench/bench_check.py [--million] [--runs N]

For decks of 10k and 100k flattened devices (``generate.generate_elements``: half-bridge
legs of one totem subcircuit) it times a whole ``drivelint check --no-cache`` in a fresh
process (reading, elaboration, recognition, every rule, the text report) and reads the
child's peak resident set (``ru_maxrss`` from ``wait4``), then times
``ngspice -b`` loading the same file. With ``--million`` the 1M deck is added (it takes
minutes and about a gigabyte). Targets: check(100k) <= 2 x ngspice's load of it; growth
10k -> 100k and 100k -> 1M <= 11 x; peak memory at 1M under 2 GB. The two programs run
alternately, best of ``--runs`` each, so load from other work on the machine falls on both.
"""

from __future__ import annotations

import argparse
import os
import shutil
import subprocess
import sys
import tempfile
import time
from pathlib import Path

BENCH = Path(__file__).resolve().parent
if str(BENCH) not in sys.path:
    sys.path.insert(0, str(BENCH))

from generate import generate_elements, write_netlist  # noqa: E402

TARGET_NGSPICE = 2.0
TARGET_GROWTH = 11.0
TARGET_PEAK_MB = 2048.0


def run_child(command: list[str], cwd: Path) -> tuple[float, float, str]:
    """(wall seconds, peak resident MB, output) of one child process."""
    start = time.perf_counter()
    process = subprocess.Popen(
        command, cwd=cwd, stdout=subprocess.PIPE, stderr=subprocess.STDOUT, text=True
    )
    assert process.stdout is not None
    output = process.stdout.read()
    _, status, usage = os.wait4(process.pid, 0)
    process.returncode = os.waitstatus_to_exitcode(status)
    elapsed = time.perf_counter() - start
    return elapsed, usage.ru_maxrss / 1024, output


def check_once(deck: Path) -> tuple[float, float]:
    command = [sys.executable, "-m", "drivelint", "check", "--no-cache", "--jobs", "1", str(deck)]
    seconds, megabytes, output = run_child(command, deck.parent)
    if "floating stage" not in output:
        raise RuntimeError(f"drivelint did not check {deck.name}:\n{output[-2000:]}")
    return seconds, megabytes


def ngspice_once(ngspice: str, deck: Path) -> float:
    seconds, _, output = run_child([ngspice, "-b", str(deck)], deck.parent)
    # Batch mode exits 1 when no analysis ran; the output says whether the deck loaded.
    if "Circuit:" not in output or "error" in output.lower():
        raise RuntimeError(f"ngspice did not load {deck.name} cleanly:\n{output[-2000:]}")
    return seconds


def main() -> int:
    parser = argparse.ArgumentParser(description=__doc__.splitlines()[0])
    parser.add_argument("--million", action="store_true", help="add the 1M-device deck")
    parser.add_argument("--runs", type=int, default=3, help="best of this many (1 at 1M)")
    args = parser.parse_args()
    sizes = (10_000, 100_000, 1_000_000) if args.million else (10_000, 100_000)
    ngspice = shutil.which("ngspice")
    check: dict[int, float] = {}
    peak: dict[int, float] = {}
    spice: dict[int, float] = {}
    with tempfile.TemporaryDirectory(prefix="drivelint-bench-") as name:
        folder = Path(name)
        for size in sizes:
            deck = write_netlist(folder, generate_elements(size), f"inverter_{size}.cir").path
            runs = 1 if size >= 1_000_000 else args.runs
            check[size], peak[size] = float("inf"), 0.0
            for _ in range(runs):
                seconds, megabytes = check_once(deck)
                check[size] = min(check[size], seconds)
                peak[size] = max(peak[size], megabytes)
                if ngspice and size <= 100_000:
                    spice[size] = min(spice.get(size, float("inf")), ngspice_once(ngspice, deck))
            load = f", ngspice load {spice[size]:.2f} s" if size in spice else ""
            print(f"{size:>9} devices: check {check[size]:.2f} s, peak {peak[size]:.0f} MB{load}")
    print("\ntargets")
    misses = 0

    def line(label: str, value: float, target: str, ok: bool) -> None:
        nonlocal misses
        misses += not ok
        print(f"  {label:<40} {value:>8.2f}  {target:<10} {'PASS' if ok else 'MISS'}")

    if 100_000 in spice:
        ratio = check[100_000] / spice[100_000]
        line("check(100k) / ngspice load(100k)", ratio, f"<= {TARGET_NGSPICE:g}", ratio <= 2)
    else:
        print("  check / ngspice load: skipped (ngspice not on PATH)")
    for small, large in zip(sizes, sizes[1:]):
        growth = check[large] / check[small]
        label = f"check time {large // 1000}k / {small // 1000}k"
        line(label, growth, f"<= {TARGET_GROWTH:g}", growth <= TARGET_GROWTH)
    top = sizes[-1]
    line(
        f"peak memory at {top // 1000}k (MB)", peak[top], f"< {TARGET_PEAK_MB:g}", peak[top] < 2048
    )
    if not args.million:
        print("  (1M deck: run with --million)")
    return 1 if misses else 0


if __name__ == "__main__":
    raise SystemExit(main())
