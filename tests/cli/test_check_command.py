"""`drivelint check`: paths, exit codes, formats, batches, cache, shards (DESIGN §9)."""

from __future__ import annotations

import json
import shutil
from pathlib import Path

import pytest
from click.testing import CliRunner

from drivelint import pipeline
from drivelint.batch import BatchOptions, plan, run_batch, select_shard
from drivelint.cli import main

ROOT = Path(__file__).resolve().parents[2]
EXAMPLES = ROOT / "examples"
FLAWED = "mower48v_hbridge_wrapped_fets.cir"  # has bootstrap-diode-voltage errors
CLEAN = "induction325_half_bridge_driver.cir"


def run(*args: str, stdin: str | None = None):  # type: ignore[no-untyped-def]
    return CliRunner().invoke(main, [*args], input=stdin)


def library(tmp_path: Path) -> Path:
    folder = tmp_path / "lib"
    shutil.copytree(EXAMPLES, folder)
    return folder


def test_exit_codes(tmp_path: Path) -> None:
    folder = library(tmp_path)
    assert run("check", "--no-cache", str(folder / CLEAN)).exit_code == 0
    flawed = run("check", "--no-cache", str(folder / FLAWED))
    assert flawed.exit_code == 1 and "[bootstrap-diode-voltage]" in flawed.output
    assert run("check", "--no-cache", "--exit-zero", str(folder / FLAWED)).exit_code == 0
    broken = folder / "broken.cir"
    broken.write_text("title\nR1 a\n")
    assert run("check", "--no-cache", str(broken)).exit_code == 1
    assert run("check", "--no-cache", "--strict", str(broken)).exit_code == 2
    assert run("check", "--no-cache", "--shard", "3/2", str(broken)).exit_code == 2
    assert run("check", "--no-cache", str(folder / "no-such-*.cir")).exit_code == 2
    # Errors only fail the run when asked to.
    (folder / "drivelint.toml").write_text("fail_on = 'error'\n")
    assert run("check", "--no-cache", "--fail-on", "note", str(folder / FLAWED)).exit_code == 1


def test_text_lines_name_path_line_column_severity_rule() -> None:
    result = run("check", "--no-cache", str(EXAMPLES / FLAWED))
    first = next(line for line in result.output.splitlines() if "[bootstrap-diode-voltage]" in line)
    path, line, column, rest = first.split(":", 3)
    assert path.endswith(FLAWED) and line == "47" and column == "1"
    assert rest.startswith(" error: ")
    assert "\n    fix: " in result.output


def test_json_is_sorted_and_round_trips() -> None:
    result = run("check", "--no-cache", "--format", "json", str(EXAMPLES))
    payload = json.loads(result.stdout)
    assert payload["version"] == 2 and payload["tool"]["name"] == "drivelint"
    paths = [f["path"] for f in payload["files"]]
    assert paths == sorted(paths) and len(paths) == len(list(EXAMPLES.glob("*.cir")))
    keys = [(f["path"], f["line"], f["column"], f["rule"]) for f in payload["findings"]]
    assert keys == sorted(keys)
    for finding in payload["findings"]:
        assert set(finding) >= {
            "rule",
            "severity",
            "path",
            "line",
            "column",
            "message",
            "device",
            "switch",
            "values",
            "fix",
        }
        for value in finding["values"].values():
            assert set(value) == {"value", "unit", "origin"}
    assert json.loads(json.dumps(payload)) == payload


def test_standard_input_with_a_name() -> None:
    text = (EXAMPLES / FLAWED).read_text()
    result = run("check", "--no-cache", "-", "--stdin-name", "piped/leg.cir", stdin=text)
    assert result.exit_code == 1 and "piped/leg.cir:47:1: error" in result.output


def test_output_file_is_written_whole(tmp_path: Path) -> None:
    target = tmp_path / "report.json"
    result = run("check", "--no-cache", "--format", "json", "--output", str(target), str(EXAMPLES))
    assert result.exit_code == 1
    assert json.loads(target.read_text())["findings"]
    assert [p.name for p in tmp_path.iterdir()] == ["report.json"]  # no temporary left behind


def _generated_library(folder: Path, count: int) -> list[Path]:
    """Variants of the examples, some broken: values changed, lines dropped, garbage."""
    sources = sorted(EXAMPLES.glob("*.cir"))
    paths = []
    for index in range(count):
        source = sources[index % len(sources)].read_text().splitlines()
        if index % 7 == 3:
            source.insert(3, "R_BAD n1")  # too few nodes
        if index % 11 == 5:
            source.insert(2, "V9 a 0 PULSE(0 5")  # unbalanced parenthesis
        if index % 13 == 0:
            source = [line.replace("470n", f"{1 + index % 9}00n") for line in source]
        path = folder / f"design_{index:04d}.cir"
        path.write_text("\n".join(source) + "\n")
        paths.append(path)
    shutil.copy(EXAMPLES / "parts.toml", folder / "parts.toml")
    return paths


def test_batch_output_is_identical_for_one_and_two_jobs(tmp_path: Path) -> None:
    folder = tmp_path / "big"
    folder.mkdir()
    _generated_library(folder, 300)
    one = run("check", "--no-cache", "--jobs", "1", "--format", "json", str(folder))
    two = run("check", "--no-cache", "--jobs", "2", "--format", "json", str(folder))
    assert one.exit_code == two.exit_code == 1
    assert one.stdout == two.stdout
    payload = json.loads(one.stdout)
    assert len(payload["files"]) == 300
    assert sum(f["status"] == "error" for f in payload["files"]) > 20  # the broken ones
    assert "files with errors" in one.stderr


def test_cache_reads_only_what_changed(tmp_path: Path) -> None:
    folder = tmp_path / "lib"
    folder.mkdir()
    paths = _generated_library(folder, 12)
    options = BatchOptions(jobs=1, cache_dir=tmp_path / "cache")
    jobs = plan(paths, options)
    pipeline.READS.clear()
    first, stats = run_batch(jobs, options)
    assert stats.from_cache == 0 and sum(pipeline.READS.values()) == 12
    pipeline.READS.clear()
    again, stats = run_batch(jobs, options)
    assert stats.from_cache == 12 and sum(pipeline.READS.values()) == 0
    assert [r.findings for r in again] == [r.findings for r in first]
    paths[4].write_text(paths[4].read_text() + "* edited after the first scan\n")
    pipeline.READS.clear()
    _, stats = run_batch(jobs, options)
    assert stats.from_cache == 11 and list(pipeline.READS) == [str(paths[4])]
    # The parts library is part of the key: changing it re-checks everything.
    parts = folder / "parts.toml"
    parts.write_text(parts.read_text() + "\n# edited\n")
    pipeline.READS.clear()
    _, stats = run_batch(jobs, options)
    assert stats.from_cache == 0


@pytest.mark.parametrize("count", [1, 2, 3, 7])
def test_shards_cover_the_set_exactly_once(count: int) -> None:
    paths = [Path(f"designs/d{i}.cir") for i in range(200)]
    slices = [select_shard(paths, index, count) for index in range(1, count + 1)]
    merged = sorted(p for s in slices for p in s)
    assert merged == sorted(paths)
    assert all(slices) or count > len(paths)


def test_a_crashing_rule_costs_one_file(monkeypatch: pytest.MonkeyPatch, tmp_path: Path) -> None:
    import drivelint.batch as batch

    folder = library(tmp_path)
    real = pipeline.check_path

    def flaky(path, *args, **kwargs):  # type: ignore[no-untyped-def]
        if Path(path).name == CLEAN:
            raise ZeroDivisionError("boom")
        return real(path, *args, **kwargs)

    monkeypatch.setattr(pipeline, "check_path", flaky)
    options = BatchOptions(jobs=1)
    results, stats = batch.run_batch(batch.plan(sorted(folder.glob("*.cir")), options), options)
    assert len(results) == len(list(folder.glob("*.cir")))
    (failed,) = [r for r in results if r.circuit.path.endswith(CLEAN)]
    assert (
        failed.diagnostics[0].code == "internal-error" and "boom" in failed.diagnostics[0].message
    )
    assert any(r.findings for r in results)


def test_cached_results_survive_pickling_unchanged() -> None:
    # The worker pool moves results through pickle (the cache is JSON); positional_reduce
    # rebuilds the dataclasses through their constructors, which must give equal objects.
    import pickle

    from drivelint.batch import slim

    for example in sorted(EXAMPLES.glob("*.cir")):
        result = slim(pipeline.check_path(example))
        assert pickle.loads(pickle.dumps(result)) == result, example.name
