"""Text lines wrap at the terminal's width, and stay whole when piped (issue 14, item 5)."""

from __future__ import annotations

from pathlib import Path

from click.testing import CliRunner

from drivelint.cli import main
from drivelint.pipeline import check_path
from drivelint.report.findings import results_text

EXAMPLE = Path(__file__).resolve().parents[2] / "examples" / "loadswitch24v_dc_enable.cir"


def test_wrapped_at_the_width_with_nothing_lost() -> None:
    result = check_path(EXAMPLE)
    plain = results_text([result])
    wrapped = results_text([result], width=60)
    assert max(len(line) for line in plain.splitlines()) > 60
    for line in wrapped.splitlines():
        assert len(line) <= 60 or " " not in line.strip()  # only an unbreakable word is longer
    # Continuation lines are indented; the words are the same, in the same order.
    assert " ".join(plain.split()) == " ".join(wrapped.split())
    heads = [line for line in wrapped.splitlines() if line.startswith(result.circuit.path)]
    assert len(heads) == len(result.findings)


def test_piped_output_is_not_wrapped() -> None:
    # CliRunner's output is not a terminal: each finding is one line, however long.
    output = CliRunner().invoke(main, ["check", "--no-cache", str(EXAMPLE)]).output
    (line,) = [x for x in output.splitlines() if x.endswith("[dc-hold]")]
    assert len(line) > 200
