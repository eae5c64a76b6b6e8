"""Resolving paths that may be hostile: symbolic-link loops, names the system refuses."""

from __future__ import annotations

import os
from pathlib import Path


def resolved(path: Path) -> Path:
    """``path.resolve()``, or its absolute form when it cannot be resolved (a symbolic-link
    loop raises RuntimeError in Python 3.11, OSError later; a NUL byte, ValueError). What is
    not there is reported by whoever opens it."""
    try:
        return path.resolve()
    except (RuntimeError, OSError, ValueError):
        return Path(os.path.abspath(path))
