"""The git pre-commit hook, run for real by the pre-commit framework (issue: three ways, point 5).

A temporary repository points at this checkout through its .pre-commit-hooks.yaml; a
netlist with a finding is refused, a clean one commits, and the hook changes no file.
"""

from __future__ import annotations

import os
import shutil
import subprocess
from pathlib import Path

import pytest

ROOT = Path(__file__).resolve().parents[2]
EXAMPLES = ROOT / "examples"


def _git(cwd: Path, *args: str, check: bool = True) -> subprocess.CompletedProcess[str]:
    return subprocess.run(
        ["git", *args], cwd=cwd, capture_output=True, text=True, check=check, timeout=600
    )


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


def test_hook_refuses_a_finding_and_passes_a_clean_netlist(tmp_path: Path, head: str) -> None:
    repo = tmp_path / "designs"
    repo.mkdir()
    _git(repo, "init", "-q")
    _git(repo, "config", "user.email", "reviewer@example.invalid")
    _git(repo, "config", "user.name", "Reviewer")
    (repo / ".pre-commit-config.yaml").write_text(
        f"repos:\n- repo: {ROOT}\n  rev: {head}\n  hooks:\n  - id: drivelint\n"
    )
    shutil.copy(EXAMPLES / "parts.toml", repo / "parts.toml")
    env = {**os.environ, "PRE_COMMIT_HOME": str(tmp_path / "pre-commit-home")}
    installed = subprocess.run(
        ["pre-commit", "install"], cwd=repo, env=env, capture_output=True, text=True, timeout=600
    )
    assert installed.returncode == 0, installed.stdout + installed.stderr
    _git(repo, "add", ".pre-commit-config.yaml", "parts.toml")
    _git(repo, "commit", "-q", "--no-verify", "-m", "set up")

    flawed = repo / "leg.cir"
    shutil.copy(EXAMPLES / "mower48v_hbridge_wrapped_fets.cir", flawed)
    before = flawed.read_bytes()
    _git(repo, "add", "leg.cir")
    refused = subprocess.run(
        ["git", "commit", "-m", "add leg"],
        cwd=repo,
        env=env,
        capture_output=True,
        text=True,
        timeout=900,
    )
    output = refused.stdout + refused.stderr
    assert refused.returncode != 0, output
    assert "leg.cir:47:1: error:" in output and "[bootstrap-diode-voltage]" in output
    assert flawed.read_bytes() == before  # the hook never modifies files

    _git(repo, "reset", "-q", "leg.cir")
    flawed.unlink()
    clean = repo / "phase.cir"
    shutil.copy(EXAMPLES / "lev48_phase_leg_npn_shifter.cir", clean)
    _git(repo, "add", "phase.cir")
    passed = subprocess.run(
        ["git", "commit", "-m", "add phase leg"],
        cwd=repo,
        env=env,
        capture_output=True,
        text=True,
        timeout=900,
    )
    assert passed.returncode == 0, passed.stdout + passed.stderr
    assert "drivelint" in passed.stdout + passed.stderr
    assert _git(repo, "log", "--oneline").stdout.count("\n") == 2
