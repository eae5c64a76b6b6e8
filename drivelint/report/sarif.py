"""Findings as a SARIF 2.1.0 log, for code-scanning dashboards.

One run; the driver lists every rule of the registry, each result points at the device's
line with the other devices of its stage as related locations, and input problems become
tool execution notifications. Everything is sorted, and nothing depends on the clock or the
machine, so the same netlists give the same bytes.
"""

from __future__ import annotations

import hashlib
import json
import posixpath
from collections.abc import Iterable, Mapping, Sequence
from pathlib import Path, PurePath
from typing import TYPE_CHECKING, Any
from urllib.parse import quote

from drivelint import __version__
from drivelint.checks.base import Finding
from drivelint.checks.registry import Rule, registry
from drivelint.checks.runner import CheckResult
from drivelint.diagnostics import Diagnostic, Severity, Span, excerpt
from drivelint.paths import resolved
from drivelint.report.status import failed

if TYPE_CHECKING:
    from drivelint.report.formats import ReportOptions

SARIF_VERSION = "2.1.0"
SARIF_SCHEMA = (
    "https://docs.oasis-open.org/sarif/sarif/v2.1.0/errata01/os/schemas/sarif-schema-2.1.0.json"
)
SOURCE_ROOT = "%SRCROOT%"

LEVELS: Mapping[Severity, str] = {
    Severity.ERROR: "error",
    Severity.WARNING: "warning",
    Severity.NOTE: "note",
}


def portable_path(path: str) -> str:
    """``path`` as CI services expect it: forward slashes, relative to the working folder.

    An absolute path under the working folder is made relative; one outside it stays
    absolute (there is nothing it could be relative to).
    """
    pure = PurePath(path)
    if pure.is_absolute():
        try:
            pure = resolved(Path(path)).relative_to(resolved(Path.cwd()))
        except ValueError:
            return pure.as_posix()
    return posixpath.normpath(pure.as_posix())


def artifact_uri(path: str) -> tuple[str, str | None]:
    """The URI of a checked file and its base id (None for an absolute ``file:`` URI)."""
    portable = portable_path(path)
    if PurePath(portable).is_absolute():
        absolute = portable if portable.startswith("/") else "/" + portable
        return "file://" + quote(absolute, errors="surrogateescape"), None
    # A file name that is not UTF-8 keeps its own bytes, percent-encoded.
    return quote(portable, errors="surrogateescape"), SOURCE_ROOT


def _unwrap(text: str) -> str:
    """Card prose re-flowed: the card's line breaks are for its TOML, not for a dashboard."""
    paragraphs = [" ".join(p.split()) for p in text.strip().split("\n\n")]
    return "\n\n".join(p for p in paragraphs if p)


def _rule_name(rule_id: str) -> str:
    # SARIF's rule name is an identifier a reader understands, conventionally one word.
    return "".join(word.capitalize() for word in rule_id.replace("_", "-").split("-"))


def rule_descriptor(rule: Rule) -> dict[str, Any]:
    why, fix, method = _unwrap(rule.why), _unwrap(rule.fix), rule.method.strip()
    return {
        "id": rule.id,
        "name": _rule_name(rule.id),
        "shortDescription": {"text": rule.title},
        "fullDescription": {"text": _unwrap(rule.summary)},
        "help": {
            "text": f"{why}\n\nFix: {fix}\n\nMethod:\n{method}",
            "markdown": f"{why}\n\n**Fix.** {fix}\n\n**Method.**\n\n```text\n{method}\n```",
        },
        "defaultConfiguration": {"level": LEVELS[rule.severity]},
        "properties": {
            "references": list(rule.references),
            "options": {
                name: {"default": option.default_text, "unit": option.unit, "help": option.help}
                for name, option in sorted(rule.options.items())
            },
        },
    }


class _Artifacts:
    """The run's artifact table: each file once, by index, in path order."""

    def __init__(self, paths: Iterable[str]) -> None:
        self.paths = sorted({portable_path(p) for p in paths})
        self.index = {path: number for number, path in enumerate(self.paths)}

    def location(self, path: str) -> dict[str, Any]:
        uri, base = artifact_uri(path)
        location: dict[str, Any] = {"uri": uri}
        if base is not None:
            location["uriBaseId"] = base
        location["index"] = self.index[portable_path(path)]
        return location

    def table(self, partial: Mapping[str, list[str]] | None = None) -> list[dict[str, Any]]:
        out = []
        for path in self.paths:
            location = self.location(path)
            del location["index"]
            entry: dict[str, Any] = {"location": location, "roles": ["analysisTarget"]}
            if partial and path in partial:
                # Checked around something missing: the file status "partial".
                entry["properties"] = {"status": "partial", "missing": partial[path]}
            out.append(entry)
        return out


def _physical(span: Span, source_line: str, artifacts: _Artifacts) -> dict[str, Any]:
    """A location; with a snippet (a short excerpt) only for a finding's own device line.

    Input problems and related locations carry their position alone: the line of an input
    problem may not be a netlist line at all (an included file that holds something else).
    """
    region: dict[str, Any] = {"startLine": max(span.line, 1), "startColumn": max(span.column, 1)}
    text = excerpt(source_line)
    if text:
        region["snippet"] = {"text": text}
    return {"artifactLocation": artifacts.location(span.path), "region": region}


def _devices_at(result: CheckResult, finding: Finding) -> dict[Span, list[str]]:
    """The devices of the finding's stage, by the span each was read from."""
    stage = next((s for s in result.stages if s.switch == finding.switch), None)
    names = (stage.switch, *stage.related) if stage else (finding.switch,)
    circuit = result.circuit
    out: dict[Span, list[str]] = {}
    for name in names:
        if name == finding.device:
            continue
        # The same lookup the checks use: a device, else a subcircuit instance (a driver IC
        # or a wrapped switch), else the stage's own line.
        device = circuit.devices.get(name)
        instance = circuit.instances.get(name)
        if device is not None:
            span = device.span
        elif instance is not None:
            span = instance.span
        elif stage is not None:
            span = stage.span
        else:
            continue
        out.setdefault(span, []).append(name)
    return out


def _related(result: CheckResult, finding: Finding, artifacts: _Artifacts) -> list[dict[str, Any]]:
    at = _devices_at(result, finding)
    related = []
    for number, span in enumerate(finding.related, start=1):
        names = sorted(at.get(span, []))
        if finding.switch in names:
            text = f"{finding.switch}: the switch of this gate drive"
        elif names:
            text = f"{', '.join(names)}: part of the gate drive of {finding.switch}"
        else:
            text = f"part of the gate drive of {finding.switch}"
        related.append(
            {
                "id": number,
                "physicalLocation": _physical(span, "", artifacts),
                "message": {"text": text},
            }
        )
    return related


def _fingerprint(finding: Finding) -> str:
    # Stable across edits that move lines: the file, the rule and the devices involved.
    key = "\0".join(
        (portable_path(finding.span.path), finding.rule, finding.switch, finding.device)
    )
    return hashlib.sha256(key.encode("utf-8", "surrogateescape")).hexdigest()[:32]


def _result(
    result: CheckResult,
    finding: Finding,
    rule_index: Mapping[str, int],
    artifacts: _Artifacts,
    accepted: bool,
) -> dict[str, Any]:
    out: dict[str, Any] = {"ruleId": finding.rule}
    if finding.rule in rule_index:
        out["ruleIndex"] = rule_index[finding.rule]
    out["level"] = LEVELS[finding.severity]
    out["message"] = {"text": finding.message}
    out["locations"] = [
        {
            "physicalLocation": _physical(
                finding.span, result.circuit.line_text(finding.span), artifacts
            )
        }
    ]
    related = _related(result, finding, artifacts)
    if related:
        out["relatedLocations"] = related
    out["partialFingerprints"] = {"drivelintDevice/v1": _fingerprint(finding)}
    if accepted:
        # An acceptance directive in the netlist is what SARIF calls an in-source suppression.
        suppression: dict[str, Any] = {"kind": "inSource", "status": "accepted"}
        waiver = finding.accepted
        if waiver is not None and waiver.reason:
            suppression["justification"] = waiver.reason
            suppression["location"] = {"physicalLocation": _physical(waiver.span, "", artifacts)}
        out["suppressions"] = [suppression]
    out["properties"] = {
        "switch": finding.switch,
        "device": finding.device,
        "fix": finding.fix,
        "values": {name: value.to_json() for name, value in sorted(finding.values.items())},
        "derivation": list(finding.derivation),
    }
    return out


def _notification(
    diagnostic: Diagnostic, codes: Mapping[str, int], artifacts: _Artifacts
) -> dict[str, Any]:
    return {
        "level": LEVELS[diagnostic.severity],
        "message": {"text": diagnostic.message},
        "locations": [{"physicalLocation": _physical(diagnostic.span, "", artifacts)}],
        "descriptor": {"id": diagnostic.code, "index": codes[diagnostic.code]},
    }


def sarif_log(results: Sequence[CheckResult]) -> dict[str, Any]:
    """The SARIF log as plain data (``json.dumps`` gives the file)."""
    rules = registry()
    ordered = sorted(results, key=lambda r: portable_path(r.circuit.path))
    rule_index = {rule_id: number for number, rule_id in enumerate(rules)}
    diagnostics = sorted(
        (d for r in ordered for d in r.diagnostics if d.severity >= Severity.WARNING),
        key=lambda d: (portable_path(d.span.path), d.span.line, d.span.column, d.code, d.message),
    )
    entries = sorted(
        [(r, f, False) for r in ordered for f in r.findings]
        + [(r, f, True) for r in ordered for f in r.accepted],
        key=lambda entry: (portable_path(entry[1].span.path), *entry[1].sort_key()[1:]),
    )
    paths: set[str] = set()
    for r in ordered:
        paths.update((r.circuit.path, *r.circuit.files))
    for _, finding, _ in entries:
        paths.update(span.path for span in (finding.span, *finding.related))
        if finding.accepted is not None:
            paths.add(finding.accepted.span.path)
    paths.update(d.span.path for d in diagnostics)
    artifacts = _Artifacts(paths)
    codes = {code: number for number, code in enumerate(sorted({d.code for d in diagnostics}))}
    driver: dict[str, Any] = {
        "name": "drivelint",
        "version": __version__,
        "rules": [rule_descriptor(rule) for rule in rules.values()],
    }
    if codes:
        driver["notifications"] = [
            {"id": code, "shortDescription": {"text": f"input problem: {code}"}} for code in codes
        ]
    invocation = {
        # False when some input could not be read as written: its checks are incomplete.
        "executionSuccessful": not any(failed(r) for r in ordered),
        "toolExecutionNotifications": [_notification(d, codes, artifacts) for d in diagnostics],
    }
    run = {
        "tool": {"driver": driver},
        "invocations": [invocation],
        "originalUriBaseIds": {
            SOURCE_ROOT: {"description": {"text": "the folder drivelint was run from"}}
        },
        "artifacts": artifacts.table(
            {
                portable_path(r.circuit.path): [m.describe() for m in r.circuit.missing]
                for r in ordered
                if r.circuit.partial
            }
        ),
        # Spans count characters of the decoded line, not UTF-16 code units.
        "columnKind": "unicodeCodePoints",
        "results": [_result(r, f, rule_index, artifacts, accepted) for r, f, accepted in entries],
    }
    return {"version": SARIF_VERSION, "$schema": SARIF_SCHEMA, "runs": [run]}


# Characters JSON may carry raw but a terminal or an editor acts on: written as \\u escapes
# (valid JSON, since outside strings the log holds only ASCII).
_RAW_UNSAFE = {
    code: f"\\u{code:04x}"
    for code in (
        0x7F,
        *range(0x80, 0xA0),
        0x2028,
        0x2029,
        *range(0x202A, 0x202F),
        *range(0x2066, 0x206A),
    )
}


def format_sarif(results: Sequence[CheckResult], options: ReportOptions) -> str:
    text = json.dumps(sarif_log(results), indent=2, ensure_ascii=False)
    return text.translate(_RAW_UNSAFE) + "\n"
