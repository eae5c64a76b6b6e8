"""Stage-recognition benchmark: time per stage, and whether it grows with the netlist.

    python bench/bench_stages.py

Recognition searches outward from each switch a bounded number of devices, so the time
for 1,000 half-bridge legs should be about ten times that for 100 (target <= 11). Two
shapes are timed: legs of one switch-totem subcircuit, and legs with their own driver IC
on shared command and supply nets (where a search that crosses a shared net, or tries
every driver, grows with the square of the size).
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

from generate import generate, generate_driver_legs, write_netlist  # noqa: E402

from drivelint.circuit.model import Circuit  # noqa: E402
from drivelint.pipeline import LoadOptions, load_circuit  # noqa: E402
from drivelint.stages.recognise import recognise  # noqa: E402

TARGET_RATIO = 11.0


SHAPES = {"totem legs": generate, "driver-IC legs, shared nets": generate_driver_legs}


def load(shape: str, legs: int, folder: Path) -> Circuit:
    deck = write_netlist(folder, SHAPES[shape](legs), f"legs{legs}_{len(shape)}.cir")
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


def time_recognition(shape: str, repeats: int = 5) -> dict[int, float]:
    """Best of ``repeats`` for each size, the sizes interleaved so load on the machine
    falls on both alike."""
    with tempfile.TemporaryDirectory() as name:
        folder = Path(name)
        circuits = {legs: load(shape, legs, folder) for legs in (100, 1000)}
    best = {legs: float("inf") for legs in circuits}
    for _ in range(repeats):
        for legs, circuit in circuits.items():
            best[legs] = min(best[legs], time_once(circuit, legs))
    return best


def main() -> int:
    missed = 0
    print("shape                        legs  recognise s  per stage")
    for shape in SHAPES:
        best = time_recognition(shape)
        for legs, seconds in sorted(best.items()):
            print(f"{shape:<27}  {legs:>4}  {seconds:>11.3f}  {seconds / legs * 1e6:>7.0f} us")
        ratio = best[1000] / best[100]
        verdict = "PASS" if ratio <= TARGET_RATIO else "MISS"
        missed += verdict == "MISS"
        print(
            f"  {shape}: time(1,000)/time(100) = {ratio:.2f}"
            f"  (target <= {TARGET_RATIO:g})  {verdict}"
        )
    return 1 if missed else 0


if __name__ == "__main__":
    raise SystemExit(main())
