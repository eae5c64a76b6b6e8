"""Elaboration: hierarchy, parameters, models, ground, wrappers, rails (issue: reader, point 5).

Naming and parameter-scoping behaviour follow the ngspice manual's "Subcircuits" and
".param" sections: instance parameters override the subcircuit's defaults, a parameter is
looked up in the subcircuit first and then outwards.
"""

from __future__ import annotations

import pytest

from drivelint.circuit.graph import device_node, net_node
from drivelint.diagnostics import Severity
from drivelint.limits import Limits
from drivelint.pipeline import LoadOptions, load_circuit


def circuit(text: str, **options: object):
    return load_circuit("deck.cir", LoadOptions(**options), text=text)  # type: ignore[arg-type]


def errors(c) -> list[str]:
    return [d.message for d in c.diagnostics if d.severity is Severity.ERROR]


THREE_LEVELS = """three levels
.param rtop=1k
.subckt leaf a b params: r=10
R1 a b {r}
C1 a mid 1n
R2 mid b {r*2}
.ends leaf
.subckt middle p q params: scale=1
X1 p q leaf r={scale*100}
X2 p q leaf
.ends middle
.subckt top in out
X1 in out middle scale=3
Rt in out {rtop}
.ends top
XA n1 0 top
VIN n1 0 DC 5
"""


def test_three_level_hierarchy_names_and_ports() -> None:
    c = circuit(THREE_LEVELS)
    assert errors(c) == []
    names = set(c.devices)
    assert {"xa.x1.x1.r1", "xa.x1.x1.c1", "xa.x1.x2.r2", "xa.rt", "vin"} <= names
    leaf = c.devices["xa.x1.x1.c1"]
    assert leaf.net("p") == "n1"  # port 'a' maps through three levels to n1
    assert leaf.net("n") == "xa.x1.x1.mid"  # internal net keeps its hierarchical name
    assert c.devices["xa.x1.x1.r2"].net("n") == "0"
    assert set(c.instances) == {"xa", "xa.x1", "xa.x1.x1", "xa.x1.x2"}


def test_parameter_override_and_scoping() -> None:
    c = circuit(THREE_LEVELS)
    assert c.devices["xa.x1.x1.r1"].value == pytest.approx(300)  # r = scale*100, scale=3
    assert c.devices["xa.x1.x1.r2"].value == pytest.approx(600)  # r*2 within the leaf
    assert c.devices["xa.x1.x2.r1"].value == pytest.approx(10)  # the default
    assert c.devices["xa.rt"].value == pytest.approx(1000)  # global parameter


def test_parameters_in_any_order_and_circular_ones() -> None:
    c = circuit("t\nR1 a 0 {b}\n.param b={a*2}\n.param a=3\n")
    assert c.devices["r1"].value == 6
    bad = circuit("t\n.param p={q+1}\n.param q={p}\nR1 a 0 {p}\n")
    assert any("circular parameter definition" in m for m in errors(bad))


def test_parameter_recursion_bound() -> None:
    chain = "".join(f".param p{i}={{p{i + 1}}}\n" for i in range(40)) + ".param p40=1\n"
    c = circuit("t\n" + chain + "R1 a 0 {p0}\n", limits=Limits(max_param_recursion=10))
    assert any("max_param_recursion" in m for m in errors(c))
    ok = circuit("t\n" + chain + "R1 a 0 {p0}\n")
    assert ok.devices["r1"].value == 1


def test_ground_aliases_merge_and_are_configurable() -> None:
    c = circuit("t\nR1 a GND 1\nR2 a gnd 1\nR3 a 0 1\nR4 a vss 1\n")
    assert {c.devices[n].net("n") for n in ("r1", "r2", "r3")} == {"0"}
    assert c.devices["r4"].net("n") == "vss"
    custom = circuit("t\nR4 a VSS 1\n", ground_aliases=frozenset({"vss"}))
    assert custom.devices["r4"].net("n") == "0"


def test_global_nets_are_shared_across_the_hierarchy() -> None:
    c = circuit("t\n.global vdd\n.subckt s a\nR1 a vdd 1\nR2 a loc 1\n.ends\nX1 n s\nX2 n s\n")
    assert c.devices["x1.r1"].net("n") == "vdd" == c.devices["x2.r1"].net("n")
    assert c.devices["x1.r2"].net("n") == "x1.loc" != c.devices["x2.r2"].net("n")


def test_models_resolve_through_the_hierarchy_with_types() -> None:
    c = circuit(
        "t\n.model dg D(IS=1e-14 BV=100)\n.model qn NPN(BF=100)\n.model mp PMOS(VTO=-2)\n"
        ".model vd VDMOS(pchan VTO=-3)\n.model vn VDMOS(VTO=3)\n.model jn NJF\n"
        ".subckt s a b\n.model dg D(IS=2e-14)\nD1 a b dg\n.ends\nX1 p q s\n"
        "D1 a 0 dg\nQ1 c b e qn\nQ2 c b e sub qn 2\nM1 d g s s mp W=10u L=1u\n"
        "M2 d g s vd\nM3 d g s vn\nJ1 d g s jn\n"
    )
    assert errors(c) == []
    d = c.devices
    assert d["x1.d1"].model.params["is"] == pytest.approx(2e-14)  # the local model wins
    assert d["d1"].model.params["bv"] == 100
    assert d["q1"].model_type == "npn" and d["q1"].net("e") == "e"
    assert d["q2"].net("s") == "sub" and d["q2"].value == 2  # substrate node and area
    assert d["m1"].model_type == "pmos" and d["m1"].params == {"w": 1e-5, "l": 1e-6}
    assert d["m2"].model_type == "pmos" and d["m3"].model_type == "nmos"
    assert d["m2"].net("s") == "s" and d["m2"].net("b") is None  # VDMOS: three nodes
    assert d["j1"].model_type == "njf"


def test_undefined_model_and_subckt_and_wrong_node_counts() -> None:
    c = circuit(
        "t\nD1 a b nodiode\nX1 a b nosub\n.subckt two a b\nR1 a b 1\n.ends\nX2 a two\n"
        "R1 a\nQ1 c b\n.model dd D\nM1 d g s dd\n"
    )
    messages = errors(c)
    # A missing model or subcircuit leaves a partial result, not an error: the diode
    # keeps its kind, the instance is an opaque block, and both are recorded.
    warnings = [d.message for d in c.diagnostics if d.severity is Severity.WARNING]
    assert any("model 'nodiode' is not defined" in m for m in warnings)
    assert any("subcircuit 'nosub' is not defined" in m for m in warnings)
    assert c.devices["d1"].kind == "diode" and c.devices["d1"].model is None
    assert c.instances["x1"].opaque and dict(c.instances["x1"].ports) == {"1": "a", "2": "b"}
    assert {(m.kind, m.name) for m in c.missing} == {("model", "nodiode"), ("subckt", "nosub")}
    assert any("connects 1 nodes but subcircuit 'two' has 2 ports" in m for m in messages)
    assert any("'r1' needs 2 nodes" in m for m in messages)
    assert any("'q1' needs" in m for m in messages)
    assert any("is a D model, not one for element 'm1'" in m for m in messages)


def test_duplicate_names_and_self_instantiation() -> None:
    c = circuit("t\nR1 a 0 1\nR1 b 0 2\n.subckt loop a\nX1 a loop\n.ends\nX9 n loop\n")
    messages = errors(c)
    assert any("duplicate element name 'r1'" in m for m in messages)
    assert any("instantiates itself: loop -> loop" in m for m in messages)
    assert c.devices["r1"].value == 1


def test_instance_depth_and_device_bounds() -> None:
    nest = "".join(f".subckt s{i} a\nX1 a s{i + 1}\n.ends\n" for i in range(10))
    c = circuit(
        "t\n" + nest + ".subckt s10 a\nR1 a 0 1\n.ends\nX0 n s0\n",
        limits=Limits(max_instance_depth=5),
    )
    assert any("max_instance_depth" in m for m in errors(c))
    many = circuit(
        "t\n" + "".join(f"R{i} a 0 1\n" for i in range(50)), limits=Limits(max_devices=10)
    )
    # Counted before building: a netlist over the bound is not elaborated at all.
    assert len(many.devices) == 0 and any("max_devices" in m for m in errors(many))


def test_multiplier_and_instance_params() -> None:
    c = circuit("t\n.model n1 NMOS\nM1 d g 0 0 n1 W=2u L=1u M=4\nR1 a 0 1k m=2\n")
    assert c.devices["m1"].multiplier == 4 and "m" not in c.devices["m1"].params
    assert c.devices["r1"].multiplier == 2


WRAPPED = """wrapped MOSFET
.subckt FETWRAP D G S
LD D d1 1n
RG G g1 1.5
LS s1 S 2n
M1 d1 g1 s1 s1 core W=1 L=1u
DB s1 d1 dbody
CGS g1 s1 1n
.model core NMOS(VTO=3 KP=20)
.model dbody D(IS=1e-12 BV=80)
.ends FETWRAP
X1 bus gate sw FETWRAP
"""


def test_wrapper_subcircuit_is_one_transistor() -> None:
    c = circuit(WRAPPED)
    assert errors(c) == []
    assert list(c.devices) == ["x1"]
    fet = c.devices["x1"]
    assert fet.kind == "mosfet" and fet.model_type == "nmos" and fet.model_name == "fetwrap"
    assert dict(fet.pins) == {"d": "bus", "g": "gate", "s": "sw"}
    assert fet.wrapper is not None and fet.wrapper.gate_resistance == pytest.approx(1.5)
    assert fet.wrapper.body_diode == "dbody"


def test_subcircuit_with_two_transistors_is_flattened() -> None:
    text = WRAPPED.replace("CGS g1 s1 1n", "M2 d1 g1 s1 s1 core W=1 L=1u")
    c = circuit(text)
    assert {"x1.m1", "x1.m2", "x1.rg"} <= set(c.devices)


def test_rails_through_chains_of_sources() -> None:
    c = circuit(
        "t\nVBUS bus 0 DC 48\nVAUX aux 0 12\nVB boot aux 5\nVN neg 0 -5\n"
        "VP clk 0 PULSE(0 5 0 1n 1n 1u 2u)\nVF f1 f2 3\nR1 f2 0 1\n"
    )
    assert c.rails == {"aux": 12, "boot": 17, "bus": 48, "neg": -5}


def test_graph_is_bipartite_with_pin_roles() -> None:
    c = circuit("t\n.model dd D\nD1 a k dd\nR1 k 0 1k\nR2 k k 1\n")
    g = c.graph()
    assert g.nodes[device_node("d1")]["bipartite"] == "device"
    assert g.nodes[net_node("k")]["bipartite"] == "net"
    assert g.has_edge(device_node("d1"), net_node("a"), key="a")
    assert g.has_edge(device_node("d1"), net_node("k"), key="k")
    assert g.number_of_edges(device_node("r2"), net_node("k")) == 2  # a shorted part
    for u, v in g.edges():
        assert {u[0], v[0]} == {"net", "device"}


def test_instance_multiplier_parallels_the_devices_inside() -> None:
    # ngspice builds every device of an `m=2` instance with m=2 (checked against ngspice in
    # test_ngspice_crosscheck); nested instance multipliers multiply, as paralleled copies do.
    c = circuit(
        "t\n.subckt cell a\nR1 a 0 1k m=3\n.ends\n.subckt pair a\nX1 a cell m=2\n.ends\n"
        "XP n pair m=5\n"
        + WRAPPED.split("\n", 1)[1].replace("X1 bus gate sw FETWRAP", "X2 bus g s FETWRAP m=2")
    )
    assert c.devices["xp.x1.r1"].multiplier == 30
    assert c.devices["x2"].multiplier == 2


# ---------------------------------------------------------------------------
# Dialect forms (issue 8); more in tests/dialects.


def test_temperature_in_a_model_parameter_is_read_at_27_degrees() -> None:
    # ngspice evaluates temper at the circuit temperature, 27 degC by default (ngspice
    # manual, ".options": TEMP/TNOM); the braces keep their parentheses in a model card.
    c = circuit(
        "t\nV1 a 0 1\n.model dt d is={temper >= 25 ? 1e-10 : (temper+1)*1e-11}\nD1 a 0 dt\n"
    )
    assert errors(c) == []
    assert c.devices["d1"].model is not None
    assert c.devices["d1"].model.params["is"] == pytest.approx(1e-10)


def test_table_source_is_behavioural() -> None:
    c = circuit("t\nV1 a 0 1\nI1 a 0 TBL(0 0 1 2m 2 3m)\n")
    assert errors(c) == []
    behaviour = c.devices["i1"].behaviour
    assert behaviour is not None and behaviour.reads == ("a", "0")
    assert behaviour.evaluate({"a": 1.5}) == pytest.approx(2.5e-3)


def test_behavioural_value_inside_a_subcircuit_reads_flat_nets() -> None:
    c = circuit(
        "t\nV1 boot 0 12\nV2 sw 0 0\nX1 boot sw hold\n"
        ".subckt hold b s\nC1 b s C='1u/(1+(V(b,s)/10)^2)'\nR1 b n 1k\nR2 n 0 R='1k+V(n)'\n.ends\n"
    )
    cap = c.devices["x1.c1"].behaviour
    assert cap is not None and cap.reads == ("boot", "sw")
    assert cap.evaluate({"boot": 10.0, "sw": 0.0}) == pytest.approx(0.5e-6)
    assert c.devices["x1.c1"].value == pytest.approx(1e-6)
    assert c.devices["x1.r2"].behaviour is not None
    assert c.devices["x1.r2"].behaviour.reads == ("x1.n",)


def test_poly_and_table_are_bounded() -> None:
    poly = circuit("t\nV1 a 0 1\nE1 o 0 POLY(40) " + "a 0 " * 40 + "1\n")
    assert any("max_poly_dimensions" in m for m in errors(poly))
    points = " ".join(f"({i},{i})" for i in range(2000))
    table = circuit(f"t\nV1 a 0 1\nG1 o 0 TABLE {{V(a)}} = {points}\n")
    assert errors(table) == []
    assert any(
        "TABLE of 'g1' is not evaluated" in d.message
        for d in table.diagnostics
        if d.severity is Severity.WARNING
    )
    assert table.devices["g1"].behaviour is None


def test_if_condition_on_node_voltages_is_refused() -> None:
    c = circuit("t\nV1 a 0 1\n.if (v(a) > 0)\nR1 a 0 1\n.endif\n")
    assert any("must depend on parameters only" in m for m in errors(c))
    assert "r1" not in c.devices


def test_one_coupling_among_several_inductors() -> None:
    # K with two inductors is SPICE3's (ngspice manual, "Coupled (Mutual) Inductors"); a
    # single K over three or more windings is the form PSpice and LTspice accept (from
    # memory): every winding is coupled, the coupling is the last field
    c = circuit("t\nL1 a 0 1m\nL2 b 0 1m\nL3 0 c 1m\nK1 L1 L2 L3 0.99\n.end\n")
    assert errors(c) == []
    assert c.devices["k1"].controls == ("l1", "l2", "l3")
    assert c.devices["k1"].value == pytest.approx(0.99)
    c = circuit("t\nL1 a 0 1m\nK1 L1 0.9\n.end\n")
    assert len(errors(c)) == 1 and "L<b>" in errors(c)[0]
