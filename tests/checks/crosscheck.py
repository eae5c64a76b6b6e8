"""What ngspice shows of one floating stage: the numbers drivelint's rules compute, measured.

Test support for the cross-checks (no tests here). A deck is simulated once with the
vectors a stage needs (boot, gate and switch-node voltages, the bootstrap diode's voltage
and current), and the steady-state cycles at the end of the run are measured the way a
bench engineer reads a scope:

- the boot voltage V(boot) − V(source) as the switch node leaves its low level (the end of
  the recharge) and as it falls again (the end of the on-time): their difference is the
  droop per cycle, the second the sustained boot voltage;
- the highest and lowest gate–source voltage over those cycles;
- the highest reverse voltage across the bootstrap diode, V(k) − V(a);
- the charge that flows backwards through the diode in each cycle (reverse recovery).

Names are drivelint's (lower case, hierarchical with dots); ngspice reads the same node
names, and a device inside a subcircuit is ``@d.x1.d2[id]`` in ngspice's own spelling.
"""

from __future__ import annotations

import math
from collections.abc import Sequence
from dataclasses import dataclass
from pathlib import Path

from simulator import Waves, run_transient

from drivelint.checks.facts import StageFacts
from drivelint.pipeline import check_path
from drivelint.ratings.values import Value
from drivelint.stages.model import DriveStage

# ngspice runs the netlist as written: the facts it is compared with are taken at the
# nominal corner (checks/corners.py), not at the tolerance corners the rules judge.
NOMINAL = {"corners": Value(0.0, "1", "nominal corner: the simulation runs the netlist as written")}


def device_current(name: str, quantity: str = "id") -> str:
    """ngspice's vector for a device quantity: ``@d_bst[id]``, ``@d.xlega.d_bt[id]``."""
    if "." not in name:
        return f"@{name}[{quantity}]"
    letter = name.rsplit(".", 1)[-1][0]
    return f"@{letter}.{name}[{quantity}]"


@dataclass(frozen=True, slots=True)
class StageNets:
    """The nets and devices of one stage that the measurements read."""

    source: str
    gate: str
    boot: str | None
    diode: str | None
    anode: str | None
    cathode: str | None

    @property
    def vectors(self) -> tuple[str, ...]:
        out = [f"v({self.gate},{self.source})", f"v({self.source})"]
        if self.boot:
            out.append(f"v({self.boot},{self.source})")
        if self.anode and self.cathode:
            out.append(f"v({self.cathode},{self.anode})")
        if self.diode:
            out.append(device_current(self.diode))
        return tuple(out)

    @property
    def saves(self) -> tuple[str, ...]:
        return (device_current(self.diode),) if self.diode else ()


def stage_nets(stage: DriveStage, facts: StageFacts) -> StageNets:
    diode = facts.diode
    return StageNets(
        source=stage.source,
        gate=stage.gate,
        boot=stage.supply.boot_net,
        diode=diode.name if diode else None,
        anode=diode.net("a") if diode else None,
        cathode=diode.net("k") if diode else None,
    )


@dataclass(frozen=True, slots=True)
class Measured:
    """Steady-state figures of one switching stage, each a mean over the last cycles."""

    cycles: int
    v_boot_recharged: float | None  # V(boot,source) before the gate starts to rise
    v_boot_end: float | None  # V(boot,source) as the node falls: the sustained level
    droop: float | None  # the first minus the second
    vgs_max: float
    vgs_min: float
    diode_reverse: float | None  # highest V(k) − V(a) after the start-up
    recovery_charge: float | None  # charge back through the diode as the node rises, less
    # the junction's depletion charge (returned when the node falls again)
    node_low: float
    node_high: float
    first_peak: float | None  # V(boot,source) before the first kept cycle's turn-on
    peaks: tuple[float, ...]
    valleys: tuple[float, ...]
    earliest_peak: float | None  # the same before the run's first complete on-time
    # the node rose before the gate did in every kept cycle (a load current lifted it
    # through the switch's body diode in the dead time): the switch turned on at zero
    # voltage, and its gate took no Miller charge
    soft_turn_on: bool = False


def _spans(time: Sequence[float], values: Sequence[float], level: float) -> list[tuple[int, int]]:
    """Index spans (first, last) in which ``values`` stays above ``level``, complete only."""
    found: list[tuple[int, int]] = []
    start: int | None = None
    for i, value in enumerate(values):
        if value > level and start is None:
            start = i
        elif value <= level and start is not None:
            if start > 0:
                found.append((start, i - 1))
            start = None
    return found


def lowest_held(
    time: Sequence[float], values: Sequence[float], hold: float, window: range
) -> float:
    """The lowest level the waveform stays at or below for at least ``hold`` seconds.

    A switching edge couples spikes of tens of nanoseconds into the gate through C_gd
    (what the second rule set's induced-turn-on rule is about); the gate rules judge the
    levels the drive paths hold, which this reads: min over t of max(v) on [t, t + hold].
    """
    from collections import deque

    best = math.inf
    queue: deque[int] = deque()
    j = window.start
    for i in window:
        while j < window.stop and time[j] <= time[i] + hold:
            while queue and values[queue[-1]] <= values[j]:
                queue.pop()
            queue.append(j)
            j += 1
        while queue and queue[0] < i:
            queue.popleft()
        if time[j - 1] - time[i] >= hold * 0.999 and queue:
            best = min(best, values[queue[0]])
    return best


def depletion_charge(
    cjo: float, vj: float, m: float, v_from: float, v_to: float, fc: float = 0.5
) -> float:
    """Charge on a SPICE junction capacitance between two junction voltages (ngspice manual,
    diode model: Q = CJO·VJ·(1 − (1 − V/VJ)^(1−M))/(1 − M) below FC·VJ, and its linear
    extension above)."""

    def charge(v: float) -> float:
        if v < fc * vj:
            return cjo * vj * (1 - (1 - v / vj) ** (1 - m)) / (1 - m)
        f1 = vj * (1 - (1 - fc) ** (1 - m)) / (1 - m)
        f2 = (1 - fc) ** (1 + m)
        f3 = 1 - fc * (1 + m)
        return cjo * f1 + cjo / f2 * (f3 * (v - fc * vj) + m / (2 * vj) * (v * v - (fc * vj) ** 2))

    return charge(v_from) - charge(v_to)


def measure_switching(
    w: Waves, nets: StageNets, cycles: int = 4, junction: tuple[float, float, float] | None = None
) -> Measured:
    """The last ``cycles`` complete on-times of the switch node (fewer if the run has fewer).

    ``junction`` is the bootstrap diode's (CJO, VJ, M), to take its depletion charge out of
    the charge measured at each rising edge.
    """
    node = w[f"v({nets.source})"]
    n = len(node)
    tail = node[n // 2 :]
    low, high = min(tail), max(tail)
    level = low + 0.5 * (high - low)
    near_low = low + 0.1 * (high - low)
    every = _spans(w.time, node, level)
    assert every, "the switch node never switches"
    # ringing or a body diode's brief conduction is not an on-time
    longest = max(b - a for a, b in every)
    real = [s for s in every if s[1] - s[0] >= 0.5 * longest]
    spans = real[-cycles:]
    first = spans[0][0]
    window = range(max(0, first - 1), spans[-1][1] + 1)
    vgs = w[f"v({nets.gate},{nets.source})"]
    vgs_high = max(vgs[i] for i in window)
    vgs_low = min(vgs[i] for i in window)
    gate_low = vgs_low + 0.1 * (vgs_high - vgs_low)
    boot = w[f"v({nets.boot},{nets.source})"] if nets.boot else None
    starts, ends = [], []
    soft = all(vgs[rise] < gate_low for rise, _ in spans)
    previous_fall = [every[every.index(s) - 1][1] if every.index(s) > 0 else 0 for s in spans]
    earliest = None
    if boot is not None:
        first_rise = real[0][0]
        stop0 = every[every.index(real[0]) - 1][1] if every.index(real[0]) > 0 else 0
        k = first_rise
        while k > stop0 and node[k] > near_low:
            k -= 1
        while k > stop0 and vgs[k] > gate_low:
            k -= 1
        earliest = max(boot[j] for j in range(k, first_rise + 1))
        for (rise, fall), stop in zip(spans, previous_fall, strict=True):
            # back from the rise, past the node's low stretch, to where the gate is still
            # low: the end of the recharge is the highest point from there to the rise
            i = rise
            while i > stop and node[i] > near_low:
                i -= 1
            while i > stop and vgs[i] > gate_low:
                i -= 1
            starts.append(max(boot[k] for k in range(i, rise + 1)))
            ends.append(boot[fall])
    reverse = None
    if nets.anode and nets.cathode:
        skip = next(i for i, t in enumerate(w.time) if t >= 0.1 * w.time[-1])
        reverse = max(w[f"v({nets.cathode},{nets.anode})"][skip:])
    q_rr = None
    if nets.diode:
        current = w[device_current(nets.diode)]
        back = []
        for (rise, fall), stop in zip(spans, previous_fall, strict=True):
            # from where the gate starts to rise: a diode refilling a dead-time dip stops
            # and recovers while the node is still close to its low level
            i = rise
            while i > stop and node[i] > near_low:
                i -= 1
            while i > stop and vgs[i] > gate_low:
                i -= 1
            mid = (rise + fall) // 2
            charge = -sum(
                (w.time[k + 1] - w.time[k]) * min(0.0, (current[k] + current[k + 1]) / 2)
                for k in range(i, mid)
            )
            if junction is not None and nets.anode and nets.cathode:
                v_diode = w[f"v({nets.cathode},{nets.anode})"]
                charge -= depletion_charge(*junction, -v_diode[i], -v_diode[mid])
            back.append(max(charge, 0.0))
        q_rr = sum(back) / len(back)

    def mean(xs: Sequence[float]) -> float | None:
        return sum(xs) / len(xs) if xs else None

    return Measured(
        cycles=len(spans),
        v_boot_recharged=mean(starts),
        v_boot_end=mean(ends),
        droop=mean([a - b for a, b in zip(starts, ends, strict=True)]) if starts else None,
        vgs_max=max(vgs[i] for i in window),
        vgs_min=lowest_held(w.time, vgs, 200e-9, window),
        diode_reverse=reverse,
        recovery_charge=q_rr,
        node_low=low,
        node_high=high,
        first_peak=starts[0] if starts else None,
        peaks=tuple(starts),
        valleys=tuple(ends),
        earliest_peak=earliest,
        soft_turn_on=soft,
    )


def simulate(deck: Path, nets: StageNets, workdir: Path, extra: Sequence[str] = ()) -> Waves:
    text = deck.read_text(encoding="utf-8")
    return run_transient(text, (*nets.vectors, *extra), workdir, nets.saves)


def facts_of(deck: Path, switch: str) -> tuple[DriveStage, StageFacts]:
    """The stage of ``switch`` and its facts, built exactly as ``drivelint check`` builds them."""
    from drivelint.checks.facts import devices_by_net
    from drivelint.config import find_config, load_config
    from drivelint.pipeline import parts_for
    from drivelint.ratings.directives import parse_directives
    from drivelint.ratings.ratings import Ratings
    from drivelint.stages.wires import collapse_wires

    result = check_path(deck, load_config(find_config(deck)))
    (stage,) = [s for s in result.stages if s.switch == switch]
    # the rules see the circuit recognition saw: wires merged, rails behind leads held
    circuit = collapse_wires(result.circuit).circuit
    directives = parse_directives(circuit.directives)
    facts = StageFacts(
        stage,
        circuit,
        Ratings(parts_for(deck), directives),
        directives,
        dict(NOMINAL),
        devices_by_net(circuit),
    )
    return stage, facts


def junction_of(facts: StageFacts) -> tuple[float, float, float] | None:
    """(CJO, VJ, M) of the bootstrap diode's model, SPICE defaults VJ = 1 V, M = 0.5."""
    model = facts.diode.model if facts.diode else None
    if model is None or not model.params.get("cjo"):
        return None
    p = model.params
    return p["cjo"], p.get("vj", 1.0), p.get("m", 0.5)


def computed_values(stage: DriveStage, facts: StageFacts) -> dict[str, float]:
    """drivelint's figures for the stage, from the same functions the rules use."""
    from drivelint.checks.diode import reverse_voltage
    from drivelint.checks.gate_levels import gate_extremes
    from drivelint.checks.refresh import sustained_boot
    from drivelint.checks.registry import registry

    out: dict[str, float] = {}
    if facts.v_boot0 is not None:
        out["v_boot0"] = facts.v_boot0.value
    if facts.droop_per_cycle is not None:
        out["droop"] = facts.droop_per_cycle.value
    sustained = sustained_boot(stage, facts)
    if sustained is not None:
        out["sustained"] = sustained.valley
        out["sustained_peak"] = sustained.peak
    options = registry()["gate-overvoltage"].option_values()
    extremes = gate_extremes(stage, facts, options)
    if extremes.vgs_pos is not None:
        out["vgs_max"] = extremes.vgs_pos
    if extremes.vgs_neg is not None:
        out["vgs_min"] = extremes.vgs_neg
    reverse = reverse_voltage(facts) if stage.supply.kind == "bootstrap" else None
    if reverse is not None:
        out["v_reverse"] = reverse.value
    if facts.recovery_charge is not None:
        out["q_rr"] = facts.recovery_charge.value
    if facts.pump_output is not None:
        out["pump_output"] = facts.pump_output.value
    return out


def predicted_valleys(
    stage: DriveStage, facts: StageFacts, first_peak: float, cycles: int
) -> list[float] | None:
    """The refresh model's valley in each of ``cycles`` cycles from a measured first peak:
    the same cycle map whose fixed point the rule reports."""
    from drivelint.checks.refresh import sustained_boot
    from drivelint.physics import bootstrap as boot_physics

    found = sustained_boot(stage, facts)
    if found is None or facts.off_time is None:
        return None
    peak = first_peak
    out = []
    for _ in range(cycles):
        step = boot_physics.boot_cycle(
            peak,
            found.v_target.value,
            found.q_cycle.value,
            found.dq_dv,
            found.c,
            found.r_charge,
            facts.off_time.value,
            facts.c_gate.value,
        )
        out.append(step.valley)
        peak = step.peak
    return out
