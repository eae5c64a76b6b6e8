"""Layers only look down (DESIGN §2): a stage never imports a later stage's modules."""

from __future__ import annotations

import ast
from pathlib import Path

PACKAGE = Path(__file__).resolve().parent.parent / "drivelint"

# Rank of each top-level module or package; a module may import only ranks <= its own.
RANKS = {
    "diagnostics": 0,
    "limits": 0,
    "paths": 0,
    "_gc": 0,
    "physics": 0,
    "netlist": 1,
    "circuit": 2,
    "ratings": 2,
    "stages": 3,
    "checks": 4,
    "report": 5,
    "codec": 5,
    "pipeline": 6,
    "config": 6,
    "batch": 6,
    "testbench": 6,
    "cache": 6,
    "merge": 6,
    "cli": 7,
    "__main__": 7,
    "__init__": 7,
}


def _layer(module: str) -> str:
    return module.split(".")[1] if module.count(".") else "__init__"


def _imports(path: Path) -> set[str]:
    tree = ast.parse(path.read_text(encoding="utf-8"))
    names: set[str] = set()
    for node in ast.walk(tree):
        if isinstance(node, ast.Import):
            names.update(a.name for a in node.names)
        elif isinstance(node, ast.ImportFrom) and node.module and node.level == 0:
            names.add(node.module)
    return {n for n in names if n == "drivelint" or n.startswith("drivelint.")}


def test_every_module_has_a_layer() -> None:
    for path in PACKAGE.rglob("*.py"):
        top = path.relative_to(PACKAGE).parts[0].removesuffix(".py")
        assert top in RANKS, f"{path}: add its layer to RANKS"


def test_layers_only_look_down() -> None:
    offences = []
    for path in PACKAGE.rglob("*.py"):
        top = path.relative_to(PACKAGE).parts[0].removesuffix(".py")
        for imported in _imports(path):
            if imported == "drivelint":
                continue
            target = _layer(imported)
            if RANKS[target] > RANKS[top]:
                offences.append(f"{path.relative_to(PACKAGE)} imports {imported}")
    assert offences == []


def test_physics_does_not_import_pint() -> None:
    for path in (PACKAGE / "physics").rglob("*.py"):
        assert "pint" not in {n.split(".")[0] for n in _imports_all(path)}, path


def _imports_all(path: Path) -> set[str]:
    tree = ast.parse(path.read_text(encoding="utf-8"))
    out: set[str] = set()
    for node in ast.walk(tree):
        if isinstance(node, ast.Import):
            out.update(a.name for a in node.names)
        elif isinstance(node, ast.ImportFrom) and node.module:
            out.add(node.module)
    return out
