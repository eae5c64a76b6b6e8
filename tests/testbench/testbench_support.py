"""Shared support for the testbench tests: building decks for a set of netlists."""

from __future__ import annotations

import shutil
from collections.abc import Iterable
from pathlib import Path

import pytest

from drivelint.batch import BatchOptions, plan
from drivelint.pipeline import collect_paths
from drivelint.testbench.command import BenchOptions, Outcome, Record, make_testbenches

ROOT = Path(__file__).resolve().parents[2]
EXAMPLES = ROOT / "examples"
DECKS = Path(__file__).resolve().parent / "decks"
NGSPICE = shutil.which("ngspice")
NO_NGSPICE = "ngspice is not installed (Debian package 'ngspice'); cannot simulate"


def build(sources: Iterable[Path], output: Path, run: bool = False) -> Outcome:
    """What ``drivelint testbench SOURCES --output OUTPUT [--run]`` does, in process."""
    sources = tuple(sources)
    jobs = plan(collect_paths(sources), BatchOptions(scan_roots=sources))
    return make_testbenches(jobs, BenchOptions(output=output, run=run, jobs=2))


def needs_ngspice() -> None:
    if NGSPICE is None:
        pytest.skip(NO_NGSPICE)


def record_of(built: Outcome, netlist: str, rule: str, device: str | None = None) -> Record:
    """The one record of ``rule``'s finding in ``netlist`` (on ``device``, where given),
    which must have a deck."""
    (record,) = [
        r
        for r in built.records
        if r.finding.span.path.endswith(netlist)
        and r.finding.rule == rule
        and (device is None or r.finding.device == device)
    ]
    assert record.deck is not None, record.reason
    return record
