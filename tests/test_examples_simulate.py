"""The bundled examples simulate in ngspice and behave the way their scenarios say.

ngspice (Debian package, SPICE3 lineage) is the independent simulator here. The examples
carry no `.control` block, so each run copies a netlist into a temporary folder, inserts
one before `.end`, runs `ngspice -b` and reads the requested vectors back from `wrdata`.
Control experiments change one part of a copy (a capacitor, a diode's TT, a duty) and
show that the behaviour follows that part.
"""

from __future__ import annotations

import bisect
import math
import re
import tomllib
from collections.abc import Callable, Sequence
from pathlib import Path

import pint
import pytest
from simulator import Waves, run_transient

EXAMPLES = Path(__file__).resolve().parents[1] / "examples"
NETLISTS = sorted(EXAMPLES.glob("*.cir"))
PARTS: dict[str, dict[str, object]] = tomllib.loads(
    (EXAMPLES / "parts.toml").read_text(encoding="utf-8")
)["part"]
# The examples are meant for quick demos and CI: the brief caps each transient.
MAX_TIME_POINTS = 20_000

UNITS: pint.UnitRegistry[float] = pint.UnitRegistry()

# Lines of ngspice's console output that mean the run did not do what the deck says.
# "unrecognized parameter" is included: ngspice then ignores the parameter, so the
# model would silently differ from the card that drivelint reads.
TROUBLE = re.compile(
    r"error|fatal|aborted|timestep too small|unrecognized|unknown (model|subckt)", re.I
)


def _si(quantity: object, unit: str) -> float:
    """Magnitude of a parts-library quantity string in `unit`."""
    return float(UNITS.Quantity(str(quantity)).to(unit).magnitude)


# ---------------------------------------------------------------- running ngspice


def _run_deck(text: str, vectors: Sequence[str], saves: Sequence[str], workdir: Path) -> Waves:
    return run_transient(text, vectors, workdir, saves)


class Simulator:
    """Runs example netlists once per distinct request and keeps the results."""

    def __init__(self, root: Path) -> None:
        self._root = root
        self._done: dict[tuple[object, ...], Waves] = {}

    def run(
        self,
        netlist: str,
        vectors: Sequence[str],
        *,
        saves: Sequence[str] = (),
        edits: Sequence[tuple[str, str]] = (),
    ) -> Waves:
        key = (netlist, tuple(vectors), tuple(saves), tuple(edits))
        if key not in self._done:
            text = (EXAMPLES / netlist).read_text(encoding="utf-8")
            for old, new in edits:
                # a control experiment that edits nothing would prove nothing
                assert text.count(old) == 1, f"{netlist}: {old!r} is not there exactly once"
                text = text.replace(old, new)
            workdir = self._root / f"run{len(self._done)}"
            self._done[key] = _run_deck(text, vectors, saves, workdir)
        return self._done[key]


@pytest.fixture(scope="module")
def sim(tmp_path_factory: pytest.TempPathFactory) -> Simulator:
    return Simulator(tmp_path_factory.mktemp("ngspice"))


# What each scenario test reads; the smoke test asks for the same vectors, so every
# example is simulated once unless an experiment edits it.
PROBES: dict[str, tuple[tuple[str, ...], tuple[str, ...]]] = {
    "lev48_phase_leg_npn_shifter.cir": (("v(g_hi,sw)", "v(sw)"), ()),
    "tool36_leg_totem_pole.cir": (("v(g_hi,sw)", "v(sw)", "v(boot,sw)"), ()),
    "induction325_half_bridge_driver.cir": (("v(g_hi,sw)", "v(sw)", "v(vb,sw)"), ()),
    "buck12v_5v_400k_sync.cir": (("v(bst,ph)", "v(ph)", "@d_bst[id]"), ("@d_bst[id]",)),
    "loadswitch24v_dc_enable.cir": (("v(g,out)", "v(out)"), ()),
    "heater96v_isolated_supply.cir": (("v(g,sw)", "v(sw)", "@d_z[id]"), ("@d_z[id]",)),
    "mower48v_hbridge_wrapped_fets.cir": (("v(xlega.hb,outa)", "v(outa)"), ()),
    "boost12v_led_lowside.cir": (("v(out)",), ()),
    "heater12v_pchannel_highside.cir": (("v(g,v12)", "v(pad_h)"), ()),
    "linreg24v_source_follower.cir": (("v(out)", "v(g,out)"), ()),
    "classd45v_split_rail_amp.cir": (("v(vb,vcc)", "v(vs)", "v(vb,vs)"), ()),
    "valve24v_pump_loadswitch.cir": (("v(g,out)", "v(cp,out)", "v(out)"), ()),
    "buck48v_closed_loop_ammeters.cir": (("v(vout)", "v(hb,sw)", "v(sw)"), ()),
    "winch36v_shunt_load_dump.cir": (("v(hb,bsa)", "v(sw)", "v(bus)"), ()),
    "linreg48v_pass_follower.cir": (("v(out)", "v(g,out)"), ()),
    "actuator24v_hbridge_held_leg.cir": (("v(swa)", "v(swb)", "v(hbb,swb)", "v(gha,swa)"), ()),
}


def probe(sim: Simulator, netlist: str, edits: Sequence[tuple[str, str]] = ()) -> Waves:
    vectors, saves = PROBES[netlist]
    return sim.run(netlist, vectors, saves=saves, edits=edits)


def spans(
    w: Waves, name: str, keep: Callable[[float], bool], shortest: float
) -> list[tuple[float, float]]:
    """Time spans, at least `shortest` long, over which `keep(w[name])` holds."""
    found: list[tuple[float, float]] = []
    start: float | None = None
    for t, value in zip(w.time, w[name], strict=True):
        if keep(value) and start is None:
            start = t
        elif not keep(value) and start is not None:
            if t - start >= shortest:
                found.append((start, t))
            start = None
    return found


def middles(found: list[tuple[float, float]]) -> list[float]:
    return [(a + b) / 2 for a, b in found]


def integral(time: Sequence[float], values: Sequence[float]) -> float:
    """Trapezoidal integral of samples on a non-uniform time grid."""
    return sum(
        (time[i + 1] - time[i]) * (values[i + 1] + values[i]) / 2 for i in range(len(time) - 1)
    )


# ---------------------------------------------------------------- every example


def test_examples_are_bundled() -> None:
    # the probes above name each bundled scenario
    assert {p.name for p in NETLISTS} == set(PROBES)


@pytest.mark.parametrize("netlist", NETLISTS, ids=lambda p: p.name)
def test_netlist_shape(netlist: Path) -> None:
    # SPICE3 input format (ngspice manual, "Input file format"; from memory): the first
    # line is the title, the last is .end. The examples add a header block of "*" lines
    # and leave analysis control to whoever runs them.
    lines = netlist.read_text(encoding="utf-8").splitlines()
    assert lines[0].strip() and lines[0][0] not in "*.+", "first line must be a title"
    assert all(line.startswith("*") for line in lines[1:4]), "header comment block missing"
    assert lines[-1].strip().lower() == ".end"
    lowered = [line.strip().lower() for line in lines]
    assert not any(line.startswith(".control") for line in lowered)
    assert sum(line.startswith(".tran") for line in lowered) == 1


@pytest.mark.parametrize("netlist", NETLISTS, ids=lambda p: p.name)
def test_example_simulates_cleanly(sim: Simulator, netlist: Path) -> None:
    vectors, saves = PROBES.get(netlist.name, (("time",), ()))
    w = sim.run(netlist.name, vectors, saves=saves)
    trouble = [line for line in w.log.splitlines() if TROUBLE.search(line)]
    assert not trouble, "\n".join(trouble)
    assert 100 < len(w.time) <= MAX_TIME_POINTS


# ---------------------------------------------------------------- scenarios


def test_phase_leg_gate_fully_on_and_off(sim: Simulator) -> None:
    w = probe(sim, "lev48_phase_leg_npn_shifter.cir")
    on = spans(w, "v(sw)", lambda v: v > 0.9 * 48.0, shortest=10e-6)
    off = spans(w, "v(sw)", lambda v: v < 1.0, shortest=10e-6)
    assert len(on) >= 6 and len(off) >= 6
    # Standard-level MOSFETs have R_DS(on) specified at V_GS = 10 V; 8 V as the least
    # acceptable on-state drive is common practice.
    assert all(w.at("v(g_hi,sw)", t) > 8.0 for t in middles(on))
    # Off: well below the 3.2 V threshold (VTO) of the NFET_100V_A model card.
    assert all(w.at("v(g_hi,sw)", t) < 2.5 for t in middles(off))


def test_small_hold_capacitor_starves_the_gate(sim: Simulator) -> None:
    # Charge conservation (Q = C*V): 10 nF at ~12 V holds ~120 nC, while the gate takes
    # about 95 nC to reach 10 V (parts.toml, checked against ngspice below), so charge
    # sharing leaves V_GS far short of 10 V and pulls the boot voltage down with it.
    netlist = "tool36_leg_totem_pole.cir"
    w = probe(sim, netlist)
    on = spans(w, "v(sw)", lambda v: v > 30.0, shortest=10e-6)[1:]
    assert on
    assert max(w.at("v(g_hi,sw)", t) for t in middles(on)) < 8.0
    assert all(w.at("v(boot,sw)", t) < 9.0 for t in middles(on))
    # Control experiment: with a 220 nF hold capacitor the same drive reaches > 10 V.
    big = probe(sim, netlist, edits=[("C1    BOOT SW 10n", "C1    BOOT SW 220n")])
    on_big = spans(big, "v(sw)", lambda v: v > 30.0, shortest=10e-6)[1:]
    assert on_big and all(big.at("v(g_hi,sw)", t) > 10.0 for t in middles(on_big))


def test_driver_ic_half_bridge_drives_high_side(sim: Simulator) -> None:
    w = probe(sim, "induction325_half_bridge_driver.cir")
    on = spans(w, "v(sw)", lambda v: v > 0.95 * 325.0, shortest=5e-6)
    assert len(on) >= 15
    # Boot supply = 15 V driver rail minus one diode drop; V_GS follows it.
    assert all(w.at("v(g_hi,sw)", t) > 12.0 for t in middles(on[2:]))
    uvlo = _si(PARTS["HBDRV_600"]["uvlo_boot"], "V")
    assert min(w.between("v(vb,sw)", 100e-6, 500e-6)) > uvlo + 4.0


def test_slow_boot_diode_loses_charge_in_recovery(sim: Simulator) -> None:
    # Charge-control diode model (SPICE diode, transit time TT; ngspice manual, diode
    # model): the stored charge that a forward-biased diode must give back when reversed
    # scales with TT. The 4 us rectifier returns far more of the boot capacitor's charge
    # to VDD every 2.5 us cycle than the same circuit with a 20 ns diode, and the boot
    # voltage during the on-times sits measurably lower.
    netlist = "buck12v_5v_400k_sync.cir"
    slow = probe(sim, netlist)
    fast = probe(sim, netlist, edits=[("BV=450 IBV=5u TT=4u", "BV=450 IBV=5u TT=20n")])

    def returned_charge(w: Waves) -> float:
        lo = bisect.bisect_left(w.time, 30e-6)
        current = [min(i, 0.0) for i in w["@d_bst[id]"][lo:]]
        return -integral(w.time[lo:], current)

    def boot_when_on(w: Waves) -> float:
        mids = middles(spans(w, "v(ph)", lambda v: v > 10.0, shortest=0.5e-6))[10:]
        return sum(w.at("v(bst,ph)", t) for t in mids) / len(mids)

    assert returned_charge(slow) > 5.0 * returned_charge(fast)
    assert boot_when_on(fast) - boot_when_on(slow) > 0.3


def test_dc_enable_lets_the_gate_decay(sim: Simulator) -> None:
    # A bootstrap has no refresh while the switch stays on: every gate-side path drains
    # the hold capacitor (R_GS and the level shifter's base current here), so V_GS
    # falls steadily and the switch ends up half on.
    w = probe(sim, "loadswitch24v_dc_enable.cir")
    early = w.at("v(g,out)", 0.5e-3)
    assert early > 9.0
    samples = [w.at("v(g,out)", t * 1e-3) for t in (0.5, 1.5, 2.5, 3.5, 4.5)]
    assert all(later < sooner for sooner, later in zip(samples, samples[1:], strict=False))
    assert w.at("v(g,out)", 5.9e-3) < early - 5.0


def test_ground_referenced_pull_down_drives_vgs_negative(sim: Simulator) -> None:
    # Experiment: drop the enable at 1.5 ms. Q4 pulls the gate to ground while C_OUT
    # holds the source near 24 V, so V_GS goes beyond the -20 V rating of NFET_40V_E.
    w = probe(
        sim,
        "loadswitch24v_dc_enable.cir",
        edits=[("PWL(0 0 200u 0 201u 5)", "PWL(0 0 200u 0 201u 5 1.5m 5 1.502m 0)")],
    )
    rating = _si(PARTS["NFET_40V_E"]["vgs_max"], "V")
    assert w.at("v(g,out)", 1.4e-3) > 8.0
    assert min(w.between("v(g,out)", 1.5e-3, 2.0e-3)) < -rating
    # What holds the source up is C_OUT discharging into R_LOAD alone (RC decay,
    # v = V0 * exp(-t / RC), RC = 48 ohm * 47 uF), not the switch.
    expected = 24.0 * math.exp(-0.5e-3 / (48.0 * 47e-6))
    assert w.at("v(out)", 2.0e-3) == pytest.approx(expected, rel=0.05)


def test_low_zener_clamps_the_drive(sim: Simulator) -> None:
    # A Zener across gate-source conducts whenever the drive exceeds V_Z: the 15 V
    # isolated rail is pinned near 12 V and the Zener carries tens of milliamps.
    netlist = "heater96v_isolated_supply.cir"
    w = probe(sim, netlist)
    on = spans(w, "v(sw)", lambda v: v > 90.0, shortest=20e-6)
    assert len(on) >= 4
    vz = _si(PARTS["ZENER_12"]["vz"], "V")
    assert all(w.at("v(g,sw)", t) < vz + 1.0 for t in middles(on))
    assert all(-w.at("@d_z[id]", t) > 0.02 for t in middles(on))
    # Control experiment: without the Zener the gate reaches the isolated rail.
    free = sim.run(netlist, ("v(g,sw)", "v(sw)"), edits=[("D_Z   SW G ZENER_12", "* D_Z removed")])
    on_free = spans(free, "v(sw)", lambda v: v > 90.0, shortest=20e-6)
    assert on_free and all(free.at("v(g,sw)", t) > 14.5 for t in middles(on_free))


def test_near_full_duty_starves_the_bootstrap(sim: Simulator) -> None:
    # Each cycle the gate, the driver's floating side and R_GSH take charge from C_BT,
    # and only the short off-time (tau = 22 ohm * 470 nF ~ 10 us) puts it back; at
    # 99.2 % duty the boot voltage keeps sinking, at 90 % it settles near its start.
    netlist = "mower48v_hbridge_wrapped_fets.cir"

    def boot_drop(w: Waves) -> float:
        mids = middles(spans(w, "v(outa)", lambda v: v > 50.0, shortest=10e-6))
        assert len(mids) >= 15
        boots = [w.at("v(xlega.hb,outa)", t) for t in mids]
        return boots[0] - boots[-1]

    assert boot_drop(probe(sim, netlist)) > 2.0
    relaxed = probe(sim, netlist, edits=[("DUTY=0.992", "DUTY=0.90")])
    assert boot_drop(relaxed) < 1.0


def test_boost_output_matches_conversion_ratio(sim: Simulator) -> None:
    # Continuous-conduction boost: V_out = V_in / (1 - D) (Erickson & Maksimovic,
    # Fundamentals of Power Electronics, ch. 2; from memory). 12 V at D = 0.7 -> 40 V.
    w = probe(sim, "boost12v_led_lowside.cir")
    tail = w.between("v(out)", 100e-6, 200e-6)
    assert abs(sum(tail) / len(tail) - 12.0 / (1 - 0.7)) < 0.1 * 40.0


def test_p_channel_gate_set_by_divider(sim: Simulator) -> None:
    # Voltage divider: V_GS,on = -V_sup * R_GS / (R_GS + R_GD), less Q1's saturation drop.
    w = probe(sim, "heater12v_pchannel_highside.cir")
    on = spans(w, "v(pad_h)", lambda v: v > 6.0, shortest=100e-6)
    assert len(on) >= 4
    expected = -12.0 * 10e3 / (10e3 + 4.7e3)
    assert all(abs(w.at("v(g,v12)", t) - expected) < 0.3 for t in middles(on))
    assert all(w.at("v(pad_h)", t) > 11.5 for t in middles(on))


def test_source_follower_regulates_without_switching(sim: Simulator) -> None:
    # Source follower: V_out = V_ref - V_GS, with V_GS a little above threshold and
    # nothing switching (flat output).
    w = probe(sim, "linreg24v_source_follower.cir")
    out = w.between("v(out)", 1e-3, 2e-3)
    assert 10.5 < sum(out) / len(out) < 12.5
    assert max(out) - min(out) < 0.05
    assert 3.0 < w.at("v(g,out)", 1.5e-3) < 5.0


def test_split_rail_boot_diode_blocks_the_whole_swing(sim: Simulator) -> None:
    # With the high side on, the cathode rides at +45 V + V_boot while the anode sits on the
    # driver rail 12 V above -45 V: V_R = 90 V + V_boot − 12 V ≈ 89 V (Kirchhoff's voltage
    # law round the loop), beyond 80 % of DFAST_100's 100 V.
    w = probe(sim, "classd45v_split_rail_amp.cir")
    peak = max(w.between("v(vb,vcc)", 20e-6, 60e-6))
    assert 85.0 < peak < 95.0 and peak > 0.8 * 100
    assert min(w.between("v(vs)", 20e-6, 60e-6)) < -44.0  # the node reaches the -45 V rail
    assert min(w.between("v(vb,vs)", 20e-6, 60e-6)) > 10.5  # the boot supply holds


def test_riding_reservoir_needs_its_zener(sim: Simulator) -> None:
    # The reservoir C_RES charges to the pump's whole output while OUT is low, and brings
    # it to the gate at turn-on; the 15 V Zener holds V_GS while the charge bleeds away.
    netlist = "valve24v_pump_loadswitch.cir"
    w = probe(sim, netlist)
    assert max(w.between("v(cp,out)", 200e-6, 600e-6)) > 25.0
    assert max(w.between("v(g,out)", 0, 600e-6)) < 15.5
    assert min(w.between("v(out)", 300e-6, 600e-6)) > 23.5  # fully on
    # Control experiment: without the Zener the gate sees well over its 20 V rating.
    bare = sim.run(netlist, ("v(g,out)",), edits=[("D_ZG  OUT G ZENER_15", "* D_ZG removed")])
    assert max(bare.between("v(g,out)", 150e-6, 600e-6)) > 25.0


def test_closed_loop_buck_regulates(sim: Simulator) -> None:
    # Voltage-mode loop: V_out = V_ref·(1 + R_top/R_bot) = 0.8 V × 15 = 12 V.
    w = probe(sim, "buck48v_closed_loop_ammeters.cir")
    out = w.between("v(vout)", 60e-6, 120e-6)
    assert abs(sum(out) / len(out) - 12.0) < 0.36
    assert min(w.between("v(hb,sw)", 60e-6, 120e-6)) > 11.0


def test_load_dump_raises_the_boot_diode_reverse_voltage(sim: Simulator) -> None:
    # V_R = V_bus + V_boot − V_aux: about 36 V at 36 V, about 56 V during the surge,
    # against DSCH_60's 60 V (48 V derated).
    w = probe(sim, "winch36v_shunt_load_dump.cir")
    assert max(w.between("v(hb,bsa)", 20e-6, 140e-6)) < 40.0
    assert 54.0 < max(w.between("v(hb,bsa)", 170e-6, 450e-6)) < 58.0


def test_pass_device_gate_with_the_output_shorted(sim: Simulator) -> None:
    # In normal operation the source follows the gate (V_GS a few volts); with the output
    # shorted the error amplifier lets go and R_PU pulls the gate towards 60 V.
    netlist = "linreg48v_pass_follower.cir"
    w = probe(sim, netlist)
    assert abs(w.at("v(out)", 2.5e-3) - 24.0) < 0.5
    assert 2.0 < w.at("v(g,out)", 2.5e-3) < 6.0
    shorted = sim.run(netlist, ("v(g,out)",), edits=[("R_LOAD OUT 0 40", "R_LOAD OUT 0 1m")])
    assert shorted.at("v(g,out)", 2.5e-3) > 40.0


def test_held_leg_stays_low_and_charged(sim: Simulator) -> None:
    # Leg B's low side is held on: its switch node stays near 0 V and its 47 nF boot
    # capacitor stays at 12 V less a diode drop; leg A switches with a full gate drive.
    w = probe(sim, "actuator24v_hbridge_held_leg.cir")
    assert max(w.between("v(swb)", 100e-6, 500e-6)) < 0.5
    assert min(w.between("v(hbb,swb)", 100e-6, 500e-6)) > 11.0
    assert max(w.between("v(swa)", 100e-6, 500e-6)) > 23.0
    assert max(w.between("v(gha,swa)", 100e-6, 500e-6)) > 11.0


# ---------------------------------------------------------------- parts library


def _definition(name: str) -> tuple[str, str]:
    """The `.model` card or `.subckt` block that defines `name` in the examples."""
    for path in NETLISTS:
        lines = path.read_text(encoding="utf-8").splitlines()
        for i, line in enumerate(lines):
            words = line.split()
            if len(words) < 2 or words[1].upper() != name.upper():
                continue
            if words[0].lower() == ".model":
                end = i + 1
                while end < len(lines) and lines[end].startswith("+"):
                    end += 1
                return "\n".join(lines[i:end]), words[2].upper().split("(")[0]
            if words[0].lower() == ".subckt":
                end = next(j for j in range(i, len(lines)) if lines[j].lower().startswith(".ends"))
                return "\n".join(lines[i : end + 1]), "SUBCKT"
    raise AssertionError(f"{name} is defined in no example")


def _instance_parameters(name: str) -> str:
    """Instance parameters (W=, L=) the examples give a level-1 MOSFET of model `name`."""
    for path in NETLISTS:
        for line in path.read_text(encoding="utf-8").splitlines():
            words = line.split()
            if words and words[0][0] in "Mm" and name in words:
                return " ".join(words[words.index(name) + 1 :])
    return ""


KIND_OF_TYPE = {
    "NMOS": {"nmos"},
    "PMOS": {"pmos"},
    "NPN": {"npn"},
    "PNP": {"pnp"},
    "D": {"diode", "zener"},
    "SUBCKT": {"driver", "nmos", "pmos"},
}


@pytest.mark.parametrize("name", sorted(PARTS))
def test_part_matches_its_model(name: str) -> None:
    # ngspice device types: .model NMOS/PMOS, VDMOS (pchan flag for P), NPN/PNP, D.
    text, kind = _definition(name)
    part = PARTS[name]
    if kind == "VDMOS":
        kind = "PMOS" if re.search(r"\bpchan\b", text, re.I) else "NMOS"
    assert part["kind"] in KIND_OF_TYPE[kind]
    breakdown = re.search(r"\bBV=([0-9.]+)", text, re.I)
    if part["kind"] == "zener":
        assert breakdown and float(breakdown.group(1)) == pytest.approx(_si(part["vz"], "V"))
    elif part["kind"] == "diode":
        # a model breaking down below its rated V_RRM would fail in the simulation first
        assert breakdown and float(breakdown.group(1)) >= _si(part["vrrm"], "V")


N_CHANNEL = sorted(name for name, part in PARTS.items() if part["kind"] == "nmos")


@pytest.mark.parametrize("name", N_CHANNEL)
def test_gate_charge_matches_model(name: str, tmp_path: Path) -> None:
    # Gate-charge test circuit as datasheets use it (constant gate current, drain fed by
    # a current source clamped to V_DD, V_DD at half the rated V_DS: common practice):
    # Q_g(V) = I_G * (time for V_GS to reach V). The parts library must agree with the
    # model cards to within 20 %, since checks may read either.
    part = PARTS[name]
    text, kind = _definition(name)
    vdd = 0.5 * _si(part["vds_max"], "V")
    vgs = _si(part["vgs_qg"], "V")
    i_gate, t_start = 2e-3, 1e-6
    if kind == "SUBCKT":
        device = f"X1 D G 0 {name}"
    elif "LEVEL=1" in text.upper().replace(" ", ""):
        device = f"M1 D G 0 0 {name} {_instance_parameters(name)}"
    else:
        device = f"M1 D G 0 {name}"
    deck = "\n".join(
        [
            f"gate charge of {name}",
            f"VDD DD 0 {vdd}",
            "IL DD D 5",
            "DCL D DD DCLAMP",
            ".model DCLAMP D (IS=1n N=1 RS=1m)",
            device,
            f"IG 0 G PULSE(0 {i_gate} {t_start} 1n 1n 1 2)",
            "RGG G 0 1G",
            text,
            ".tran 10n 100u",
            ".end",
        ]
    )
    w = _run_deck(deck, ["v(g)"], (), tmp_path)
    crossing = next(t for t, v in zip(w.time, w["v(g)"], strict=True) if v >= vgs)
    measured = i_gate * (crossing - t_start)
    assert measured == pytest.approx(_si(part["qg"], "C"), rel=0.20)
