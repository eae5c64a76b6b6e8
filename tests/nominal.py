"""Netlists judged at the nominal corner, for tests that hold a rule to a published
worked example or to a simulation of the netlist as written (both are nominal figures).

The rules judge every margin at its tolerance corner by default (drivelint/checks/
corners.py); ``corners = 0`` is the documented way to judge the values as written.
"""

from __future__ import annotations

from pathlib import Path
from typing import TYPE_CHECKING

if TYPE_CHECKING:
    from drivelint.checks.runner import CheckResult

NOMINAL_DIRECTIVE = "* drivelint: conditions corners=0"


def at_nominal(text: str) -> str:
    """``text`` with a directive that sets corners = 0, written just before its ``.end``
    (or at its end), so that no line of the netlist moves."""
    lines = text.splitlines(keepends=True)
    for index in range(len(lines) - 1, -1, -1):
        if lines[index].strip().lower() == ".end":
            lines.insert(index, NOMINAL_DIRECTIVE + "\n")
            return "".join(lines)
    ending = "" if not text or text.endswith("\n") else "\n"
    return f"{text}{ending}{NOMINAL_DIRECTIVE}\n"


def check_nominal(path: Path) -> CheckResult:
    """``drivelint check`` of ``path`` at the nominal corner (its text with the directive)."""
    from drivelint.pipeline import check_path

    return check_path(path, text=at_nominal(path.read_text(encoding="utf-8")))
