"""Every bundled example's recognised stages, field by field.

The expected values are read off each netlist by hand (what an engineer sees in the
schematic), and examples/README.md states the same intent; the ngspice runs in
tests/test_examples_simulate.py confirm each circuit behaves as described.
"""

from __future__ import annotations

import json
import os
from pathlib import Path
from typing import Any

import pytest

from drivelint.pipeline import load_stages
from drivelint.stages.recognise import stages_json

ROOT = Path(__file__).resolve().parent.parent.parent
EXAMPLES = ROOT / "examples"
SNAPSHOTS = Path(__file__).resolve().parent / "snapshots"


@pytest.fixture(autouse=True)
def _in_root(monkeypatch: pytest.MonkeyPatch) -> None:
    monkeypatch.chdir(ROOT)


def stages(name: str) -> dict[str, Any]:
    circuit, found = load_stages(Path("examples") / name)
    assert not [d for d in circuit.diagnostics if d.severity.label == "error"]
    return {s.switch: s for s in found}


# switch -> (supply kind, capacitor, diode, aux rail, pull-down returns, clamps, refresh kinds,
#            control source, inverting, frequency, duty, mode)
EXPECTED = {
    "lev48_phase_leg_npn_shifter.cir": {
        "m1": (
            "bootstrap",
            "c1",
            "d1",
            "aux",
            {"ground"},
            {("d2", "normal")},
            {"low-side switch", "inductor-load"},
            "vhin",
            True,
            8e3,
            0.70,
            "switching",
        ),
    },
    "tool36_leg_totem_pole.cir": {
        "m1": (
            "bootstrap",
            "c1",
            "d1",
            "aux",
            {"source"},
            set(),
            {"low-side switch", "inductor-load"},
            "vhin",
            False,
            16e3,
            0.50,
            "switching",
        ),
    },
    "induction325_half_bridge_driver.cir": {
        "m_hi": (
            "bootstrap",
            "c_boot",
            "d_boot",
            "vcc",
            {"source"},
            set(),
            {"low-side switch"},
            "vhin",
            False,
            40e3,
            None,
            "switching",
        ),
    },
    "buck12v_5v_400k_sync.cir": {
        "m_hs": (
            "bootstrap",
            "c_bst",
            "d_bst",
            "vdd",
            {"source"},
            set(),
            {"low-side switch", "inductor-load"},
            "vinh",
            False,
            400e3,
            None,
            "switching",
        ),
    },
    "loadswitch24v_dc_enable.cir": {
        "m1": (
            "bootstrap",
            "c_boot",
            "d1",
            "aux",
            {"source", "ground"},
            set(),
            {"load"},
            "ven",
            False,
            None,
            None,
            "static",
        ),
    },
    "heater96v_isolated_supply.cir": {
        "m1": (
            "isolated",
            None,
            None,
            "vdd2",
            {"source"},
            {("d_z", "normal")},
            {"inductor-load", "freewheel diode"},
            "vpwm",
            False,
            5e3,
            0.50,
            "switching",
        ),
    },
    "mower48v_hbridge_wrapped_fets.cir": {
        "xlega.xqh": (
            "bootstrap",
            "xlega.c_bt",
            "xlega.d_bt",
            "v12",
            {"source"},
            set(),
            {"low-side switch"},
            "vhia",
            False,
            20e3,
            0.992,
            "switching",
        ),
        "xlegb.xqh": (
            "bootstrap",
            "xlegb.c_bt",
            "xlegb.d_bt",
            "v12",
            {"source"},
            set(),
            {"low-side switch"},
            "vhib",
            False,
            None,
            None,
            "static",
        ),
    },
    "classd45v_split_rail_amp.cir": {
        # the driver on the negative rail; the command out of the PWM comparator
        "m_h": (
            "bootstrap",
            "c_bs",
            "d_bs",
            "vcc",
            {"source"},
            set(),
            {"low-side switch", "inductor-load"},
            "b_cmp",
            False,
            384e3,
            None,
            "switching",
        ),
    },
    "valve24v_pump_loadswitch.cir": {
        "m1": (
            "charge-pump",
            "c_res",
            "d_p2",
            "vbus",
            {"ground"},
            {("d_zg", "normal")},
            {"inductor-load", "freewheel diode"},
            "voff",
            True,
            None,
            None,
            "static",
        ),
    },
    "buck48v_closed_loop_ammeters.cir": {
        "m_hs": (
            "bootstrap",
            "c_bst",
            "d_bst",
            "v12",
            {"source"},
            set(),
            {"low-side switch", "inductor-load"},
            "b_pwm",
            False,
            250e3,
            None,
            "switching",
        ),
    },
    "winch36v_shunt_load_dump.cir": {
        "m_h": (
            "bootstrap",
            "c_bs",
            "d_bs",
            "v12",
            {"source"},
            set(),
            {"low-side switch", "inductor-load"},
            "vhi",
            False,
            20e3,
            0.60,
            "switching",
        ),
    },
    "actuator24v_hbridge_held_leg.cir": {
        "m_ha": (
            "bootstrap",
            "c_ba",
            "d_ba",
            "v12",
            {"source"},
            set(),
            {"low-side switch"},
            "vhia",
            False,
            20e3,
            0.80,
            "switching",
        ),
        "m_hb": (
            "bootstrap",
            "c_bb",
            "d_bb",
            "v12",
            {"source"},
            set(),
            {"low-side switch"},
            "vhib",
            False,
            None,
            None,
            "static",
        ),
    },
}


def test_new_examples_read_through_their_shunts_and_ammeters() -> None:
    # the 2 mΩ DC-link shunt and the 0 V ammeters are wires; the load dump is the bus
    winch = stages("winch36v_shunt_load_dump.cir")["m_h"]
    assert winch.bus is not None and (winch.bus.low, winch.bus.volts) == (36, 56)
    assert any("r_shunt" in n for n in winch.notes)
    buck = stages("buck48v_closed_loop_ammeters.cir")["m_hs"]
    assert buck.control is not None and buck.control.kind == "modulator"
    assert {"v_isw", "v_ils", "r_esr"} <= {n.split()[0] for n in buck.notes}
    amp = stages("classd45v_split_rail_amp.cir")["m_h"]
    low = next(r for r in amp.refresh if r.kind == "low-side switch")
    assert low.reference == "vn"
    valve = stages("valve24v_pump_loadswitch.cir")["m1"]
    assert valve.supply.riding and valve.supply.clock is not None
    assert valve.supply.clock.volts == 12
    (follower,) = stages("linreg48v_pass_follower.cir").values()
    assert follower.mode == "linear" and follower.supply.kind == "none"


@pytest.mark.parametrize(
    "example, switch",
    [(example, switch) for example, table in EXPECTED.items() for switch in table],
)
def test_example_stage(example: str, switch: str) -> None:
    (
        kind,
        capacitor,
        diode,
        aux,
        returns,
        clamps,
        refresh,
        control,
        inverting,
        frequency,
        duty,
        mode,
    ) = EXPECTED[example][switch]
    stage = stages(example)[switch]
    assert stage.floating
    assert stage.supply.kind == kind
    assert stage.supply.capacitor == capacitor
    assert stage.supply.diode == diode
    if diode:
        assert stage.supply.diode_orientation == "forward"
    assert stage.supply.aux is not None and stage.supply.aux.net == aux
    if stage.supply.kind == "charge-pump":
        assert stage.supply.aux.net == aux  # the pump's feed
    assert {p.returns_to for p in stage.pulldowns} == returns
    assert {(c.device, c.orientation) for c in stage.clamps} == clamps
    assert {r.kind for r in stage.refresh} == refresh
    assert stage.control is not None and stage.control.source == control
    assert stage.control.inverting is inverting
    waveform = stage.control.waveform
    assert waveform is not None
    if stage.control.modulated:
        # the carrier's frequency; the duty is the loop's
        assert waveform.frequency() == pytest.approx(frequency, rel=1e-6)
        assert stage.mode == mode
        return
    if frequency is None:
        assert waveform.period() is None
    else:
        assert waveform.frequency() == pytest.approx(frequency, rel=1e-6)
    if duty is not None:
        middle = (waveform.high() + waveform.low()) / 2
        assert waveform.duty_above(middle) == pytest.approx(duty, abs=0.002)
    assert stage.mode == mode


def test_example_driver_pins_come_from_the_parts_library() -> None:
    stage = stages("induction325_half_bridge_driver.cir")["m_hi"]
    assert stage.driver is not None and stage.driver.device == "xu1"
    assert stage.driver.origin.startswith("parts library (examples/parts.toml:")
    assert {stage.driver.pins[r] for r in ("boot", "switch", "high_out")} == {"vb", "sw", "ho"}


def test_dc_enable_example_has_an_unbounded_on_time() -> None:
    waveform = stages("loadswitch24v_dc_enable.cir")["m1"].control.waveform
    assert waveform.longest_time_above(2.5) == float("inf")


@pytest.mark.parametrize(
    "example",
    ["boost12v_led_lowside.cir", "heater12v_pchannel_highside.cir"],
)
def test_negative_examples_have_no_floating_stage(example: str) -> None:
    assert not any(s.floating for s in stages(example).values())


def test_linear_regulator_example_is_not_a_bootstrap_stage() -> None:
    (stage,) = stages("linreg24v_source_follower.cir").values()
    assert stage.supply.kind == "none" and stage.mode == "linear"


@pytest.mark.parametrize("example", sorted(p.name for p in EXAMPLES.glob("*.cir")))
def test_snapshot(example: str) -> None:
    """Regenerate with `python scripts/update_snapshots.py` and review the diff."""
    _, found = load_stages(Path("examples") / example)
    produced = json.loads(json.dumps(stages_json(found), sort_keys=True))
    expected = json.loads((SNAPSHOTS / (Path(example).stem + ".json")).read_text())
    assert produced == expected, "recognition changed; run scripts/update_snapshots.py and review"


def test_every_example_has_a_snapshot() -> None:
    assert {p.stem for p in EXAMPLES.glob("*.cir")} == {p.stem for p in SNAPSHOTS.glob("*.json")}
    assert os.path.isdir(SNAPSHOTS)
