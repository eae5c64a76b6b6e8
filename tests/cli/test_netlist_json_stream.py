"""`drivelint netlist --format json` is written element by element, and its bytes are those
of ``json.dumps(payload, indent=2)`` of the whole payload (as the command wrote it before
it streamed): one deck as an object, several as ``{"decks": […]}``, none as an empty list."""

from __future__ import annotations

import json
import shutil
import sys
from collections.abc import Iterator
from pathlib import Path

import pytest
from click.testing import CliRunner

from drivelint.batch import BatchOptions, load_job, plan
from drivelint.circuit.model import Circuit
from drivelint.cli import main
from drivelint.pipeline import collect_paths
from drivelint.report.netlist import netlist_json, write_netlist_json

ROOT = Path(__file__).resolve().parents[2]
EXAMPLES = ROOT / "examples"
sys.path.insert(0, str(ROOT / "bench"))

from generate import generate_driver_legs, generate_elements  # noqa: E402


def whole(paths: list[Path]) -> str:
    """The output as one ``json.dumps`` of the whole payload."""
    options = BatchOptions(scan_roots=tuple(paths))
    circuits = [load_job(job, options) for job in plan(collect_paths(tuple(paths)), options)]
    payload = (
        netlist_json(circuits[0])
        if len(circuits) == 1
        else {"decks": [netlist_json(c) for c in circuits]}
    )
    return json.dumps(payload, indent=2, sort_keys=False) + "\n"


def streamed(*paths: Path) -> str:
    result = CliRunner().invoke(main, ["netlist", "--format", "json", *map(str, paths)])
    assert result.exception is None or isinstance(result.exception, SystemExit)
    return result.stdout


@pytest.fixture(scope="module")
def decks(tmp_path_factory: pytest.TempPathFactory) -> Path:
    folder = tmp_path_factory.mktemp("decks")
    shutil.copytree(EXAMPLES, folder / "lib")
    (folder / "lib" / "broken.cir").write_text("broken\nR1 a\nM1 d g s s nfet\n.end\n")
    (folder / "lib" / "partial.cir").write_text(
        "partial\n.include missing.lib\nX1 a b MISSING_SUB\nR1 a 0 1k\n.end\n"
    )
    (folder / "lib" / "empty.cir").write_text("only a title\n")
    (folder / "legs.cir").write_text(generate_elements(2_000).text)
    (folder / "drivers.cir").write_text(generate_driver_legs(40).text)
    (folder / "none").mkdir()
    (folder / "none" / "drivelint.toml").write_text("exclude = ['*.cir']\n")
    (folder / "none" / "skipped.cir").write_text("t\nR1 a 0 1\n.end\n")
    return folder


def test_every_deck_alone_is_byte_identical(decks: Path) -> None:
    singles = sorted((decks / "lib").glob("*.cir")) + [decks / "legs.cir", decks / "drivers.cir"]
    for path in singles:
        assert streamed(path) == whole([path]), path.name


def test_several_decks_and_none_are_byte_identical(decks: Path) -> None:
    assert streamed(decks / "lib") == whole([decks / "lib"])
    assert streamed(decks / "none") == whole([decks / "none"]) == '{\n  "decks": []\n}\n'


def test_output_is_written_in_pieces_no_larger_than_an_element(decks: Path) -> None:
    options = BatchOptions()
    (job,) = plan([decks / "legs.cir"], options)
    circuit = load_job(job, options)
    pieces: list[str] = []
    write_netlist_json(iter([circuit]), 1, pieces.append)
    text = "".join(pieces)
    assert text == json.dumps(netlist_json(circuit), indent=2) + "\n"
    assert len(circuit.devices) == 2_000
    # The largest piece is one device (or one small list), never the deck.
    assert max(len(p) for p in pieces) < 2_000
    assert len(pieces) > 2 * len(circuit.devices)


def test_decks_are_loaded_one_at_a_time(decks: Path) -> None:
    """Each deck is written before the next is read, so two are never held together."""
    options = BatchOptions()
    jobs = plan([decks / "legs.cir", decks / "drivers.cir"], options)
    events: list[str] = []

    def loaded() -> Iterator[Circuit]:
        for job in jobs:
            events.append(f"load {job.path.name}")
            yield load_job(job, options)

    def write(piece: str) -> None:
        if not events or events[-1] != "write":
            events.append("write")

    write_netlist_json(loaded(), len(jobs), write)
    assert events == ["write", "load legs.cir", "write", "load drivers.cir", "write"]
