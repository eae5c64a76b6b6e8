"""`drivelint check examples/`: exactly the planted mistakes of examples/README.md, at their lines.

Each rule's own test file asserts the numbers; this one holds the whole set, so a new rule
or a recognition change that adds a false alarm to a clean example fails here.
"""

from __future__ import annotations

from pathlib import Path

import pytest

from drivelint.pipeline import check_path

ROOT = Path(__file__).resolve().parents[2]

# (example, rule, device, line): the mistakes listed in examples/README.md.
EXPECTED = {
    ("buck12v_5v_400k_sync.cir", "bootstrap-diode-slow", "d_bst", 26),
    # the same rectifier's drop: 5 V less V_F is short of the 4.5 V the switch is rated at
    ("buck12v_5v_400k_sync.cir", "gate-headroom", "d_bst", 26),
    ("heater96v_isolated_supply.cir", "gate-overvoltage", "d_z", 30),
    ("loadswitch24v_dc_enable.cir", "dc-hold", "ven", 38),
    ("loadswitch24v_dc_enable.cir", "gate-overvoltage", "q4", 52),
    ("mower48v_hbridge_wrapped_fets.cir", "bootstrap-no-refresh", "vhia", 38),
    # the high side's edge (1.76 V/ns) lifts the low side's gate, held through R_GL 15 Ω
    # and the driver, to V_th (ngspice: 4.4 V at the core's gate, against V_th 3 V)
    ("mower48v_hbridge_wrapped_fets.cir", "induced-turn-on", "xlega.r_gl", 51),
    ("mower48v_hbridge_wrapped_fets.cir", "bootstrap-diode-voltage", "xlega.d_bt", 47),
    # leg A's 100 ns dead times against hard turn-offs through 15 Ω gate resistors (warning)
    ("mower48v_hbridge_wrapped_fets.cir", "cross-conduction", "vlia", 39),
    ("tool36_leg_totem_pole.cir", "bootstrap-capacitor-small", "c1", 34),
    # the boot diode blocks the whole ±45 V swing plus V_boot
    ("classd45v_split_rail_amp.cir", "bootstrap-diode-voltage", "d_bs", 25),
    # and its 1 uF VCC bypass is under ten times the 220 nF bootstrap capacitor
    ("classd45v_split_rail_amp.cir", "driver-decoupling", "c_vcc", 21),
    # the load dump, given as PWL, over the 60 V Schottky's derated rating
    ("winch36v_shunt_load_dump.cir", "bootstrap-diode-voltage", "d_bs", 25),
    # and both 60 V switches block the 56 V surge plus the ringing allowance
    ("winch36v_shunt_load_dump.cir", "voltage-stress", "m_h", 31),
    ("winch36v_shunt_load_dump.cir", "voltage-stress", "m_l", 32),
    # at the worst corner (checks/corners.py) the 60 V Schottky's 100 uA leaks 6.4 mA at
    # 85 °C, and 470 nF less its tolerance no longer holds the rule's 2x margin
    # no gate–source Zener on a pass device pulled up from 60 V: an output short breaks
    # the gate, and so does the output held up while the error amplifier pulls it down
    ("linreg48v_pass_follower.cir", "gate-overvoltage", "m_pass", 18),
    ("linreg48v_pass_follower.cir", "gate-overvoltage", "q_ea", 20),
    # no passive part ties the high side's gate to its source: the driver models' sinks
    # stand for outputs that are high impedance unpowered (no parts entry says otherwise)
    ("actuator24v_hbridge_held_leg.cir", "gate-pulldown-missing", "m_ha", 27),
    ("actuator24v_hbridge_held_leg.cir", "gate-pulldown-missing", "m_hb", 37),
    ("buck12v_5v_400k_sync.cir", "gate-pulldown-missing", "m_hs", 30),
    ("buck48v_closed_loop_ammeters.cir", "gate-pulldown-missing", "m_hs", 32),
    ("classd45v_split_rail_amp.cir", "gate-pulldown-missing", "m_h", 31),
    ("winch36v_shunt_load_dump.cir", "gate-pulldown-missing", "m_h", 31),
    # the only passive path is a pull-up to the floating supply; only a transistor pulls
    # down, so the switch turns on with the controller unpowered
    ("lev48_phase_leg_npn_shifter.cir", "gate-pulldown-missing", "m1", 26),
    ("valve24v_pump_loadswitch.cir", "gate-pulldown-missing", "m1", 31),
}
CLEAN = [
    "induction325_half_bridge_driver.cir",
    "boost12v_led_lowside.cir",
    "heater12v_pchannel_highside.cir",
    "linreg24v_source_follower.cir",
]


@pytest.fixture(scope="module")
def found(request: pytest.FixtureRequest) -> set[tuple[str, str, str, int]]:
    out = set()
    for example in sorted((ROOT / "examples").glob("*.cir")):
        result = check_path(example)
        assert not [d for d in result.diagnostics if d.severity.label == "error"], example
        for finding in result.findings:
            out.add((example.name, finding.rule, finding.device, finding.span.line))
    return out


def test_every_planted_mistake_is_found_at_its_line(found: set[tuple[str, str, str, int]]) -> None:
    assert EXPECTED <= found


def test_nothing_else_is_reported(found: set[tuple[str, str, str, int]]) -> None:
    assert found - EXPECTED == set()


@pytest.mark.parametrize("example", CLEAN)
def test_clean_examples_exit_zero(example: str) -> None:
    from click.testing import CliRunner

    from drivelint.cli import main

    result = CliRunner().invoke(main, ["check", "--no-cache", str(ROOT / "examples" / example)])
    assert result.exit_code == 0, result.output
