"""Say what was assumed, and conditions that behave one way (issue 14, items 3 and 4).

References: examples/README.md for what each example holds; the defaults' own sources are
named in drivelint/checks/facts.py ("from memory" for the driver figures, "common
practice" for V_GS ratings).
"""

from __future__ import annotations

import shutil
from pathlib import Path

import pytest
from click.testing import CliRunner

from drivelint.checks.facts import (
    DRIVER_IQ_BOOT_DEFAULT,
    DRIVER_Q_LEVELSHIFT_DEFAULT,
    DRIVER_Q_LEVELSHIFT_HIGH_VOLTAGE,
)
from drivelint.cli import main
from drivelint.pipeline import check_path, check_text

ROOT = Path(__file__).resolve().parents[2]
EXAMPLES = ROOT / "examples"


def with_lines(tmp_path: Path, example: str, *lines: str) -> Path:
    text = (EXAMPLES / example).read_text().splitlines()
    path = tmp_path / example
    path.write_text("\n".join([text[0], *lines, *text[1:]]) + "\n")
    shutil.copy(EXAMPLES / "parts.toml", tmp_path / "parts.toml")
    return path


def test_part_directive_for_no_device_is_a_warning(tmp_path: Path) -> None:
    deck = with_lines(tmp_path, "tool36_leg_totem_pole.cir", "* drivelint: part M9 qg=40n")
    result = check_path(deck)
    (warning,) = [d for d in result.diagnostics if "matches no device" in d.message]
    assert warning.severity.label == "warning" and warning.span.line == 2
    assert "'part m9'" in warning.message


def test_condition_no_rule_uses_is_reported(tmp_path: Path) -> None:
    # examples/README.md: the boost LED supply has no floating stage, so nothing uses fsw.
    deck = with_lines(tmp_path, "boost12v_led_lowside.cir", "* drivelint: conditions fsw=250k")
    (unused,) = [d for d in check_path(deck).diagnostics if "used by no rule" in d.message]
    assert unused.span.line == 2 and "condition fsw" in unused.message
    # The mower's leg A is judged at its switching frequency: the same condition is used.
    used = with_lines(
        tmp_path, "mower48v_hbridge_wrapped_fets.cir", "* drivelint: conditions fsw=20k"
    )
    assert not [d for d in check_path(used).diagnostics if "used by no rule" in d.message]


def test_duty_max_caps_the_on_time_read_from_the_waveform(tmp_path: Path) -> None:
    # examples/README.md: leg A is commanded at 99.2 % duty and 20 kHz, a 49.6 us on-time.
    # With duty_max = 0.95 the duty is 0.95 and no on-time exceeds 0.95/20 kHz = 47.5 us.
    capped = with_lines(
        tmp_path, "mower48v_hbridge_wrapped_fets.cir", "* drivelint: conditions duty_max=0.95"
    )
    (refresh,) = [f for f in check_path(capped).findings if f.rule == "bootstrap-no-refresh"]
    assert refresh.values["duty_max"].value == pytest.approx(0.95)
    assert refresh.values["on_time"].value == pytest.approx(47.5e-6)
    assert "capping the 49.6 us" in refresh.values["on_time"].origin
    # A larger duty_max raises the duty but never the on-time the waveform shows.
    plain = [
        f
        for f in check_path(EXAMPLES / "mower48v_hbridge_wrapped_fets.cir").findings
        if f.rule == "bootstrap-no-refresh"
    ][0]
    assert plain.values["on_time"].value == pytest.approx(49.6e-6, rel=1e-3)
    loose = with_lines(
        tmp_path, "mower48v_hbridge_wrapped_fets.cir", "* drivelint: conditions duty_max=0.999"
    )
    (wide,) = [f for f in check_path(loose).findings if f.rule == "bootstrap-no-refresh"]
    assert wide.values["on_time"].value == pytest.approx(plain.values["on_time"].value)


def test_explain_lists_what_a_clean_stage_assumed() -> None:
    # examples/README.md: the lev48 leg is clean but for gate-pulldown-missing (its pull-up
    # turns it on with the controller unpowered); its ambient is SPICE's nominal 27 °C.
    run = CliRunner().invoke(
        main,
        [
            "check",
            "--no-cache",
            "--explain",
            "--ignore",
            "gate-pulldown-missing",
            str(EXAMPLES / "lev48_phase_leg_npn_shifter.cir"),
        ],
    )
    assert run.exit_code == 0
    lines = run.output.splitlines()
    head = next(i for i, line in enumerate(lines) if "m1: assumed" in line)
    listed = lines[head + 1 : head + 8]
    assert any(line.strip().startswith("ambient = 27") and "default" in line for line in listed)
    assert not any(line.strip().startswith("qg =") for line in listed)  # from parts.toml


PIN_NAMED_DRIVER = """pin-named driver, no parts entry
VBUS bus 0 DC {bus}
VCC vcc 0 DC 12
VH hin 0 PULSE(0 5 0 10n 10n 20u 50u)
XU vcc boot hgate sw hin 0 HSX
DB vcc boot dfast
CB boot sw 470n
M1 bus hgate sw nfet
RLOAD sw 0 10
.subckt HSX VCC VB HO VS HIN COM
BH HO VS V = V(HIN,COM) > 2.5 ? V(VB,VS) : 0
{inner}.ends HSX
.model dfast D(IS=1n TT=20n BV=600)
.model nfet VDMOS(VTO=3 KP=20 Cgs=2n Cgdmax=1n)
.end
"""


@pytest.mark.parametrize(
    "bus, q_ls", [(48, DRIVER_Q_LEVELSHIFT_DEFAULT), (325, DRIVER_Q_LEVELSHIFT_HIGH_VOLTAGE)]
)
def test_driver_without_parts_entry_gets_conservative_defaults(bus: int, q_ls: float) -> None:
    result = check_text(PIN_NAMED_DRIVER.format(bus=bus, inner=""))
    (stage,) = [s for s in result.stages if s.floating]
    assert stage.driver is not None and stage.driver.origin == "pin names"
    (assumed,) = result.assumed
    iq, charge = assumed.values["i_quiescent"], assumed.values["q_levelshift"]
    assert iq.value == DRIVER_IQ_BOOT_DEFAULT and charge.value == q_ls
    for value in (iq, charge):
        assert value.origin.startswith("default:") and "from memory" in value.origin


def test_a_driver_model_that_draws_from_its_boot_pin_keeps_its_own_drain() -> None:
    result = check_text(PIN_NAMED_DRIVER.format(bus=48, inner="R_Q VB VS 100k\n"))
    (assumed,) = result.assumed
    assert assumed.values["i_quiescent"].value == 0
    assert "model's own (xu.r_q)" in assumed.values["i_quiescent"].origin


def test_unused_parts_entries_are_reported_for_a_library_scan(tmp_path: Path) -> None:
    folder = tmp_path / "lib"
    folder.mkdir()
    for name in ("tool36_leg_totem_pole.cir", "lev48_phase_leg_npn_shifter.cir"):
        shutil.copy(EXAMPLES / name, folder / name)
    parts = (EXAMPLES / "parts.toml").read_text()
    (folder / "parts.toml").write_text(parts + '\n[part.NFET_TYPED_WRONG]\nkind = "nmos"\n')
    scan = CliRunner().invoke(main, ["check", "--no-cache", str(folder)])
    line = next(x for x in scan.output.splitlines() if "nfet_typed_wrong" in x)
    assert "warning: part 'nfet_typed_wrong' matches no model or subcircuit" in line
    assert line.startswith(f"{folder / 'parts.toml'}:") and "[parts-unused]" in line
    # A file named alone (a pre-commit hook) is not a library scan: nothing said.
    one = CliRunner().invoke(
        main, ["check", "--no-cache", str(folder / "tool36_leg_totem_pole.cir")]
    )
    assert "parts-unused" not in one.output
