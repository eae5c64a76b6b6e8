"""What a one-file check imports: the start-up path a pre-commit hook pays on every run.

networkx, pint and lark stay off it. lark is the grammars' reference parser; the
netlist lines and expressions of a design that parses are read by hand (``split_grouped``,
``descent.parse``), and lark is imported only to word a syntax error. This is a count of
modules, not a timing: the times are in bench/bench_cli.py.
"""

from __future__ import annotations

import json
import subprocess
import sys
from pathlib import Path

import pytest

ROOT = Path(__file__).resolve().parents[2]
EXAMPLES = sorted((ROOT / "examples").glob("*.cir"))
HEAVY = ("lark", "networkx", "pint")

_PROBE = """
import json, sys
from drivelint.cli import main
sys.argv = ["drivelint", "check", "--no-cache", "--format", "text", *sys.argv[1:]]
try:
    main()
except SystemExit:
    pass
sys.stderr.write("\\n" + json.dumps(sorted(m for m in sys.modules if "." not in m)) + "\\n")
"""


def imported(*paths: Path) -> set[str]:
    done = subprocess.run(
        [sys.executable, "-c", _PROBE, *map(str, paths)],
        capture_output=True,
        text=True,
        cwd=ROOT,
        timeout=120,
    )
    return set(json.loads(done.stderr.strip().splitlines()[-1]))


def test_checking_every_example_imports_no_heavy_library() -> None:
    modules = imported(*EXAMPLES)
    assert "drivelint" in modules
    assert not modules & set(HEAVY), sorted(modules & set(HEAVY))


@pytest.mark.parametrize(
    ("text", "expected"),
    [
        # a syntax error in an expression: lark words it
        ("* bad\nR1 a 0 {1 +}\n.end\n", True),
        # groups, commas, braces and quotes that parse: no lark
        ("* fine\nV1 a 0 PWL(0 0, 1u {2*2})\nR1 a 0 '1k*(1+1)'\n.end\n", False),
    ],
)
def test_lark_is_imported_only_for_an_error(tmp_path: Path, text: str, expected: bool) -> None:
    deck = tmp_path / "deck.cir"
    deck.write_text(text)
    assert ("lark" in imported(deck)) is expected
