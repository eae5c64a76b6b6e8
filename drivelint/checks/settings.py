"""What the configuration says of a rule, in the rules' own layer: the configuration reads
it (config.py), the runner and the registry act on it."""

from __future__ import annotations

from collections.abc import Mapping
from dataclasses import dataclass, field

from drivelint.diagnostics import Severity


class RuleError(ValueError):
    """A rule card or rule setting that cannot be used; the message names file and key."""


@dataclass(frozen=True, slots=True)
class RuleSetting:
    """A rule's settings from the configuration: on or off, its severity, its options."""

    enabled: bool = True
    severity: Severity | None = None
    options: Mapping[str, float] = field(default_factory=dict)
