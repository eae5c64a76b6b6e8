"""`drivelint merge`: the JSON reports of a CI matrix's shards joined into one report that is
byte for byte what one `drivelint check` over the whole library writes, in every format;
reports that are not the slices of one run, or not whole, refused with exit 2."""

from __future__ import annotations

import json
import shutil
from pathlib import Path
from typing import Any

import pytest
from click.testing import CliRunner, Result

from drivelint import merge
from drivelint.batch import select_shard
from drivelint.cli import main

ROOT = Path(__file__).resolve().parents[2]
EXAMPLES = ROOT / "examples"
FORMATS = ("json", "text", "sarif", "junit", "github", "html")

BROKEN = "broken\nR1 a\nM1 d g s s nfet\n.end\n"  # a syntax error: status "error"
PARTIAL = (  # names a library that is not there: status "partial"
    "partial leg\n.include missing_models.lib\nVB bus 0 48\nM1 bus g sw sw NFET_X\n"
    "M2 sw gl 0 0 NFET_X\nD1 vdd boot DX\nC1 boot sw 100n\nVD vdd 0 12\n.end\n"
)
REASON = "charge pump fitted on the production board"


def run(*args: str) -> Result:
    return CliRunner().invoke(main, list(args))


@pytest.fixture(scope="module")
def workspace(tmp_path_factory: pytest.TempPathFactory) -> Path:
    """A library (the bundled examples, a broken, a partial and an accepted netlist, a
    folder with a configuration of its own) and, beside it, a testbench folder."""
    where = tmp_path_factory.mktemp("merge")
    lib = where / "lib"
    shutil.copytree(EXAMPLES, lib)
    own = lib / "own"
    own.mkdir()
    (own / "broken.cir").write_text(BROKEN)
    (own / "partial.cir").write_text(PARTIAL)
    lines = (EXAMPLES / "loadswitch24v_dc_enable.cir").read_text().splitlines()
    accepted = [lines[0], f"* drivelint: accept dc-hold M1 -- {REASON}", *lines[1:]]
    (own / "accepted.cir").write_text("\n".join(accepted) + "\n")
    shutil.copy(EXAMPLES / "parts.toml", own / "parts.toml")
    (own / "drivelint.toml").write_text("fail_on = 'error'\n")
    return where


@pytest.fixture()
def here(workspace: Path, monkeypatch: pytest.MonkeyPatch) -> Path:
    monkeypatch.chdir(workspace)
    return workspace


def shards(count: int, *extra: str, prefix: str = "s") -> list[str]:
    names = []
    for index in range(1, count + 1):
        name = f"{prefix}{index}of{count}.json"
        done = run(
            "check",
            "--no-cache",
            *extra,
            "--format",
            "json",
            "--shard",
            f"{index}/{count}",
            "--output",
            name,
            "lib",
        )
        assert done.exit_code in (0, 1), done.output
        names.append(name)
    return names


def test_shards_cover_the_library_unevenly_but_each_holds_files(here: Path) -> None:
    # The equality below means something only if the files really are split.
    files = sorted(Path("lib").rglob("*.cir"))
    for count in (2, 3):
        sizes = [len(select_shard(files, i, count)) for i in range(1, count + 1)]
        assert sum(sizes) == len(files) and sum(1 for s in sizes if s) >= 2


def without_input_lines(text: str, report: dict[str, Any]) -> str:
    """``text`` without the quoted line (and caret) under each input problem's headline: the
    one thing a JSON report does not keep (it quotes no line of an input problem, which may
    be a line of a file that is not a netlist), so the one thing merged text lacks."""
    headlines = {
        f"{d['path']}:{d['line']}:{d['column']}: {d['severity']}: {d['message']}"
        for f in report["files"]
        for d in f["diagnostics"]
    }
    out: list[str] = []
    under = False
    for line in text.split("\n"):
        if under and line.startswith("    "):
            continue
        under = line in headlines
        out.append(line)
    return "\n".join(out)


@pytest.mark.parametrize("count", [2, 3])
def test_merged_shards_are_byte_identical_to_one_run(here: Path, count: int) -> None:
    names = shards(count)
    for fmt in FORMATS:
        whole = run("check", "--no-cache", "--format", fmt, "--output", f"whole.{fmt}", "lib")
        merged = run("merge", *names, "--format", fmt, "--output", f"merged.{fmt}")
        assert merged.exit_code == whole.exit_code == 1, merged.output
        expected = Path(f"whole.{fmt}").read_text()
        if fmt == "text":
            report = json.loads(Path("whole.json").read_text())
            shorter = without_input_lines(expected, report)
            assert shorter != expected  # own/broken.cir's line is quoted by check, not merge
            expected = shorter
        assert Path(f"merged.{fmt}").read_text() == expected, fmt
    # What was joined is everything: every status, an accepted finding, the summary.
    report = json.loads(Path("merged.json").read_text())
    assert {f["status"] for f in report["files"]} == {"clean", "findings", "partial", "error"}
    assert any(f["accepted"] for f in report["findings"])
    assert report["run"]["shard"] is None and report["run"]["fail_on"] == ["error", "warning"]


def test_render_options_and_standard_output_match_too(here: Path) -> None:
    names = shards(2)
    report = json.loads(run("check", "--no-cache", "--format", "json", "lib").stdout)
    for options in (
        ["--explain", "--show-accepted"],
        ["--format", "junit", "--explain"],
        ["--format", "github", "--explain"],
    ):
        whole = run("check", "--no-cache", *options, "lib")
        merged = run("merge", *names, *options)
        expected = (
            whole.stdout if "--format" in options else without_input_lines(whole.stdout, report)
        )
        assert merged.stdout == expected and merged.exit_code == whole.exit_code
    decks = run("testbench", "lib", "--output", "benches")
    assert decks.exit_code in (0, 1)
    html = ["--format", "html", "--testbench", "benches", "--explain"]
    run("check", "--no-cache", *html, "--output", "whole-tb.html", "lib")
    run("merge", *names, *html, "--output", "merged-tb.html")
    page = Path("merged-tb.html").read_bytes()
    assert page == Path("whole-tb.html").read_bytes() and b'class="deck"' in page


def test_selected_rules_merge_and_are_recorded(here: Path) -> None:
    names = shards(2, "--select", "bootstrap", prefix="sel")
    run(
        "check",
        "--no-cache",
        "--select",
        "bootstrap",
        "--format",
        "sarif",
        "--output",
        "whole-sel.sarif",
        "lib",
    )
    assert run("merge", *names, "--format", "sarif", "--output", "merged-sel.sarif").exit_code == 1
    assert Path("merged-sel.sarif").read_bytes() == Path("whole-sel.sarif").read_bytes()
    rules = json.loads(Path(names[0]).read_text())["run"]["rules"]
    assert rules and all(r.startswith("bootstrap") for r in rules)


def test_one_whole_report_renders_again(here: Path) -> None:
    run("check", "--no-cache", "--format", "json", "--output", "whole-run.json", "lib")
    run("check", "--no-cache", "--format", "html", "--output", "whole-run.html", "lib")
    assert run("merge", "whole-run.json", "--format", "html", "--output", "again.html").exit_code
    assert Path("again.html").read_bytes() == Path("whole-run.html").read_bytes()


def test_exit_codes_follow_check(here: Path) -> None:
    names = shards(2)
    assert run("merge", *names, "--exit-zero").exit_code == 0
    assert run("merge", *names, "--strict").exit_code == 2  # own/broken.cir was not checked
    only_clean = run(
        "check",
        "--no-cache",
        "--format",
        "json",
        "--output",
        "clean.json",
        "lib/induction325_half_bridge_driver.cir",
    )
    assert only_clean.exit_code == 0
    assert run("merge", "clean.json").exit_code == 0


# -- refusals ----------------------------------------------------------------------------


def refused(result: Result, *words: str) -> None:
    assert result.exit_code == 2, result.output
    assert isinstance(result.exception, SystemExit)  # a diagnostic, never a traceback
    assert "Traceback" not in result.output
    for word in words:
        assert word in result.output, (word, result.output)


def edited(source: str, target: str, change: Any) -> str:
    payload = json.loads(Path(source).read_text())
    change(payload)
    Path(target).write_text(json.dumps(payload))
    return target


def test_refuses_another_drivelint(here: Path) -> None:
    one, two = shards(2)
    other = edited(two, "other-version.json", lambda p: p["tool"].update(version="9.9.9"))
    refused(run("merge", one, other), "other-version.json", "9.9.9")
    code = edited(two, "other-code.json", lambda p: p["run"].update(code="0" * 64))
    refused(run("merge", one, code), "other-code.json", "different drivelint code")


def test_refuses_other_settings(here: Path) -> None:
    one, _ = shards(2)
    (_, two) = shards(2, "--select", "dc-hold", prefix="dc")
    refused(run("merge", one, two), "dc2of2.json", "rule selections")
    (_, hidden) = shards(2, "--allow-hidden-includes", prefix="hid")
    refused(run("merge", one, hidden), "--allow-hidden-includes")
    smaller = run(
        "check",
        "--no-cache",
        "--format",
        "json",
        "--shard",
        "2/2",
        "--output",
        "smaller.json",
        "lib/own",
    )
    assert smaller.exit_code in (0, 1)
    refused(run("merge", one, "smaller.json"), "smaller.json", "not shards of one run")


def test_refuses_a_configuration_that_changed_between_shards(here: Path) -> None:
    config = Path("lib/drivelint.toml")
    try:
        config.write_text("fail_on = 'warning'\n")
        (one, _) = shards(2, prefix="cfg-a")
        config.write_text("fail_on = 'note'\n")
        (_, two) = shards(2, prefix="cfg-b")
    finally:
        config.unlink()
    refused(run("merge", one, two), "lib/drivelint.toml", "changed between shards")


def test_refuses_overlapping_and_missing_shards(here: Path) -> None:
    one, two, three = shards(3)
    refused(run("merge", one, one, two, three), "both shard 1/3")
    refused(run("merge", one, three), "shard 2/3 missing")
    pair = shards(2)
    refused(run("merge", pair[0], two, three), "different shard counts")
    run("check", "--no-cache", "--format", "json", "--output", "whole-lib.json", "lib")
    refused(run("merge", "whole-lib.json", pair[1]), "whole run")

    def steal(payload: dict[str, Any]) -> None:  # a file of shard 1 put in shard 2 too
        first = json.loads(Path(pair[0]).read_text())["files"][0]
        payload["files"].append(first)

    doubled = edited(pair[1], "doubled.json", steal)
    refused(run("merge", pair[0], doubled), "is in both", "overlapping")


@pytest.mark.parametrize(
    ("content", "words"),
    [
        ("{not json", ["not JSON"]),
        ("[1, 2]", ["not a drivelint JSON report"]),
        ("[" * 100_000 + "]" * 100_000, ["nested too deeply"]),
        (
            '{"tool": {"name": "drivelint", "version": "0.1.0"}, "version": 1, "files": []}',
            ["report format 1", "merge reads format 2"],
        ),
        (
            '{"tool": {"name": "drivelint", "version": "0.2.0"}, "version": 2, "run": null}',
            ["no run header"],
        ),
    ],
)
def test_refuses_what_is_not_a_report(here: Path, content: str, words: list[str]) -> None:
    Path("bad.json").write_text(content)
    refused(run("merge", "bad.json"), "bad.json", *words)


def test_refuses_a_report_whose_fields_are_wrong(here: Path) -> None:
    one, two = shards(2)
    cut = Path(two).read_bytes()
    Path("cut.json").write_bytes(cut[: len(cut) // 2])
    refused(run("merge", one, "cut.json"), "cut.json", "not JSON")

    def wrong_type(payload: dict[str, Any]) -> None:
        payload["files"][0]["result"][1][1] = 42  # the circuit's path, as a number

    refused(run("merge", one, edited(two, "typed.json", wrong_type)), "typed.json", "file 1")

    def foreign_tag(payload: dict[str, Any]) -> None:
        payload["files"][0]["result"][0] = "Popen"

    refused(run("merge", one, edited(two, "tag.json", foreign_tag)), "tag.json", "Popen")

    def extra_header(payload: dict[str, Any]) -> None:
        payload["run"]["command"] = "rm -rf /"

    refused(run("merge", one, edited(two, "hdr.json", extra_header)), "unknown field")

    def moved(payload: dict[str, Any]) -> None:
        payload["files"][0]["order"] = 10_000

    refused(run("merge", one, edited(two, "order.json", moved)), "not in the library")
    refused(run("merge", one, "no-such.json"), "no-such.json", "not found")


def test_refuses_a_report_over_the_size_bound(here: Path, monkeypatch: pytest.MonkeyPatch) -> None:
    one, two = shards(2)
    monkeypatch.setattr(merge, "MAX_REPORT_BYTES", 1000)
    refused(run("merge", one, two), "larger than 1000 bytes")


def test_does_not_overwrite_an_input_report(here: Path) -> None:
    one, two = shards(2)
    before = Path(one).read_bytes()
    refused(run("merge", one, two, "--format", "html", "--output", one), "not overwritten")
    assert Path(one).read_bytes() == before


def test_a_formatter_tripped_by_an_edited_report_names_it(
    here: Path, monkeypatch: pytest.MonkeyPatch
) -> None:
    """Fields of the right types that do not fit together could trip a formatter: the report
    that trips it alone is named, never a traceback."""
    from drivelint.report import junit

    one, two = shards(2)
    victim = json.loads(Path(two).read_text())["files"][0]["path"]
    real = junit.format_junit

    def fragile(results, options):  # type: ignore[no-untyped-def]
        if any(r.circuit.path == victim for r in results):
            raise KeyError("m_nowhere")
        return real(results, options)

    monkeypatch.setattr(junit, "format_junit", fragile)
    result = run("merge", one, two, "--format", "junit")
    refused(result, two, "cannot be rendered as junit", "KeyError")
    assert one not in result.output


def test_empty_shards_and_standard_input(here: Path) -> None:
    """More shards than files leaves some empty, and they merge like the others; a whole
    run that read standard input renders again with it in its place (after the files)."""
    two = ["lib/lev48_phase_leg_npn_shifter.cir", "lib/own/broken.cir"]
    names = []
    for index in range(1, 6):
        name = f"tiny{index}.json"
        run(
            "check",
            "--no-cache",
            "--format",
            "json",
            "--shard",
            f"{index}/5",
            "--output",
            name,
            *two,
        )
        names.append(name)
    sizes = [len(json.loads(Path(n).read_text())["files"]) for n in names]
    assert sum(sizes) == 2 and sizes.count(0) >= 3
    run("check", "--no-cache", "--format", "sarif", "--output", "tiny.sarif", *two)
    run("merge", *names, "--format", "sarif", "--output", "tiny-merged.sarif")
    assert Path("tiny-merged.sarif").read_bytes() == Path("tiny.sarif").read_bytes()

    deck = (EXAMPLES / "tool36_leg_totem_pole.cir").read_text()
    piped = ["check", "--no-cache", "-", "--stdin-name", "piped/leg.cir", *two]
    runner = CliRunner()
    report = runner.invoke(main, [*piped, "--format", "json", "--output", "piped.json"], input=deck)
    junit = runner.invoke(main, [*piped, "--format", "junit", "--output", "piped.xml"], input=deck)
    assert report.exit_code == junit.exit_code == 1
    assert json.loads(Path("piped.json").read_text())["run"]["stdin"] == "piped/leg.cir"
    assert run("merge", "piped.json", "--format", "junit", "--output", "piped-again.xml").exit_code
    assert Path("piped-again.xml").read_bytes() == Path("piped.xml").read_bytes()
    # Standard input is read by every shard of a run, so its shards overlap.
    for index in (1, 2):
        runner.invoke(
            main,
            [*piped, "--format", "json", "--shard", f"{index}/2", "--output", f"p{index}.json"],
            input=deck,
        )
    refused(run("merge", "p1.json", "p2.json"), "piped/leg.cir", "overlapping")


def test_refuses_headers_that_claim_too_much(here: Path) -> None:
    one, two = shards(2)
    many = edited(two, "many.json", lambda p: p["run"].update(shard=[2, 10**12]))
    first = edited(one, "many1.json", lambda p: p["run"].update(shard=[1, 10**12]))
    refused(run("merge", first, many), "shards 3/1000000000000", ", …", "missing")
    severity = edited(two, "severity.json", lambda p: p["run"].update(fail_on=["fatal"]))
    refused(run("merge", one, severity), "severity.json", "unknown severity")
    zero = edited(two, "zero.json", lambda p: p["run"].update(shard=[0, 2]))
    refused(run("merge", one, zero), "zero.json", "is not I/N")


def test_shards_answered_from_the_cache_merge_the_same(
    here: Path, monkeypatch: pytest.MonkeyPatch
) -> None:
    """Results decoded from cache entries render as those just computed."""
    monkeypatch.setenv("XDG_CACHE_HOME", str(here / "cache"))
    monkeypatch.setenv("HOME", str(here))  # platforms that ignore XDG_CACHE_HOME
    names = []
    for index in (1, 2):
        for _ in range(2):  # the second run of each shard comes from the cache
            name = f"cached{index}.json"
            run("check", "--format", "json", "--shard", f"{index}/2", "--output", name, "lib")
        names.append(name)
    assert any((here / "cache").rglob("*.json"))
    run("merge", *names, "--format", "html", "--output", "cached.html")
    run("check", "--no-cache", "--format", "html", "--output", "uncached.html", "lib")
    assert Path("cached.html").read_bytes() == Path("uncached.html").read_bytes()
