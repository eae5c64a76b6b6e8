"""What a rule's testbench builder is given and what it returns, and the helpers builders share.

A builder reads the finding (its values are the claims and the operating point), the
stage (which nets and devices), the shared facts, and the design's statements; it returns
a :class:`Bench`: the edits to the design, the stimulus, the analysis, the ``.meas``
cards, the claims they check and the limits that show the failure. When the context
carries a :class:`Fix`, the same builder lays out the fixed deck: the fix's edits are
merged in and its changed operating point (a lower duty) is used for the stimulus.
"""

from __future__ import annotations

import math
from collections.abc import Mapping
from dataclasses import dataclass, field

from drivelint.checks.base import Finding
from drivelint.checks.facts import StageFacts
from drivelint.circuit.model import Circuit, Device
from drivelint.diagnostics import Span
from drivelint.netlist.statements import Element, Word
from drivelint.netlist.values import format_si
from drivelint.netlist.waveforms import Dc, Pulse, Pwl, Waveform
from drivelint.ratings.values import Value
from drivelint.stages.model import DriveStage
from drivelint.testbench.design import Design, Edit
from drivelint.testbench.measure import Card, Claim, Limit, Trace
from drivelint.testbench.stimulus import (
    Drive,
    Schedule,
    dead_time,
    drive_of,
    modulator_drive,
    partner_source,
    waveform_text,
)
from drivelint.testbench.supplies import Held, hold_floating, hold_rails, levels_of

# The period a one-shot's dead time is scaled from when the design gives none: 10 us,
# for 100 ns of dead time (stimulus.DEAD_FRACTION).
ONE_SHOT_PERIOD = 10e-6

# Bounds on what a testbench asks of the simulator, so that a deck runs in seconds.
MAX_STOP = 0.2  # s of simulated time
MAX_POINTS = 400_000  # stop / max step
MIN_STEP = 1e-9  # finer steps make ngspice fail on switch models ("timestep too small")


@dataclass(frozen=True, slots=True)
class Declined:
    """No deck (or no fixed deck) for this finding, and why."""

    reason: str


@dataclass(frozen=True, slots=True)
class Fix:
    """The finding's own suggested fix, as changes to the design."""

    description: str  # what was changed, from which of the finding's values
    edits: Mapping[Span, Edit] = field(default_factory=dict)
    directives: tuple[str, ...] = ()  # '* drivelint:' lines giving the new part's ratings
    duty: float | None = None  # the control's duty, when the fix limits it
    bounds: Mapping[str, float] = field(default_factory=dict)  # limits the new part moves


@dataclass(frozen=True, slots=True)
class Bench:
    """Everything rule-specific in one testbench deck."""

    edits: Mapping[Span, Edit]
    stop: float
    step: float
    cards: tuple[Card, ...]
    claims: tuple[Claim, ...]
    limits: tuple[Limit, ...]
    notes: tuple[str, ...]  # what the stimulus is and why, for the header
    saves: tuple[str, ...] = ()
    uic: bool = False
    # the tolerance corner the deck holds (testbench.corners): what the header says, the
    # '* drivelint:' lines that make drivelint judge the deck as written, and the numbers
    corner: tuple[str, ...] = ()
    directives: tuple[str, ...] = ()
    corner_side: str | None = None
    corner_values: Mapping[str, float] = field(default_factory=dict)
    # the series of the waveform file written with --run (the quantity a claim is about)
    traces: tuple[Trace, ...] = ()


@dataclass(frozen=True, slots=True)
class BenchContext:
    finding: Finding
    stage: DriveStage
    facts: StageFacts
    design: Design
    options: Mapping[str, float]
    fix: Fix | None = None

    @property
    def circuit(self) -> Circuit:
        """The circuit the rules judged: the design's, wires merged (``stages.wires``).
        Its nets are nets of the design, so they can be probed in the deck."""
        return self.facts.circuit

    def value(self, key: str) -> float | None:
        found = self.finding.values.get(key)
        return found.value if found is not None else None

    def claim(self, key: str, sense: str = "estimate") -> Claim | None:
        found = self.finding.values.get(key)
        if found is None or not math.isfinite(found.value):
            return None
        return Claim(key, found.value, found.unit, sense)


# -- nets ------------------------------------------------------------------------------------


def boot_vector_nets(stage: DriveStage) -> tuple[str, str] | None:
    """(boot net, switch node): V(boot) − V(sw) is the floating supply."""
    boot = stage.supply.boot_net
    return (boot, stage.source) if boot else None


# -- the design's own stimulus --------------------------------------------------------------------


def design_schedule(stage: DriveStage) -> Schedule | None:
    """When the design's own control waveform commands the switch on, where that can be
    read exactly (a pulse train, a single pulse, straight-line PWL, a DC level)."""
    control = stage.control
    waveform = control.waveform if control else None
    if control is None or waveform is None or control.modulated:
        return None  # a modulator's waveform is its carrier, not the command
    high, low = waveform.high(), waveform.low()
    threshold = (high + low) / 2
    on_high = not control.inverting

    def is_on(value: float) -> bool:
        return value > threshold if on_high else value < threshold

    if isinstance(waveform, Dc):
        return Schedule.steps((0.0, True)) if is_on(waveform.value) else Schedule.steps()
    if isinstance(waveform, Pulse):
        return _pulse_schedule(waveform, is_on)
    if isinstance(waveform, Pwl) and waveform.repeat_from is None:
        edges: list[tuple[float, bool]] = []
        state = is_on(waveform.points[0][1])
        if state:
            edges.append((0.0, True))
        for (t0, v0), (t1, v1) in zip(waveform.points, waveform.points[1:]):
            if is_on(v1) != state and v1 != v0:
                crossing = t0 + (threshold - v0) / (v1 - v0) * (t1 - t0)
                state = not state
                edges.append((crossing + waveform.delay, state))
        return Schedule.steps(*edges)
    return None


def _pulse_schedule(pulse: Pulse, is_on: object) -> Schedule | None:
    assert callable(is_on)
    if not math.isfinite(pulse.pw):
        return None
    start = pulse.td + pulse.tr / 2
    end = pulse.td + pulse.tr + pulse.pw + pulse.tf / 2
    if is_on(pulse.v2):
        if pulse.per is None:
            return Schedule.steps((start, True), (end, False))
        return Schedule.periodic(pulse.per, end - start, start)
    if pulse.per is None:
        return Schedule.steps((0.0, True), (start, False), (end, True))
    # On outside the pulses: the first on-window is cut short at t = 0, so the schedule
    # starts at the first full one.
    return Schedule.periodic(pulse.per, pulse.per - (end - start), end)


def periodic_conditions(ctx: BenchContext) -> tuple[float, float] | None:
    """(period, on-time) of the pulse train the rule judged: its frequency and maximum
    duty (the fix's duty if there is one). The refresh window is what these rules weigh,
    so the duty decides the on-time even where a condition gives a different one."""
    fsw = ctx.value("fsw") or (ctx.facts.fsw.value if ctx.facts.fsw else None)
    duty = ctx.value("duty_max") or (ctx.facts.duty_max.value if ctx.facts.duty_max else None)
    if not fsw or duty is None:
        return None
    period = 1.0 / fsw
    if ctx.fix is not None and ctx.fix.duty is not None:
        duty = ctx.fix.duty
    return period, duty * period


def matches(schedule: Schedule | None, period: float, on_time: float) -> bool:
    """Whether the design's own stimulus already is the operating point the rule used."""
    if schedule is None or schedule.period is None:
        return False
    return math.isclose(schedule.period, period, rel_tol=1e-3) and math.isclose(
        schedule.on_time, on_time, rel_tol=1e-3
    )


# -- writing the stimulus -------------------------------------------------------------------------


@dataclass(frozen=True, slots=True)
class Stimulus:
    edits: dict[Span, Edit]
    notes: tuple[str, ...]


def _source_line(
    design: Design, element: Element, waveform: str, name: str | None = None
) -> str | None:
    nodes = element.fields[:2]
    if len(nodes) < 2 or not all(isinstance(n, Word) for n in nodes):
        return None
    first, second = nodes
    assert isinstance(first, Word) and isinstance(second, Word)
    return f"{name or design.raw_name(element)} {first.raw} {second.raw} {waveform}"


def describe(schedule: Schedule) -> str:
    if schedule.period is not None:
        duty = schedule.on_time / schedule.period
        return (
            f"on for {format_si(schedule.on_time, 's')} every {format_si(schedule.period, 's')} "
            f"({format_si(1 / schedule.period, 'Hz')}, duty {duty:.2%}), "
            f"first turn-on at {format_si(schedule.delay, 's')}"
        )
    parts = [f"{'on' if on else 'off'} at {format_si(t, 's')}" for t, on in schedule.edges]
    return ", ".join(parts) if parts else "held off"


def _command(
    ctx: BenchContext,
) -> tuple[Device, Element, Drive | None, str, str] | Declined:
    """The statement that commands the switch, the levels it commands with, the name the
    rewritten source takes, and what it is.

    An independent voltage source keeps its name. A modulator (a behavioural comparator or
    error amplifier, whose duty is the loop's) is replaced at its own statement by an
    independent source between the same nodes, carrying the waveform the rule assumed;
    its levels come from its expression over the extremes of its inputs.
    """
    stage, design, circuit = ctx.stage, ctx.design, ctx.circuit
    control = stage.control
    source = circuit.devices.get(control.source) if control and control.source else None
    element = design.element_of(source.name) if source else None
    if control is None or source is None or element is None:
        return Declined("the stage's command cannot be traced to a source")
    if source.kind == "vsource":
        return source, element, None, design.raw_name(element), source.name
    from drivelint.stages.behaviour import is_voltage_source

    if not (control.modulated and is_voltage_source(circuit, source)):
        return Declined("the stage's control source is not an independent voltage source")
    drive = modulator_drive(circuit, source, control.inverting)
    if drive is None:
        return Declined(
            f"the output levels of the modulator {source.name} cannot be told from its expression"
        )
    taken = {n.rsplit(".", 1)[-1] for n in design.circuit.devices}
    name = f"v_tb_{source.name.rsplit('.', 1)[-1]}"
    while name in taken:
        name += "_"
    return source, element, drive, name.upper(), f"the modulator {source.name}"


def stimulus(ctx: BenchContext, schedule: Schedule, why: str) -> Stimulus | Declined:
    """Edits that make the stage's command (and its bridge partner's) follow ``schedule``;
    the partner gets the complement with the design's dead time, unless it follows the
    same command through the design's own dead-time logic."""
    stage, design = ctx.stage, ctx.design
    circuit = ctx.circuit
    control = stage.control
    command = _command(ctx)
    if isinstance(command, Declined):
        return command
    source, element, given_drive, written_name, what = command
    assert control is not None
    low_side = next((r for r in stage.refresh if r.kind == "low-side switch"), None)
    same_command = (
        low_side is not None
        and low_side.command is not None
        and low_side.command.source == source.name
    )
    found = None if same_command else partner_source(circuit, stage, ctx.facts.by_net)
    partner_wave: Waveform | None = found[1].waveform if found else None
    drive = given_drive or drive_of(source.waveform, control.inverting, [partner_wave])
    if drive is None:
        return Declined(f"the logic levels of {source.name} cannot be told from its waveform")
    line = _source_line(design, element, waveform_text(schedule, drive), written_name)
    if line is None:
        return Declined(f"{source.name}'s nodes are not plain node names")
    notes = [f"{written_name.lower()}: {describe(schedule)} ({why})"]
    if given_drive is not None:
        notes.append(
            f"{what} is replaced by the independent source {written_name.lower()} between "
            f"the same nodes (levels {format_si(drive.off, 'V')} off, "
            f"{format_si(drive.on, 'V')} on, from its expression): the loop sets the duty "
            "in the design, the rule assumed this one"
        )
    shared = design.produced_by(element)
    if len(shared) > 1:
        notes.append(f"{source.name} is one statement for {', '.join(shared)}: all follow it")
    edits = {element.span: Edit(lines=(line,), note=f"{what} drives {why}")}
    if same_command:
        assert low_side is not None
        notes.append(
            f"the bridge partner {low_side.devices[0]} follows the same command through the "
            "design's own logic (its dead time included)"
        )
    elif found is not None:
        partner, partner_source_device, partner_inverting = found
        partner_element = design.element_of(partner_source_device.name)
        partner_drive = drive_of(partner_wave, partner_inverting, [source.waveform])
        if partner_element is None or partner_drive is None:
            return Declined(f"the command of the bridge partner {partner.name} cannot be rewritten")
        dead = _dead_time(source.waveform, partner_wave, schedule)
        partner_line = _source_line(
            design,
            partner_element,
            waveform_text(schedule.complement(dead), partner_drive, initially_on=True),
        )
        if partner_line is None:
            return Declined(f"{partner_source_device.name}'s nodes are not plain node names")
        edits[partner_element.span] = Edit(
            lines=(partner_line,),
            note=f"{partner_source_device.name} drives the bridge partner {partner.name}: "
            "the complement",
        )
        notes.append(
            f"{partner_source_device.name} commands the bridge partner {partner.name}: on "
            f"whenever {stage.switch} is off, {format_si(dead, 's')} dead time"
        )
    elif low_side is not None:
        return Declined(
            "the command of the low-side partner cannot be traced, so the leg cannot be "
            "driven without risking cross-conduction"
        )
    return Stimulus(edits, tuple(notes))


def _dead_time(main: Waveform | None, partner: Waveform | None, schedule: Schedule) -> float:
    """The dead time a rewritten leg keeps between its two commands: the design's own
    where its pulse trains show it, at most a quarter of the off-time at each edge (the
    partner must get some of it). A one-shot has no period of its own: the design's pulse
    trains give it if they can, else a short one (its length hardly matters for one edge)."""
    own_period = main.period() if main else None
    period = schedule.period or own_period or ONE_SHOT_PERIOD
    dead = dead_time(main, partner, period)
    if schedule.period is not None:
        dead = min(dead, (schedule.period - schedule.on_time) / 4)
    return dead


def partner_dead_time(ctx: BenchContext, schedule: Schedule) -> float:
    """The dead time :func:`stimulus` gives the bridge partner for ``schedule`` (0 when
    the partner is not commanded separately)."""
    low_side = next((r for r in ctx.stage.refresh if r.kind == "low-side switch"), None)
    control = ctx.stage.control
    if low_side is None or control is None:
        return 0.0
    if low_side.command is not None and low_side.command.source == control.source:
        return 0.0
    found = partner_source(ctx.circuit, ctx.stage, ctx.facts.by_net)
    source = ctx.circuit.devices.get(control.source) if control.source else None
    if found is None or source is None:
        return 0.0
    return _dead_time(source.waveform, found[1].waveform, schedule)


def held_supplies(ctx: BenchContext, stress: bool, supply_corner: bool = True) -> Held | Declined:
    """Edits that hold the bus and the auxiliary rail at the levels the rule judged them
    at: the bus at its highest (every rule takes it there), the auxiliary rail at its
    highest for a stress figure and its lowest for a hold or headroom figure. A rail given
    as a waveform (a surge, a dip) is held at that level for the whole run; a rail the
    rule took from a condition or a tolerance corner is moved to it (with
    ``supply_corner`` false, a figure that takes nothing from the gate supply's corner, the
    auxiliary rail stays at its nominal level)."""
    stage, facts = ctx.stage, ctx.facts
    pairs: dict[str, Value | None] = {}
    if stage.bus is not None:
        pairs[stage.bus.net] = facts.v_bus
    aux = stage.supply.aux
    if stage.supply.kind in ("bootstrap", "charge-pump") and aux is not None:
        if aux.net not in (stage.source, stage.supply.boot_net):
            level = facts.v_aux_max if stress else facts.v_aux
            pairs.setdefault(aux.net, level if supply_corner else facts.v_aux_nominal)
    why = (
        "the level the rule's stress figures use" if stress else "the level the rule's figures use"
    )
    held = hold_rails(ctx.design, ctx.circuit, levels_of(pairs), why)
    if isinstance(held, str):
        return Declined(held)
    if stage.supply.kind == "isolated" and stage.supply.source:
        level = facts.v_boot_max if stress else facts.v_boot0
        isolated = hold_floating(
            ctx.design, ctx.circuit, stage.supply.source, stage.supply.boot_net, level, why
        )
        if isinstance(isolated, str):
            return Declined(isolated)
        held = Held({**held.edits, **isolated.edits}, (*held.notes, *isolated.notes))
    negative = stage.supply.negative
    if negative is not None and negative.source:
        # the turn-off supply below the source, at the corner the rule took it: furthest
        # from the source for a stress figure, nearest for the others
        off = facts.v_off_negative if stress else facts.v_off_nearest
        magnitude = Value(-off.value, "V", off.origin) if off is not None else None
        below = hold_floating(
            ctx.design, ctx.circuit, negative.source, stage.source, magnitude, why
        )
        if isinstance(below, str):
            return Declined(below)
        held = Held({**held.edits, **below.edits}, (*held.notes, *below.notes))
    return held


def analysis_step(design: Design, stop: float, shortest: float) -> float:
    """The largest internal time step: fine enough for the shortest interval of the
    stimulus, not finer than the design's own print step asks, bounded in count."""
    tran = design.design_tran()
    design_step = math.inf
    if tran is not None and tran.fields and isinstance(tran.fields[0], Word):
        from drivelint.netlist.values import parse_number

        parsed = parse_number(tran.fields[0].text)
        if parsed and parsed > 0:
            design_step = parsed
    step = min(design_step, shortest / 5, stop / 1000)
    return max(step, stop / MAX_POINTS, MIN_STEP)


def charge_time(ctx: BenchContext) -> float:
    """How long the bootstrap takes to charge through its path: five refresh time
    constants (the finding's, else series resistance and capacitor), at least 10 µs."""
    tau = ctx.value("refresh_tau")
    if tau is None:
        facts = ctx.facts
        c = facts.c_hold.value if facts.c_hold else 0.0
        r = ctx.stage.supply.series_resistance or 0.0
        loads = [x.resistance for x in ctx.stage.refresh if x.resistance is not None]
        r += min((x for x in loads if math.isfinite(x)), default=0.0)
        tau = r * c
    return min(max(5 * tau, 10e-6), MAX_STOP / 4)
