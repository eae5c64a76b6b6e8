"""`* drivelint: accept RULE DEVICE -- REASON`: accepted findings leave the report, and an
acceptance that matches nothing is itself reported (issue: the checks, point 3)."""

from __future__ import annotations

from pathlib import Path

from drivelint.pipeline import check_path

ROOT = Path(__file__).resolve().parents[2]
EXAMPLE = ROOT / "examples" / "loadswitch24v_dc_enable.cir"


def with_directives(tmp_path: Path, *lines: str) -> Path:
    text = EXAMPLE.read_text().splitlines()
    path = tmp_path / EXAMPLE.name
    path.write_text("\n".join([text[0], *lines, *text[1:]]) + "\n")
    (tmp_path / "parts.toml").write_text((ROOT / "examples" / "parts.toml").read_text())
    return path


def test_acceptance_moves_the_finding_out_of_the_report(tmp_path: Path) -> None:
    plain = check_path(EXAMPLE)
    assert "dc-hold" in {f.rule for f in plain.findings}
    path = with_directives(tmp_path, "* drivelint: accept dc-hold M1 -- charge pump on the board")
    result = check_path(path)
    assert "dc-hold" not in {f.rule for f in result.findings}
    assert [f.rule for f in result.accepted] == ["dc-hold"]
    assert not [d for d in result.diagnostics if d.code == "directive"]
    # The other rules still report.
    assert "gate-overvoltage" in {f.rule for f in result.findings}


def test_stale_acceptance_is_reported_at_its_line(tmp_path: Path) -> None:
    path = with_directives(
        tmp_path, "* drivelint: accept bootstrap-diode-slow M1 -- fast diode fitted"
    )
    result = check_path(path)
    (stale,) = [d for d in result.diagnostics if d.code == "directive"]
    assert stale.span.line == 2 and "matches no finding" in stale.message
    assert stale.severity.label == "warning"


def test_malformed_directive_is_a_diagnostic_with_its_column(tmp_path: Path) -> None:
    path = with_directives(tmp_path, "* drivelint: part M1 qg=lots")
    result = check_path(path)
    (problem,) = [d for d in result.diagnostics if d.code == "directive"]
    assert problem.span.line == 2 and problem.span.column == len("* drivelint: part M1 qg=") + 1
    assert "'lots' is not a number" in problem.message


def test_part_directive_overrides_the_parts_library(tmp_path: Path) -> None:
    path = with_directives(
        tmp_path, "* drivelint: part C_BOOT c=4.7u", "* drivelint: part M1 qg=40n"
    )
    result = check_path(path)
    (hold,) = [f for f in result.findings if f.rule == "dc-hold"]
    assert hold.values["gate_charge"].origin.startswith("directive")
