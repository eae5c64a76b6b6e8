"""Shared by the generator scripts: a Python module that holds one JSON string.

The generated modules (``parse_tables.py``, ``card_data.py``) are data, not code: a
docstring, a few string assignments, and the JSON text split into adjacent string
literals of 88 characters, which drivelint reads with ``json.loads``.
"""

from __future__ import annotations

import json
from pathlib import Path
from typing import Any


def render(header: str, strings: dict[str, str], name: str, data: Any) -> str:
    """The module's text: ``header``, each of ``strings`` assigned, then ``name`` = JSON."""
    text = json.dumps(data, sort_keys=True, separators=(",", ":"))
    chunks = "\n".join(f"    {json.dumps(text[i : i + 88])}" for i in range(0, len(text), 88))
    assigned = "".join(f"{key} = {value!r}\n" for key, value in strings.items())
    return f"{header}{assigned}{name} = (\n{chunks}\n)\n"


def write(target: Path, text: str, root: Path) -> int:
    target.write_text(text, encoding="utf-8")
    print(f"wrote {target.relative_to(root)} ({len(text)} bytes)")
    return 0
