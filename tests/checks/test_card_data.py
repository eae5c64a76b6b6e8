"""The rule cards' snapshot (drivelint/checks/card_data.py) is current, and only a cache.

The registry reads the parsed cards from the snapshot when its digest matches the card
files, and parses the TOML otherwise; both give the same rules.
"""

from __future__ import annotations

import ast
import json
import tomllib
from pathlib import Path

import pytest

from drivelint.checks import registry as module
from drivelint.checks.registry import cards_digest, rules_dir

ROOT = Path(__file__).resolve().parents[2]


def _texts() -> dict[str, bytes]:
    return {card.name: card.read_bytes() for card in sorted(rules_dir().glob("*.toml"))}


def test_snapshot_is_current() -> None:
    from drivelint.checks.card_data import CARDS_DIGEST

    assert CARDS_DIGEST == cards_digest(_texts()), (
        "a rule card changed: run python scripts/generate_card_data.py and commit the result"
    )


def test_snapshot_holds_what_tomllib_reads() -> None:
    from drivelint.checks.card_data import CARDS_JSON

    parsed = {name: tomllib.loads(text.decode()) for name, text in _texts().items()}
    assert json.loads(CARDS_JSON) == parsed


def test_snapshot_is_literals_only() -> None:
    tree = ast.parse((ROOT / "drivelint" / "checks" / "card_data.py").read_text())
    for node in tree.body:
        if isinstance(node, ast.Expr) and isinstance(node.value, ast.Constant):
            continue
        assert isinstance(node, ast.Assign), ast.dump(node)
        assert isinstance(ast.literal_eval(node.value), str)


def test_a_stale_snapshot_is_ignored(monkeypatch: pytest.MonkeyPatch) -> None:
    from drivelint.checks import card_data

    with_snapshot = module.registry()
    monkeypatch.setattr(card_data, "CARDS_DIGEST", "0" * 64)
    monkeypatch.setattr(card_data, "CARDS_JSON", '{"dc-hold.toml": {"title": "stale"}}')
    assert module._snapshot(_texts()) is None
    module.registry.cache_clear()
    try:
        from_toml = module.registry()
    finally:
        module.registry.cache_clear()
    assert {rule_id: (r.title, r.severity, r.options) for rule_id, r in from_toml.items()} == {
        rule_id: (r.title, r.severity, r.options) for rule_id, r in with_snapshot.items()
    }
