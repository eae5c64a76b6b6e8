"""Every rule has a card and a check, and every card's examples do what they say."""

from __future__ import annotations

from pathlib import Path

import pytest

from drivelint.checks.registry import RuleError, load_card, registry, rules_dir
from drivelint.pipeline import check_text

RULES = sorted(registry())


def test_every_card_loads_and_every_check_module_is_carded() -> None:
    cards = {p.stem for p in rules_dir().glob("*.toml")}
    assert cards == set(registry())
    checks_dir = Path(__file__).resolve().parents[2] / "drivelint" / "checks"
    import importlib

    declared: set[str] = set()
    for module in checks_dir.glob("*.py"):
        mod = importlib.import_module(f"drivelint.checks.{module.stem}")
        declared |= set(getattr(mod, "CHECKS", {}))
    assert declared == cards


@pytest.mark.parametrize("rule_id", RULES)
def test_card_is_complete(rule_id: str) -> None:
    rule = registry()[rule_id]
    for text in (rule.title, rule.summary, rule.why, rule.method, rule.fix):
        assert len(text) > 20
    assert rule.references, "cite a source, 'common practice' or 'from memory'"
    for option in rule.options.values():
        assert option.help and option.unit


@pytest.mark.parametrize("rule_id", RULES)
def test_bad_example_fires_and_good_one_does_not(rule_id: str) -> None:
    rule = registry()[rule_id]
    bad = check_text(rule.bad, path=f"{rule_id}-bad.cir")
    assert not [d for d in bad.diagnostics if d.severity.label == "error"]
    assert rule_id in {f.rule for f in bad.findings}, f"bad example of {rule_id} did not fire"
    good = check_text(rule.good, path=f"{rule_id}-good.cir")
    assert not [d for d in good.diagnostics if d.severity.label == "error"]
    assert rule_id not in {f.rule for f in good.findings}, f"good example of {rule_id} fired"


def test_a_card_without_a_check_is_refused(tmp_path: Path) -> None:
    card = tmp_path / "no-such-rule.toml"
    source = (rules_dir() / f"{RULES[0]}.toml").read_text(encoding="utf-8")
    card.write_text(source, encoding="utf-8")
    with pytest.raises(RuleError, match="has no check"):
        load_card(card)
    broken = tmp_path / "broken.toml"
    broken.write_text('title = "x"\n', encoding="utf-8")
    with pytest.raises(RuleError, match="missing"):
        load_card(broken)
