"""The house style is checked, not hoped for: ruff (lint and format) and mypy (strict)."""

from __future__ import annotations

import shutil
import subprocess
import sys
from pathlib import Path

import pytest

ROOT = Path(__file__).resolve().parent.parent


def _run(*command: str) -> subprocess.CompletedProcess[str]:
    return subprocess.run(
        command, cwd=ROOT, capture_output=True, text=True, timeout=600, check=False
    )


@pytest.mark.skipif(shutil.which("ruff") is None, reason="ruff is not installed (test extra)")
def test_ruff_lint_and_format() -> None:
    lint = _run("ruff", "check", ".")
    assert lint.returncode == 0, lint.stdout + lint.stderr
    layout = _run("ruff", "format", "--check", ".")
    assert layout.returncode == 0, layout.stdout + layout.stderr


def test_mypy_strict() -> None:
    pytest.importorskip("mypy", reason="mypy is not installed (test extra)")
    checked = _run(sys.executable, "-m", "mypy", "drivelint")
    assert checked.returncode == 0, checked.stdout + checked.stderr
