"""Shared fixtures for the physics tests: a pint registry and a small ngspice runner."""

from __future__ import annotations

import shutil
import subprocess
from collections.abc import Callable
from pathlib import Path
from typing import Any

import pint
import pytest

NgspiceRunner = Callable[[str, str, list[str]], dict[str, list[float]]]


@pytest.fixture(scope="session")
def ureg() -> pint.UnitRegistry[Any]:
    """One registry for the whole session (building one takes a noticeable fraction of a second)."""
    return pint.UnitRegistry()


@pytest.fixture
def run_ngspice(tmp_path: Path) -> NgspiceRunner:
    """Run a deck in ngspice batch mode and return its vectors by name.

    ``run(circuit, analysis, vectors)`` writes the circuit lines, a ``.control`` block that
    runs ``analysis`` (e.g. ``"tran 10n 200u uic"``) and writes ``vectors`` with ``wrdata``
    (one scale column, names in a header, 13 significant digits), then parses the file.
    """
    if shutil.which("ngspice") is None:
        pytest.skip("ngspice is not installed; the simulator cross-checks need it (CI has it)")

    def run(circuit: str, analysis: str, vectors: list[str]) -> dict[str, list[float]]:
        out = tmp_path / "vectors.txt"
        deck = tmp_path / "deck.cir"
        deck.write_text(
            "* drivelint physics cross-check\n"
            f"{circuit.strip()}\n"
            ".control\n"
            "set wr_singlescale\n"
            "set wr_vecnames\n"
            "option numdgt=12\n"
            f"{analysis}\n"
            f"wrdata {out} {' '.join(vectors)}\n"
            "quit\n"
            ".endc\n"
            ".end\n"
        )
        done = subprocess.run(
            ["ngspice", "-b", str(deck)],
            capture_output=True,
            text=True,
            timeout=30,
            check=False,
        )
        if done.returncode != 0 or not out.exists():
            raise AssertionError(f"ngspice failed:\n{done.stdout}\n{done.stderr}")
        header, *rows = out.read_text().splitlines()
        names = header.split()
        columns: dict[str, list[float]] = {name: [] for name in names}
        for row in rows:
            for name, cell in zip(names, row.split(), strict=True):
                columns[name].append(float(cell))
        return columns

    return run
