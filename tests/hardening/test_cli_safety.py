"""The command line: the sandbox, report files, and terminals that cannot take UTF-8.

Guards: a scanned tree's own drivelint.toml could set allow_outside_root = true and let
`/etc/passwd`-style files into the report; `--allow-outside-root` was mentioned but absent
from `check`; `--output` into a missing or read-only folder gave a traceback and lost the
results; the report file got mode 0600 whatever the umask; non-UTF-8 text written to a
strict or non-UTF-8 standard output ended in UnicodeEncodeError and no report.
"""

from __future__ import annotations

import json
import os
import stat
import subprocess
import sys
from pathlib import Path

import pytest

ROOT = Path(__file__).resolve().parents[2]
EXAMPLES = ROOT / "examples"
FLAWED = EXAMPLES / "mower48v_hbridge_wrapped_fets.cir"
OUTSIDE_SECRET = "outside-the-root-SECRET"


def drivelint(
    *args: str, cwd: Path, env: dict[str, str] | None = None, umask: int | None = None
) -> subprocess.CompletedProcess[bytes]:
    environment = {**os.environ, "XDG_CACHE_HOME": str(cwd / ".cache-home"), **(env or {})}

    def set_umask() -> None:
        if umask is not None:
            os.umask(umask)

    return subprocess.run(
        [sys.executable, "-m", "drivelint", *args],
        cwd=cwd,
        capture_output=True,
        timeout=120,
        env=environment,
        check=False,
        preexec_fn=set_umask if umask is not None else None,  # noqa: PLW1509
    )


def text_of(run: subprocess.CompletedProcess[bytes]) -> str:
    return run.stdout.decode(errors="replace") + run.stderr.decode(errors="replace")


def sandbox(tmp_path: Path, config: str) -> tuple[Path, Path]:
    """outer/ holds a secret; outer/repo/ is a project whose netlist includes it."""
    outer = tmp_path / "outer"
    repo = outer / "repo"
    repo.mkdir(parents=True)
    (repo / ".git").mkdir()
    (outer / "secret.inc").write_text(f"R_{OUTSIDE_SECRET} a 0\n")
    (repo / "drivelint.toml").write_text(config)
    (repo / "deck.cir").write_text("t\n.include ../secret.inc\nR1 a 0 1k\nV1 a 0 DC 5\n.end\n")
    return outer, repo


@pytest.mark.parametrize("command", ["netlist", "stages", "check"])
def test_a_scanned_trees_own_config_cannot_widen_its_sandbox(tmp_path: Path, command: str) -> None:
    _, repo = sandbox(tmp_path, "allow_outside_root = true\n")
    args = [command, "--no-cache", "."] if command == "check" else [command, "deck.cir"]
    run = drivelint(*args, cwd=repo)
    assert "resolves outside the project root" in text_of(run)
    assert OUTSIDE_SECRET not in text_of(run)


@pytest.mark.parametrize("command", ["netlist", "stages", "check"])
def test_allow_outside_root_on_the_command_line_widens_it(tmp_path: Path, command: str) -> None:
    _, repo = sandbox(tmp_path, "")
    extra = ["--no-cache"] if command == "check" else []
    run = drivelint(command, *extra, "--allow-outside-root", "deck.cir", cwd=repo)
    assert "outside the project root" not in text_of(run)
    assert "secret.inc" in text_of(run)  # read: its broken line is reported


def test_a_configuration_above_the_project_may_widen_it(tmp_path: Path) -> None:
    """The invoking project's (or a user-level) file above the checked project's root."""
    outer, repo = sandbox(tmp_path, "")
    (repo / "drivelint.toml").unlink()
    (outer / "drivelint.toml").write_text("allow_outside_root = true\n")
    run = drivelint("check", "--no-cache", "repo/deck.cir", cwd=outer)
    assert "outside the project root" not in text_of(run)
    # ... but not when that folder is itself being scanned.
    run = drivelint("check", "--no-cache", ".", cwd=outer)
    assert "resolves outside the project root" in text_of(run)


def test_output_into_a_missing_folder_exits_2(tmp_path: Path) -> None:
    run = drivelint(
        "check",
        "--no-cache",
        "--format",
        "json",
        "--output",
        "no/such/dir/r.json",
        str(FLAWED),
        cwd=tmp_path,
    )
    assert run.returncode == 2 and b"Traceback" not in run.stderr
    assert b"does not exist" in run.stderr


@pytest.mark.skipif(hasattr(os, "geteuid") and os.geteuid() == 0, reason="root writes anywhere")
def test_output_into_a_read_only_folder_exits_2(tmp_path: Path) -> None:
    folder = tmp_path / "ro"
    folder.mkdir()
    folder.chmod(0o500)
    try:
        run = drivelint("check", "--no-cache", "--output", "ro/r.txt", str(FLAWED), cwd=tmp_path)
    finally:
        folder.chmod(0o700)
    assert run.returncode == 2 and b"cannot write" in run.stderr and b"Traceback" not in run.stderr


def test_output_that_cannot_be_created_exits_2(tmp_path: Path) -> None:
    """Works as root too: the target's folder is a file."""
    (tmp_path / "plain").write_text("x")
    run = drivelint("check", "--no-cache", "--output", "plain/r.txt", str(FLAWED), cwd=tmp_path)
    assert run.returncode == 2 and b"Traceback" not in run.stderr


def test_output_never_overwrites_a_checked_file(tmp_path: Path) -> None:
    deck = tmp_path / "deck.cir"
    deck.write_text(FLAWED.read_text())
    run = drivelint("check", "--no-cache", "--output", "deck.cir", "deck.cir", cwd=tmp_path)
    assert run.returncode == 2 and deck.read_text() == FLAWED.read_text()


@pytest.mark.parametrize("umask", [0o022, 0o077, 0o002])
def test_the_report_file_respects_the_umask(tmp_path: Path, umask: int) -> None:
    run = drivelint(
        "check",
        "--no-cache",
        "--format",
        "json",
        "--output",
        "r.json",
        str(FLAWED),
        cwd=tmp_path,
        umask=umask,
    )
    assert run.returncode == 1
    assert stat.S_IMODE((tmp_path / "r.json").stat().st_mode) == 0o666 & ~umask
    assert json.loads((tmp_path / "r.json").read_text())["findings"]


@pytest.mark.parametrize("encoding", ["ascii", "latin-1", "utf-8:strict", "cp1252"])
@pytest.mark.parametrize("fmt", ["text", "sarif", "html"])
def test_a_terminal_that_cannot_encode_gets_escapes_not_a_crash(
    tmp_path: Path, encoding: str, fmt: str
) -> None:
    deck = tmp_path / "ünïcode_Ω.cir"
    deck.write_text(
        FLAWED.read_text().replace("\n", " — µΩ ☃ 漢\n", 1) + "R☃ a\n", encoding="utf-8"
    )
    run = drivelint(
        "check",
        "--no-cache",
        "--format",
        fmt,
        deck.name,
        cwd=tmp_path,
        env={"PYTHONIOENCODING": encoding, "LC_ALL": "C", "LANG": "C"},
    )
    assert b"UnicodeEncodeError" not in run.stderr and b"Traceback" not in run.stderr
    assert run.returncode == 1
    assert len(run.stdout) > 100


@pytest.mark.skipif(sys.platform != "linux", reason="file names of any bytes: Linux")
@pytest.mark.parametrize("fmt", ["text", "json", "sarif", "junit", "github", "html"])
def test_a_file_name_that_is_not_utf8_is_reported_in_every_format(tmp_path: Path, fmt: str) -> None:
    """Such a name arrives with surrogate escapes, which strict encoders refuse."""
    name = os.fsdecode(b"caf\xe9.cir")
    (tmp_path / name).write_bytes(FLAWED.read_bytes().replace(b"\n", b" \xe9\xff\n", 1))
    for attempt in ("cold", "warm", "shard"):
        extra = ["--shard", "1/1"] if attempt == "shard" else []
        run = drivelint(
            "check",
            "--format",
            fmt,
            *extra,
            ".",
            cwd=tmp_path,
            env={"PYTHONIOENCODING": "utf-8:strict"},
        )
        assert run.returncode == 1 and b"Traceback" not in run.stderr, (attempt, run.stderr[-2000:])
    assert len(list((tmp_path / ".cache-home").rglob("*.json"))) == 1  # cached, and found
