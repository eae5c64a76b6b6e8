"""The indexes that keep recognition and the rules linear in the size of a circuit.

A rule that looks along a net every stage shares (the gate rail, ground) reads an index
built once per circuit (``NetIndex``), and recognition neither tests every driver's name
per device nor leaves its working view alive once it returns. Each index must give what
the plain scan gives, in the same order.
"""

from __future__ import annotations

import weakref

from drivelint.checks.facts import devices_by_net
from drivelint.pipeline import LoadOptions, load_circuit
from drivelint.ratings.parts import PartsLibrary
from drivelint.stages import recognise as recognise_module
from drivelint.stages.recognise import _inside, recognise

# Three legs, each with its own driver subcircuit, on shared command and supply nets.
LEGS = """three driver-IC legs on shared nets
VBUS bus 0 DC 48
VAUX aux 0 DC 12
CAUX aux 0 4.7u
RAUX aux aux2 1
CAUX2 aux2 0 1u
VHIN hin 0 PULSE(0 5 0 10n 10n 2u 5u)
VLIN lin 0 PULSE(5 0 0 10n 10n 2u 5u)
.subckt HBDRV_GEN VB HO VS VCC HIN LIN LO COM
BH ho1 VS V = V(HIN,COM) > 2.5 ? V(VB,VS) : 0
RH ho1 HO 2
BL lo1 COM V = V(LIN,COM) > 2.5 ? V(VCC,COM) : 0
RL lo1 LO 2
RQ VB VS 100k
.ends HBDRV_GEN
.subckt DRV_LEG BUS AUX HIN LIN SW
XU boot ho SW AUX HIN LIN lo 0 HBDRV_GEN
DB AUX boot dfast
CB boot SW 220n
RGH ho gh 4.7
RGSH gh SW 10k
MH BUS gh SW nfet
RGL lo gl 4.7
RGSL gl 0 10k
ML SW gl 0 nfet
.ends DRV_LEG
X1 bus aux hin lin sw1 DRV_LEG
RLD1 sw1 0 10
X2 bus aux hin lin sw2 DRV_LEG
RLD2 sw2 0 10
X3 bus aux hin lin sw3 DRV_LEG
RLD3 sw3 0 10
.model dfast D(IS=1n TT=20n BV=100)
.model nfet VDMOS(VTO=3 KP=20 Cgs=2n Cgdmax=1n)
.end
"""


def _circuit(tmp_path):
    deck = tmp_path / "legs.cir"
    deck.write_text(LEGS)
    return load_circuit(deck, LoadOptions(root=tmp_path))


def test_net_index_gives_what_a_scan_of_the_net_gives(tmp_path) -> None:
    circuit = _circuit(tmp_path)
    index = devices_by_net(circuit)
    kinds = {d.kind for d in circuit.devices.values()}
    nets = sorted(index)
    assert "aux" in nets and len(index["aux"]) >= 5
    for net in nets:
        for kind in kinds:
            scanned = [d for d in index[net] if d.kind == kind]
            assert list(index.of_kind(net, kind)) == scanned
        for other in nets:
            if other == net:
                continue
            scanned = [d for d in index[net] if set(d.nets) == {net, other}]
            assert list(index.between(net, other)) == scanned
    assert [d.name for d in index.between("aux", "0")] == ["vaux", "caux"]
    assert [d.name for d in index.between("0", "aux2")] == ["caux2"]
    assert list(index.of_kind("nowhere", "resistor")) == []


def test_inner_devices_are_found_by_their_driver_prefix() -> None:
    drivers = {"x1.xu": None, "x12.xu": None}
    assert _inside("x1.xu.bh", drivers)
    assert _inside("x12.xu.rq", drivers)
    assert not _inside("x1.mh", drivers)
    assert not _inside("x1.xu", drivers)  # the driver itself is not inside itself
    assert not _inside("x1.xub.r1", drivers)  # a longer name sharing the prefix
    assert not _inside("r1", drivers)


def test_recognition_keeps_its_view_only_while_it_runs(tmp_path, monkeypatch) -> None:
    circuit = _circuit(tmp_path)
    views: list[weakref.ref[object]] = []
    original = recognise_module._View.__init__

    def recording(self, *args, **kwargs) -> None:  # type: ignore[no-untyped-def]
        original(self, *args, **kwargs)
        views.append(weakref.ref(self))

    monkeypatch.setattr(recognise_module._View, "__init__", recording)
    stages = recognise(circuit, PartsLibrary())
    assert sum(1 for s in stages if s.floating) == 3
    assert [s.driver.device for s in stages if s.floating and s.driver] == [
        "x1.xu",
        "x2.xu",
        "x3.xu",
    ]
    # The collector is paused while recognition runs and what is left is frozen after it:
    # a reference cycle through the view would keep it (and every builder) for good.
    assert len(views) == 1 and views[0]() is None
