"""Stage-recognition benchmark: time per stage, and whether it grows with the netlist.

    python bench/bench_stages.py

Recognition searches outward from each switch a bounded number of devices, so the time
for 1,000 half-bridge legs should be about ten times that for 100 (target <= 11).
Reading and elaboration are excluded; the circuit graph is built inside the timing,
because recognition builds it.
"""

from __future__ import annotations

import sys
import tempfile
import time
from pathlib import Path

sys.path.insert(0, str(Path(__file__).resolve().parent))
sys.path.insert(0, str(Path(__file__).resolve().parent.parent))

from generate import generate, write_netlist  # noqa: E402

from drivelint.circuit.model import Circuit  # noqa: E402
from drivelint.pipeline import LoadOptions, load_circuit  # noqa: E402
from drivelint.stages.recognise import recognise  # noqa: E402

TARGET_RATIO = 11.0


def load(legs: int, folder: Path) -> Circuit:
    deck = write_netlist(folder, generate(legs), f"legs{legs}.cir")
    circuit = load_circuit(deck.path, LoadOptions(root=folder))
    assert not [d for d in circuit.diagnostics if d.severity.label == "error"]
    return circuit


def time_once(circuit: Circuit, legs: int) -> float:
    start = time.perf_counter()
    stages = recognise(circuit)
    elapsed = time.perf_counter() - start
    floating = sum(1 for s in stages if s.floating)
    assert floating == legs, f"{legs} legs, {floating} floating stages recognised"
    return elapsed


def time_recognition(repeats: int = 7) -> dict[int, float]:
    """Best of ``repeats`` for each size, the sizes interleaved so load on the machine
    falls on both alike."""
    with tempfile.TemporaryDirectory() as name:
        folder = Path(name)
        circuits = {legs: load(legs, folder) for legs in (100, 1000)}
    best = {legs: float("inf") for legs in circuits}
    for _ in range(repeats):
        for legs, circuit in circuits.items():
            best[legs] = min(best[legs], time_once(circuit, legs))
    return best


def main() -> int:
    best = time_recognition()
    (n_small, small), (n_large, large) = sorted(best.items())
    ratio = large / small
    print("legs  floating stages  recognise s  per stage")
    print(f"{100:>4}  {n_small:>15}  {small:>11.3f}  {small / n_small * 1e6:>7.0f} us")
    print(f"{1000:>4}  {n_large:>15}  {large:>11.3f}  {large / n_large * 1e6:>7.0f} us")
    verdict = "PASS" if ratio <= TARGET_RATIO else "MISS"
    print(f"time(1,000 legs)/time(100 legs) = {ratio:.2f}  (target <= {TARGET_RATIO:g})  {verdict}")
    return 0 if verdict == "PASS" else 1


if __name__ == "__main__":
    raise SystemExit(main())
