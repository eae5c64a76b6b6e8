"""Locating the data files (lark grammars) that ship beside the code."""

from __future__ import annotations

import pathlib

_PACKAGE_DIR = pathlib.Path(__file__).resolve().parent.parent


def grammar_path(name: str) -> pathlib.Path:
    """Path of grammar file ``name``: inside the installed package, else in the source checkout."""
    # The wheel carries grammar/ inside the package (pyproject force-include);
    # a source checkout keeps it at the repository root beside drivelint/.
    installed = _PACKAGE_DIR / "grammar" / name
    if installed.exists():
        return installed
    return _PACKAGE_DIR.parent / "grammar" / name
