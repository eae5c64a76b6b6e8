"""The page's inline style sheet and script (the page fetches nothing)."""

STYLE = """
:root{--ink:#1d2433;--mute:#5d6778;--line:#d5dae1;--soft:#f4f6f9;--err:#b3261e;
--warn:#a85a00;--note:#1f5fae;--ok:#1d7a46;--hit:#fdeceb}
*{box-sizing:border-box}
body{margin:0;color:var(--ink);background:#fff;font:14px/1.45 system-ui,sans-serif}
header{padding:18px 32px 14px;border-bottom:3px solid var(--ink);background:var(--soft)}
header h1{margin:0;font-size:21px;letter-spacing:.2px}
header .meta{margin:4px 0 0;color:var(--mute);font-size:13px}
main{padding:4px 32px 32px}
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
article.design{border-top:2px solid var(--ink);margin-top:14px;padding-top:2px}
article.design > details > summary{list-style:none;color:var(--ink);font-size:14px}
article.design > details > summary::-webkit-details-marker{display:none}
article.design > details > summary h3{display:inline;margin:0}
article.design > details > summary::before{content:"\\25B8 ";color:var(--mute)}
article.design > details[open] > summary::before{content:"\\25BE "}
.design-counts{color:var(--mute);font-size:12.5px;margin-left:8px}
#filters{display:flex;flex-wrap:wrap;gap:14px;align-items:center;background:var(--soft);
border:1px solid var(--line);border-radius:4px;padding:8px 12px;margin:8px 0}
#filters label{font-size:12.5px;color:var(--mute)}
#filters select,#filters button{font:inherit;font-size:13px}
#filter-count{font-size:12.5px;color:var(--mute)}
.not-checked{color:var(--mute);margin:2px 0;font-style:italic}
.finding-body{display:flex;flex-wrap:wrap;gap:8px 24px;align-items:flex-start}
.finding-text{flex:1 1 520px;min-width:0}
.finding-figures{flex:0 1 680px;min-width:0;display:flex;flex-wrap:wrap;gap:8px}
.key-numbers{margin:4px 0;font-variant-numeric:tabular-nums}
.key-numbers .claim{font-weight:650}
.key-numbers .limit{color:var(--mute)}
.waiver{margin:4px 0;padding:2px 8px;border-left:3px solid var(--ok);background:#eef6f1}
.sev.accepted{background:var(--ok)}
.bench{margin:4px 0;font-size:13px}
.bench-notes,.bench-note{color:var(--mute);font-size:12.5px}
table.bench-claims td{padding:1px 10px}
svg.plot .claim{stroke:var(--err);stroke-width:1.2;stroke-dasharray:3 3}
svg.plot .sim-curve{fill:none;stroke-width:1.8}
svg.plot .sim-0{stroke:#1f5fae}
svg.plot .sim-1{stroke:#a85a00}
svg.plot .sim-2{stroke:#1d7a46}
svg.plot .sim-3{stroke:#6b3fa0}
svg .ref{font:italic 10px ui-monospace,monospace;fill:var(--mute)}
.design-title{margin:0 0 4px;font-style:italic}
.design-summary{margin:0 0 6px;color:var(--mute);font-size:13px}
section.stage{margin:8px 0 16px 12px}
.stage-meta{font-weight:400;color:var(--mute);font-size:13px}
.clean-stage{color:var(--ok);margin:2px 0}
.finding{border:1px solid var(--line);border-left:5px solid var(--note);border-radius:3px;
padding:8px 12px;margin:10px 0;background:#fff}
.finding.error{border-left-color:var(--err)}
.finding.warning{border-left-color:var(--warn)}
.finding.accepted{border-left-color:var(--ok);background:#fbfdfc}
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

# Sorting and filtering. The view lives in the address (#sort=key:dir&status=…&rule=…&
# severity=…) so it can be bookmarked or shared, and a page opened that way arrives so.
# An address naming an element (a design, a finding) opens the collapsed parts around it.
SCRIPT = """
(function () {
  "use strict";
  var table = document.getElementById("designs");
  if (!table) { return; }
  var heads = Array.prototype.slice.call(table.tHead.rows[0].cells);
  var articles = Array.prototype.slice.call(document.querySelectorAll("article.design"));
  var KEYS = ["status", "rule", "severity"];
  var state = {sort: null, status: "", rule: "", severity: ""};
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
  function parse() {
    var found = {sort: null, status: "", rule: "", severity: ""};
    var text = window.location.hash.replace(/^#/, "");
    if (text.indexOf("=") < 0) { return null; }
    text.split("&").forEach(function (part) {
      var pair = part.split("=");
      if (pair.length !== 2) { return; }
      var value = pair[1];
      if (pair[0] === "sort" && /^[a-z]+:(asc|desc)$/.test(value)) { found.sort = value; }
      if (KEYS.indexOf(pair[0]) >= 0 && /^[a-z0-9-]*$/.test(value)) { found[pair[0]] = value; }
    });
    return found;
  }
  function write() {
    var parts = [];
    if (state.sort) { parts.push("sort=" + state.sort); }
    KEYS.forEach(function (k) { if (state[k]) { parts.push(k + "=" + state[k]); } });
    try {
      history.replaceState(null, "", parts.length ? "#" + parts.join("&") :
        window.location.pathname + window.location.search);
    } catch (e) { /* some browsers refuse on file: pages; the view still changes */ }
  }
  function shows(card) {
    var accepted = card.getAttribute("data-accepted") === "1";
    if (state.rule && card.getAttribute("data-rule") !== state.rule) { return false; }
    if (state.severity === "accepted") { return accepted; }
    if (state.severity) {
      return !accepted && card.getAttribute("data-severity") === state.severity;
    }
    return true;
  }
  function applyFilters() {
    var shown = {};
    var count = 0;
    var narrowed = Boolean(state.rule || state.severity);
    articles.forEach(function (article) {
      var any = false;
      article.querySelectorAll(".finding").forEach(function (card) {
        var ok = shows(card);
        card.hidden = !ok;
        if (ok) { any = true; }
      });
      var ok = (!state.status || article.getAttribute("data-status") === state.status) &&
        (any || !narrowed);
      article.hidden = !ok;
      shown[article.getAttribute("data-path")] = ok;
      if (ok) { count += 1; }
    });
    Array.prototype.slice.call(table.tBodies[0].rows).forEach(function (row) {
      row.hidden = !shown[row.getAttribute("data-path")];
    });
    var counter = document.getElementById("filter-count");
    if (counter) { counter.textContent = count + " of " + articles.length + " designs shown"; }
  }
  function fromAddress() {
    var found = parse();
    if (found === null) { reveal(); return; }
    state = found;
    if (state.sort) {
      var m = state.sort.split(":");
      heads.forEach(function (th, i) {
        if (th.getAttribute("data-key") === m[0]) { sortBy(i, m[1]); }
      });
    }
    KEYS.forEach(function (k) {
      var select = document.getElementById("filter-" + k);
      if (select) { select.value = state[k]; }
    });
    applyFilters();
  }
  function reveal() {
    var id = window.location.hash.replace(/^#/, "");
    var element = id ? document.getElementById(id) : null;
    var own = element ? element.querySelector(":scope > details.design-details") : null;
    if (own) { own.open = true; }
    while (element) {
      if (element.tagName === "DETAILS") { element.open = true; }
      element = element.parentElement;
    }
  }
  heads.forEach(function (th, i) {
    function activate() {
      var dir = th.getAttribute("aria-sort") === "ascending" ? "desc" : "asc";
      sortBy(i, dir);
      state.sort = th.getAttribute("data-key") + ":" + dir;
      write();
    }
    th.addEventListener("click", activate);
    th.addEventListener("keydown", function (ev) {
      if (ev.key === "Enter" || ev.key === " ") { ev.preventDefault(); activate(); }
    });
  });
  KEYS.forEach(function (k) {
    var select = document.getElementById("filter-" + k);
    if (!select) { return; }
    select.addEventListener("change", function () {
      state[k] = select.value;
      applyFilters();
      write();
    });
  });
  function openAll(open) {
    articles.forEach(function (a) {
      a.querySelectorAll("details.design-details").forEach(function (d) { d.open = open; });
    });
  }
  var expand = document.getElementById("open-all");
  var collapse = document.getElementById("close-all");
  if (expand) { expand.addEventListener("click", function () { openAll(true); }); }
  if (collapse) { collapse.addEventListener("click", function () { openAll(false); }); }
  fromAddress();
  window.addEventListener("hashchange", fromAddress);
})();
"""

# Nothing may be fetched: the page is complete in itself.
CSP = (
    "default-src 'none'; style-src 'unsafe-inline'; script-src 'unsafe-inline'; "
    "img-src data:; base-uri 'none'; form-action 'none'"
)
