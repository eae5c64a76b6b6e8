"""The HTML report: one self-contained page, rendered for real in a headless browser.

References used below:
- Capacitor law, Q = C·ΔV and dV/dt = −I/C (textbook relation), as used by the
  bootstrap-capacitor sizing equations of published gate-driver application notes
  (from memory): V_boot(t) = V_boot,0 − Q_g/C − I_drain·t/C.
- The example library's own specification, examples/README.md (which devices each
  stage has, and where the planted mistakes are).
- Chromium (Debian package) as an independent HTML/CSS/JS/SVG engine: what it renders
  is what a reader sees.
"""

from __future__ import annotations

import math
import re
import shutil
import subprocess
import xml.etree.ElementTree as ET
from collections import Counter
from dataclasses import replace
from html import escape
from html.parser import HTMLParser
from pathlib import Path

import pytest

from drivelint.checks.base import Finding
from drivelint.checks.runner import CheckResult
from drivelint.diagnostics import Severity
from drivelint.pipeline import check_path, check_text
from drivelint.ratings.values import Value
from drivelint.report.formats import ReportOptions
from drivelint.report.html import (
    PLOT_RULES,
    boot_droop,
    boot_plot_svg,
    drawn_devices,
    format_html,
    stage_svg,
)
from drivelint.stages.model import Clamp, DriveStage, GatePath, Supply

ROOT = Path(__file__).resolve().parents[2]
EXAMPLES = ROOT / "examples"
OPTIONS = ReportOptions()


# --------------------------------------------------------------------------- helpers


class _Page(HTMLParser):
    """Collects what the tests look at: design rows, finding messages, tiles, links, ids."""

    def __init__(self) -> None:
        super().__init__(convert_charrefs=True)
        self.rows: list[dict[str, str]] = []
        self.cells: list[list[str]] = []
        self.messages: list[str] = []
        self.tiles: dict[str, str] = {}
        self.ids: set[str] = set()
        self.hrefs: list[str] = []
        self.srcs: list[str] = []
        self.scripts = 0
        self.heads: dict[str, str] = {}
        self._in_designs = False
        self._in_body = False
        self._cell: list[str] | None = None
        self._message: list[str] | None = None
        self._tile: str | None = None
        self._tile_n = False

    def handle_starttag(self, tag: str, attrs: list[tuple[str, str | None]]) -> None:
        a = {k: v or "" for k, v in attrs}
        if "id" in a:
            self.ids.add(a["id"])
        if "href" in a:
            self.hrefs.append(a["href"])
        if "src" in a:
            self.srcs.append(a["src"])
        if tag == "script":
            self.scripts += 1
        if tag == "table" and a.get("id") == "designs":
            self._in_designs = True
        if self._in_designs and tag == "th":
            self.heads[a.get("data-key", "")] = a.get("aria-sort", "")
        if self._in_designs and tag == "tbody":
            self._in_body = True
        if self._in_body and tag == "tr":
            self.rows.append(a)
            self.cells.append([])
        if self._in_body and tag == "td":
            self._cell = []
        if tag == "p" and "finding-message" in a.get("class", ""):
            self._message = []
        if tag == "div" and "data-tile" in a:
            self._tile = a["data-tile"]
        if self._tile and tag == "div" and a.get("class") == "tile-n":
            self._tile_n = True

    def handle_endtag(self, tag: str) -> None:
        if tag == "table":
            self._in_designs = self._in_body = False
        if tag == "td" and self._cell is not None:
            self.cells[-1].append("".join(self._cell).strip())
            self._cell = None
        if tag == "p" and self._message is not None:
            self.messages.append("".join(self._message))
            self._message = None
        if tag == "div" and self._tile_n:
            self._tile_n = False

    def handle_data(self, data: str) -> None:
        if self._cell is not None:
            self._cell.append(data)
        if self._message is not None:
            self._message.append(data)
        if self._tile_n and self._tile:
            self.tiles[self._tile] = data.strip()
            self._tile = None


def parse(page: str) -> _Page:
    parser = _Page()
    parser.feed(page)
    parser.close()
    return parser


def finding_div(page: str, finding_message: str) -> str:
    """The HTML of the finding card whose message is ``finding_message``."""
    at = page.index(escape(finding_message, quote=True))
    start = page.rindex('<div class="finding ', 0, at)
    following = page.find('<div class="finding ', at)
    return page[start : following if following != -1 else len(page)]


def hand_finding(
    stage_result: CheckResult, rule: str, device: str, values: dict[str, Value]
) -> Finding:
    stage = next(s for s in stage_result.stages if s.floating)
    return Finding(
        rule=rule,
        severity=Severity.ERROR,
        message=f"{device} runs down during the on-time of {stage.switch}",
        span=stage_result.circuit.devices[device].span,
        switch=stage.switch,
        device=device,
        values=values,
        fix=f"enlarge {device}",
    )


def given(value: float, unit: str) -> Value:
    return Value(value, unit, "test input")


@pytest.fixture(scope="module")
def library() -> list[CheckResult]:
    return [check_path(p) for p in sorted(EXAMPLES.glob("*.cir"))]


@pytest.fixture(scope="module")
def page(library: list[CheckResult]) -> str:
    return format_html(library, OPTIONS)


@pytest.fixture(scope="module")
def tool36() -> CheckResult:
    return check_path(EXAMPLES / "tool36_leg_totem_pole.cir")


# --------------------------------------------------------------------------- the page


def test_page_fetches_nothing(page: str) -> None:
    # Self-contained: no absolute address anywhere, no external resource of any kind.
    assert "http://" not in page and "https://" not in page
    parsed = parse(page)
    assert parsed.srcs == []
    assert "url(" not in page and "@import" not in page and "<link" not in page
    # Every link is an anchor into the page, and every anchor exists.
    assert parsed.hrefs and all(h.startswith("#") for h in parsed.hrefs)
    assert {h[1:] for h in parsed.hrefs} <= parsed.ids
    # The browser is told to refuse any fetch, should one slip in.
    assert "default-src &#x27;none&#x27;" in page
    assert parsed.scripts == 1


def test_page_is_deterministic(library: list[CheckResult], page: str) -> None:
    assert format_html(list(reversed(library)), OPTIONS) == page
    rows = parse(page).rows
    assert [r["data-path"] for r in rows] == sorted(r["data-path"] for r in rows)


def test_one_row_per_design_with_its_counts(library: list[CheckResult], page: str) -> None:
    parsed = parse(page)
    assert len(parsed.rows) == len(list(EXAMPLES.glob("*.cir"))) == len(library)
    keys = list(parsed.heads)
    for result, row, cells in zip(
        sorted(library, key=lambda r: r.circuit.path), parsed.rows, parsed.cells, strict=True
    ):
        assert row["data-path"] == result.circuit.path
        column = dict(zip(keys, cells, strict=True))
        assert int(column["findings"]) == len(result.findings)
        assert int(column["floating"]) == sum(1 for s in result.stages if s.floating)
        assert int(column["errors"]) == sum(
            1 for f in result.findings if f.severity is Severity.ERROR
        )
        assert column["status"] == ("findings" if result.findings else "clean")


def test_summary_counts(library: list[CheckResult], page: str) -> None:
    tiles = parse(page).tiles
    findings = [f for r in library for f in r.findings]
    assert tiles["designs"] == str(len(library))
    assert tiles["floating stages"] == str(sum(s.floating for r in library for s in r.stages))
    assert tiles["findings"] == str(len(findings))
    assert tiles["errors"] == str(sum(f.severity is Severity.ERROR for f in findings))
    assert tiles["files with input errors"] == "0"
    for rule, count in Counter(f.rule for f in findings).items():
        row = re.search(rf'<tr data-rule="{re.escape(rule)}">(.*?)</tr>', page)
        assert row is not None, rule
        assert f'<td class="num total">{count}</td>' in row.group(1)


def test_planted_mistakes_are_on_the_page(library: list[CheckResult], page: str) -> None:
    # examples/README.md: the under-rated bootstrap diode D_BT, reported in leg A (leg B's
    # high side is held off in the scenario, so its diode never blocks the bus).
    mower = next(r for r in library if r.circuit.path.endswith("mower48v_hbridge_wrapped_fets.cir"))
    diode_findings = [f for f in mower.findings if f.rule == "bootstrap-diode-voltage"]
    assert {f.device for f in diode_findings} == {"xlega.d_bt"}
    for finding in diode_findings:
        card = finding_div(page, finding.message)
        assert escape(finding.fix) in card
        for name, value in finding.values.items():
            assert f"<code>{name}</code>" in card
            assert escape(value.text()) in card
            assert escape(value.origin) in card
    # Clean designs (README: induction325 and the negatives) are marked clean.
    rows = {r["data-path"]: c for r, c in zip(parse(page).rows, parse(page).cells, strict=True)}
    for clean in ("induction325_half_bridge_driver.cir", "boost12v_led_lowside.cir"):
        cells = next(c for p, c in rows.items() if p.endswith(clean))
        assert cells[-1] == "clean"


def test_every_text_is_escaped(tool36: CheckResult) -> None:
    hostile = check_text(
        "<script>alert('title')</script> & more\nV1 a 0 DC 1\nR1 a 0 1k\n.end\n",
        path="<b>deck</b>.cir",
    )
    finding = replace(
        hand_finding(tool36, "bootstrap-capacitor-small", "c1", {}),
        message="V_GS < 0 & > 20 <img src=x>",
        fix="<script>fix()</script>",
        values={"q<g>": Value(1e-9, "C", "origin <i>here</i>")},
        derivation=("a < b & c",),
    )
    page = format_html([hostile, replace(tool36, findings=(finding,))], OPTIONS)
    for raw in ("<script>alert", "<b>deck", "<img src=x>", "<script>fix", "<i>here", "q<g>"):
        assert raw not in page
    for shown in (
        "&lt;script&gt;alert(&#x27;title&#x27;)&lt;/script&gt; &amp; more",
        "&lt;b&gt;deck&lt;/b&gt;.cir",
        "V_GS &lt; 0 &amp; &gt; 20 &lt;img src=x&gt;",
        "origin &lt;i&gt;here&lt;/i&gt;",
        "a &lt; b &amp; c",
    ):
        assert shown in page
    assert parse(page).scripts == 1


def test_input_errors_are_listed() -> None:
    broken = check_text("broken deck\nR1 a\nM1 d g s\n.end\n", path="lib/broken.cir")
    assert any(d.severity is Severity.ERROR for d in broken.diagnostics)
    good = check_text("fine\nV1 a 0 DC 1\nR1 a 0 1k\n.end\n", path="lib/fine.cir")
    page = format_html([good, broken], OPTIONS)
    parsed = parse(page)
    assert parsed.tiles["files with input errors"] == "1"
    listed = re.search(r'<ul id="input-errors">(.*?)</ul>', page, re.S)
    assert listed is not None and "lib/broken.cir" in listed.group(1)
    assert "lib/fine.cir" not in listed.group(1)
    status = {r["data-path"]: c[-1] for r, c in zip(parsed.rows, parsed.cells, strict=True)}
    assert status == {"lib/broken.cir": "error", "lib/fine.cir": "clean"}


def test_empty_scan() -> None:
    page = format_html([], OPTIONS)
    assert "No netlists were checked" in page and "http" + "://" not in page


# --------------------------------------------------------------------------- stage diagram


def test_diagram_shows_the_stage_and_highlights_the_device(tool36: CheckResult) -> None:
    stage = next(s for s in tool36.stages if s.floating)
    svg = stage_svg(stage, tool36.circuit, ["c1"])
    root = ET.fromstring(svg)  # well-formed: every text in it escaped
    devices = {
        g.get("data-device", ""): g.get("class") for g in root.iter() if g.get("data-device")
    }
    # examples/README.md: bootstrap D1 + C1, totem pole Q2/Q3, R_GS, refresh by M2.
    assert {"m1", "c1", "d1", "q2", "q3", "r_gs", "m2"} <= set(devices)
    # A group (an inductor with its load) shares one box named after all its devices.
    assert {n for box in devices for n in re.split(r", | \+ ", box)} == drawn_devices(stage)
    assert devices["c1"] == "dev hit"
    assert [d for d, cls in devices.items() if cls == "dev hit"] == ["c1"]


def test_diagram_of_an_isolated_supply_with_a_clamp(library: list[CheckResult]) -> None:
    # examples/README.md: isolated 15 V source V_ISO, Zener D_Z across gate-source.
    heater = next(r for r in library if r.circuit.path.endswith("heater96v_isolated_supply.cir"))
    stage = next(s for s in heater.stages if s.floating)
    root = ET.fromstring(stage_svg(stage, heater.circuit, ["d_z"]))
    devices = {g.get("data-device"): g for g in root.iter() if g.get("data-device")}
    assert {"v_iso", "d_z", "m1"} <= set(devices)
    assert devices["d_z"].get("class") == "dev hit"
    assert devices["v_iso"].get("class") == "dev"
    assert "12 V" in "".join(devices["d_z"].itertext())


def _variants(stage: DriveStage) -> dict[str, DriveStage]:
    """Shapes the examples do not have, built from a real stage (common practice circuits)."""
    return {
        # A charge pump, a gate-source clamp of two back-to-back Zeners, a pull-down to a
        # negative rail and a second pull-up from a separate rail.
        "charge-pump": replace(
            stage,
            supply=Supply("charge-pump", boot_net="cp", capacitor="c1", diode="d1", source="c_p"),
            pullups=(GatePath(("q2",), "g", "boot"), GatePath(("r_x",), "g", "v15")),
            pulldowns=(GatePath(("r_g", "q3"), "g", "vneg"), GatePath(("r_gs",), "g", "source")),
            clamps=(Clamp("d_a", "zener", "back-to-back", ("d_a", "d_b"), 15.0),),
        ),
        # A reversed bootstrap diode, no refresh path and no control recognised.
        "reversed": replace(
            stage,
            supply=replace(stage.supply, diode_orientation="reversed"),
            refresh=(),
            control=None,
        ),
    }


@pytest.mark.parametrize("shape", ["charge-pump", "reversed"])
def test_diagram_of_other_shapes(tool36: CheckResult, shape: str) -> None:
    stage = _variants(next(s for s in tool36.stages if s.floating))[shape]
    highlight = {"charge-pump": ["d_b", "c_p"], "reversed": ["d1"]}[shape]
    root = ET.fromstring(stage_svg(stage, tool36.circuit, highlight))
    boxes = {g.get("data-device", ""): g for g in root.iter() if g.get("data-device")}
    assert {n for box in boxes for n in re.split(r", | \+ ", box)} == drawn_devices(stage)
    hits = {name for name, g in boxes.items() if g.get("class") == "dev hit"}
    if shape == "charge-pump":
        assert hits == {"c_p", "d_a + d_b"}
        assert "vneg" in "".join(root.itertext()) and "v15" in "".join(root.itertext())
    else:
        assert hits == {"d1"}
        assert "reversed!" in "".join(boxes["d1"].itertext())
        assert "vhin" not in boxes and not any("ground" in t for t in root.itertext())


def test_every_stage_with_findings_has_its_diagram(library: list[CheckResult], page: str) -> None:
    articles = re.findall(r'<article class="design".*?</article>', page, re.S)
    assert len(articles) == len(library)
    for result, article in zip(
        sorted(library, key=lambda r: r.circuit.path), articles, strict=True
    ):
        assert escape(result.circuit.path) in article[: article.index("</h3>")]
        diagrams = re.findall(r'<svg class="stage".*?</svg>', article, re.S)
        drawn = {ET.fromstring(svg).get("data-switch") for svg in diagrams}
        assert drawn == {f.switch for f in result.findings}, result.circuit.path
        assert len(diagrams) == len(drawn)


# --------------------------------------------------------------------------- boot plot

# V0 = 12 V, C = 100 nF, Q_g = 50 nC, I = 1 mA, t_on = 1 ms. By Q = C·ΔV and dV/dt = −I/C:
# V(0+) = 12 − 50 nC/100 nF = 11.5 V; V(t) = 11.5 V − t·10 V/ms; it reaches 8 V at
# t = (11.5 − 8) V · 100 nF / 1 mA = 350 µs; V(1 ms) = 1.5 V.
PLOT_CASE = {"v_min": 8.0, "v0": 12.0, "c": 100e-9, "qg": 50e-9, "i": 1e-3, "t_on": 1e-3}
EXPECTED_ROWS = [
    ("0 (before turn-on)", "12 V"),
    ("0 s", "11.5 V"),
    ("250 us", "9 V"),
    ("500 us", "6.5 V"),
    ("750 us", "4 V"),
    ("1 ms", "1.5 V"),
]


def _plot_values(names: tuple[str, str, str, str]) -> dict[str, Value]:
    v0, c, qg, t_on = names
    return {
        v0: given(PLOT_CASE["v0"], "V"),
        "v_boot_min": given(PLOT_CASE["v_min"], "V"),
        c: given(PLOT_CASE["c"], "F"),
        qg: given(PLOT_CASE["qg"], "C"),
        "i_drain": given(PLOT_CASE["i"], "A"),
        t_on: given(PLOT_CASE["t_on"], "s"),
    }


def _y_axis(svg: str) -> tuple[float, float]:
    """Volts per pixel and the offset, read back from the y-axis tick labels."""
    ticks = [
        (float(y) - 4, float(v))
        for y, v in re.findall(
            r'<text class="tick" x="[\d.]+" y="([\d.]+)" '
            r'text-anchor="end">([-\d.e]+)</text>',
            svg,
        )
    ]
    (y1, v1), (y2, v2) = ticks[0], ticks[-1]
    slope = (v2 - v1) / (y2 - y1)
    return slope, v1 - slope * y1


@pytest.mark.parametrize(
    "names",
    [
        ("v_boot0", "c_hold", "qg", "on_time"),
        ("v_boot", "capacitance", "gate_charge", "t_on"),
    ],
)
@pytest.mark.parametrize("rule", sorted(PLOT_RULES))
def test_boot_plot_follows_the_capacitor_law(
    tool36: CheckResult, rule: str, names: tuple[str, str, str, str]
) -> None:
    finding = hand_finding(tool36, rule, "c1", _plot_values(names))
    figure = boot_plot_svg(finding)
    assert figure is not None
    rows = re.findall(r'<tr><td class="num">([^<]*)</td><td class="num">([^<]*)</td></tr>', figure)
    assert rows == EXPECTED_ROWS
    assert "below the minimum after 350 us" in figure
    svg = figure[figure.index("<svg") : figure.index("</svg>") + 6]
    ET.fromstring(svg)
    points = re.search(r'<polyline class="curve" points="([^"]+)"', svg)
    assert points is not None
    xy = [tuple(map(float, p.split(","))) for p in points.group(1).split()]
    slope, offset = _y_axis(svg)
    volts = [slope * y + offset for _, y in xy]
    # Read back from the drawing: the step at turn-on and the end of the on-time.
    assert volts[0] == pytest.approx(12.0, abs=0.05)
    assert volts[1] == pytest.approx(11.5, abs=0.05)
    assert volts[-1] == pytest.approx(1.5, abs=0.05)
    # A constant drain: equal time steps give equal voltage steps (a straight line).
    steps = [b - a for a, b in zip(volts[1:], volts[2:], strict=False)]
    assert max(steps) == pytest.approx(min(steps), abs=0.02)
    limit = re.search(r'<line class="limit" x1="[\d.]+" y1="([\d.]+)"', svg)
    assert limit is not None
    assert slope * float(limit.group(1)) + offset == pytest.approx(8.0, abs=0.05)
    # The same page carries it, inside the finding's card.
    page = format_html([replace(tool36, findings=(finding,))], OPTIONS)
    assert 'class="plot"' in finding_div(page, finding.message)


def test_dc_command_plot_spans_twice_the_hold_time(tool36: CheckResult) -> None:
    # An unbounded on-time (DC): the hold time sets the plot; t_hold = (C·ΔV − Q_g)/I
    # = (100 nF · 4 V − 50 nC)/1 mA = 350 µs, so the plot ends at 700 µs with
    # V = 11.5 V − 700 µs · 10 V/ms = 4.5 V.
    values = _plot_values(("v_boot0", "c_hold", "qg", "on_time"))
    values["on_time"] = given(math.inf, "s")
    values["hold_time"] = given(350e-6, "s")
    figure = boot_plot_svg(hand_finding(tool36, "dc-hold", "c1", values))
    assert figure is not None
    assert "below the minimum after 350 us" in figure
    assert '<td class="num">700 us</td><td class="num">4.5 V</td>' in figure
    assert "unbounded" in figure


def test_gate_charge_alone_below_the_minimum(tool36: CheckResult) -> None:
    # examples/README.md: C1 = 10 nF against Q_g ≈ 95 nC — the charge of one turn-on
    # alone, 95 nC / 10 nF = 9.5 V, takes an 11.7 V supply below a 10 V minimum.
    values = {
        "v_boot": given(11.7, "V"),
        "v_boot_min": given(10.0, "V"),
        "capacitance": given(10e-9, "F"),
        "gate_charge": given(95e-9, "C"),
        "on_time": given(31.3e-6, "s"),
    }
    figure = boot_plot_svg(hand_finding(tool36, "bootstrap-capacitor-small", "c1", values))
    assert figure is not None
    assert "below the minimum at turn-on" in figure
    assert "no steady drain given" in figure
    assert '<td class="num">0 s</td><td class="num">2.2 V</td>' in figure


def test_plot_skipped_without_the_values_it_needs(tool36: CheckResult) -> None:
    full = _plot_values(("v_boot0", "c_hold", "qg", "on_time"))
    for missing in ("v_boot0", "v_boot_min", "c_hold", "qg"):
        values = {k: v for k, v in full.items() if k != missing}
        finding = hand_finding(tool36, "dc-hold", "c1", values)
        assert boot_droop(finding) is None, missing
        page = format_html([replace(tool36, findings=(finding,))], OPTIONS)
        card = finding_div(page, finding.message)
        assert 'class="plot"' not in card and "enlarge c1" in card
    # Neither an on-time, a hold time nor a drain: nothing says how long to plot.
    no_time = {k: v for k, v in full.items() if k not in ("on_time", "i_drain")}
    assert boot_droop(hand_finding(tool36, "dc-hold", "c1", no_time)) is None
    # Values with the wrong unit are not taken for what their name says.
    wrong = dict(full, c_hold=given(100e-9, "C"))
    assert boot_droop(hand_finding(tool36, "dc-hold", "c1", wrong)) is None
    # Other rules carry no plot even with the same values.
    other = hand_finding(tool36, "bootstrap-diode-voltage", "c1", full)
    page = format_html([replace(tool36, findings=(other,))], OPTIONS)
    assert 'class="plot"' not in page


def test_real_hold_findings_carry_their_plot(library: list[CheckResult], page: str) -> None:
    hold = [f for r in library for f in r.findings if f.rule in PLOT_RULES]
    if not hold:
        pytest.skip("no dc-hold or bootstrap-capacitor-small finding in the examples yet")
    for finding in hold:
        card = finding_div(page, finding.message)
        assert ('class="plot"' in card) == (boot_droop(finding) is not None)


# --------------------------------------------------------------------------- in a browser

CHROMIUM = shutil.which("chromium")


def _render(html_file: Path, fragment: str, profile: Path) -> subprocess.Popen[str]:
    return subprocess.Popen(
        [
            str(CHROMIUM),
            "--headless",
            "--no-sandbox",
            "--disable-gpu",
            "--disable-quic",
            "--no-first-run",
            "--disable-background-networking",
            "--disable-component-update",
            "--disable-sync",
            f"--user-data-dir={profile}",
            "--dump-dom",
            html_file.as_uri() + fragment,
        ],
        stdout=subprocess.PIPE,
        stderr=subprocess.DEVNULL,
        text=True,
    )


@pytest.fixture(scope="module")
def rendered(page: str, tmp_path_factory: pytest.TempPathFactory) -> dict[str, str]:
    """The DOM as Chromium leaves it after running the page, opened at two sort addresses."""
    if CHROMIUM is None:
        pytest.skip("chromium is not installed (Debian: apt-get install chromium)")
    folder = tmp_path_factory.mktemp("html")
    report = folder / "report.html"
    report.write_text(page, encoding="utf-8")
    fragments = ("#sort=findings:desc", "#sort=design:desc")
    running = {f: _render(report, f, folder / f"profile{i}") for i, f in enumerate(fragments)}
    doms = {}
    for fragment, process in running.items():
        out, _ = process.communicate(timeout=90)
        assert process.returncode == 0, f"chromium failed on {fragment or 'the page'}"
        doms[fragment] = out
    return doms


def test_browser_renders_every_design_and_finding(
    rendered: dict[str, str], library: list[CheckResult]
) -> None:
    dom_text = rendered["#sort=findings:desc"]
    dom = parse(dom_text)
    assert sorted(r["data-path"] for r in dom.rows) == sorted(r.circuit.path for r in library)
    assert len(dom.rows) == len(library)
    messages = sorted(f.message for r in library for f in r.findings)
    assert sorted(dom.messages) == messages
    assert "<title>drivelint report" in dom_text
    # The inline SVG survived parsing as SVG: Chromium kept the stage diagrams and plots.
    assert dom_text.count('<svg class="stage"') == len(
        {(r.circuit.path, f.switch) for r in library for f in r.findings}
    )
    plots = [f for r in library for f in r.findings if f.rule in PLOT_RULES and boot_droop(f)]
    assert dom_text.count('<svg class="plot"') == len(plots)


def test_browser_sorts_the_designs_table(
    rendered: dict[str, str], library: list[CheckResult]
) -> None:
    by_findings = parse(rendered["#sort=findings:desc"])
    counts = {r.circuit.path: len(r.findings) for r in library}
    order = [counts[r["data-path"]] for r in by_findings.rows]
    assert order == sorted(order, reverse=True)
    # Ties keep the path order.
    for a, b in zip(by_findings.rows, by_findings.rows[1:], strict=False):
        if counts[a["data-path"]] == counts[b["data-path"]]:
            assert a["data-path"] < b["data-path"]
    assert by_findings.heads["findings"] == "descending"
    assert by_findings.heads["design"] == "none"
    by_name = parse(rendered["#sort=design:desc"])
    assert [r["data-path"] for r in by_name.rows] == sorted(counts, reverse=True)
