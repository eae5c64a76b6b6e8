"""Paths: resolving those that may be hostile (symbolic-link loops, names the system
refuses), a project's root, the netlists under a folder."""

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


ROOT_MARKERS = ("drivelint.toml", "pyproject.toml", ".git")
NETLIST_SUFFIXES = (".cir", ".net", ".sp", ".spi", ".spice", ".ckt")


def find_project_root(path: Path) -> Path:
    """The nearest folder above ``path`` holding a project marker, else the file's folder."""
    start = resolved(path)
    folder = start if start.is_dir() else start.parent
    for candidate in (folder, *folder.parents):
        if any((candidate / marker).exists() for marker in ROOT_MARKERS):
            return candidate
    return folder


def collect_paths(
    paths: tuple[Path, ...], suffixes: tuple[str, ...] = NETLIST_SUFFIXES
) -> list[Path]:
    """Files as given, and folders searched recursively for netlist suffixes, sorted."""
    out: list[Path] = []
    for path in paths:
        if path.is_dir():
            out.extend(
                sorted(p for p in path.rglob("*") if p.is_file() and p.suffix.lower() in suffixes)
            )
        else:
            out.append(path)
    return out
