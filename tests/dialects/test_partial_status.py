"""The file status ``partial`` through every format, and its exit code."""

from __future__ import annotations

import json
import xml.etree.ElementTree as ET
from pathlib import Path

from click.testing import CliRunner

from drivelint.checks.runner import CheckResult
from drivelint.cli import main
from drivelint.pipeline import check_path, check_text
from drivelint.report.formats import ReportOptions, formatter

HERE = Path(__file__).resolve().parent
PARTIAL = HERE / "19_partial.cir"
CLEAN = "clean deck\nVAUX aux 0 DC 12\nR1 aux 0 1k\n.end\n"


def results() -> list[CheckResult]:
    return [check_path(PARTIAL), check_text(CLEAN, "clean.cir")]


def test_json_status() -> None:
    report = json.loads(formatter("json")(results(), ReportOptions()))
    statuses = {Path(f["path"]).name: f["status"] for f in report["files"]}
    assert statuses == {"19_partial.cir": "partial", "clean.cir": "clean"}


def test_junit_marks_a_partial_file_skipped() -> None:
    root = ET.fromstring(formatter("junit")(results(), ReportOptions()))
    suite = root.find("testsuite")
    assert suite is not None and suite.get("skipped") == "1" and suite.get("errors") == "0"
    skipped = [case for case in suite.iter("testcase") if case.find("skipped") is not None]
    (case,) = skipped
    message = case.find("skipped").get("message")  # type: ignore[union-attr]
    assert message is not None and "subckt 'gate_driver_a'" in message


def test_sarif_artifact_carries_the_status() -> None:
    log = json.loads(formatter("sarif")(results(), ReportOptions()))
    artifacts = log["runs"][0]["artifacts"]
    partial = [a for a in artifacts if a.get("properties", {}).get("status") == "partial"]
    (artifact,) = partial
    assert artifact["location"]["uri"].endswith("19_partial.cir")
    assert "model 'nfet_missing'" in artifact["properties"]["missing"]


def test_github_notice_for_a_partial_file() -> None:
    lines = formatter("github")(results(), ReportOptions()).splitlines()
    notices = [line for line in lines if line.startswith("::notice") and "title=partial" in line]
    (notice,) = notices
    assert "19_partial.cir" in notice and "checked in part" in notice


def test_html_shows_the_status() -> None:
    page = formatter("html")(results(), ReportOptions())
    assert '<span class="status partial">partial</span>' in page


def test_exit_code_of_a_partial_file() -> None:
    # README, "Exit codes": a file checked in part counts as a warning: exit 1 at the
    # default --fail-on warning, 0 with --fail-on error; `netlist` reads it and exits 0.
    runner = CliRunner()
    args = ["check", str(PARTIAL), "--no-cache", "--format", "json"]
    assert runner.invoke(main, args).exit_code == 1
    assert runner.invoke(main, [*args, "--fail-on", "error"]).exit_code == 0
    assert runner.invoke(main, ["netlist", str(PARTIAL)]).exit_code == 0
