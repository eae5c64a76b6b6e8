"""The page: summary, filters, designs table, each design with its stages and findings.

Everything is inline (CSS, a few lines of JS, SVG) and a Content-Security-Policy forbids
any fetch, so the file can be mailed, archived or opened offline and shows the same thing
everywhere.
"""

from __future__ import annotations

from collections import Counter
from collections.abc import Mapping, Sequence
from dataclasses import dataclass
from pathlib import Path
from typing import TYPE_CHECKING

from drivelint import __version__
from drivelint.checks.base import Finding
from drivelint.checks.runner import CheckResult
from drivelint.circuit.model import Circuit
from drivelint.diagnostics import Diagnostic, Severity, excerpt
from drivelint.netlist.values import format_si
from drivelint.ratings.values import Value
from drivelint.report.html.assets import CSP, SCRIPT, STYLE
from drivelint.report.html.diagram import _volts, drawn_devices, stage_svg
from drivelint.report.html.markup import esc as _e
from drivelint.report.html.plots import PLOT_RULES, boot_plot_svg, simulated_svg
from drivelint.report.html.testbench import BenchRecord, Testbench, load_testbench
from drivelint.report.status import file_status
from drivelint.stages.model import DriveStage

if TYPE_CHECKING:
    from drivelint.report.formats import ReportOptions

SEVERITIES = (Severity.ERROR, Severity.WARNING, Severity.NOTE)


def _status(result: CheckResult) -> str:
    return file_status(result)


def _input_errors(result: CheckResult) -> list[Diagnostic]:
    return [d for d in result.diagnostics if d.severity is Severity.ERROR]


# The numbers a reader needs first in each finding: what it claims, against its limit. A
# rule not listed shows its values in name order; a new rule adds its pairs here.
KEY_VALUES: Mapping[str, tuple[tuple[str, str], ...]] = {
    "bootstrap-capacitor-small": (
        ("droop_per_cycle", "delta_v_allowed"),
        ("capacitance", "required_capacitance"),
    ),
    "dc-hold": (("hold_time", "on_time"),),
    "bootstrap-diode-voltage": (("diode_reverse_voltage", "derated_limit"),),
    "bootstrap-diode-slow": (("trr", "trr_max"),),
    "bootstrap-no-refresh": (("sustained_boot_voltage", "v_boot_min"), ("duty_max", "max_duty")),
    "gate-overvoltage": (
        ("vgs_max_positive", "vgs_limit_positive"),
        ("vgs_max_negative", "vgs_limit_negative"),
    ),
    "gate-headroom": (("vgs_on_worst", "vgs_needed"),),
    "driver-decoupling": (("bypass_capacitance", "bypass_needed"), ("vcc_dip", "v_supply_after")),
    "voltage-stress": (
        ("vds_off", "derated_limit"),
        ("v_part", "derated_limit"),
        ("p_resistor", "derated_limit"),
    ),
    "level-shift-contention": (
        ("shifter_voltage", "derated_limit"),
        ("shifter_margin", "margin_needed"),
    ),
    "cross-conduction": (
        ("dead_time", "dead_time_needed"),
        ("command_overlap", "dead_time_needed"),
    ),
    "induced-turn-on": (("vgs_peak", "vth"), ("r_off", "r_off_max")),
    "gate-pulldown-missing": (("vgs_induced", "vth"), ("vgs_turn_on", "vth")),
    "switching-loss": (
        ("t_junction", "t_junction_limit"),
        ("edge_fraction", "edge_fraction_max"),
    ),
    "switch-node-undershoot": (("v_undershoot", "vs_min"), ("v_boot_undershoot", "v_limit")),
}


def key_pairs(finding: Finding) -> list[tuple[str, Value, str, Value]]:
    """(claim, its value, limit, its value) for each pair the finding carries."""
    values = finding.values
    return [
        (claim, values[claim], limit, values[limit])
        for claim, limit in KEY_VALUES.get(finding.rule, ())
        if claim in values and limit in values
    ]


def _severity_badge(severity: Severity) -> str:
    return f'<span class="sev {severity.label}">{severity.label}</span>'


def _values_table(finding: Finding) -> str:
    first = [k for pair in key_pairs(finding) for k in (pair[0], pair[2])]
    order = list(dict.fromkeys(first)) + sorted(k for k in finding.values if k not in first)
    rows = "".join(
        f"<tr{' class=key' if name in first else ''}><td><code>{_e(name)}</code></td>"
        f'<td class="num">{_e(finding.values[name].text())}</td>'
        f'<td class="origin">{_e(finding.values[name].origin)}</td></tr>'
        for name in order
    )
    if not rows:
        return ""
    return (
        '<table class="values"><thead><tr><th>quantity</th><th>value</th><th>origin</th>'
        f"</tr></thead><tbody>{rows}</tbody></table>"
    )


def _key_numbers(finding: Finding) -> str:
    pairs = key_pairs(finding)
    if not pairs:
        return ""
    items = "; ".join(
        f'<span class="claim"><code>{_e(claim)}</code> = {_e(value.text())}</span> '
        f'<span class="limit">against <code>{_e(limit)}</code> = {_e(bound.text())}</span>'
        for claim, value, limit, bound in pairs
    )
    return f'<p class="key-numbers">{items}</p>'


def _bench_html(record: BenchRecord | None, finding: Finding) -> str:
    """The finding's testbench: links to its decks, its claims against what was measured."""
    if record is None:
        return ""
    links = []
    if record.deck:
        links.append(f'<a class="deck" href="{_e(record.deck)}">deck</a>')
    if record.fixed_deck:
        links.append(f'<a class="fixed-deck" href="{_e(record.fixed_deck)}">fixed deck</a>')
    parts = [
        '<div class="bench"><span class="fix-label">Testbench</span> '
        + (" · ".join(links) if links else "no deck written")
    ]
    rows = []
    for key, claimed in sorted(record.claims.items()):
        unit = finding.values[key].unit if key in finding.values else ""
        measured = record.measured.get(key)
        shown = format_si(measured.value, unit) if measured is not None else "not run"
        ratio = ""
        if measured is not None and claimed:
            ratio = f"{measured.value / claimed:.2f}×"
        status = measured.status if measured is not None and measured.status else ""
        rows.append(
            f'<tr><td><code>{_e(key)}</code></td><td class="num">'
            f'{_e(format_si(claimed, unit))}</td><td class="num">{_e(shown)}</td>'
            f'<td class="num">{_e(ratio)}</td><td>{_e(status)}</td></tr>'
        )
    if rows:
        parts.append(
            '<table class="bench-claims"><thead><tr><th>claim</th><th>claimed</th>'
            "<th>simulated</th><th>ratio</th><th></th></tr></thead>"
            f"<tbody>{''.join(rows)}</tbody></table>"
        )
    parts.extend(f'<p class="bench-note">{_e(note)}</p>' for note in record.notes)
    parts.append("</div>")
    return "".join(parts)


def _finding_html(
    finding: Finding,
    circuit: Circuit,
    anchor: str,
    explain: bool,
    bench: Testbench | None = None,
) -> str:
    line = excerpt(circuit.line_text(finding.span))
    waiver = finding.accepted
    head = (
        f'<div class="fhead">{_severity_badge(finding.severity)} '
        + ('<span class="sev accepted">accepted</span> ' if waiver else "")
        + f'<code class="rule">{_e(finding.rule)}</code> '
        f'<span class="loc">{_e(finding.span)}</span> '
        f'<span class="on">device <code>{_e(finding.device)}</code>'
        f" on switch <code>{_e(finding.switch)}</code></span></div>"
    )
    accepted = ""
    if waiver is not None:
        accepted = (
            f'<p class="waiver">Accepted: {_e(waiver.reason)} '
            f'<span class="loc">({_e(waiver.span.path)}:{waiver.span.line})</span></p>'
        )
    source = f'<pre class="src">{finding.span.line:>5} | {_e(line)}</pre>' if line else ""
    derivation = ""
    if finding.derivation:
        steps = _e("\n".join(finding.derivation))
        derivation = (
            f'<details class="derivation"{" open" if explain else ""}>'
            f"<summary>derivation</summary><pre>{steps}</pre></details>"
        )
    record = bench.record_for(finding.rule, finding.device, circuit.path) if bench else None
    figures = [boot_plot_svg(finding) if finding.rule in PLOT_RULES else None]
    if record is not None and record.waveform is not None:
        figures.append(simulated_svg(record.waveform, finding))
    shown = "".join(f for f in figures if f)
    classes = f"finding {finding.severity.label}" + (" accepted" if waiver else "")
    return (
        f'<div class="{classes}" id="{anchor}" data-rule="{_e(finding.rule)}" '
        f'data-severity="{finding.severity.label}" data-accepted="{1 if waiver else 0}">'
        + head
        + '<div class="finding-body"><div class="finding-text">'
        + f'<p class="finding-message">{_e(finding.message)}</p>'
        + accepted
        + _key_numbers(finding)
        + source
        + f'<p class="fix"><span class="fix-label">Fix</span> {_e(finding.fix)}</p>'
        + _bench_html(record, finding)
        + _values_table(finding)
        + derivation
        + "</div>"
        + (f'<div class="finding-figures">{shown}</div>' if shown else "")
        + "</div></div>"
    )


def _stage_heading(stage: DriveStage) -> str:
    supply = stage.supply
    kind = "no floating supply" if supply.kind == "none" else f"{supply.kind} supply"
    parts = [f"{stage.channel}", stage.mode, kind]
    if stage.bus is not None:
        parts.append(f"drain rail {stage.bus.net}{_volts(stage.bus.volts)}")
    if stage.driver is not None:
        parts.append(f"driver {stage.driver.device} ({stage.driver.subckt})")
    return (
        f'<h4><code>{_e(stage.switch)}</code> <span class="stage-meta">'
        f"{_e(' · '.join(parts))} · line {stage.span.line}</span></h4>"
    )


def _diagram_figure(stage: DriveStage, circuit: Circuit, findings: Sequence[Finding]) -> str:
    hits = sorted({f.device for f in findings if f.accepted is None})
    drawn = drawn_devices(stage)
    missing = [name for name in hits if name not in drawn]
    note = ""
    if missing:
        note = f" Not drawn: {', '.join(missing)}."
    return (
        '<figure class="diagram">'
        + stage_svg(stage, circuit, hits)
        + "<figcaption>Stage as recognised. Red: device with a finding ("
        + _e(", ".join(hits) or "none open")
        + ")."
        + _e(note)
        + " Dots are connections; a line crossing without a dot is not connected; a device "
        "on two paths is drawn once and named where the other passes through it.</figcaption>"
        "</figure>"
    )


@dataclass(frozen=True, slots=True)
class _Numbered:
    """A finding with its page anchor, so the summary can link to it."""

    finding: Finding
    anchor: str


def _not_checked(result: CheckResult, stage: DriveStage, status: str) -> str | None:
    """Why a stage without findings was not judged, or None when it was."""
    for diagnostic in result.diagnostics:
        if diagnostic.code == "not-checked" and diagnostic.message.startswith(
            f"stage of {stage.switch} not checked"
        ):
            return diagnostic.message
    if status == "error":
        return "not checked: this file has input errors (listed above), so its findings are "
        "not complete"
    return None


def _design_article(
    result: CheckResult,
    anchor: str,
    numbered: Sequence[_Numbered],
    explain: bool,
    bench: Testbench | None,
) -> str:
    circuit = result.circuit
    status = _status(result)
    rules = sorted({n.finding.rule for n in numbered})
    severities = sorted({n.finding.severity.label for n in numbered})
    counts = f"{len(result.findings)} finding{'s' * (len(result.findings) != 1)}"
    if result.accepted:
        counts += f", {len(result.accepted)} accepted"
    floating = [s for s in result.stages if s.floating]
    counts += f", {len(floating)} floating stage{'s' * (len(floating) != 1)}"
    parts = [
        f'<article class="design" id="{anchor}" data-path="{_e(circuit.path)}" '
        f'data-status="{status}" data-rules="{_e(" ".join(rules))}" '
        f'data-severities="{_e(" ".join(severities))}">',
        '<details class="design-details"><summary>'
        f'<h3><code>{_e(circuit.path)}</code> <span class="status {status}">{status}</span></h3>'
        f'<span class="design-counts">{_e(counts)}</span></summary>',
    ]
    if circuit.title:
        parts.append(f'<p class="design-title">{_e(circuit.title)}</p>')
    others = [s for s in result.stages if not s.floating]
    summary = (
        f"{len(result.stages)} switch{'es' * (len(result.stages) != 1)} recognised, "
        f"{len(floating)} with a floating source."
    )
    if others:
        summary += (
            " Not floating: " + "; ".join(f"{s.switch} ({s.floating_reason})" for s in others) + "."
        )
    parts.append(f'<p class="design-summary">{_e(summary)}</p>')
    shown = [d for d in result.diagnostics if d.severity >= Severity.WARNING]
    if shown:
        rows = "".join(
            f'<tr><td>{_severity_badge(d.severity)}</td><td class="loc">{_e(d.span)}</td>'
            f"<td>{_e(d.message)}</td><td><code>{_e(d.code)}</code></td></tr>"
            for d in shown
        )
        # Positions only: the line an input problem is on may not be a netlist line at all.
        parts.append(
            '<h4>Input problems</h4><table class="diagnostics"><thead><tr><th>severity</th>'
            "<th>where</th><th>message</th><th>code</th></tr></thead>"
            f"<tbody>{rows}</tbody></table>"
        )
    placed: set[int] = set()
    for stage in floating:
        mine = [n for n in numbered if n.finding.switch == stage.switch]
        placed.update(id(n) for n in mine)
        parts.append('<section class="stage">' + _stage_heading(stage))
        if mine:
            parts.append(_diagram_figure(stage, circuit, [n.finding for n in mine]))
            parts.extend(_finding_html(n.finding, circuit, n.anchor, explain, bench) for n in mine)
        else:
            why = _not_checked(result, stage, status)
            if why is not None:
                parts.append(f'<p class="not-checked">{_e(why[0].upper() + why[1:])}.</p>')
            else:
                parts.append('<p class="clean-stage">No findings for this stage.</p>')
        parts.append("</section>")
    rest = [n for n in numbered if id(n) not in placed]
    if rest:
        parts.append('<section class="stage"><h4>Other findings</h4>')
        parts.extend(_finding_html(n.finding, circuit, n.anchor, explain, bench) for n in rest)
        parts.append("</section>")
    parts.append("</details></article>")
    return "".join(parts)


def _summary(results: Sequence[CheckResult], numbered: Mapping[str, Sequence[_Numbered]]) -> str:
    from drivelint.checks.registry import registry

    findings = [f for r in results for f in r.findings]
    stages = sum(1 for r in results for s in r.stages if s.floating)
    by_severity = Counter(f.severity for f in findings)
    accepted = sum(len(r.accepted) for r in results)
    broken = [r for r in results if _input_errors(r)]
    tiles = [
        ("designs", str(len(results)), ""),
        ("floating stages", str(stages), ""),
        ("findings", str(len(findings)), "bad" if findings else "good"),
        *(
            (s.label + "s", str(by_severity[s]), s.label if by_severity[s] else "")
            for s in SEVERITIES
        ),
        ("accepted", str(accepted), ""),
        ("files with input errors", str(len(broken)), "bad" if broken else "good"),
    ]
    parts = ['<section id="summary"><h2>Summary</h2><div class="tiles">']
    parts.extend(
        f'<div class="tile {cls}" data-tile="{_e(name)}"><div class="tile-n">{_e(number)}</div>'
        f'<div class="tile-l">{_e(name)}</div></div>'
        for name, number, cls in tiles
    )
    parts.append("</div>")
    rules = registry()
    counts: Counter[tuple[str, Severity]] = Counter((f.rule, f.severity) for f in findings)
    first_anchor: dict[str, str] = {}
    for path in sorted(numbered):
        for item in numbered[path]:
            if item.finding.accepted is None:
                first_anchor.setdefault(item.finding.rule, item.anchor)
    if findings:
        rows = []
        for rule_id in sorted({f.rule for f in findings}):
            rule = rules.get(rule_id)
            cells = "".join(
                f'<td class="num">{counts[(rule_id, s)] or ""}</td>' for s in SEVERITIES
            )
            total = sum(counts[(rule_id, s)] for s in SEVERITIES)
            rows.append(
                f'<tr data-rule="{_e(rule_id)}"><td><a href="#{first_anchor[rule_id]}">'
                f"<code>{_e(rule_id)}</code></a></td><td>{_e(rule.title if rule else '')}</td>"
                f'{cells}<td class="num total">{total}</td></tr>'
            )
        totals = "".join(f'<td class="num">{by_severity[s]}</td>' for s in SEVERITIES)
        parts.append(
            '<h3>Findings by rule and severity</h3><table id="by-rule"><thead><tr><th>rule</th>'
            "<th>title</th><th>errors</th><th>warnings</th><th>notes</th><th>total</th></tr>"
            f"</thead><tbody>{''.join(rows)}</tbody><tfoot><tr><td>all rules</td><td></td>"
            f'{totals}<td class="num total">{len(findings)}</td></tr></tfoot></table>'
        )
    else:
        parts.append('<p class="all-clean">No findings in any design.</p>')
    parts.append("<h3>Files with input errors</h3>")
    if broken:
        items = "".join(
            f"<li><code>{_e(r.circuit.path)}</code>: {len(_input_errors(r))} error"
            f"{'s' * (len(_input_errors(r)) != 1)} — first: {_e(_input_errors(r)[0].span)}: "
            f"{_e(_input_errors(r)[0].message)}</li>"
            for r in broken
        )
        parts.append(f'<ul id="input-errors">{items}</ul>')
    else:
        parts.append('<p id="input-errors" class="none">None: every file was read.</p>')
    parts.append("</section>")
    return "".join(parts)


def _filters(results: Sequence[CheckResult]) -> str:
    """The filter bar: status, rule, severity; the script applies them (and keeps them in
    the address). Without a script every design and finding simply stays shown."""
    statuses = ("clean", "findings", "partial", "error")
    rules = sorted({f.rule for r in results for f in (*r.findings, *r.accepted)})

    def select(key: str, label: str, options: Sequence[str]) -> str:
        choices = "".join(f'<option value="{_e(o)}">{_e(o)}</option>' for o in options)
        return (
            f'<label for="filter-{key}">{label}</label> <select id="filter-{key}">'
            f'<option value="">any</option>{choices}</select>'
        )

    return (
        '<div id="filters">'
        + select("status", "status", statuses)
        + select("rule", "rule", rules)
        + select("severity", "severity", (*(s.label for s in SEVERITIES), "accepted"))
        + '<button type="button" id="open-all">open all</button>'
        '<button type="button" id="close-all">close all</button>'
        f'<span id="filter-count">{len(results)} of {len(results)} designs shown</span></div>'
    )


DESIGN_COLUMNS = (
    ("design", "design"),
    ("switches", "switches"),
    ("floating", "floating"),
    ("errors", "errors"),
    ("warnings", "warnings"),
    ("notes", "notes"),
    ("findings", "findings"),
    ("accepted", "accepted"),
    ("input", "input problems"),
    ("status", "status"),
)


def _designs_table(results: Sequence[CheckResult], anchors: Mapping[str, str]) -> str:
    heads = "".join(
        f'<th data-key="{key}" aria-sort="none" tabindex="0">{_e(label)}</th>'
        for key, label in DESIGN_COLUMNS
    )
    rows = []
    for order, result in enumerate(results):
        circuit = result.circuit
        by = Counter(f.severity for f in result.findings)
        problems = sum(1 for d in result.diagnostics if d.severity >= Severity.WARNING)
        status = _status(result)
        rank = {"error": 3, "partial": 2, "findings": 1, "clean": 0}[status]
        numbers = [
            len(result.stages),
            sum(1 for s in result.stages if s.floating),
            by[Severity.ERROR],
            by[Severity.WARNING],
            by[Severity.NOTE],
            len(result.findings),
            len(result.accepted),
            problems,
        ]
        cells = "".join(f'<td class="num" data-sort="{n}">{n}</td>' for n in numbers)
        rows.append(
            f'<tr data-order="{order}" data-path="{_e(circuit.path)}" data-status="{status}">'
            f'<td data-sort="{_e(circuit.path)}"><a href="#{anchors[circuit.path]}">'
            f'<code>{_e(circuit.path)}</code></a><div class="title-cell">{_e(circuit.title)}</div>'
            f"</td>{cells}"
            f'<td data-sort="{rank}"><span class="status {status}">{status}</span></td></tr>'
        )
    return (
        '<section id="designs-section"><h2>Designs</h2>'
        '<p class="hint">Click a column header to sort; click again to reverse. A design '
        "opens below when its name is clicked.</p>"
        + _filters(results)
        + f'<table id="designs" class="sortable"><thead><tr>{heads}</tr></thead>'
        f"<tbody>{''.join(rows)}</tbody></table></section>"
    )


def _bench_section(bench: Testbench) -> str:
    linked = len(bench.records)
    parts = [
        '<section id="testbench"><h2>Testbench</h2>'
        f"<p>{linked} record{'s' * (linked != 1)} read from <code>{_e(bench.folder)}</code>: "
        "each finding with a record links its deck (and fixed deck) and, where a simulated "
        "waveform was written, draws it beside the computed one.</p>"
    ]
    if bench.notes:
        items = "".join(f"<li>{_e(note)}</li>" for note in bench.notes)
        parts.append(f'<ul class="bench-notes">{items}</ul>')
    parts.append("</section>")
    return "".join(parts)


def format_html(results: Sequence[CheckResult], options: ReportOptions) -> str:
    """The whole library scan as one self-contained HTML page."""
    ordered = sorted(results, key=lambda r: r.circuit.path)
    anchors = {r.circuit.path: f"d{i}" for i, r in enumerate(ordered, 1)}
    numbered: dict[str, list[_Numbered]] = {}
    count = 0
    card = 0
    for result in ordered:
        items: list[_Numbered] = []
        # Accepted findings keep their place among the others, marked and with their reason.
        for finding in sorted((*result.findings, *result.accepted), key=Finding.sort_key):
            count += finding.accepted is None
            card += 1
            items.append(_Numbered(finding, f"f{card}"))
        numbered[result.circuit.path] = items
    bench = None
    if options.testbench is not None:
        folder = Path(options.testbench)
        report_folder = Path(options.output).absolute().parent if options.output else Path.cwd()
        bench = load_testbench(folder, report_folder, options.testbench)
    files = len(ordered)
    meta = (
        f"drivelint {__version__} · {files} netlist{'s' * (files != 1)} · "
        f"{count} finding{'s' * (count != 1)}"
    )
    body = [
        "<!DOCTYPE html>",
        '<html lang="en"><head><meta charset="utf-8">',
        f'<meta http-equiv="Content-Security-Policy" content="{_e(CSP)}">',
        '<meta name="viewport" content="width=device-width, initial-scale=1">',
        '<meta name="generator" content="drivelint">',
        "<title>drivelint report: floating gate drives</title>",
        f"<style>{STYLE}</style></head><body>",
        "<header><h1>drivelint report: floating gate drives</h1>"
        f'<p class="meta">{_e(meta)}</p></header><main>',
    ]
    if not ordered:
        body.append('<p class="all-clean">No netlists were checked.</p>')
    else:
        body.append(_summary(ordered, numbered))
        if bench is not None:
            body.append(_bench_section(bench))
        body.append(_designs_table(ordered, anchors))
        body.append('<section id="details"><h2>Designs in detail</h2>')
        body.extend(
            _design_article(
                r, anchors[r.circuit.path], numbered[r.circuit.path], options.explain, bench
            )
            for r in ordered
        )
        body.append("</section>")
    body.append(
        "</main><footer>Generated by drivelint "
        f"{_e(__version__)}. Values are in SI units with their origins; every finding names "
        "the netlist line it comes from. This page is self-contained and fetches nothing."
        f"</footer><script>{SCRIPT}</script></body></html>"
    )
    return "\n".join(body) + "\n"
