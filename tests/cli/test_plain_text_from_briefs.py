"""Plain text is joined from each file's brief (report/brief.py): whether the briefs were
made fresh, came back from workers or from the cache, the report, the summary and the
exit code are what rendering the full results gives, byte for byte."""

from __future__ import annotations

import json
import shutil
from pathlib import Path

import pytest
from click.testing import CliRunner, Result

from drivelint.batch import BatchOptions, plan, run_batch, run_batch_brief
from drivelint.cli import main
from drivelint.report.brief import brief_of, brief_text, select_brief
from drivelint.report.findings import results_text

ROOT = Path(__file__).resolve().parents[2]
EXAMPLES = ROOT / "examples"
ACCEPTED = "loadswitch24v_dc_enable.cir"


@pytest.fixture(scope="module")
def library(tmp_path_factory: pytest.TempPathFactory) -> Path:
    """The examples, one with an accepted finding, a broken file and one read in part."""
    folder = tmp_path_factory.mktemp("briefs") / "lib"
    shutil.copytree(EXAMPLES, folder)
    lines = (folder / ACCEPTED).read_text().splitlines()
    (folder / ACCEPTED).write_text(
        "\n".join([lines[0], "* drivelint: accept dc-hold M1 -- pump on the board", *lines[1:]])
    )
    (folder / "broken.cir").write_text("title\nR1 a\n")
    (folder / "partial.cir").write_text("title\n.include missing.inc\nR1 a 0 1k\n.end\n")
    return folder


def run(*args: str) -> Result:
    return CliRunner().invoke(main, list(args))


def test_briefs_join_to_the_full_text_report(library: Path) -> None:
    options = BatchOptions(jobs=1)
    jobs = plan(sorted(library.glob("*.cir")), options)
    results, _ = run_batch(jobs, options)
    briefs, _ = run_batch_brief(jobs, options)
    assert briefs == [brief_of(r) for r in results]
    assert {b.status for b in briefs} == {"error", "partial", "findings", "clean"}
    assert any(b.accepted for b in briefs)
    for shown in (False, True):
        assert brief_text(briefs, shown) == results_text(results, show_accepted=shown)

    def keep(rule: str) -> bool:
        return rule.startswith("bootstrap")

    from drivelint.checks.runner import select_rules

    assert brief_text([select_brief(b, keep) for b in briefs]) == results_text(
        [select_rules(r, keep) for r in results]
    )


@pytest.mark.parametrize("jobs", ["1", "2"])
def test_a_warm_rescan_prints_what_the_cold_scan_printed(
    library: Path, tmp_path: Path, monkeypatch: pytest.MonkeyPatch, jobs: str
) -> None:
    monkeypatch.setenv("XDG_CACHE_HOME", str(tmp_path / "cache"))
    uncached = run("check", "--no-cache", "--jobs", jobs, str(library))
    cold = run("check", "--jobs", jobs, "--show-accepted", str(library))
    warm = run("check", "--jobs", jobs, "--show-accepted", str(library))
    assert cold.exit_code == warm.exit_code == uncached.exit_code == 1
    assert warm.stdout == cold.stdout
    assert ": accepted error: " in warm.stdout
    # without --show-accepted, the report the uncached run printed
    again = run("check", "--jobs", jobs, str(library))
    assert again.stdout == uncached.stdout
    # and the summary on standard error counts the hits
    written = tmp_path / "report.txt"
    to_file = run("check", "--jobs", jobs, "--output", str(written), str(library))
    assert written.read_text(encoding="utf-8") == uncached.stdout
    files = len(list(library.glob("*.cir")))
    assert f"{files} files ({files} from cache)" in to_file.stderr


def test_rule_selection_and_exit_codes_from_briefs(
    library: Path, tmp_path: Path, monkeypatch: pytest.MonkeyPatch
) -> None:
    monkeypatch.setenv("XDG_CACHE_HOME", str(tmp_path / "cache"))
    clean = str(library / "induction325_half_bridge_driver.cir")
    for _ in range(2):  # cold, then from the cache
        assert run("check", clean).exit_code == 0
        assert run("check", "--strict", str(library / "broken.cir")).exit_code == 2
        assert run("check", str(library / "partial.cir")).exit_code == 1
        assert run("check", "--fail-on", "error", str(library / "partial.cir")).exit_code == 0
        rule = "gate-pulldown-missing"
        selected = run("check", "--select", rule, str(library))
        assert f"[{rule}]" in selected.stdout and "[bootstrap-" not in selected.stdout
        full = run("check", "--select", rule, "--format", "json", str(library))
        assert {f["rule"] for f in json.loads(full.stdout)["findings"]} == {rule}


def test_a_brief_with_wrong_fields_is_a_miss(
    library: Path, tmp_path: Path, monkeypatch: pytest.MonkeyPatch
) -> None:
    monkeypatch.setenv("XDG_CACHE_HOME", str(tmp_path / "cache"))
    deck = str(library / "mower48v_hbridge_wrapped_fets.cir")
    first = run("check", deck)
    (entry,) = (tmp_path / "cache").rglob("*.json")
    for damage in (
        {"status": 3},
        {"status": "fine"},
        {"findings": [["bootstrap-diode-voltage", 99, "x"]]},
        {"unknown": 1},
        {"names_used": "m1"},
    ):
        header, result = entry.read_text(encoding="utf-8").split("\n")
        data = json.loads(header)
        data["brief"].update(damage)
        entry.write_text(json.dumps(data) + "\n" + result, encoding="utf-8")
        again = run("check", "--output", str(tmp_path / "out.txt"), deck)
        assert "from cache" not in again.stderr, damage
        assert (tmp_path / "out.txt").read_text(encoding="utf-8") == first.stdout
