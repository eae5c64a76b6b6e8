"""A rule card in readable form, for `drivelint explain`."""

from __future__ import annotations

import textwrap

from drivelint.checks.registry import Rule


def card_text(rule: Rule) -> str:
    def section(title: str, body: str) -> str:
        return f"{title}\n{textwrap.indent(body.strip(), '  ')}"

    parts = [
        f"{rule.id}: {rule.title}",
        f"default severity: {rule.severity.label}",
        section("What it checks", rule.summary),
        section("Why it matters", rule.why),
        section("How it is computed", rule.method),
        section("How to fix it", rule.fix),
    ]
    if rule.options:
        rows = "\n".join(
            f"{o.name} = {o.default_text!r} [{o.unit}]: {o.help}" for o in rule.options.values()
        )
        parts.append(section("Options", rows))
    parts.append(section("References", "\n".join(f"- {r}" for r in rule.references)))
    parts.append(
        "drivelint is a review aid, not a substitute for a qualified engineer, the parts'\n"
        "datasheets, or local codes and licensed practice; high-voltage stages can kill."
    )
    return "\n\n".join(parts)
