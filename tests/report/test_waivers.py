"""Waivers stay visible (issue 14, item 2): an accepted finding keeps its place in every
format, with the reason its acceptance gives and where that acceptance is."""

from __future__ import annotations

import json
import xml.etree.ElementTree as ET
from pathlib import Path

import pytest
from click.testing import CliRunner

from drivelint.cli import main
from drivelint.pipeline import check_path
from drivelint.report.formats import ReportOptions, formatter

ROOT = Path(__file__).resolve().parents[2]
EXAMPLE = ROOT / "examples" / "loadswitch24v_dc_enable.cir"  # dc-hold on VEN (README)
REASON = "charge pump fitted on the production board"


@pytest.fixture()
def deck(tmp_path: Path) -> Path:
    lines = EXAMPLE.read_text().splitlines()
    path = tmp_path / EXAMPLE.name
    path.write_text(
        "\n".join([lines[0], f"* drivelint: accept dc-hold M1 -- {REASON}", *lines[1:]])
    )
    (tmp_path / "parts.toml").write_text((ROOT / "examples" / "parts.toml").read_text())
    return path


def test_text_marks_it_accepted_with_its_reason(deck: Path) -> None:
    plain = CliRunner().invoke(main, ["check", "--no-cache", str(deck)])
    assert "[dc-hold]" not in plain.output
    assert "1 accepted by a directive" in plain.output  # the summary counts it
    shown = CliRunner().invoke(main, ["check", "--no-cache", "--show-accepted", str(deck)])
    (line,) = [x for x in shown.output.splitlines() if "[dc-hold]" in x]
    assert ": accepted error: " in line and line.endswith(f"-- {REASON} ({deck}:2)")


def test_json_carries_reason_path_and_line(deck: Path) -> None:
    payload = json.loads(formatter("json")([check_path(deck)], ReportOptions()))
    (held,) = [f for f in payload["findings"] if f["rule"] == "dc-hold"]
    assert held["accepted"] == {"reason": REASON, "path": str(deck), "line": 2}
    others = [f for f in payload["findings"] if f["rule"] != "dc-hold"]
    assert others and all(f["accepted"] is None for f in others)
    assert payload["findings"] == sorted(
        payload["findings"], key=lambda f: (f["path"], f["line"], f["column"], f["rule"])
    )


def test_junit_github_and_sarif_show_it(deck: Path) -> None:
    result = check_path(deck)
    junit = ET.fromstring(formatter("junit")([result], ReportOptions()))
    out = "".join(e.text or "" for e in junit.iter("system-out"))
    assert f"accepted ({REASON}; {deck}:2)" in out and "[dc-hold]" in out
    assert not [f for f in junit.iter("failure") if f.get("type") == "dc-hold"]
    github = formatter("github")([result], ReportOptions())
    (notice,) = [x for x in github.splitlines() if "title=dc-hold (accepted)" in x]
    assert notice.startswith("::notice ") and REASON in notice
    sarif = json.loads(formatter("sarif")([result], ReportOptions()))
    (entry,) = [r for r in sarif["runs"][0]["results"] if r["ruleId"] == "dc-hold"]
    (suppression,) = entry["suppressions"]
    assert suppression["justification"] == REASON
    region = suppression["location"]["physicalLocation"]["region"]
    assert region["startLine"] == 2
