"""Stage recognition on small decks built to fool it (issue: recognise gate-drive stages).

The topologies are the textbook ones — bootstrap supply, bipolar level shifter with
resistor pull-up, complementary emitter-follower buffer, driver IC, charge pump,
isolated supply (common practice); each deck is invented for the test.
"""

from __future__ import annotations

import pytest

from drivelint.pipeline import LoadOptions, load_circuit
from drivelint.ratings.parts import Part, PartsLibrary
from drivelint.stages.recognise import recognise

MODELS = """
.model nfet VDMOS(VTO=3 KP=20 Cgs=2n Cgdmax=1n Cgdmin=100p)
.model pfet VDMOS(pchan VTO=-3 KP=20)
.model dfast D(IS=1n TT=20n BV=100)
.model dz D(IS=1n BV=15 IBV=5m)
.model qn NPN(BF=100)
.model qp PNP(BF=100)
"""

# A discrete high-side stage with deliberately meaningless net names.
DISCRETE = (
    """discrete stage, arbitrary names
VB1 n7 0 DC 48
VA1 n3 0 DC 12
VC1 n9 0 PULSE(0 5 0 10n 10n 20u 50u)
M1 n7 n12 n5 nfet
M2 n5 n13 0 nfet
VG2 n13 0 PULSE(0 12 0.5u 10n 10n 19u 50u)
L1 n5 n6 100u
R9 n6 0 2
R2 n3 n4 4.7
D1 n4 n8 dfast
C1 n8 n5 220n
R4 n8 n12 1k
Q1 n12 n10 n11 qn
R5 n11 0 220
R6 n9 n10 1k
DZ1 n5 n12 dz
"""
    + MODELS
)


def stages_of(text: str, parts: PartsLibrary | None = None, **options: object):
    circuit = load_circuit("deck.cir", LoadOptions(**options), text=text)  # type: ignore[arg-type]
    errors = [d for d in circuit.diagnostics if d.severity.label == "error"]
    assert not errors, [d.render() for d in errors]
    return {s.switch: s for s in recognise(circuit, parts)}


def test_discrete_bootstrap_with_arbitrary_net_names() -> None:
    stage = stages_of(DISCRETE)["m1"]
    assert stage.floating and stage.source == "n5" and stage.bus.net == "n7"
    assert stage.bus.volts == 48
    supply = stage.supply
    assert (supply.kind, supply.boot_net, supply.capacitor, supply.diode) == (
        "bootstrap",
        "n8",
        "c1",
        "d1",
    )
    assert supply.diode_orientation == "forward"
    assert supply.series_resistors == ("r2",) and supply.series_resistance == pytest.approx(4.7)
    assert supply.aux.net == "n3" and supply.aux.volts == 12
    assert [p.devices for p in stage.pullups] == [("r4",)]
    assert [(p.devices, p.returns_to) for p in stage.pulldowns] == [(("q1", "r5"), "ground")]
    assert [(c.device, c.kind, c.orientation) for c in stage.clamps] == [("dz1", "zener", "normal")]
    assert {r.kind for r in stage.refresh} == {"low-side switch", "inductor-load"}
    control = stage.control
    assert control.source == "vc1" and control.inverting
    assert control.waveform.frequency() == pytest.approx(20e3)
    assert stage.mode == "switching"


def test_low_side_switch_is_not_floating_and_shifter_is_not_a_stage() -> None:
    stages = stages_of(DISCRETE)
    assert not stages["m2"].floating and "ground" in stages["m2"].floating_reason
    assert set(stages) == {"m1", "m2"}


def test_ground_spelled_differently() -> None:
    text = DISCRETE
    for old, new in [
        ("n7 0 DC", "n7 GND DC"),
        ("n3 0 DC", "n3 Gnd DC"),
        ("n9 0 PULSE", "n9 gnd PULSE"),
        ("n13 0 nfet", "n13 GND nfet"),
        ("R5 n11 0", "R5 n11 gnd"),
        ("R9 n6 0", "R9 n6 GND"),
    ]:
        assert old in text
        text = text.replace(old, new)
    stage = stages_of(text)["m1"]
    assert stage.floating and stage.pulldowns[0].returns_to == "ground"


def test_reversed_bootstrap_diode_is_recognised_and_reported() -> None:
    text = DISCRETE.replace("D1 n4 n8 dfast", "D1 n8 n4 dfast")
    supply = stages_of(text)["m1"].supply
    assert supply.kind == "bootstrap" and supply.diode == "d1"
    assert supply.diode_orientation == "reversed"


def test_reversed_zener_clamp() -> None:
    text = DISCRETE.replace("DZ1 n5 n12 dz", "DZ1 n12 n5 dz")
    (clamp,) = stages_of(text)["m1"].clamps
    assert clamp.orientation == "reversed"


def test_back_to_back_zeners() -> None:
    text = DISCRETE.replace("DZ1 n5 n12 dz", "DZ1 n20 n12 dz\nDZ2 n20 n5 dz")
    (clamp,) = stages_of(text)["m1"].clamps
    assert clamp.orientation == "back-to-back" and set(clamp.devices) == {"dz1", "dz2"}


WRAPPER = """
.subckt PWRFET D G S
RG G gi 2
LD D di 1n
M1 di gi si nfet
LS si S 1n
DB si di dfast
.ends PWRFET
"""


def test_switch_inside_a_wrapper_subcircuit() -> None:
    text = DISCRETE.replace("M1 n7 n12 n5 nfet", "X1 n7 n12 n5 PWRFET") + WRAPPER
    stages = stages_of(text)
    stage = stages["x1"]
    assert stage.floating and stage.supply.capacitor == "c1"
    assert stage.clamps[0].device == "dz1"


DRIVER = (
    """driver IC half bridge
VBUS bus 0 DC 300
VCC vcc 0 DC 15
VH hin 0 PULSE(0 5 1u 10n 10n 9u 20u)
VL lin 0 PULSE(5 0 0 10n 10n 11u 20u)
XU vcc hin lin 0 boot hgate sw lgate GDRV
DB vcc boot dfast
CB boot sw 1u
RGH hgate g1 10
RGL lgate g2 10
M1 bus g1 sw nfet
M2 sw g2 0 nfet
RLOAD sw 0 100
.subckt GDRV VCC HIN LIN COM VB HO VS LO
BH ho1 VS V = V(HIN,COM) > 2.5 ? V(VB,VS) : 0
RH ho1 HO 2
BL lo1 COM V = V(LIN,COM) > 2.5 ? V(VCC,COM) : 0
RL lo1 LO 2
.ends GDRV
"""
    + MODELS
)


def test_driver_ic_with_gate_resistor() -> None:
    stage = stages_of(DRIVER)["m1"]
    assert stage.driver is not None and stage.driver.device == "xu"
    assert stage.driver.origin == "pin names"
    assert stage.driver.pins["boot"] == "boot" and stage.driver.pins["switch"] == "sw"
    assert stage.supply.kind == "bootstrap" and stage.supply.diode == "db"
    assert stage.supply.aux.net == "vcc" and stage.supply.capacitor == "cb"
    assert [p.devices for p in stage.pullups] == [("xu", "rgh")]
    assert [(p.devices, p.returns_to) for p in stage.pulldowns] == [(("rgh", "xu"), "source")]
    assert stage.control.source == "vh" and not stage.control.inverting
    assert {r.kind for r in stage.refresh} == {"low-side switch", "load"}


def test_driver_from_the_parts_library_with_odd_pin_names() -> None:
    renamed = DRIVER.replace("VCC HIN LIN COM VB HO VS LO", "P1 P2 P3 P4 P5 P6 P7 P8")
    renamed = renamed.replace("V(HIN,COM) > 2.5 ? V(VB,VS)", "V(P2,P4) > 2.5 ? V(P5,P7)")
    renamed = renamed.replace("ho1 VS", "ho1 P7").replace("ho1 HO", "ho1 P6")
    renamed = renamed.replace("V(LIN,COM) > 2.5 ? V(VCC,COM)", "V(P3,P4) > 2.5 ? V(P1,P4)")
    renamed = renamed.replace("lo1 COM", "lo1 P4").replace("lo1 LO", "lo1 P8")
    pins = {
        "p1": "supply",
        "p2": "high_in",
        "p3": "low_in",
        "p4": "ground",
        "p5": "boot",
        "p6": "high_out",
        "p7": "switch",
        "p8": "low_out",
    }
    parts = PartsLibrary({"gdrv": Part("gdrv", "driver", {}, pins, "parts.toml:1")})
    stage = stages_of(renamed, parts)["m1"]
    assert stage.driver is not None and stage.driver.origin.startswith("parts library")
    assert stage.supply.boot_net == "boot" and stage.control.source == "vh"


HALF_BRIDGE_TWICE = (
    """two legs from one subcircuit sharing the auxiliary rail
VBUS bus 0 DC 60
VAUX aux 0 DC 12
VA ina 0 PULSE(0 5 0 10n 10n 10u 25u)
VB inb 0 PULSE(0 5 12u 10n 10n 10u 25u)
XA bus aux ina outa 0 LEG
XB bus aux inb outb 0 LEG
RLOAD outa outb 10
.subckt LEG BUS AUX IN OUT GROUND
DBT AUX bt dfast
CBT bt OUT 330n
RPU bt g 2.2k
QLS g b e qn
RE e GROUND 330
RB IN b 1k
MH BUS g OUT nfet
ML OUT gl GROUND nfet
RGL gl GROUND 10k
.ends LEG
"""
    + MODELS
)


def test_half_bridge_subcircuit_used_twice_sharing_the_aux_rail() -> None:
    stages = stages_of(HALF_BRIDGE_TWICE)
    a, b = stages["xa.mh"], stages["xb.mh"]
    assert a.floating and b.floating
    assert a.supply.aux.net == b.supply.aux.net == "aux"
    assert (a.supply.capacitor, b.supply.capacitor) == ("xa.cbt", "xb.cbt")
    assert a.control.source == "va" and b.control.source == "vb"
    assert a.source == "outa" and b.source == "outb"


def test_charge_pump_supply() -> None:
    text = (
        """charge pump
VBUS bus 0 DC 24
VAUX aux 0 DC 12
VCLK clk 0 PULSE(0 12 0 10n 10n 1u 2u)
VEN en 0 DC 5
D1 aux p1 dfast
CP p1 clk 10n
D2 p1 top dfast
CH top out 100n
RPU top g 10k
Q1 g b 0 qn
RB en b 10k
M1 bus g out nfet
RL out 0 10
"""
        + MODELS
    )
    stage = stages_of(text)["m1"]
    assert stage.supply.kind == "charge-pump" and stage.supply.source == "cp"
    assert stage.mode == "static"


def test_isolated_supplies_source_and_winding() -> None:
    source = DISCRETE.replace("D1 n4 n8 dfast", "VISO n8 n5 DC 15").replace("R2 n3 n4 4.7\n", "")
    stage = stages_of(source)["m1"]
    assert stage.supply.kind == "isolated" and stage.supply.source == "viso"
    winding = DISCRETE.replace(
        "D1 n4 n8 dfast",
        "LS n30 n5 1m\nDW n30 n8 dfast\nLP n31 0 1m\nKT LP LS 0.99\nVP n31 0 SIN(0 10 100k)",
    )
    stage = stages_of(winding)["m1"]
    assert stage.supply.kind == "isolated" and stage.supply.source == "ls"


def test_push_pull_buffer_with_speed_up_capacitor() -> None:
    text = (
        """push-pull
VBUS bus 0 DC 36
VAUX aux 0 DC 12
VIN in 0 PULSE(0 5 0 10n 10n 30u 62.5u)
D1 aux boot dfast
C1 boot sw 1u
RPU boot base 4.7k
QS base qb 0 qn
RQB in qb 2.2k
RT base tb 470
CSU base tb 1n
QU boot tb te qn
QD sw tb te qp
RG te g 4.7
M1 bus g sw nfet
M2 sw gl 0 nfet
VGL gl 0 DC 0
"""
        + MODELS
    )
    stage = stages_of(text)["m1"]
    assert [p.devices for p in stage.pullups] == [("qu", "rg")]
    assert [(p.devices, p.returns_to) for p in stage.pulldowns] == [(("rg", "qd"), "source")]
    # VIN high turns QS on, which pulls the buffer's base, and so the gate, down.
    assert stage.control.source == "vin" and stage.control.inverting


def test_pulldown_to_ground_is_reported_as_ground() -> None:
    text = DISCRETE.replace("DZ1 n5 n12 dz", "RPD n12 0 100k")
    returns = {p.devices: p.returns_to for p in stages_of(text)["m1"].pulldowns}
    assert returns[("rpd",)] == "ground"


def test_direct_resistor_from_a_ground_referenced_rail() -> None:
    text = (
        """no floating supply
VBUS bus 0 DC 24
VG12 v12 0 DC 12
VIN in 0 PULSE(0 5 0 10n 10n 5u 10u)
RPU v12 g 1k
Q1 g b 0 qn
RB in b 1k
M1 bus g out nfet
RL out 0 10
"""
        + MODELS
    )
    stage = stages_of(text)["m1"]
    assert stage.supply.kind == "none"
    assert [(p.devices, p.returns_to) for p in stage.pullups] == [(("rpu",), "v12")]


# -- negatives ---------------------------------------------------------------------------------


def test_p_channel_high_side_switch_is_not_floating() -> None:
    text = (
        """p-channel high side
VBUS bus 0 DC 12
VIN in 0 PULSE(0 5 0 10n 10n 5u 10u)
M1 out g bus pfet
RPU bus g 10k
Q1 g b 0 qn
RB in b 1k
RL out 0 5
"""
        + MODELS
    )
    stages = stages_of(text)
    assert not stages["m1"].floating and "P-channel" in stages["m1"].floating_reason


def test_source_follower_linear_regulator_is_not_a_bootstrap_stage() -> None:
    text = (
        """linear regulator
VIN vin 0 DC 24
VREF ref 0 DC 5.6
RG ref g 1k
M1 vin g out nfet
RL out 0 50
"""
        + MODELS
    )
    stage = stages_of(text)["m1"]
    assert stage.supply.kind == "none" and stage.mode == "linear"


def test_recognition_is_local_and_does_not_see_far_parts() -> None:
    far = DISCRETE + "".join(f"RX{i} far{i} far{i + 1} 1k\n" for i in range(200))
    assert stages_of(far)["m1"].related == stages_of(DISCRETE)["m1"].related
