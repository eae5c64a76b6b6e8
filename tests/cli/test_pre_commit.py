"""The git pre-commit hook, run for real by the pre-commit framework (issue 14, item 7).

The README's two forms are copied from the README itself: the tagged form, pointed at a
clone of this checkout that carries the tag the README names, and the `repo: local` form
with drivelint on the PATH. A netlist with a finding is refused, a clean one commits, the
hook changes no file, a staged include file has the netlist that includes it checked, and
a PCB netlist sharing the `.net` suffix is skipped with a note.
"""

from __future__ import annotations

import os
import re
import shutil
import subprocess
import sys
from pathlib import Path

import pytest

ROOT = Path(__file__).resolve().parents[2]
EXAMPLES = ROOT / "examples"


def _git(cwd: Path, *args: str, check: bool = True) -> subprocess.CompletedProcess[str]:
    return subprocess.run(
        ["git", *args], cwd=cwd, capture_output=True, text=True, check=check, timeout=600
    )


def readme_hook_blocks() -> tuple[str, str]:
    """The README's tagged and local `.pre-commit-config.yaml` blocks, as written."""
    readme = (ROOT / "README.md").read_text(encoding="utf-8")
    section = readme[readme.index("### As a git pre-commit hook") :]
    section = section[: section.index("\n### ")]
    tagged, local = re.findall(r"```yaml\n(.*?)```", section, re.S)
    return tagged, local


@pytest.fixture(scope="module")
def head() -> str:
    if shutil.which("git") is None or shutil.which("pre-commit") is None:
        pytest.skip("git or the pre-commit framework (pip install pre-commit) is not installed")
    found = _git(ROOT, "rev-parse", "HEAD", check=False)
    if found.returncode != 0:
        pytest.skip("this checkout is not a git repository with a commit")
    tracked = _git(ROOT, "ls-files", ".pre-commit-hooks.yaml").stdout.strip()
    if not tracked:
        pytest.skip(".pre-commit-hooks.yaml is not committed yet")
    return found.stdout.strip()


def designs_repo(tmp_path: Path, config: str) -> tuple[Path, dict[str, str]]:
    repo = tmp_path / "designs"
    repo.mkdir()
    _git(repo, "init", "-q")
    _git(repo, "config", "user.email", "reviewer@example.invalid")
    _git(repo, "config", "user.name", "Reviewer")
    (repo / ".pre-commit-config.yaml").write_text(config)
    shutil.copy(EXAMPLES / "parts.toml", repo / "parts.toml")
    # The local form runs the drivelint installed beside this interpreter.
    path = f"{Path(sys.executable).parent}{os.pathsep}{os.environ.get('PATH', '')}"
    env = {**os.environ, "PATH": path, "PRE_COMMIT_HOME": str(tmp_path / "pre-commit-home")}
    installed = subprocess.run(
        ["pre-commit", "install"], cwd=repo, env=env, capture_output=True, text=True, timeout=600
    )
    assert installed.returncode == 0, installed.stdout + installed.stderr
    _git(repo, "add", ".pre-commit-config.yaml", "parts.toml")
    _git(repo, "commit", "-q", "--no-verify", "-m", "set up")
    return repo, env


def commit(repo: Path, env: dict[str, str], message: str) -> subprocess.CompletedProcess[str]:
    return subprocess.run(
        ["git", "commit", "-m", message],
        cwd=repo,
        env=env,
        capture_output=True,
        text=True,
        timeout=900,
    )


def refuses_then_passes(repo: Path, env: dict[str, str]) -> None:
    flawed = repo / "leg.cir"
    shutil.copy(EXAMPLES / "mower48v_hbridge_wrapped_fets.cir", flawed)
    before = flawed.read_bytes()
    _git(repo, "add", "leg.cir")
    refused = commit(repo, env, "add leg")
    output = refused.stdout + refused.stderr
    assert refused.returncode != 0, output
    assert "leg.cir:47:1: error:" in output and "[bootstrap-diode-voltage]" in output
    assert flawed.read_bytes() == before  # the hook never modifies files
    _git(repo, "reset", "-q", "leg.cir")
    flawed.unlink()
    clean = repo / "phase.cir"
    shutil.copy(EXAMPLES / "induction325_half_bridge_driver.cir", clean)
    _git(repo, "add", "phase.cir")
    passed = commit(repo, env, "add phase leg")
    assert passed.returncode == 0, passed.stdout + passed.stderr
    assert "drivelint" in passed.stdout + passed.stderr
    assert _git(repo, "log", "--oneline").stdout.count("\n") == 2


def test_tagged_form_as_the_readme_writes_it(tmp_path: Path, head: str) -> None:
    tagged, _ = readme_hook_blocks()
    rev = re.search(r"rev: (\S+)", tagged)
    assert rev is not None and rev.group(1) == "v0.2.0"
    mirror = tmp_path / "mirror"
    _git(tmp_path, "clone", "-q", str(ROOT), str(mirror))
    _git(mirror, "checkout", "-q", head)
    _git(mirror, "tag", "-f", rev.group(1))  # at the checkout under test (a release tag may exist)
    config = re.sub(r"repo: \S+", f"repo: {mirror}", tagged, count=1)
    repo, env = designs_repo(tmp_path, config)
    refuses_then_passes(repo, env)


def test_local_form_as_the_readme_writes_it(tmp_path: Path, head: str) -> None:
    _, local = readme_hook_blocks()
    assert "repo: local" in local
    repo, env = designs_repo(tmp_path, local)
    refuses_then_passes(repo, env)
    # A staged include file has the netlist that includes it checked again: the mower's
    # leg refers to its subcircuit in a file of its own here.
    text = (EXAMPLES / "mower48v_hbridge_wrapped_fets.cir").read_text().splitlines()
    start = next(i for i, line in enumerate(text) if line.lower().startswith(".subckt"))
    end = max(i for i, line in enumerate(text) if line.lower().startswith(".ends"))
    (repo / "legs.inc").write_text("* the legs\n" + "\n".join(text[start : end + 1]) + "\n")
    body = text[:start] + [".include legs.inc"] + text[end + 1 :]
    (repo / "bridge.cir").write_text("\n".join(body) + "\n")
    _git(repo, "add", "bridge.cir", "legs.inc")
    assert commit(repo, env, "bridge").returncode != 0  # the bridge itself has findings
    _git(repo, "commit", "-q", "--no-verify", "-m", "bridge, accepted for now")
    (repo / "legs.inc").write_text((repo / "legs.inc").read_text() + "* touched\n")
    _git(repo, "add", "legs.inc")
    again = commit(repo, env, "touch the legs")
    output = again.stdout + again.stderr
    assert (
        again.returncode != 0 and "bridge.cir:" in output and "[bootstrap-diode-voltage]" in output
    )
    assert "legs.inc:1:1" not in output  # the include is not checked as a netlist
    _git(repo, "reset", "-q", "legs.inc")
    _git(repo, "checkout", "-q", "legs.inc")
    # A PCB netlist sharing the suffix is skipped with one line, not syntax errors.
    (repo / "board.net").write_text(
        '(export (version "E")\n  (design\n    (source "board.sch"))\n'
        '  (components\n    (comp (ref "R1")\n      (value "10k")))\n  (nets))\n'
    )
    _git(repo, "add", "board.net")
    # pre-commit shows a passing hook's output only when asked to.
    skipped = subprocess.run(
        ["pre-commit", "run", "--verbose", "--files", "board.net"],
        cwd=repo,
        env=env,
        capture_output=True,
        text=True,
        timeout=900,
    )
    output = skipped.stdout + skipped.stderr
    assert skipped.returncode == 0, output
    assert "board.net: note: skipped: an S-expression file" in output
    assert "syntax" not in output and ": error:" not in output
