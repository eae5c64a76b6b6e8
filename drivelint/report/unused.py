"""Settings a library scan gives that none of its netlists uses: parts entries no model or
subcircuit matches, configured conditions no rule asked for. Read from each file's brief
(or result), so a warm re-scan says them without building any result."""

from __future__ import annotations

from collections.abc import Mapping, Sequence
from typing import TYPE_CHECKING, Protocol

from drivelint.diagnostics import Diagnostic, Severity, Span

if TYPE_CHECKING:
    from drivelint.ratings.parts import PartsLibrary


class Usage(Protocol):
    """What a checked file's rules used (a result or its brief)."""

    @property
    def conditions_used(self) -> frozenset[str]: ...
    @property
    def names_used(self) -> frozenset[str]: ...


def unused_parts(results: Sequence[Usage], libraries: Sequence[PartsLibrary]) -> list[Diagnostic]:
    """Parts entries that no model or subcircuit of any checked netlist uses: a warning
    each, at the entry's line (a name typed as the part number rather than the .model
    name, or a part no longer in the designs)."""
    used = frozenset().union(*(r.names_used for r in results)) if results else frozenset()
    out: dict[str, Diagnostic] = {}
    for library in libraries:
        for name, part in library.parts.items():
            if name in used or part.origin in out:
                continue
            path, _, line = part.origin.rpartition(":")
            span = Span(path, int(line) if line.isdigit() else 1, 1)
            checked = len(results)
            out[part.origin] = Diagnostic(
                Severity.WARNING,
                span,
                f"part '{part.name}' matches no model or subcircuit of the {checked} "
                f"netlist{'s' * (checked != 1)} checked; parts are keyed by the .model or "
                ".subckt name a netlist uses",
                "",
                "parts-unused",
            )
    return [out[k] for k in sorted(out)]


def unused_conditions(
    results: Sequence[Usage], configured: Mapping[str, Sequence[str]]
) -> list[str]:
    """Configured conditions (key -> where each is set) that no rule used in any file."""
    used = frozenset().union(*(r.conditions_used for r in results)) if results else frozenset()
    return [
        f"{where}: warning: condition {key} is used by no rule in the {len(results)} "
        f"file{'s' * (len(results) != 1)} checked [condition-unused]"
        for key, places in sorted(configured.items())
        if key not in used
        for where in sorted(set(places))
    ]
