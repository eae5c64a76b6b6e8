"""gate-headroom: the on-state gate drive against vgs_on and the driver's lockout."""

from __future__ import annotations

from pathlib import Path

import pytest
from nominal import at_nominal, check_nominal

from drivelint.checks.base import Finding
from drivelint.checks.registry import registry
from drivelint.diagnostics import Severity
from drivelint.physics import diode as diode_physics
from drivelint.pipeline import check_path, check_text
from drivelint.ratings.parts import Part, PartsLibrary

RULE = "gate-headroom"
ROOT = Path(__file__).resolve().parents[2]
EXAMPLES = ROOT / "examples"
OUTSIDE = Path(__file__).resolve().parent / "outside"
CARD = registry()[RULE]


def lint(text: str, parts: PartsLibrary | None = None) -> list[Finding]:
    result = check_text(at_nominal(text), parts=parts)
    assert not [d for d in result.diagnostics if d.severity.label == "error"], result.diagnostics
    return [f for f in result.findings if f.rule == RULE]


def with_rail(volts: float) -> str:
    return CARD.bad.replace("VCC vcc 0 DC 10", f"VCC vcc 0 DC {volts:g}")


def test_a_ten_volt_rail_on_a_standard_level_switch() -> None:
    # V_boot,0 = V_aux − V_F: the card's diode (IS 1 nA, N 1.6, RS 0.2 Ω) at the current it
    # still carries at the end of each 15 µs recharge (Shockley law); 10 V − V_F is below the
    # 10 V at which a standard-level switch's R_DS(on) is rated (the documented default for
    # a model with VTO = 3.5 V, common practice).
    (finding,) = lint(CARD.bad)
    values = finding.values
    assert finding.severity is Severity.WARNING
    assert finding.device == "d1"
    v_f = values["diode_vf"].value
    assert values["vgs_supply_on"].value == pytest.approx(10.0 - v_f)
    current = float(values["diode_vf"].origin.split(" at ")[1].split(" ")[0].rstrip("munp") or 0)
    assert current > 0
    assert 0.3 < v_f < 0.9
    assert values["vgs_needed"].value == pytest.approx(10.0)
    assert "default" in values["vgs_on"].origin and "10 V" in values["vgs_on"].origin
    assert "12 V or 15 V" in finding.fix
    assert lint(CARD.good) == []


def test_the_plateau_or_the_lockout_makes_it_an_error() -> None:
    # Below the Miller plateau the switch never leaves its linear region (gate-charge
    # curve, standard semiconductor texts): with the plateau given at 9.6 V it is an error.
    text = CARD.bad.replace("VBUS bus", "* drivelint: part M1 vgs_plateau=9.6\nVBUS bus")
    (finding,) = lint(text)
    assert finding.severity is Severity.ERROR
    assert "linear region" in finding.message
    # A driver whose boot lockout (plus its 0.5 V spread) is above the supply: the driver
    # switches the gate off unasked.
    parts = PartsLibrary(
        {"hsdrv": Part("hsdrv", "driver", {"uvlo_boot": "9.3 V"}, {}, "parts.toml:1")}
    )
    (locked,) = lint(CARD.bad, parts)
    assert locked.severity is Severity.ERROR
    assert locked.values["uvlo"].value == pytest.approx(9.3)
    assert locked.values["uvlo_margin"].value == pytest.approx(0.5)
    assert "lockout" in locked.message


def test_vgs_on_comes_from_the_parts_library_then_the_test_voltage() -> None:
    # A logic-level rating silences the 10 V rail; a gate-charge test voltage stands in
    # when no vgs_on is given, and the finding says so.
    rated = CARD.bad.replace("VBUS bus", "* drivelint: part M1 vgs_on=4.5\nVBUS bus")
    assert lint(rated) == []
    tested = CARD.bad.replace("VBUS bus", "* drivelint: part M1 vgs_qg=12\nVBUS bus")
    (finding,) = lint(tested)
    assert finding.values["vgs_on"].value == 12
    assert "vgs_qg" in finding.values["vgs_on"].origin


def test_a_logic_level_model_defaults_to_four_and_a_half_volts() -> None:
    # VTO at most 2 V reads as a logic-level part, rated at 4.5 V (common practice): a 6 V
    # rail less a silicon diode's drop clears it, a 4 V rail does not.
    text = with_rail(6.0).replace("VTO=3.5", "VTO=1.6")
    assert lint(text) == []
    (finding,) = lint(with_rail(4.0).replace("VTO=3.5", "VTO=1.6"))
    assert finding.values["vgs_on"].value == 4.5
    assert "logic-level" in finding.values["vgs_on"].origin


def test_never_on_and_linear_stages_are_not_judged() -> None:
    held = CARD.bad.replace("PULSE(0 5 0 10n 10n 10u 25u)", "DC 0")
    assert lint(held) == []
    follower = (EXAMPLES / "linreg24v_source_follower.cir").read_text(encoding="utf-8")
    assert lint(follower) == []


# ---------------------------------------------------------------- decks of our own


@pytest.mark.parametrize(
    ("deck", "severity", "device"),
    [
        ("o13_bootstrap_10v_rail.cir", Severity.WARNING, "d_bt"),
        ("o14_bootstrap_5v_rail.cir", Severity.ERROR, "d_bt"),
        ("o05_pump_ground_reservoir.cir", Severity.ERROR, "c_p"),
    ],
)
def test_outside_decks_with_too_little_drive(deck: str, severity: Severity, device: str) -> None:
    (finding,) = [f for f in check_path(OUTSIDE / deck).findings if f.rule == RULE]
    assert finding.severity is severity and finding.device == device


def test_a_ground_referenced_pump_below_the_bus() -> None:
    # The pump doubles the 12 V rail (two diode drops at a milliampere, Shockley law on the
    # D_SIG card) but the bus is 24 V: the switch's source follows its gate instead.
    (finding,) = [
        f
        for f in check_nominal(OUTSIDE / "o05_pump_ground_reservoir.cir").findings
        if f.rule == RULE
    ]
    drop = diode_physics.diode_drop(1e-3, 4e-9, 1.8, 0.6)
    assert finding.values["vgs_supply_on"].value == pytest.approx(12 + 12 - 2 * drop - 24)
    assert "source follower" in finding.message


def test_example_buck_five_volt_drive_through_a_rectifier() -> None:
    # A 5 V driver rail and a silicon rectifier as boot diode on a part rated at 4.5 V
    # (parts.toml: R_DS(on) at 4.5 V, gate charge tested there): short of it.
    result = check_nominal(EXAMPLES / "buck12v_5v_400k_sync.cir")
    (finding,) = [f for f in result.findings if f.rule == RULE]
    assert finding.severity is Severity.WARNING and finding.device == "d_bst"
    assert finding.values["vgs_needed"].value == pytest.approx(4.5)
    assert "vgs_qg" in finding.values["vgs_on"].origin


@pytest.mark.parametrize(
    "example",
    [
        "lev48_phase_leg_npn_shifter.cir",
        "induction325_half_bridge_driver.cir",
        "mower48v_hbridge_wrapped_fets.cir",
        "tool36_leg_totem_pole.cir",
        "heater96v_isolated_supply.cir",
        "loadswitch24v_dc_enable.cir",
        "linreg24v_source_follower.cir",
    ],
)
def test_examples_with_enough_drive_are_quiet(example: str) -> None:
    assert [f for f in check_path(EXAMPLES / example).findings if f.rule == RULE] == []
