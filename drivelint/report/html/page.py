"""The page: summary, designs table, each design with its stages and findings.

Everything is inline (CSS, a few lines of JS, SVG) and a Content-Security-Policy forbids
any fetch, so the file can be mailed, archived or opened offline and shows the same thing
everywhere.
"""

from __future__ import annotations

from collections import Counter
from collections.abc import Mapping, Sequence
from dataclasses import dataclass
from typing import TYPE_CHECKING

from drivelint import __version__
from drivelint.checks.base import Finding
from drivelint.checks.runner import CheckResult
from drivelint.circuit.model import Circuit
from drivelint.diagnostics import Diagnostic, Severity, excerpt
from drivelint.report.html.diagram import _volts, drawn_devices, stage_svg
from drivelint.report.html.markup import esc as _e
from drivelint.report.html.plots import PLOT_RULES, boot_plot_svg
from drivelint.report.status import file_status
from drivelint.stages.model import DriveStage

if TYPE_CHECKING:
    from drivelint.report.formats import ReportOptions

SEVERITIES = (Severity.ERROR, Severity.WARNING, Severity.NOTE)


def _status(result: CheckResult) -> str:
    return file_status(result)


def _input_errors(result: CheckResult) -> list[Diagnostic]:
    return [d for d in result.diagnostics if d.severity is Severity.ERROR]


def _severity_badge(severity: Severity) -> str:
    return f'<span class="sev {severity.label}">{severity.label}</span>'


def _finding_html(
    finding: Finding, circuit: Circuit, anchor: str, explain: bool, accepted: bool = False
) -> str:
    line = excerpt(circuit.line_text(finding.span))
    head = (
        f'<div class="fhead">{_severity_badge(finding.severity)} '
        f'<code class="rule">{_e(finding.rule)}</code> '
        f'<span class="loc">{_e(finding.span)}</span> '
        f'<span class="on">device <code>{_e(finding.device)}</code>'
        f" on switch <code>{_e(finding.switch)}</code></span></div>"
    )
    rows = "".join(
        f'<tr><td><code>{_e(name)}</code></td><td class="num">{_e(value.text())}</td>'
        f'<td class="origin">{_e(value.origin)}</td></tr>'
        for name, value in sorted(finding.values.items())
    )
    values = (
        '<table class="values"><thead><tr><th>quantity</th><th>value</th><th>origin</th>'
        f"</tr></thead><tbody>{rows}</tbody></table>"
        if rows
        else ""
    )
    source = f'<pre class="src">{finding.span.line:>5} | {_e(line)}</pre>' if line else ""
    derivation = ""
    if finding.derivation:
        steps = _e("\n".join(finding.derivation))
        derivation = (
            f'<details class="derivation"{" open" if explain else ""}>'
            f"<summary>derivation</summary><pre>{steps}</pre></details>"
        )
    plot = boot_plot_svg(finding) if finding.rule in PLOT_RULES else None
    classes = f"finding {finding.severity.label}" + (" accepted" if accepted else "")
    return (
        f'<div class="{classes}" id="{anchor}">'
        + head
        + f'<p class="finding-message">{_e(finding.message)}</p>'
        + source
        + values
        + f'<p class="fix"><span class="fix-label">Fix</span> {_e(finding.fix)}</p>'
        + derivation
        + (plot or "")
        + "</div>"
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
    hits = sorted({f.device for f in findings})
    drawn = drawn_devices(stage)
    missing = [name for name in hits if name not in drawn]
    note = ""
    if missing:
        note = f" Not drawn: {', '.join(missing)}."
    return (
        '<figure class="diagram">'
        + stage_svg(stage, circuit, hits)
        + "<figcaption>Stage as recognised. Red: device with a finding ("
        + _e(", ".join(hits))
        + ")."
        + _e(note)
        + " Dots are connections; a line crossing without a dot is not connected.</figcaption>"
        "</figure>"
    )


@dataclass(frozen=True, slots=True)
class _Numbered:
    """A finding with its page anchor, so the summary can link to it."""

    finding: Finding
    anchor: str


def _design_article(
    result: CheckResult, anchor: str, numbered: Sequence[_Numbered], explain: bool
) -> str:
    circuit = result.circuit
    status = _status(result)
    parts = [
        f'<article class="design" id="{anchor}">',
        f'<h3><code>{_e(circuit.path)}</code> <span class="status {status}">{status}</span></h3>',
    ]
    if circuit.title:
        parts.append(f'<p class="design-title">{_e(circuit.title)}</p>')
    floating = [s for s in result.stages if s.floating]
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
            parts.extend(_finding_html(n.finding, circuit, n.anchor, explain) for n in mine)
        else:
            parts.append('<p class="clean-stage">No findings for this stage.</p>')
        parts.append("</section>")
    rest = [n for n in numbered if id(n) not in placed]
    if rest:
        parts.append('<section class="stage"><h4>Other findings</h4>')
        parts.extend(_finding_html(n.finding, circuit, n.anchor, explain) for n in rest)
        parts.append("</section>")
    if result.accepted:
        parts.append(
            f'<details class="accepted-list"><summary>{len(result.accepted)} accepted by a '
            "directive</summary>"
        )
        parts.extend(
            _finding_html(f, circuit, f"{anchor}-a{i}", explain, accepted=True)
            for i, f in enumerate(result.accepted, 1)
        )
        parts.append("</details>")
    parts.append("</article>")
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
            f'<tr data-order="{order}" data-path="{_e(circuit.path)}">'
            f'<td data-sort="{_e(circuit.path)}"><a href="#{anchors[circuit.path]}">'
            f'<code>{_e(circuit.path)}</code></a><div class="title-cell">{_e(circuit.title)}</div>'
            f"</td>{cells}"
            f'<td data-sort="{rank}"><span class="status {status}">{status}</span></td></tr>'
        )
    return (
        '<section id="designs-section"><h2>Designs</h2>'
        '<p class="hint">Click a column header to sort; click again to reverse.</p>'
        f'<table id="designs" class="sortable"><thead><tr>{heads}</tr></thead>'
        f"<tbody>{''.join(rows)}</tbody></table></section>"
    )


STYLE = """
:root{--ink:#1d2433;--mute:#5d6778;--line:#d5dae1;--soft:#f4f6f9;--err:#b3261e;
--warn:#a85a00;--note:#1f5fae;--ok:#1d7a46;--hit:#fdeceb}
*{box-sizing:border-box}
body{margin:0;color:var(--ink);background:#fff;font:14px/1.45 system-ui,sans-serif}
header{padding:18px 32px 14px;border-bottom:3px solid var(--ink);background:var(--soft)}
header h1{margin:0;font-size:21px;letter-spacing:.2px}
header .meta{margin:4px 0 0;color:var(--mute);font-size:13px}
main{padding:4px 32px 32px;max-width:1280px}
h2{font-size:17px;border-bottom:1px solid var(--line);padding-bottom:4px;margin:26px 0 10px}
h3{font-size:15px;margin:18px 0 8px}
h4{font-size:14px;margin:14px 0 6px}
code,pre,.loc{font-family:ui-monospace,monospace;font-size:12.5px}
pre{margin:0;white-space:pre-wrap}
a{color:var(--note);text-decoration:none}
a:hover{text-decoration:underline}
table{border-collapse:collapse;margin:6px 0 10px}
th,td{padding:4px 10px;border-bottom:1px solid var(--line);text-align:left;vertical-align:top}
th{background:var(--soft);font-weight:600;font-size:12.5px;white-space:nowrap}
td.num{text-align:right;font-variant-numeric:tabular-nums;white-space:nowrap}
#designs td.num[data-sort="0"]{color:#a3aab5}
tfoot td{font-weight:600;border-top:2px solid var(--line)}
#designs th{cursor:pointer;user-select:none}
#designs th:hover{background:#e7ebf1}
#designs th[aria-sort=ascending]::after{content:" \\25B2";font-size:10px}
#designs th[aria-sort=descending]::after{content:" \\25BC";font-size:10px}
#designs{width:100%}
#designs .title-cell{color:var(--mute);font-size:12.5px;max-width:640px}
.hint{color:var(--mute);font-size:12.5px;margin:0}
.tiles{display:flex;flex-wrap:wrap;gap:10px;margin:8px 0 14px}
.tile{border:1px solid var(--line);border-radius:4px;padding:8px 14px;min-width:110px;
background:#fff}
.tile-n{font-size:22px;font-weight:650;font-variant-numeric:tabular-nums}
.tile-l{font-size:12px;color:var(--mute)}
.tile.bad{border-left:4px solid var(--err)}
.tile.good{border-left:4px solid var(--ok)}
.tile.error .tile-n{color:var(--err)}
.tile.warning .tile-n{color:var(--warn)}
.tile.note .tile-n{color:var(--note)}
.sev,.status{display:inline-block;padding:0 6px;border-radius:3px;font-size:11px;
font-weight:650;text-transform:uppercase;letter-spacing:.4px;color:#fff;vertical-align:1px}
.sev.error,.status.error{background:var(--err)}
.sev.warning{background:var(--warn)}
.sev.note{background:var(--note)}
.status.findings{background:var(--warn)}
.status.partial{background:var(--warn);font-style:italic}
.status.clean{background:var(--ok)}
article.design{border-top:2px solid var(--ink);margin-top:22px;padding-top:2px}
.design-title{margin:0 0 4px;font-style:italic}
.design-summary{margin:0 0 6px;color:var(--mute);font-size:13px}
section.stage{margin:8px 0 16px 12px}
.stage-meta{font-weight:400;color:var(--mute);font-size:13px}
.clean-stage{color:var(--ok);margin:2px 0}
.finding{border:1px solid var(--line);border-left:5px solid var(--note);border-radius:3px;
padding:8px 12px;margin:10px 0;background:#fff}
.finding.error{border-left-color:var(--err)}
.finding.warning{border-left-color:var(--warn)}
.finding.accepted{opacity:.75}
.fhead{display:flex;flex-wrap:wrap;gap:8px;align-items:baseline}
.fhead .on{color:var(--mute);font-size:13px}
.finding-message{margin:6px 0;font-weight:600}
pre.src{background:var(--soft);padding:3px 8px;border-radius:3px;color:#333;margin:4px 0}
table.values td.origin{color:var(--mute);font-size:12.5px}
.fix{margin:6px 0}
.fix-label{display:inline-block;background:var(--ok);color:#fff;font-size:11px;font-weight:650;
text-transform:uppercase;padding:0 6px;border-radius:3px;margin-right:4px}
details summary{cursor:pointer;color:var(--mute);font-size:12.5px}
details pre{background:var(--soft);padding:6px 8px;margin:4px 0}
figure{margin:8px 0;overflow-x:auto}
figcaption{font-size:12px;color:var(--mute);max-width:900px}
svg{max-width:100%;height:auto;font-family:system-ui,sans-serif}
svg .wire{stroke:#3a4252;stroke-width:1.5}
svg .dot{fill:#3a4252}
svg .term{fill:#fff;stroke:#3a4252;stroke-width:1.5}
svg .gnd{stroke:#3a4252;stroke-width:1.5;fill:none}
svg .dev rect{fill:#fff;stroke:#3a4252;stroke-width:1.2}
svg .dev.hit rect{fill:var(--hit);stroke:var(--err);stroke-width:2.6}
svg .dev text{text-anchor:middle}
svg .dev .name{font:600 11.5px ui-monospace,monospace;fill:var(--ink)}
svg .dev.hit .name{fill:var(--err)}
svg .dev .cap{font-size:9.5px;fill:var(--mute)}
svg .cmd{fill:var(--note)}
svg text.cap{font-size:9.5px;fill:var(--mute)}
svg .net{font:10.5px ui-monospace,monospace;fill:var(--note)}
svg .pin{font-size:9px;fill:var(--mute)}
svg.plot .grid{stroke:#e3e7ed;stroke-width:1}
svg.plot .frame{fill:none;stroke:#8a93a3}
svg.plot .bad{fill:#fbe3e1}
svg.plot .limit{stroke:var(--err);stroke-width:1.6;stroke-dasharray:6 4}
svg.plot .cross{stroke:var(--err);stroke-width:1;stroke-dasharray:2 3}
svg.plot .ontime{stroke:#5d6778;stroke-width:1;stroke-dasharray:4 3}
svg.plot .cross-dot{fill:var(--err)}
svg.plot .curve{fill:none;stroke:var(--note);stroke-width:2.2}
svg.plot .tick{font-size:10.5px;fill:var(--mute)}
svg.plot .axis{font-size:11.5px;fill:var(--ink)}
svg.plot .limit-label,svg.plot .cross-label{font-size:11px;fill:var(--err)}
svg.plot .curve-label{font-size:11px;fill:var(--note)}
svg.plot .suggested{fill:none;stroke:var(--ok);stroke-width:1.8;stroke-dasharray:7 4}
svg.plot .suggested-label{font-size:11px;fill:var(--ok)}
table.plot-values td{padding:1px 10px}
footer{padding:10px 32px 24px;color:var(--mute);font-size:12px;border-top:1px solid var(--line)}
@media print{header{background:none}#designs th::after{content:none}
.finding{break-inside:avoid}figure{break-inside:avoid}}
"""

# Sorting of the designs table. The sort state lives in the address (#sort=key:dir) so a
# sorted view can be bookmarked or shared, and a page opened that way arrives sorted.
SCRIPT = """
(function () {
  "use strict";
  var table = document.getElementById("designs");
  if (!table) { return; }
  var heads = Array.prototype.slice.call(table.tHead.rows[0].cells);
  function keyOf(cell) {
    var v = cell.getAttribute("data-sort");
    return v === null ? cell.textContent.trim() : v;
  }
  function sortBy(index, dir) {
    var body = table.tBodies[0];
    var rows = Array.prototype.slice.call(body.rows);
    var numeric = rows.every(function (r) {
      var k = keyOf(r.cells[index]);
      return k !== "" && !isNaN(Number(k));
    });
    rows.sort(function (a, b) {
      var x = keyOf(a.cells[index]), y = keyOf(b.cells[index]);
      var c = numeric ? Number(x) - Number(y) : (x < y ? -1 : (x > y ? 1 : 0));
      if (dir === "desc") { c = -c; }
      if (c === 0) {
        c = Number(a.getAttribute("data-order")) - Number(b.getAttribute("data-order"));
      }
      return c;
    });
    rows.forEach(function (r) { body.appendChild(r); });
    heads.forEach(function (th, i) {
      th.setAttribute("aria-sort",
        i === index ? (dir === "asc" ? "ascending" : "descending") : "none");
    });
  }
  function fromAddress() {
    var m = /^#sort=([a-z]+):(asc|desc)$/.exec(window.location.hash);
    if (!m) { return; }
    heads.forEach(function (th, i) {
      if (th.getAttribute("data-key") === m[1]) { sortBy(i, m[2]); }
    });
  }
  heads.forEach(function (th, i) {
    function activate() {
      var dir = th.getAttribute("aria-sort") === "ascending" ? "desc" : "asc";
      sortBy(i, dir);
      try {
        history.replaceState(null, "", "#sort=" + th.getAttribute("data-key") + ":" + dir);
      } catch (e) { /* some browsers refuse on file: pages; sorting still works */ }
    }
    th.addEventListener("click", activate);
    th.addEventListener("keydown", function (ev) {
      if (ev.key === "Enter" || ev.key === " ") { ev.preventDefault(); activate(); }
    });
  });
  fromAddress();
  window.addEventListener("hashchange", fromAddress);
})();
"""

# Nothing may be fetched: the page is complete in itself.
CSP = (
    "default-src 'none'; style-src 'unsafe-inline'; script-src 'unsafe-inline'; "
    "img-src data:; base-uri 'none'; form-action 'none'"
)


def format_html(results: Sequence[CheckResult], options: ReportOptions) -> str:
    """The whole library scan as one self-contained HTML page."""
    ordered = sorted(results, key=lambda r: r.circuit.path)
    anchors = {r.circuit.path: f"d{i}" for i, r in enumerate(ordered, 1)}
    numbered: dict[str, list[_Numbered]] = {}
    count = 0
    for result in ordered:
        items = []
        for finding in sorted(result.findings, key=Finding.sort_key):
            count += 1
            items.append(_Numbered(finding, f"f{count}"))
        numbered[result.circuit.path] = items
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
        body.append(_designs_table(ordered, anchors))
        body.append('<section id="details"><h2>Designs in detail</h2>')
        body.extend(
            _design_article(r, anchors[r.circuit.path], numbered[r.circuit.path], options.explain)
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
