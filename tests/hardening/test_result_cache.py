"""The result cache holds data, not code, and never answers for inputs that changed.

Guards, each named in its test: a cache that was pickled (anyone able to write the cache
folder ran code); stale answers when an include appeared, a symbolic link was retargeted, a
root marker was added, a local file shadowed a search-path file, or the same netlist sat in
another folder; corrupt or swapped entries ending in tracebacks or served for the wrong file;
a cache folder found by hand instead of the platform's user cache directory.
"""

from __future__ import annotations

import json
import os
import re
import shutil
from pathlib import Path

import pytest

from drivelint import cache, pipeline
from drivelint.batch import BatchOptions, cache_key, plan, run_batch
from drivelint.checks.runner import CheckResult

ROOT = Path(__file__).resolve().parents[2]
PACKAGE = ROOT / "drivelint"
EXAMPLES = ROOT / "examples"

DECK = """include test
.include models/parts.inc
R1 a 0 1k
V1 a 0 DC 5
.end
"""


def scan(paths: list[Path], folder: Path, **given: object) -> tuple[list[CheckResult], int]:
    options = BatchOptions(jobs=1, cache_dir=folder, **given)  # type: ignore[arg-type]
    results, stats = run_batch(plan(paths, options), options)
    return results, stats.from_cache


def messages(result: CheckResult) -> list[str]:
    return [d.message for d in result.diagnostics]


def project(tmp_path: Path, name: str = "proj") -> Path:
    folder = tmp_path / name
    (folder / "models").mkdir(parents=True)
    (folder / "drivelint.toml").write_text("")
    (folder / "deck.cir").write_text(DECK)
    return folder


def test_no_object_deserialiser_and_no_lark_cache_in_the_package() -> None:
    """Guards: the result cache was a pickle, so anyone who could write the cache folder (a
    shared or restored CI cache) ran code. No module may import an object deserialiser,
    nor ask lark for its cache file."""
    offenders = []
    for path in sorted(PACKAGE.rglob("*.py")):
        text = path.read_text(encoding="utf-8")
        if re.search(
            r"^\s*(import|from)\s+(c?pickle|shelve|marshal|dill|jsonpickle)\b", text, re.M
        ):
            offenders.append(f"{path.relative_to(ROOT)}: imports an object deserialiser")
        if re.search(r"cache\s*=\s*True", text):
            offenders.append(f"{path.relative_to(ROOT)}: cache=True")
    assert offenders == []


def test_entries_are_json_tied_to_their_key_and_round_trip(tmp_path: Path) -> None:
    """Every entry is a JSON object carrying its own key; a warm scan gives equal results."""
    folder = tmp_path / "lib"
    shutil.copytree(EXAMPLES, folder)
    paths = sorted(folder.glob("*.cir"))
    first, hits = scan(paths, tmp_path / "cache")
    assert hits == 0
    entries = sorted((tmp_path / "cache").rglob("*.json"))
    assert len(entries) == len(paths)
    for entry in entries:
        header, result = entry.read_text(encoding="utf-8").split("\n")
        data = json.loads(header)
        assert json.loads(result)[0] == "CheckResult"
        assert data["format"] == cache.CACHE_FORMAT and entry.stem == data["key"]
    again, hits = scan(paths, tmp_path / "cache")
    assert hits == len(paths)
    assert again == first


def test_cache_keeps_no_file_content_beyond_finding_excerpts(tmp_path: Path) -> None:
    """A secret in a comment or a long line never lands in the cache folder."""
    folder = tmp_path / "lib"
    folder.mkdir()
    text = (EXAMPLES / "mower48v_hbridge_wrapped_fets.cir").read_text()
    deck = folder / "deck.cir"
    title, rest = text.split("\n", 1)
    deck.write_text(f"{title}\n* token=SECRET-TOKEN-123\n{rest}R9 a b {'9' * 5000}\n")
    shutil.copy(EXAMPLES / "parts.toml", folder / "parts.toml")
    scan([deck], tmp_path / "cache")
    stored = "".join(p.read_text() for p in (tmp_path / "cache").rglob("*.json"))
    assert "SECRET-TOKEN-123" not in stored
    assert "9" * 200 not in stored


def test_an_include_created_after_the_first_run_is_seen(tmp_path: Path) -> None:
    """Guards: missing includes were not recorded, so creating one later kept the old answer."""
    folder = project(tmp_path)
    deck = folder / "deck.cir"
    (first,), _ = scan([deck], tmp_path / "cache")
    assert any("not found" in m for m in messages(first))
    (folder / "models" / "parts.inc").write_text("R2 a 0 2k\n")
    (second,), hits = scan([deck], tmp_path / "cache")
    assert hits == 0 and not any("not found" in m for m in messages(second))


def test_the_same_netlist_in_another_folder_is_checked_there(tmp_path: Path) -> None:
    """Guards: keys used relative paths, so an identical netlist elsewhere got this one's answer."""
    one, two = project(tmp_path, "one"), project(tmp_path, "two")
    (two / "models" / "parts.inc").write_text("R2 a 0 2k\n")
    (first,), _ = scan([one / "deck.cir"], tmp_path / "cache")
    (second,), hits = scan([two / "deck.cir"], tmp_path / "cache")
    assert hits == 0
    assert any("not found" in m for m in messages(first))
    assert not any("not found" in m for m in messages(second))
    assert second.circuit.path == str(two / "deck.cir")


@pytest.mark.skipif(not hasattr(os, "symlink"), reason="no symbolic links here")
def test_a_retargeted_symbolic_link_is_seen(tmp_path: Path) -> None:
    """Guards: an include through a symbolic link kept its answer after the link moved."""
    folder = project(tmp_path)
    (folder / "models" / "good.inc").write_text("R2 a 0 2k\n")
    (folder / "models" / "bad.inc").write_text("R2 a\n")
    link = folder / "models" / "parts.inc"
    link.symlink_to("good.inc")
    deck = folder / "deck.cir"
    (first,), _ = scan([deck], tmp_path / "cache")
    assert not any(d.code == "syntax" for d in first.diagnostics)
    link.unlink()
    link.symlink_to("bad.inc")
    (second,), hits = scan([deck], tmp_path / "cache")
    assert hits == 0 and any(d.code != "empty" for d in second.diagnostics)


def test_a_root_marker_added_moves_the_sandbox(tmp_path: Path) -> None:
    """Guards: adding a root marker (here `.git`) below the old root made an include leave
    the new root, but the cached answer still read it."""
    outer = tmp_path / "outer"
    (outer / "sub").mkdir(parents=True)
    (outer / "drivelint.toml").write_text("")
    (outer / "shared.inc").write_text("R2 a 0 2k\n")
    deck = outer / "sub" / "deck.cir"
    deck.write_text("t\n.include ../shared.inc\nR1 a 0 1k\nV1 a 0 DC 5\n")
    (first,), _ = scan([deck], tmp_path / "cache")
    assert not any("outside the project root" in m for m in messages(first))
    (outer / "sub" / ".git").mkdir()
    (second,), hits = scan([deck], tmp_path / "cache")
    assert hits == 0 and any("outside the project root" in m for m in messages(second))


def test_a_local_file_shadowing_a_search_path_file_is_seen(tmp_path: Path) -> None:
    """Guards: a file created beside the netlist shadows the include_paths one; the cache
    kept answering with the search-path file."""
    folder = project(tmp_path)
    (folder / "drivelint.toml").write_text('include_paths = ["lib"]\n')
    (folder / "lib").mkdir()
    (folder / "lib" / "cell.inc").write_text("R2 a 0 2k\n")
    deck = folder / "deck.cir"
    deck.write_text("t\n.include cell.inc\nR1 a 0 1k\nV1 a 0 DC 5\n")
    (first,), _ = scan([deck], tmp_path / "cache")
    assert [f for f in first.circuit.files if f.endswith("cell.inc")] == [
        str(folder / "lib" / "cell.inc")
    ]
    assert not [d for d in first.diagnostics if d.span.path.endswith("cell.inc")]
    (folder / "cell.inc").write_text("R2 a\n")  # the local one wins, and it is broken
    (second,), hits = scan([deck], tmp_path / "cache")
    assert hits == 0
    assert [d.span.path for d in second.diagnostics] == [str(folder / "cell.inc")]


HEADER = b'{"format": 3, "key": "KEY", "inputs": []}'


@pytest.mark.parametrize(
    "damage",
    [
        b"",
        b"{",
        b"\x00\xff\xfe random bytes \x80",
        b"[]",
        b'{"format": 3}\n[]',
        b'"just a string"',
        HEADER + b"\n" + b"[" * 100_000 + b"]" * 100_000,
        HEADER + b'\n["CheckResult", 1, 2, 3, 4, 5]',
        b'{"format": 3, "key": "KEY", "inputs": [["exec", "x", "y"]]}\nnull',
        HEADER + b'\n["os.system", "echo hi"]',
        HEADER,
    ],
    ids=[
        "empty",
        "truncated",
        "random-bytes",
        "wrong-type",
        "missing-keys",
        "string",
        "deep-nesting",
        "wrong-fields",
        "unknown-input",
        "unknown-class",
        "no-result-line",
    ],
)
def test_a_corrupt_entry_is_a_miss(tmp_path: Path, damage: bytes) -> None:
    """Guards: a truncated, random or wrongly typed entry ended in a traceback."""
    deck = tmp_path / "lib" / "deck.cir"
    deck.parent.mkdir()
    shutil.copy(EXAMPLES / "mower48v_hbridge_wrapped_fets.cir", deck)
    shutil.copy(EXAMPLES / "parts.toml", deck.parent / "parts.toml")
    (first,), _ = scan([deck], tmp_path / "cache")
    (entry,) = (tmp_path / "cache").rglob("*.json")
    entry.write_bytes(damage.replace(b"KEY", entry.stem.encode()))
    (second,), hits = scan([deck], tmp_path / "cache")
    assert hits == 0 and second == first
    (third,), hits = scan([deck], tmp_path / "cache")  # rewritten whole
    assert hits == 1 and third == first


def test_an_entry_copied_over_another_is_not_served(tmp_path: Path) -> None:
    """Guards: an entry copied over another file's entry was served for the wrong file."""
    folder = tmp_path / "lib"
    shutil.copytree(EXAMPLES, folder)
    clean, flawed = (
        folder / "lev48_phase_leg_npn_shifter.cir",
        folder / "mower48v_hbridge_wrapped_fets.cir",
    )
    (a, b), _ = scan([clean, flawed], tmp_path / "cache")
    options = BatchOptions(jobs=1, cache_dir=tmp_path / "cache")
    key_a, key_b = (cache_key(j, options) for j in plan([clean, flawed], options))
    assert key_a and key_b and key_a != key_b
    shutil.copy(
        cache.entry_path(tmp_path / "cache", key_b), cache.entry_path(tmp_path / "cache", key_a)
    )
    (again, _), hits = scan([clean, flawed], tmp_path / "cache")
    assert hits == 1 and again == a


def test_a_cache_folder_others_can_write_is_not_used(tmp_path: Path) -> None:
    """An entry planted in a group- or world-writable cache folder is never read."""
    folder = tmp_path / "lib"
    shutil.copytree(EXAMPLES, folder)
    paths = sorted(folder.glob("*.cir"))[:2]
    shared = tmp_path / "shared-cache"
    scan(paths, shared)
    shared.chmod(0o777)
    pipeline.READS.clear()
    _, hits = scan(paths, shared)
    assert hits == 0 and sum(pipeline.READS.values()) == 2
    assert (tmp_path / "fresh").exists() is False
    scan(paths, tmp_path / "fresh")
    assert (tmp_path / "fresh").stat().st_mode & 0o777 == 0o700


def test_the_cache_folder_is_the_platforms_user_cache_directory(
    monkeypatch: pytest.MonkeyPatch, tmp_path: Path
) -> None:
    """Guards: the folder was built by hand from XDG_CACHE_HOME or ~/.cache, wrong on
    macOS and Windows."""
    import platformdirs

    assert cache.default_cache_dir() == Path(
        platformdirs.user_cache_dir("drivelint", appauthor=False)
    )
    if platformdirs.user_cache_dir.__module__.startswith("platformdirs") and os.name == "posix":
        monkeypatch.setenv("XDG_CACHE_HOME", str(tmp_path))
        if str(tmp_path) in platformdirs.user_cache_dir("drivelint"):  # the XDG flavour
            assert cache.default_cache_dir() == tmp_path / "drivelint"
