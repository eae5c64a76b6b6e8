"""What sharding costs and what merging saves: ``python bench/bench_merge.py [--files N]``.

On a library of N example-sized netlists (default 1,000; see ``bench_cli.library``), each
run a fresh process, no cache, one job, measured side by side in this one run:

- ``check --format text`` and ``check --format json`` over the whole library: what writing
  the complete record (each file's whole result) costs, and its size per file;
- ``check --format html`` over the whole library, against ``merge`` of its 4 shards'
  JSON reports into HTML (the work left to the last job of a CI matrix), and whether the
  merged page is byte for byte the single run's;
- the 4 ``--shard I/4`` runs, summed, against the single run (what the slices add).
"""

from __future__ import annotations

import argparse
import os
import subprocess
import sys
import tempfile
import time
from pathlib import Path

BENCH = Path(__file__).resolve().parent
if str(BENCH) not in sys.path:
    sys.path.insert(0, str(BENCH))

from bench_cli import DRIVELINT, library  # noqa: E402

SHARDS = 4


def timed(arguments: list[str], cwd: Path, env: dict[str, str]) -> float:
    start = time.perf_counter()
    done = subprocess.run(
        [*DRIVELINT, *arguments],
        cwd=cwd,
        env=env,
        stdout=subprocess.DEVNULL,
        stderr=subprocess.DEVNULL,
    )
    assert done.returncode in (0, 1), (arguments, done.returncode)
    return time.perf_counter() - start


def main() -> int:
    parser = argparse.ArgumentParser()
    parser.add_argument("--files", type=int, default=1000)
    args = parser.parse_args()
    with tempfile.TemporaryDirectory() as name:
        here = Path(name)
        (here / "lib").mkdir()
        library(here / "lib", args.files)
        env = {**os.environ, "XDG_CACHE_HOME": str(here / "cache")}
        check = ["check", "--no-cache", "--jobs", "1"]
        text = timed([*check, "--format", "text", "--output", "whole.txt", "lib"], here, env)
        whole_json = timed([*check, "--format", "json", "--output", "whole.json", "lib"], here, env)
        html = timed([*check, "--format", "html", "--output", "whole.html", "lib"], here, env)
        shards = [
            timed(
                [
                    *check,
                    "--format",
                    "json",
                    "--shard",
                    f"{i}/{SHARDS}",
                    "--output",
                    f"s{i}.json",
                    "lib",
                ],
                here,
                env,
            )
            for i in range(1, SHARDS + 1)
        ]
        names = [f"s{i}.json" for i in range(1, SHARDS + 1)]
        merge = timed(["merge", *names, "--format", "html", "--output", "merged.html"], here, env)
        same = (here / "merged.html").read_bytes() == (here / "whole.html").read_bytes()
        size = (here / "whole.json").stat().st_size
    print(f"library: {args.files} netlists, no cache, --jobs 1, one process per run")
    print(f"check --format text            {text:7.2f} s")
    print(
        f"check --format json            {whole_json:7.2f} s   {whole_json / text:5.2f}x text;"
        f" {size / 1e6:.1f} MB, {size / args.files / 1e3:.1f} kB per file"
    )
    print(f"check --format html            {html:7.2f} s")
    print(
        f"{SHARDS} shards, json, summed        {sum(shards):7.2f} s   "
        f"{sum(shards) / whole_json:5.2f}x one json run; longest {max(shards):.2f} s"
    )
    print(
        f"merge {SHARDS} shards into html      {merge:7.2f} s   {merge / html:5.2f}x check html;"
        f" identical bytes: {same}"
    )
    return 0 if same else 1


if __name__ == "__main__":
    sys.exit(main())
