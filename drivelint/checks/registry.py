"""The rule registry, built from one place: the cards in ``rules/<id>.toml``.

A card names the module in ``drivelint/checks/`` that holds its check; the module
declares ``CHECKS = {"rule-id": function}``, and the registry insists that the two agree,
so a rule cannot exist without both its documentation and its code.
"""

from __future__ import annotations

import hashlib
import importlib
import json
import tomllib
from collections.abc import Mapping
from dataclasses import dataclass, field
from functools import cache
from pathlib import Path
from typing import Any

from drivelint.checks.base import Check
from drivelint.checks.settings import RuleError as RuleError
from drivelint.diagnostics import Severity

REQUIRED = ("title", "severity", "summary", "why", "method", "fix", "module", "references")
OPTION_KEYS = frozenset({"unit", "default", "help"})


@dataclass(frozen=True, slots=True)
class RuleOption:
    name: str
    unit: str
    default: float
    default_text: str
    help: str


@dataclass(frozen=True, slots=True)
class Rule:
    id: str
    title: str
    severity: Severity
    summary: str
    why: str
    method: str
    fix: str
    references: tuple[str, ...]
    options: Mapping[str, RuleOption]
    bad: str
    good: str
    check: Check = field(repr=False)
    card: str = ""

    def option_values(self, overrides: Mapping[str, float] | None = None) -> dict[str, float]:
        values = {name: option.default for name, option in self.options.items()}
        values.update(overrides or {})
        return values


def rules_dir() -> Path:
    package = Path(__file__).resolve().parent.parent
    installed = package / "rules"
    return installed if installed.is_dir() else package.parent / "rules"


def parse_option_value(text: str | float, unit: str, where: str) -> float:
    from drivelint.ratings.units import UnitError, parse_quantity

    try:
        return parse_quantity(text, unit)
    except UnitError as exc:
        raise RuleError(f"{where}: {exc}") from None


def cards_digest(texts: Mapping[str, bytes]) -> str:
    """What the card snapshot depends on: every card's file name and bytes."""
    digest = hashlib.sha256()
    for name in sorted(texts):
        digest.update(name.encode() + b"\0" + texts[name] + b"\0")
    return digest.hexdigest()


def _snapshot(texts: Mapping[str, bytes]) -> Mapping[str, dict[str, Any]] | None:
    """The cards as parsed data from ``card_data.py``, when it was made from these bytes.

    tomllib is pure Python: the fifteen cards took about 7 ms to parse on every start,
    a twentieth of a one-file check. ``scripts/generate_card_data.py`` writes the parsed
    cards as one JSON string with the digest of the files it read; a card edited since
    (or a snapshot missing) is parsed from its TOML instead: slower, never stale.
    """
    try:
        from drivelint.checks.card_data import CARDS_DIGEST, CARDS_JSON
    except ImportError:
        return None
    if CARDS_DIGEST != cards_digest(texts):
        return None
    found: dict[str, dict[str, Any]] = json.loads(CARDS_JSON)
    return found


def parse_card(path: Path, text: bytes) -> dict[str, Any]:
    try:
        return tomllib.loads(text.decode("utf-8"))
    except (tomllib.TOMLDecodeError, UnicodeDecodeError) as exc:
        raise RuleError(f"{path.name}: not valid TOML: {exc}") from None


def load_card(path: Path, data: Mapping[str, Any] | None = None) -> Rule:
    """The rule of card ``path``; ``data`` is its parsed TOML where already known."""
    where = path.name
    if data is None:
        data = parse_card(path, path.read_bytes())
    rule_id = path.stem
    missing = [key for key in REQUIRED if key not in data]
    if missing:
        raise RuleError(f"{where}: missing {', '.join(missing)}")
    try:
        severity = Severity.parse(str(data["severity"]))
    except ValueError as exc:
        raise RuleError(f"{where}: severity: {exc}") from None
    options: dict[str, RuleOption] = {}
    for name, spec in dict(data.get("options", {})).items():
        unknown = set(spec) - OPTION_KEYS
        if unknown or not {"unit", "default", "help"} <= set(spec):
            raise RuleError(f"{where}: options.{name} needs unit, default and help only")
        default = parse_option_value(spec["default"], spec["unit"], f"{where}: options.{name}")
        options[name] = RuleOption(name, spec["unit"], default, str(spec["default"]), spec["help"])
    example = dict(data.get("example", {}))
    if not example.get("bad") or not example.get("good"):
        raise RuleError(f"{where}: needs [example] bad and good netlists")
    module = importlib.import_module(f"drivelint.checks.{data['module']}")
    checks: Mapping[str, Check] = getattr(module, "CHECKS", {})
    if rule_id not in checks:
        raise RuleError(f"{where}: module drivelint.checks.{data['module']} has no check for it")
    return Rule(
        id=rule_id,
        title=data["title"],
        severity=severity,
        summary=data["summary"].strip(),
        why=data["why"].strip(),
        method=data["method"].strip(),
        fix=data["fix"].strip(),
        references=tuple(data["references"]),
        options=options,
        bad=example["bad"],
        good=example["good"],
        check=checks[rule_id],
        card=str(path),
    )


@cache
def registry() -> Mapping[str, Rule]:
    """Every rule, by id, in id order."""
    cards = sorted(rules_dir().glob("*.toml"))
    texts = {card.name: card.read_bytes() for card in cards}
    snapshot = _snapshot(texts)
    return {
        card.stem: load_card(
            card, snapshot[card.name] if snapshot else parse_card(card, texts[card.name])
        )
        for card in cards
    }
