"""A report one can scan (issue 14, item 8), waivers (item 2) and testbench links (issue 13)
in the HTML report, rendered for real in headless Chromium where a browser decides.

References:
- examples/README.md: which example has which planted mistake, and which are clean.
- The hold time of the load-switch example's dc-hold finding (the finding's own value, at
  its worst corner, computed by physics.bootstrap.hold_time_linear): the plot must cross
  V_boot,min there, since it draws the same law.
- Chromium (Debian package) as an independent HTML/CSS/JS engine.
"""

from __future__ import annotations

import json
import os
import re
import shutil
import subprocess
from dataclasses import replace
from html import escape
from pathlib import Path

import pytest
from click.testing import CliRunner

from drivelint.checks.base import Waiver
from drivelint.checks.runner import CheckResult
from drivelint.cli import main
from drivelint.diagnostics import Span
from drivelint.netlist.values import format_si
from drivelint.pipeline import check_path, check_text
from drivelint.report.formats import ReportOptions
from drivelint.report.html import boot_droop, format_html, stage_svg
from drivelint.report.html.page import key_pairs
from drivelint.report.status import file_status

ROOT = Path(__file__).resolve().parents[2]
EXAMPLES = ROOT / "examples"
CHROMIUM = shutil.which("chromium")
SWITCH = EXAMPLES / "loadswitch24v_dc_enable.cir"


@pytest.fixture(scope="module")
def library() -> list[CheckResult]:
    return [check_path(p) for p in sorted(EXAMPLES.glob("*.cir"))]


@pytest.fixture(scope="module")
def page(library: list[CheckResult]) -> str:
    return format_html(library, ReportOptions())


def card(page: str, message: str) -> str:
    at = page.index(escape(message, quote=True))
    start = page.rindex('<div class="finding ', 0, at)
    following = page.find('<div class="finding ', at)
    return page[start : following if following != -1 else len(page)]


# --------------------------------------------------------------------------- the page text


def test_designs_are_collapsed_and_carry_their_filter_keys(
    library: list[CheckResult], page: str
) -> None:
    articles = re.findall(r'<article class="design"[^>]*>', page)
    assert len(articles) == len(library)
    assert page.count('<details class="design-details">') == len(library)  # closed
    mower = next(a for a in articles if "mower48v" in a)
    assert 'data-status="findings"' in mower
    assert (
        'data-rules="bootstrap-diode-voltage bootstrap-no-refresh cross-conduction '
        'induced-turn-on"' in mower
    )
    for result in library:
        for finding in result.findings:
            assert f'data-rule="{finding.rule}" data-severity="{finding.severity.label}"' in card(
                page, finding.message
            )


def test_key_numbers_come_first(library: list[CheckResult], page: str) -> None:
    # examples/README.md: the 10 nF hold capacitor of the 36 V leg; its card leads with the
    # droop per cycle against the droop allowed, then the capacitance against the one needed.
    tool = next(r for r in library if r.circuit.path.endswith("tool36_leg_totem_pole.cir"))
    (finding,) = tool.findings
    html = card(page, finding.message)
    first = html.index('<p class="key-numbers">')
    assert first < html.index('<table class="values">') and first < html.index('class="fix"')
    assert [(c, limit) for c, _, limit, _ in key_pairs(finding)] == [
        ("droop_per_cycle", "delta_v_allowed"),
        ("capacitance", "required_capacitance"),
    ]
    rows = re.findall(r"<tr(?: class=key)?><td><code>([a-z_0-9]+)</code>", html)
    assert rows[:4] == ["droop_per_cycle", "delta_v_allowed", "capacitance", "required_capacitance"]
    assert rows[4:] == sorted(rows[4:])


def test_every_device_is_drawn_once(library: list[CheckResult]) -> None:
    # examples/README.md (lev48): R5 sits on both the pull-up (R4, R5) and the pull-down
    # (R5, Q1, R_E) path; it gets one box, and the second path names it.
    lev = next(r for r in library if r.circuit.path.endswith("lev48_phase_leg_npn_shifter.cir"))
    stage = next(s for s in lev.stages if s.floating)
    svg = stage_svg(stage, lev.circuit)
    boxes = re.findall(r'data-device="([^"]+)"', svg)
    assert len(boxes) == len(set(boxes)) and boxes.count("r5") == 1
    assert 'data-ref="r5"' in svg
    for result in library:
        for stage in result.stages:
            if stage.floating:
                names = re.findall(r'data-device="([^"]+)"', stage_svg(stage, result.circuit))
                assert len(names) == len(set(names)), (result.circuit.path, names)


def test_a_file_with_input_errors_is_not_checked_rather_than_clean() -> None:
    text = SWITCH.read_text().replace("R_GS  G OUT 100k", "R_GS  G OUT 100k\nR_BAD a")
    broken = check_text(text, path="lib/broken_switch.cir")
    assert [s for s in broken.stages if s.floating]
    quiet = replace(broken, findings=())
    html = format_html([quiet], ReportOptions())
    assert 'data-status="error"' in html
    assert "No findings for this stage" not in html
    assert '<p class="not-checked">Not checked: this file has input errors' in html


def test_main_is_not_narrowed() -> None:
    from drivelint.report.html.assets import STYLE

    main_rule = re.search(r"(?m)^main\{([^}]*)\}", STYLE)
    assert main_rule is not None and "max-width" not in main_rule.group(1)


def test_accepted_finding_keeps_its_place_with_its_reason(library: list[CheckResult]) -> None:
    result = next(r for r in library if r.circuit.path.endswith(SWITCH.name))
    held = next(f for f in result.findings if f.rule == "dc-hold")
    reason = "charge pump <fitted> on the board"
    waiver = Waiver(reason, Span(result.circuit.path, 2, 1))
    accepted = replace(held, accepted=waiver)
    rest = tuple(f for f in result.findings if f is not held)
    html = format_html([replace(result, findings=rest, accepted=(accepted,))], ReportOptions())
    shown = card(html, held.message)
    assert 'data-accepted="1"' in shown and '<span class="sev accepted">accepted</span>' in shown
    assert f"Accepted: {escape(reason)}" in shown and "<fitted>" not in html
    # In its stage, in line order, between the others (not in a list apart).
    stage_html = html[html.index('<section class="stage">') :]
    order = [
        stage_html.index(escape(f.message, quote=True))
        for f in sorted((*rest, accepted), key=lambda f: f.sort_key())
    ]
    assert order == sorted(order)


def test_boot_plot_crosses_where_the_finding_says(library: list[CheckResult]) -> None:
    result = next(r for r in library if r.circuit.path.endswith(SWITCH.name))
    held = next(f for f in result.findings if f.rule == "dc-hold")
    droop = boot_droop(held)
    assert droop is not None and droop.slope > 0  # the drains fall with the voltage
    crossing = droop.crossing()
    assert crossing == pytest.approx(held.values["hold_time"].value, rel=1e-9)
    assert droop.at(crossing) == pytest.approx(held.values["v_boot_min"].value, abs=1e-6)
    # The 36 V leg's plot ends where the finding says one on-time leaves the supply.
    tool = next(r for r in library if r.circuit.path.endswith("tool36_leg_totem_pole.cir"))
    (small,) = tool.findings
    droop = boot_droop(small)
    assert droop is not None and droop.on_time is not None
    end = small.values["v_boot"].value - small.values["droop_per_cycle"].value
    assert droop.at(droop.on_time) == pytest.approx(end, abs=1e-6)


def test_report_file_follows_the_umask(tmp_path: Path) -> None:
    out = tmp_path / "report.html"
    old = os.umask(0o027)
    try:
        CliRunner().invoke(
            main, ["check", "--no-cache", "--format", "html", "--output", str(out), str(SWITCH)]
        )
    finally:
        os.umask(old)
    assert out.stat().st_mode & 0o777 == 0o640


# --------------------------------------------------------------------------- testbench links


def _bench_folder(tmp_path: Path, result: CheckResult) -> Path:
    """A testbench folder in the format `drivelint testbench` writes, with hostile parts."""
    hold = next(f for f in result.findings if f.rule == "dc-hold").values["hold_time"].value
    folder = tmp_path / "tb"
    (folder / "loadswitch").mkdir(parents=True)
    deck = folder / "loadswitch" / "dc-hold__ven.cir"
    deck.write_text("* deck\n.end\n")
    (folder / "loadswitch" / "dc-hold__ven.fixed.cir").write_text("* fixed\n.end\n")
    (tmp_path / "outside.cir").write_text("* not in the folder\n")
    times = [i * 1e-5 for i in range(1001)]
    (folder / "loadswitch" / "dc-hold__ven.wave.json").write_text(
        json.dumps(
            {
                "time": times,
                "series": {"v_boot": [12 - 3000 * t for t in times], "<script>x": [0.0] * 1001},
                "units": {"v_boot": "V", "<script>x": "<b>"},
                "claim": "hold_time",
            }
        )
    )
    (folder / "bad.wave.json").write_text('{"time": [0, NaN], "series": {"v": [1, 2]}}')
    path = result.circuit.path
    records = [
        {
            "rule": "dc-hold",
            "device": "ven",
            "path": path,
            "deck": "loadswitch/dc-hold__ven.cir",
            # as the testbench command prints it, with the folder in front
            "fixed_deck": "tb/loadswitch/dc-hold__ven.fixed.cir",
            "claims": {"hold_time": hold, "i_drain": 868e-6},
            "measured": {"hold_time": {"measured": 0.98 * hold, "status": "confirmed"}},
            "waveform": "loadswitch/dc-hold__ven.wave.json",
        },
        {
            "rule": "gate-overvoltage",
            "device": "q4",
            "path": path,
            "deck": "../outside.cir",
            "fixed_deck": "/etc/passwd",
            "claims": {"vgs_max_negative": -24.0},
            "waveform": "bad.wave.json",
        },
        "not a record",
        {"rule": "<script>", "device": "x", "path": path},
    ]
    (folder / "testbench.json").write_text(json.dumps(records))
    return folder


def test_testbench_links_decks_and_draws_the_simulated_waveform(
    tmp_path: Path, library: list[CheckResult], monkeypatch: pytest.MonkeyPatch
) -> None:
    result = next(r for r in library if r.circuit.path.endswith(SWITCH.name))
    folder = _bench_folder(tmp_path, result)
    monkeypatch.chdir(tmp_path)
    out = tmp_path / "reports" / "scan.html"
    out.parent.mkdir()
    options = ReportOptions(testbench="tb", output=str(out))
    html = format_html([result], options)
    held = card(html, next(f for f in result.findings if f.rule == "dc-hold").message)
    # Links relative to the report file, into the folder only.
    assert 'href="../tb/loadswitch/dc-hold__ven.cir"' in held
    assert 'href="../tb/loadswitch/dc-hold__ven.fixed.cir"' in held
    hold = next(f for f in result.findings if f.rule == "dc-hold").values["hold_time"].value
    assert format_si(0.98 * hold, "s") in held and "0.98×" in held and "confirmed" in held
    assert '<svg class="plot sim"' in held and '<svg class="plot"' in held
    assert f"claimed {format_si(hold, 's')}" in held
    over = card(html, next(f for f in result.findings if f.rule == "gate-overvoltage").message)
    assert "outside.cir" not in html and "/etc/passwd" not in html
    assert "deck not linked" in over and "fixed deck not linked" in over
    assert "simulated waveform not shown" in over and "not a number JSON allows" in over
    # Bad records are notes; nothing from them reaches the page as markup.
    assert "record 3 not used" in html and "record 4 not used" in html
    assert "<script>x" not in html and "<b>" not in html
    hrefs = re.findall(r'href="([^"]*)"', html)
    assert all(h.startswith("#") or h.startswith("../tb/") for h in hrefs), hrefs
    assert str(folder) not in html.replace(f"{folder.name}</code>", "")  # no absolute paths


@pytest.mark.parametrize(
    "index",
    [b"not json", b'{"a": 1}', b"[" * 100_000, '["\u00e9"]'.encode("latin-1"), b""],
)
def test_a_bad_index_is_a_note_never_a_crash(tmp_path: Path, index: bytes) -> None:
    folder = tmp_path / "tb"
    folder.mkdir()
    (folder / "testbench.json").write_bytes(index)
    out = tmp_path / "r.html"
    run = CliRunner().invoke(
        main,
        [
            "check",
            "--no-cache",
            "--format",
            "html",
            "--testbench",
            str(folder),
            "--output",
            str(out),
            str(SWITCH),
        ],
    )
    assert run.exit_code == 1, run.output  # the findings, not a crash
    html = out.read_text()
    assert "testbench.json not used" in html


def test_testbench_needs_the_html_format(tmp_path: Path) -> None:
    run = CliRunner().invoke(main, ["check", "--testbench", str(tmp_path), str(SWITCH)])
    assert run.exit_code == 2 and "--format html" in run.output


# --------------------------------------------------------------------------- in a browser


def _dom(html: str, folder: Path, fragment: str, probe: str = "") -> str:
    if CHROMIUM is None:
        pytest.skip("chromium is not installed (Debian: apt-get install chromium)")
    page = folder / f"page{abs(hash(fragment + probe))}.html"
    page.write_text(html.replace("</body>", f"<script>{probe}</script></body>") if probe else html)
    run = subprocess.run(
        [
            CHROMIUM,
            "--headless",
            "--no-sandbox",
            "--disable-gpu",
            "--no-first-run",
            "--disable-background-networking",
            "--disable-component-update",
            "--disable-sync",
            "--window-size=1800,1000",
            f"--user-data-dir={folder / 'profile'}",
            "--dump-dom",
            page.as_uri() + fragment,
        ],
        capture_output=True,
        text=True,
        timeout=90,
        check=True,
    )
    return run.stdout


def _shown(dom: str, tag: str) -> dict[str, bool]:
    """data-path -> shown, for the design rows ("tr") or articles ("article")."""
    out = {}
    for attrs in re.findall(rf"<{tag}\b([^>]*)>", dom):
        path = re.search(r'data-path="([^"]+)"', attrs)
        if path:
            out[path.group(1)] = " hidden" not in attrs
    return out


def test_browser_filters_by_status_rule_and_severity(
    page: str, library: list[CheckResult], tmp_path: Path
) -> None:
    paths = {r.circuit.path: r for r in library}
    by_status = _dom(page, tmp_path, "#status=clean")
    shown = _shown(by_status, "article")
    assert shown == {p: file_status(r) == "clean" for p, r in paths.items()}
    assert _shown(by_status, "tr") == shown
    clean = sum(file_status(r) == "clean" for r in library)
    assert f"{clean} of {len(library)} designs shown" in by_status
    # A rule and a severity: only designs with such a finding, only those findings shown.
    dom = _dom(page, tmp_path, "#rule=gate-overvoltage&severity=warning")
    wanted = {
        p
        for p, r in paths.items()
        if any(f.rule == "gate-overvoltage" and f.severity.label == "warning" for f in r.findings)
    }
    assert {p for p, ok in _shown(dom, "article").items() if ok} == wanted
    cards = re.findall(r'<div class="finding [^"]*"[^>]*>', dom)
    visible = [c for c in cards if " hidden" not in c]
    assert visible and all('data-rule="gate-overvoltage"' in c for c in visible)
    assert all('data-severity="warning"' in c for c in visible)
    assert 'id="filter-rule"' in dom and re.search(r'<select id="filter-severity">', dom)


def test_browser_opens_the_design_an_address_names(page: str, tmp_path: Path) -> None:
    dom = _dom(page, tmp_path, "#d12")
    opened = re.findall(
        r'<article class="design" id="(d\d+)"[^>]*><details class="design-'
        r'details"( open="")?',
        dom,
    )
    assert ("d12", ' open=""') in opened
    assert sum(1 for _, flag in opened if flag) == 1


def test_browser_layout_uses_the_window_width(page: str, tmp_path: Path) -> None:
    probe = (
        "document.body.setAttribute('data-main-width', "
        "Math.round(document.querySelector('main').getBoundingClientRect().width));"
    )
    dom = _dom(page, tmp_path, "", probe)
    width = re.search(r'data-main-width="(\d+)"', dom)
    assert width is not None and int(width.group(1)) > 1600  # a 1800 px window
