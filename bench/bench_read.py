"""Reading and elaboration benchmark: ``python bench/bench_read.py [--quick]``.

For decks of 1k, 10k and 100k flattened devices (see ``generate.py``) it times
``read_deck`` and ``elaborate`` separately, checks that time grows linearly, measures the
peak memory of loading the 100k deck in a child process, and compares with the time
ngspice takes to load the same file when ngspice is on PATH. ``--quick`` skips 100k.

Both steps run with the cyclic collector paused, as ``load_circuit`` runs them, so the
figures are those a user of the pipeline sees; the collection that follows when the
collector resumes is timed on its own and counted in the total. A future benchmark of
stage recognition can sit beside this one and share ``generate.py``.
"""

from __future__ import annotations

import argparse
import gc
import json
import resource
import shutil
import subprocess
import sys
import tempfile
import time
from collections.abc import Sequence
from dataclasses import dataclass
from pathlib import Path

BENCH = Path(__file__).resolve().parent
ROOT = BENCH.parent
# Run from a checkout without installing: the project and the sibling generator.
for _folder in (ROOT, BENCH):
    if str(_folder) not in sys.path:
        sys.path.insert(0, str(_folder))

from generate import WrittenNetlist, generate, generate_elements, write_netlist  # noqa: E402

from drivelint._gc import paused_gc  # noqa: E402
from drivelint.circuit.elaborate import ElaborateOptions, elaborate  # noqa: E402
from drivelint.circuit.model import Circuit  # noqa: E402
from drivelint.diagnostics import Severity  # noqa: E402
from drivelint.netlist.reader import ReadOptions, read_deck  # noqa: E402

SIZES = (1_000, 10_000, 100_000)
REPEATS = {1_000: 3, 10_000: 3, 100_000: 2}
NGSPICE_REPEATS = 3
TARGET_SCALING = 11.0  # time(100k)/time(10k): 10 is linear, a little slack for noise
TARGET_PEAK_MB = 500.0
TARGET_NGSPICE_RATIO = 10.0


@dataclass(frozen=True, slots=True)
class Timing:
    """Best times of one size, in seconds (each part's best over the repetitions)."""

    elements: int
    read: float
    elaborate: float
    resume: float  # the collection that runs when the paused collector is switched back on
    total: float  # best wall time of one whole repetition
    total_cpu: float  # best process CPU time of one whole repetition


@dataclass(frozen=True, slots=True)
class PeakMemory:
    megabytes: float
    devices: int
    errors: int


def clean_load_failures(circuit: Circuit, expected_devices: int) -> list[str]:
    """Why a generated deck did not load cleanly; empty when it did."""
    problems = [d.render() for d in circuit.diagnostics if d.severity >= Severity.ERROR][:5]
    if len(circuit.devices) != expected_devices:
        problems.append(
            f"{len(circuit.devices)} devices after flattening, {expected_devices} expected"
        )
    return problems


def time_load(deck: WrittenNetlist, repeats: int) -> Timing:
    """Best-of-``repeats`` read and elaborate times; asserts the deck loads cleanly.

    The collector is paused over both steps and resumed after them, as ``load_circuit``
    does; the first collection after resuming walks everything just built, so it is
    timed too and counted in the total.
    """
    read_options = ReadOptions(root=deck.path.parent)
    elaborate_options = ElaborateOptions()
    reads: list[float] = []
    elaborations: list[float] = []
    resumes: list[float] = []
    totals: list[float] = []
    cpu_totals: list[float] = []
    for _ in range(repeats):
        # Leftovers of the previous repetition must not be collected inside the timing.
        gc.collect()
        cpu_start = time.process_time()
        start = time.perf_counter()
        with paused_gc():
            statements = read_deck(deck.path, read_options)
            middle = time.perf_counter()
            circuit = elaborate(statements, elaborate_options)
            end = time.perf_counter()
        gc.collect(0)  # what the next allocation would trigger anyway
        resumed = time.perf_counter()
        cpu_totals.append(time.process_time() - cpu_start)
        reads.append(middle - start)
        elaborations.append(end - middle)
        resumes.append(resumed - end)
        totals.append(resumed - start)
        problems = clean_load_failures(circuit, deck.elements)
        assert not problems, f"{deck.path.name} did not load cleanly:\n" + "\n".join(problems)
        del statements, circuit
    return Timing(
        deck.elements, min(reads), min(elaborations), min(resumes), min(totals), min(cpu_totals)
    )


def load_once(path: Path) -> None:
    """Child-process side of the memory measurement: load, then report what was loaded."""
    from drivelint.pipeline import LoadOptions, load_circuit

    circuit = load_circuit(path, LoadOptions(root=path.parent))
    errors = sum(1 for d in circuit.diagnostics if d.severity >= Severity.ERROR)
    print(json.dumps({"devices": len(circuit.devices), "errors": errors}))


def peak_memory(deck: WrittenNetlist) -> PeakMemory:
    """Peak resident set of a fresh interpreter loading ``deck`` through ``load_circuit``.

    Read from ``getrusage(RUSAGE_CHILDREN).ru_maxrss`` (KiB on Linux), which is the
    largest of all children waited for so far, so this runs before any other child. (It
    need not start at 0: the figure survives exec, so a launcher such as a version-manager
    shim that ran children of its own before exec'ing Python leaves a few MB in it.)
    """
    before = resource.getrusage(resource.RUSAGE_CHILDREN).ru_maxrss
    result = subprocess.run(
        [sys.executable, str(Path(__file__).resolve()), "--load-once", str(deck.path)],
        capture_output=True,
        text=True,
        check=True,
    )
    after = resource.getrusage(resource.RUSAGE_CHILDREN).ru_maxrss
    # Unchanged means an earlier child peaked higher and this one's peak is unknown.
    assert after > before, "peak memory must be measured before any larger child process"
    report = json.loads(result.stdout.strip().splitlines()[-1])
    return PeakMemory(after / 1024, int(report["devices"]), int(report["errors"]))


def ngspice_time(ngspice: str, path: Path, repeats: int) -> float:
    """Best wall time of ``ngspice -b`` loading ``path`` (the deck has no analysis card)."""
    best = float("inf")
    for _ in range(repeats):
        start = time.perf_counter()
        result = subprocess.run(
            [ngspice, "-b", str(path)], capture_output=True, text=True, cwd=path.parent
        )
        best = min(best, time.perf_counter() - start)
        # Batch mode exits 1 when no analysis ran, so the exit status says nothing here;
        # the output does. A deck ngspice rejected would be timed short and flatter us.
        output = result.stdout + result.stderr
        if "Circuit:" not in output or "error" in output.lower():
            raise RuntimeError(f"ngspice did not load {path.name} cleanly:\n{output[-2000:]}")
    return best


def status(passed: bool) -> str:
    return "PASS" if passed else "MISS"


def per_second(elements: int, seconds: float) -> str:
    return f"{elements / seconds / 1000:.1f}k"


@dataclass(frozen=True, slots=True)
class Results:
    decks: dict[int, WrittenNetlist]
    timings: dict[int, Timing]
    ngspice: dict[int, float]  # empty when ngspice is not on PATH
    ngspice_floor: float | None  # ngspice on a 2-leg deck: mostly its start-up
    memory: PeakMemory | None  # None with --quick


def measure(folder: Path, sizes: Sequence[int], with_memory: bool) -> Results:
    decks = {n: write_netlist(folder, generate_elements(n), f"deck_{n}.cir") for n in sizes}
    # First, before any other child process (see peak_memory).
    memory = peak_memory(decks[sizes[-1]]) if with_memory else None
    # Builds the line grammar and imports the lazily loaded modules, outside the timings.
    warm = write_netlist(folder, generate(2), "warm.cir")
    time_load(warm, 1)
    timings = {n: time_load(decks[n], REPEATS[n]) for n in sizes}
    ngspice = shutil.which("ngspice")
    spice: dict[int, float] = {}
    floor = None
    if ngspice:
        spice = {n: ngspice_time(ngspice, decks[n].path, NGSPICE_REPEATS) for n in sizes}
        floor = ngspice_time(ngspice, warm.path, NGSPICE_REPEATS)
    return Results(decks, timings, spice, floor, memory)


def print_table(results: Results) -> None:
    columns = [
        "elements",
        "legs",
        "file KB",
        "read s",
        "read el/s",
        "elab s",
        "elab el/s",
        "gc s",
        "total s",
        "total el/s",
        "cpu s",
    ]
    if results.ngspice:
        columns += ["ngspice s", "ratio"]
    rows = []
    for n, t in results.timings.items():
        row = [
            str(n),
            str(results.decks[n].legs),
            f"{results.decks[n].size_bytes / 1024:.0f}",
            f"{t.read:.3f}",
            per_second(n, t.read),
            f"{t.elaborate:.3f}",
            per_second(n, t.elaborate),
            f"{t.resume:.3f}",
            f"{t.total:.3f}",
            per_second(n, t.total),
            f"{t.total_cpu:.3f}",
        ]
        if results.ngspice:
            row += [f"{results.ngspice[n]:.3f}", f"{t.total / results.ngspice[n]:.2f}x"]
        rows.append(row)
    widths = [max(len(c), *(len(r[i]) for r in rows)) for i, c in enumerate(columns)]
    for line in (columns, *rows):
        print("  ".join(cell.rjust(width) for cell, width in zip(line, widths, strict=True)))


def print_targets(results: Results) -> int:
    """Print each target with PASS/MISS; return how many were missed."""
    misses = 0
    timings = results.timings

    def line(label: str, value: str, target: str, verdict: str) -> None:
        print(f"  {label:<46} {value:>10}  {target:<10} {verdict}")

    print("targets")
    line(
        "time(10k)/time(1k), read+elaborate, wall",
        f"{timings[10_000].total / timings[1_000].total:.2f}",
        "",
        "(information)",
    )
    if 100_000 in timings:
        wall = timings[100_000].total / timings[10_000].total
        cpu = timings[100_000].total_cpu / timings[10_000].total_cpu
        misses += wall > TARGET_SCALING
        line(
            "time(100k)/time(10k), read+elaborate, wall",
            f"{wall:.2f}",
            f"<= {TARGET_SCALING:g}",
            status(wall <= TARGET_SCALING),
        )
        line("time(100k)/time(10k), read+elaborate, CPU", f"{cpu:.2f}", "", "(information)")
    else:
        line("time(100k)/time(10k)", "skipped", "", "(--quick)")
    if results.memory is not None:
        megabytes = results.memory.megabytes
        misses += megabytes > TARGET_PEAK_MB
        line(
            "peak memory at 100k (child ru_maxrss)",
            f"{megabytes:.0f} MB",
            f"<= {TARGET_PEAK_MB:g} MB",
            status(megabytes <= TARGET_PEAK_MB),
        )
    else:
        line("peak memory at 100k", "skipped", "", "(--quick)")
    if results.ngspice:
        for n, seconds in results.ngspice.items():
            ratio = timings[n].total / seconds
            misses += ratio >= TARGET_NGSPICE_RATIO
            line(
                f"drivelint / ngspice load time, {n // 1000}k",
                f"{ratio:.2f}x",
                f"< {TARGET_NGSPICE_RATIO:g}x",
                status(ratio < TARGET_NGSPICE_RATIO),
            )
        line("(ngspice -b on a 2-leg deck: its start-up)", f"{results.ngspice_floor:.3f} s", "", "")
    else:
        line("drivelint / ngspice load time", "skipped", "", "(ngspice not on PATH)")
    return misses


def run(quick: bool) -> int:
    sizes = SIZES[:2] if quick else SIZES
    with tempfile.TemporaryDirectory(prefix="drivelint-bench-") as folder:
        results = measure(Path(folder), sizes, with_memory=not quick)
    print(
        f"drivelint read/elaborate benchmark (Python {sys.version.split()[0]}; best of "
        f"{REPEATS[1_000]}, {REPEATS[100_000]} at 100k; gc paused over read+elaborate as "
        "load_circuit does, 'gc s' is the collection when it resumes, counted in total)"
    )
    print()
    print_table(results)
    print()
    misses = print_targets(results)
    if results.memory is not None:
        memory = results.memory
        assert memory.errors == 0 and memory.devices == SIZES[-1], memory
    print(
        f"\nevery deck, {sizes[-1]} elements included, loaded with no error diagnostics "
        "and the expected device count"
    )
    return 1 if misses else 0


def main(argv: Sequence[str] | None = None) -> int:
    parser = argparse.ArgumentParser(description=__doc__.splitlines()[0])
    parser.add_argument("--quick", action="store_true", help="skip the 100k-element deck")
    # Internal: the child process of the peak-memory measurement.
    parser.add_argument("--load-once", type=Path, help=argparse.SUPPRESS)
    args = parser.parse_args(argv)
    if args.load_once is not None:
        load_once(args.load_once)
        return 0
    return run(args.quick)


if __name__ == "__main__":
    sys.exit(main())
