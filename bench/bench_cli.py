"""Command-line benchmarks: cold start, batch throughput, warm-cache re-scan.

    python bench/bench_cli.py [--files N]

(a) cold start: median wall time of `drivelint check` on one example against
    `python -c "import click, lark, networkx"` (the imports it cannot avoid), same
    machine, as a ratio (target <= 1.0: no slower than those imports);
(b) batch throughput: files per second on N example-sized netlists (default 1,000) with
    --jobs 1 and --jobs 2, no cache (targets: jobs 2 >= 1.7 x jobs 1; >= 200 files/s);
(c) warm cache: a re-scan of the same files as a fraction of the cold scan (target <= 10 %).

Every child runs with its compiled bytecode cached (a private PYTHONPYCACHEPREFIX in the
scratch folder, filled by each command's first run), as from an installed package (pip
compiles it at install). With PYTHONDONTWRITEBYTECODE set, drivelint would compile its
own modules from source on every start while the libraries of the baseline load theirs
from the installed bytecode; that figure is printed too, as information.
"""

from __future__ import annotations

import argparse
import os
import shutil
import statistics
import subprocess
import sys
import tempfile
import time
from pathlib import Path

ROOT = Path(__file__).resolve().parent.parent
EXAMPLE = ROOT / "examples" / "lev48_phase_leg_npn_shifter.cir"
DRIVELINT = [sys.executable, "-m", "drivelint"]


def wall(command: list[str], env: dict[str, str] | None = None, cwd: Path | None = None) -> float:
    start = time.perf_counter()
    subprocess.run(command, env=env, cwd=cwd, stdout=subprocess.DEVNULL, stderr=subprocess.DEVNULL)
    return time.perf_counter() - start


def library(folder: Path, count: int) -> None:
    sources = sorted((ROOT / "examples").glob("*.cir"))
    for index in range(count):
        text = sources[index % len(sources)].read_text()
        # Each file distinct, so no two share a cache entry.
        (folder / f"design_{index:04d}.cir").write_text(text + f"* copy {index}\n")
    shutil.copy(ROOT / "examples" / "parts.toml", folder / "parts.toml")


def main() -> int:
    parser = argparse.ArgumentParser()
    parser.add_argument("--files", type=int, default=1000)
    parser.add_argument("--runs", type=int, default=15)
    args = parser.parse_args()
    results: list[tuple[str, float, str, bool | None]] = []

    with tempfile.TemporaryDirectory() as name:
        scratch = Path(name)
        env = {
            **{k: v for k, v in os.environ.items() if k != "PYTHONDONTWRITEBYTECODE"},
            "XDG_CACHE_HOME": str(scratch / "cache"),
            "PYTHONPYCACHEPREFIX": str(scratch / "bytecode"),
        }
        imports = [sys.executable, "-c", "import click, lark, networkx"]
        single_command = [*DRIVELINT, "check", "--no-cache", str(EXAMPLE)]
        source_env = {**env, "PYTHONDONTWRITEBYTECODE": "1"}
        source_env.pop("PYTHONPYCACHEPREFIX")
        # the two alternate, so load from other work falls on both alike
        base_runs: list[float] = []
        single_runs: list[float] = []
        source_runs: list[float] = []
        wall(imports, env)
        wall(single_command, env)  # fills the bytecode cache
        for _ in range(args.runs):
            base_runs.append(wall(imports, env))
            single_runs.append(wall(single_command, env))
            source_runs.append(wall(single_command, source_env))
        baseline = statistics.median(base_runs)
        single = statistics.median(single_runs)
        from_source = statistics.median(source_runs)
        ratio = single / baseline
        print(
            f"cold start: drivelint check {single * 1000:.0f} ms, imports {baseline * 1000:.0f} ms"
            f" (drivelint compiled from source each start: {from_source * 1000:.0f} ms,"
            f" {from_source / baseline:.2f}x)"
        )
        # the target the scale issue sets: no slower than the bare imports
        results.append(("cold start ratio", ratio, "<= 1.0", ratio <= 1.0))

        folder = scratch / "lib"
        folder.mkdir()
        library(folder, args.files)
        one = wall([*DRIVELINT, "check", "--no-cache", "--jobs", "1", str(folder)], env)
        two = wall([*DRIVELINT, "check", "--no-cache", "--jobs", "2", str(folder)], env)
        rate_one, rate_two = args.files / one, args.files / two
        print(f"batch: --jobs 1 {rate_one:.0f} files/s, --jobs 2 {rate_two:.0f} files/s")
        results.append(
            (
                "jobs 2 / jobs 1 throughput",
                rate_two / rate_one,
                ">= 1.7",
                rate_two / rate_one >= 1.7,
            )
        )
        results.append(("files/s with 2 jobs", rate_two, ">= 200", rate_two >= 200))

        cold = wall([*DRIVELINT, "check", "--jobs", "2", str(folder)], env)
        warm = wall([*DRIVELINT, "check", "--jobs", "2", str(folder)], env)
        print(f"cache: cold scan {cold:.2f} s, warm re-scan {warm:.2f} s")
        results.append(("warm / cold scan", warm / cold, "<= 0.10", warm / cold <= 0.10))

    print()
    for label, value, target, ok in results:
        verdict = "PASS" if ok else "MISS"
        print(f"  {label:<32} {value:>8.2f}  {target:<8} {verdict}")
    return 0 if all(ok for *_, ok in results) else 1


if __name__ == "__main__":
    raise SystemExit(main())
