"""Waveform files for the HTML report (testbench/waveform.py) and the index DIR/testbench.json.

The raw-file reader is held to the ASCII raw format as ngspice 39 writes it (the header
lines, then each point's index and time followed by one value a line), both on a file
written by hand and on one ngspice writes; the thinning keeps every extreme; a run's
files are the same bytes when run again.
"""

from __future__ import annotations

import json
import os
from pathlib import Path

import pytest
from testbench_support import EXAMPLES, NGSPICE, build, needs_ngspice

from drivelint.testbench.command import records_json
from drivelint.testbench.measure import Trace, voltage_trace
from drivelint.testbench.waveform import (
    MAX_POINTS,
    RawError,
    read_ascii_raw,
    series_of,
    thinned,
    waveform_text,
)

RAW = """Title: a hand-written raw file
Date: Thu Jan  1 00:00:00  2026
Plotname: Transient Analysis
Flags: real
No. Variables: 3
No. Points: 3
Variables:
\t0\ttime\ttime
\t1\tv(boot)\tvoltage
\t2\tv(sw)\tvoltage
Values:
0\t\t0.000000000000000e+00
\t1.200000000000000e+01
\t0.000000000000000e+00
1\t\t1.000000000000000e-06
\t5.800000000000000e+01
\t4.800000000000000e+01
2\t\t2.000000000000000e-06
\t5.750000000000000e+01
\t4.800000000000000e+01
"""


def test_reads_an_ascii_raw_file(tmp_path: Path) -> None:
    raw = tmp_path / "x.raw"
    raw.write_text(RAW, encoding="ascii")
    vectors = read_ascii_raw(raw, {"time", "v(boot)", "v(sw)"}, 1 << 20)
    assert vectors["time"] == (0.0, 1e-6, 2e-6)
    boot = voltage_trace("boot", "sw", "V(boot)-V(sw)")
    assert series_of([boot], vectors) == {"V(boot)-V(sw)": [12.0, 10.0, 9.5]}
    current = Trace("I", "A", "v(sw)", scale=-1.0)
    assert series_of([current], vectors)["I"] == [-0.0, -48.0, -48.0]
    with pytest.raises(RawError, match="lacks"):
        read_ascii_raw(raw, {"time", "v(gate)"}, 1 << 20)
    with pytest.raises(RawError, match="larger"):
        read_ascii_raw(raw, {"time"}, 10)


def test_reads_what_ngspice_writes(tmp_path: Path) -> None:
    needs_ngspice()
    import subprocess

    deck = tmp_path / "rc.cir"
    deck.write_text(
        "rc\nV1 a 0 PULSE(0 10 0 1u 1u 1 2)\nR1 a b 1k\nC1 b 0 1n\n.save v(a) v(b)\n"
        ".tran 10n 5u\n.end\n",
        encoding="utf-8",
    )
    raw = tmp_path / "rc.raw"
    subprocess.run(
        [str(NGSPICE), "-b", "-r", str(raw), deck.name],
        cwd=tmp_path,
        env={**os.environ, "SPICE_ASCIIRAWFILE": "1"},
        capture_output=True,
        check=True,
        timeout=60,
    )
    vectors = read_ascii_raw(raw, {"time", "v(a)", "v(b)"}, 1 << 24)
    assert vectors["time"][0] == 0 and vectors["time"][-1] == pytest.approx(5e-6)
    # an RC charging: 1 us ramp, then 10 V·(1 − e^(−t/τ)) toward 10 V, τ = 1 us
    assert vectors["v(a)"][-1] == pytest.approx(10.0)
    assert 9.0 < vectors["v(b)"][-1] < 10.0


def test_thinning_keeps_every_extreme_and_is_bounded() -> None:
    count = 50_000
    time = [i * 1e-9 for i in range(count)]
    values = [((i * 7919) % 1000) / 1000.0 for i in range(count)]
    values[12_345] = 5.0  # a spike
    values[40_000] = -5.0  # a dip
    keep = thinned(time, values)
    assert len(keep) <= MAX_POINTS and keep == sorted(set(keep))
    assert {0, count - 1, 12_345, 40_000} <= set(keep)
    assert keep == thinned(time, values)  # deterministic
    short = thinned(time[:100], values[:100])
    assert short == list(range(100))


def test_the_file_format(tmp_path: Path) -> None:
    raw = tmp_path / "x.raw"
    raw.write_text(RAW, encoding="ascii")
    vectors = read_ascii_raw(raw, {"time", "v(boot)", "v(sw)"}, 1 << 20)
    text = waveform_text([voltage_trace("boot", "sw", "V(boot)-V(sw)")], vectors, "v_boot")
    payload = json.loads(text)
    assert set(payload) == {"time", "series", "units", "claim"}
    assert payload["claim"] == "v_boot" and payload["units"] == {"V(boot)-V(sw)": "V"}
    assert payload["time"] == [0.0, 1e-06, 2e-06]
    assert payload["series"]["V(boot)-V(sw)"] == [12.0, 10.0, 9.5]


@pytest.fixture(scope="module")
def runs(tmp_path_factory: pytest.TempPathFactory) -> tuple[Path, Path, object]:
    if NGSPICE is None:
        pytest.skip("ngspice is not installed (Debian package 'ngspice'); cannot simulate")
    netlist = [EXAMPLES / "loadswitch24v_dc_enable.cir"]
    first, second = tmp_path_factory.mktemp("one"), tmp_path_factory.mktemp("two")
    outcome = build(netlist, first, run=True)
    build(netlist, second, run=True)
    return first, second, outcome


def test_a_run_writes_the_waveforms_and_the_index(runs: tuple[Path, Path, object]) -> None:
    first, _, outcome = runs
    index = json.loads((first / "testbench.json").read_text(encoding="utf-8"))
    assert (first / "testbench.json").read_text(encoding="utf-8") == records_json(outcome)  # type: ignore[arg-type]
    assert [r["rule"] for r in index] == ["dc-hold", "gate-overvoltage"]
    for record in index:
        path = first / record["waveform"]
        assert path.name == Path(record["deck"]).name.replace(".cir", ".wave.json")
        payload = json.loads(path.read_text(encoding="utf-8"))
        assert set(payload) == {"time", "series", "units", "claim"}
        assert (
            payload["claim"] == next(iter(sorted(record["claims"])), None)
            or payload["claim"] in record["claims"]
        )
        assert 10 < len(payload["time"]) <= MAX_POINTS
        assert all(len(v) == len(payload["time"]) for v in payload["series"].values())
    # the V_GS the negative finding claims is in its waveform: thinning keeps the lowest
    negative = next(r for r in index if r["rule"] == "gate-overvoltage")
    payload = json.loads((first / negative["waveform"]).read_text(encoding="utf-8"))
    measured = negative["measured"]["vgs_max_negative"]["measured"]
    assert min(payload["series"]["V_GS"]) == pytest.approx(measured, rel=1e-3)


def test_a_run_gives_the_same_bytes_again(runs: tuple[Path, Path, object]) -> None:
    first, second, _ = runs

    def files(root: Path) -> dict[str, bytes]:
        return {
            str(p.relative_to(root)): p.read_bytes()
            for p in sorted(root.rglob("*"))
            if p.is_file() and p.name.endswith(".wave.json")
        }

    assert files(first) and files(first) == files(second)
