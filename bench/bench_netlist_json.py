"""Peak memory of ``drivelint netlist --format json`` against the circuit's own:
``python bench/bench_netlist_json.py [--elements N]``.

On one generated deck (default 100k flattened devices, see ``generate.py``) each of these
runs in a child process of its own, and its peak resident memory is read from that child
alone (a fresh wrapper process waits for it and reports ``RUSAGE_CHILDREN.ru_maxrss``, the
largest of its children, of which it has one):

- ``imports``: the interpreter with drivelint's reading modules imported, nothing read;
- ``circuit``: the deck loaded (``load_circuit``), nothing written: the circuit's own;
- ``netlist --format json``: the command, streaming its output to /dev/null;
- ``whole payload``: the same output built as one dict and one string first, as the
  command did before it streamed (``json.dumps(netlist_json(circuit), indent=2)``);
- ``check``: ``drivelint check --no-cache`` on the deck.

Printed side by side: each peak, and its ratio to the circuit's (target for the command:
<= 1.1, "no more than the circuit's own"), also with the imports' memory taken off both.
"""

from __future__ import annotations

import argparse
import json
import subprocess
import sys
import tempfile
from pathlib import Path

BENCH = Path(__file__).resolve().parent
ROOT = BENCH.parent
for _folder in (ROOT, BENCH):
    if str(_folder) not in sys.path:
        sys.path.insert(0, str(_folder))

from generate import generate_elements, write_netlist  # noqa: E402

TARGET_RATIO = 1.1

# A wrapper whose only child is the command: its RUSAGE_CHILDREN peak is that child's.
_WRAPPER = """
import resource, subprocess, sys
done = subprocess.run(sys.argv[1:], stdout=subprocess.DEVNULL, stderr=subprocess.DEVNULL)
print(resource.getrusage(resource.RUSAGE_CHILDREN).ru_maxrss, done.returncode)
"""

_IMPORTS = "import drivelint.pipeline, drivelint.report.netlist, json"
_CIRCUIT = (
    "import sys; from pathlib import Path; from drivelint.pipeline import load_circuit; "
    "c = load_circuit(Path(sys.argv[1])); print(len(c.devices))"
)
_WHOLE = (
    "import json, sys; from pathlib import Path; from drivelint.pipeline import load_circuit; "
    "from drivelint.report.netlist import netlist_json; "
    "c = load_circuit(Path(sys.argv[1])); "
    "sys.stdout.write(json.dumps(netlist_json(c), indent=2, sort_keys=False) + '\\n')"
)


def peak_mb(command: list[str], cwd: Path) -> tuple[float, int]:
    """Peak resident memory of ``command`` (MB) and its exit code."""
    out = subprocess.run(
        [sys.executable, "-c", _WRAPPER, *command],
        cwd=cwd,
        capture_output=True,
        text=True,
        check=True,
    )
    kib, code = out.stdout.split()
    return int(kib) / 1024, int(code)


def main() -> int:
    parser = argparse.ArgumentParser()
    parser.add_argument("--elements", type=int, default=100_000)
    args = parser.parse_args()
    python = sys.executable
    with tempfile.TemporaryDirectory() as name:
        folder = Path(name)
        deck = write_netlist(folder, generate_elements(args.elements), "bench.cir")
        path = str(deck.path)
        runs = {
            "imports": [python, "-c", _IMPORTS],
            "circuit": [python, "-c", _CIRCUIT, path],
            "netlist --format json": [
                python,
                "-m",
                "drivelint",
                "netlist",
                "--format",
                "json",
                path,
            ],
            "whole payload": [python, "-c", _WHOLE, path],
            "check": [python, "-m", "drivelint", "check", "--no-cache", path],
        }
        peaks = {label: peak_mb(command, folder) for label, command in runs.items()}
        # The streamed output is still what the whole payload gives (on a smaller deck).
        small = write_netlist(folder, generate_elements(2_000), "small.cir")
        streamed = subprocess.run(
            [python, "-m", "drivelint", "netlist", "--format", "json", str(small.path)],
            capture_output=True,
        ).stdout
        whole = subprocess.run([python, "-c", _WHOLE, str(small.path)], capture_output=True).stdout
    base = peaks["imports"][0]
    circuit = peaks["circuit"][0]
    print(f"deck: {deck.elements} flattened devices, {deck.size_bytes / 1e6:.1f} MB of text")
    print(f"{'run':<24} {'peak MB':>9} {'/ circuit':>10} {'(less imports)':>15}  exit")
    for label, (megabytes, code) in peaks.items():
        ratio = megabytes / circuit
        less = (megabytes - base) / (circuit - base) if circuit > base else float("nan")
        print(f"{label:<24} {megabytes:9.1f} {ratio:10.2f} {less:15.2f}  {code}")
    command = peaks["netlist --format json"][0]
    ok = command / circuit <= TARGET_RATIO
    same = streamed == whole and bool(json.loads(streamed))
    print(
        f"netlist --format json / circuit: {command / circuit:.2f} "
        f"(target <= {TARGET_RATIO}): {'ok' if ok else 'MISSED'}; "
        f"streamed bytes equal the whole payload's: {same}"
    )
    return 0 if ok and same else 1


if __name__ == "__main__":
    sys.exit(main())
