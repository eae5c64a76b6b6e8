"""The control stimulus of a testbench: when the switch is commanded on, written as the
control source's own waveform (and, for a bridge leg, its partner's complement).

A :class:`Schedule` says when the floating switch is on: a periodic train (period,
on-time, first turn-on) or a list of edges. :class:`Drive` holds the levels and edge
times of the source that commands it; an inverting control path (an active-low input)
swaps which level means "on". Every time below is where the edge crosses the midpoint of
the two levels, which is where drivelint measures on-times, so a deck and the rule agree
on the on-time the stimulus demands.
"""

from __future__ import annotations

import math
from collections.abc import Mapping, Sequence
from dataclasses import dataclass

from drivelint.circuit.model import GROUND, Circuit, Device
from drivelint.netlist.waveforms import Pulse, Waveform
from drivelint.stages.model import DriveStage
from drivelint.stages.recognise import driver_input

DEFAULT_EDGE = 10e-9  # edge time for a source that had no pulse edges of its own
# Dead time between a leg's two commands when the design's own cannot be read off its
# waveforms: a small fraction of the period within the range of common drivers.
DEAD_FRACTION = 0.01
DEAD_MIN, DEAD_MAX = 20e-9, 1e-6
# Series resistors followed from a gate (or a driver input) back to its command source.
MAX_RESISTOR_HOPS = 3


@dataclass(frozen=True, slots=True)
class Drive:
    """The levels of a control source and its edge times."""

    on: float
    off: float
    rise: float = DEFAULT_EDGE  # off -> on
    fall: float = DEFAULT_EDGE  # on -> off


@dataclass(frozen=True, slots=True)
class Schedule:
    """When the switch is commanded on.

    Periodic: on for ``on_time`` every ``period`` from ``delay``. Edges: off at t = 0,
    then each ``(time, on)`` switches it (one-shot turn-ons, DC enables).
    """

    period: float | None = None
    on_time: float = 0.0
    delay: float = 0.0
    edges: tuple[tuple[float, bool], ...] = ()

    @classmethod
    def periodic(cls, period: float, on_time: float, delay: float) -> Schedule:
        return cls(period=period, on_time=on_time, delay=delay)

    @classmethod
    def steps(cls, *edges: tuple[float, bool]) -> Schedule:
        return cls(edges=tuple(edges))

    def on_windows(self, until: float) -> list[tuple[float, float]]:
        """The on-windows (start, end) up to ``until``."""
        windows: list[tuple[float, float]] = []
        if self.period is not None:
            begin = self.delay
            while begin < until:
                windows.append((begin, begin + self.on_time))
                begin += self.period
            return windows
        start: float | None = None
        for time, on in self.edges:
            if on and start is None:
                start = time
            elif not on and start is not None:
                windows.append((start, time))
                start = None
        if start is not None:
            windows.append((start, math.inf))
        return windows

    def complement(self, dead: float) -> Schedule:
        """The partner's schedule: on whenever this one is off, ``dead`` apart."""
        if self.period is not None:
            return Schedule(
                period=self.period,
                on_time=self.period - self.on_time - 2 * dead,
                delay=self.delay + self.on_time + dead,
            )
        edges: list[tuple[float, bool]] = []
        for time, on in self.edges:
            edges.append((time - dead, False) if on else (time + dead, True))
        return Schedule(edges=tuple(edges))


def number(value: float) -> str:
    """A SPICE number, exact enough and the same on every run."""
    if value == 0:
        return "0"
    return f"{value:.9g}"


def waveform_text(schedule: Schedule, drive: Drive, initially_on: bool = False) -> str:
    """The source's waveform: ``PULSE(...)`` for a periodic schedule, else ``PWL(...)``.

    ``initially_on`` is for a partner whose schedule is the complement of a periodic one:
    it is on from t = 0 until its first off-edge.
    """
    rise, fall = drive.rise, drive.fall
    if schedule.period is not None:
        if initially_on:
            # The pulse is the off-window: from this on-window's end to the next start.
            off_start = schedule.delay + schedule.on_time - schedule.period
            off_width = schedule.period - schedule.on_time
            td = off_start - fall / 2
            pw = off_width - (rise + fall) / 2
            fields = (drive.on, drive.off, td, fall, rise, pw, schedule.period)
        else:
            td = schedule.delay - rise / 2
            pw = schedule.on_time - (rise + fall) / 2
            fields = (drive.off, drive.on, td, rise, fall, pw, schedule.period)
        return "PULSE(" + " ".join(number(x) for x in fields) + ")"
    level = drive.on if initially_on else drive.off
    edges = list(schedule.edges)
    while edges and edges[0][0] <= 0:  # a state from the start, not an edge
        level = drive.on if edges.pop(0)[1] else drive.off
    points: list[tuple[float, float]] = [(0.0, level)]
    for time, on in edges:
        edge = rise if on else fall
        target = drive.on if on else drive.off
        start = max(time - edge / 2, points[-1][0])
        points.append((start, level))
        points.append((start + edge, target))
        level = target
    return "PWL(" + " ".join(f"{number(t)} {number(v)}" for t, v in points) + ")"


# -- the control source and its bridge partner ---------------------------------------------------


def drive_of(
    waveform: Waveform | None, inverting: bool, others: Sequence[Waveform | None] = ()
) -> Drive | None:
    """The levels a control source uses; from its partners' when it is a plain DC level.

    A DC command says only where it rests, not where it would go: the logic levels are
    then taken from the other commands of the same leg (a DC-held partner at 5 V says the
    logic high is 5 V). None when no level other than the resting one is known.
    """
    if waveform is None:
        return None
    high, low = waveform.high(), waveform.low()
    rise = fall = DEFAULT_EDGE
    if isinstance(waveform, Pulse):
        rise, fall = waveform.tr or DEFAULT_EDGE, waveform.tf or DEFAULT_EDGE
        if waveform.v2 < waveform.v1:
            rise, fall = fall, rise  # tr is the v1 -> v2 edge, which here falls
    if not (math.isfinite(high) and math.isfinite(low)):
        return None
    if high == low:
        levels = [high, low] + [w.high() for w in others if w] + [w.low() for w in others if w]
        levels = [v for v in levels if math.isfinite(v)]
        high, low = max(levels + [0.0]), min(levels + [0.0])
        if high == low:
            return None
    if inverting:
        return Drive(on=low, off=high, rise=fall, fall=rise)
    return Drive(on=high, off=low, rise=rise, fall=fall)


def _resistor_reach(
    circuit: Circuit, by_net: Mapping[str, Sequence[Device]], start: str
) -> set[str]:
    """Nets reachable from ``start`` through at most a few series resistors."""
    seen = {start}
    frontier = [start]
    for _ in range(MAX_RESISTOR_HOPS):
        nxt = []
        for net in frontier:
            for device in by_net.get(net, ()):
                if device.kind != "resistor":
                    continue
                for other in device.nets:
                    if other not in seen and other != GROUND and other not in circuit.rails:
                        seen.add(other)
                        nxt.append(other)
        frontier = nxt
    return seen


def _command_source(
    circuit: Circuit, by_net: Mapping[str, Sequence[Device]], nets: set[str]
) -> Device | None:
    """An independent voltage source from one of ``nets`` to ground: a command."""
    found = sorted(
        {
            device.name
            for net in nets
            for device in by_net.get(net, ())
            if device.kind == "vsource"
            and device.waveform is not None
            and GROUND in device.nets
            and set(device.nets) - {GROUND} <= nets
        }
    )
    return circuit.devices[found[0]] if len(found) == 1 else None


def _switch_control(
    circuit: Circuit, by_net: Mapping[str, Sequence[Device]], nets: set[str]
) -> tuple[str, bool] | None:
    """A voltage-controlled switch that pulls one of ``nets`` up to a positive rail (the
    upper switch of a totem): its control net, and whether a high command turns it off."""
    for net in sorted(nets):
        for device in by_net.get(net, ()):
            if device.kind != "switch":
                continue
            p, n, cp, cn = (device.net(pin) for pin in ("p", "n", "cp", "cn"))
            other = n if p == net else p if n == net else None
            if other is None or circuit.rails.get(other, 0.0) <= 0:
                continue
            # It conducts while V(cp, cn) > VT: with the command on cp, VT >= 0 is a high
            # command turning it on; with the command on cn, VT < 0 is a low one. Other
            # arrangements never or always conduct over a logic swing: not recognised.
            vt = device.model.params.get("vt", 0.0) if device.model else 0.0
            if cn == GROUND and cp and vt >= 0:
                return cp, False
            if cp == GROUND and cn and vt < 0:
                return cn, True
    return None


def partner_source(
    circuit: Circuit, stage: DriveStage, by_net: Mapping[str, Sequence[Device]]
) -> tuple[Device, Device, bool] | None:
    """The low-side partner of a bridge leg, the source that commands it, and whether
    that command is inverted on its way; None when it cannot be traced.

    From the partner's gate, series resistors lead to a command source, to the low-side
    output of the stage's driver IC (whose low-side input leads on to one), or to a
    switch totem whose upper switch is controlled from one.
    """
    partner = next((r for r in stage.refresh if r.kind == "low-side switch"), None)
    device = circuit.devices.get(partner.devices[0]) if partner and partner.devices else None
    gate = device.net("g") if device else None
    if device is None or gate is None:
        return None
    reach = _resistor_reach(circuit, by_net, gate)
    inverting = False
    driver = stage.driver
    low_out = driver.pins.get("low_out") if driver else None
    low_in, active_low = driver_input(driver, "low") if driver else (None, False)
    if low_out is not None and low_in is not None and low_out in reach:
        reach = _resistor_reach(circuit, by_net, low_in)
        inverting = active_low
    source = _command_source(circuit, by_net, reach)
    if source is None:
        totem = _switch_control(circuit, by_net, reach)
        if totem is not None:
            net, inverting = totem
            source = _command_source(circuit, by_net, _resistor_reach(circuit, by_net, net))
    control = stage.control.source if stage.control else None
    if source is None or source.name == control:
        return None
    return device, source, inverting


def dead_time(main: Waveform | None, partner: Waveform | None, period: float) -> float:
    """The design's own dead time between a leg's commands, or a default.

    Read off two pulse trains of the same period: the gap between the partner's
    off-edge and the main command's on-edge (and the other way round at turn-off).
    """
    default = min(max(DEAD_FRACTION * period, DEAD_MIN), DEAD_MAX)
    if not (isinstance(main, Pulse) and isinstance(partner, Pulse)):
        return default
    if main.per is None or partner.per is None or not math.isclose(main.per, partner.per):
        return default

    def window(pulse: Pulse) -> tuple[float, float]:  # the v2 segment, midpoint to midpoint
        return pulse.td + pulse.tr / 2, pulse.td + pulse.tr + pulse.pw + pulse.tf / 2

    main_start, main_end = window(main)
    if main.v2 < main.v1:
        main_start, main_end = main_end, main_start + main.per
    part_start, part_end = window(partner)
    if partner.v2 > partner.v1:  # its pulse is the on-window; the off-window is the rest
        part_start, part_end = part_end, part_start + partner.per
    per = main.per
    lead = (main_start - part_start) % per
    trail = (part_end - main_end) % per
    gap = min(lead, trail)
    return gap if 0 < gap < 0.25 * per else default


# -- a modulator's output ------------------------------------------------------------------------

# Levels each net a modulator reads is tried at, as multiples of the circuit's largest rail:
# the extremes of any input a comparator or an error amplifier could see, and zero.
PROBE_SCALES = (-2.0, -0.5, 0.0, 0.5, 2.0)
MAX_PROBED_NETS = 3  # nets varied together (5³ evaluations at most)


def modulator_levels(circuit: Circuit, device: Device) -> tuple[float, float] | None:
    """(lowest, highest) output of a behavioural modulator over the extremes of its inputs.

    A comparator's expression gives its two logic levels; an error amplifier with output
    limits gives those limits. Each net the expression reads is set to a few levels
    spanning the circuit's rails, all combinations tried (pure evaluation by drivelint's
    own expression grammar). None when it reads too many nets, cannot be evaluated, or
    never changes.
    """
    from itertools import product

    from drivelint.stages import behaviour

    nets = behaviour.referenced_nets(circuit, device)
    if not nets or len(nets) > MAX_PROBED_NETS:
        return None
    scale = max([abs(v) for v in circuit.rails.values()] + [1.0])
    levels = [s * scale for s in PROBE_SCALES]
    outputs = []
    for combination in product(levels, repeat=len(nets)):
        out = behaviour.value(circuit, device, dict(zip(nets, combination)))
        if out is not None and math.isfinite(out):
            outputs.append(out)
    if not outputs or max(outputs) == min(outputs):
        return None
    return min(outputs), max(outputs)


def modulator_drive(circuit: Circuit, device: Device, inverting: bool) -> Drive | None:
    """The levels a modulator's output commands the switch with, from its expression."""
    found = modulator_levels(circuit, device)
    if found is None:
        return None
    low, high = found
    return Drive(on=low, off=high) if inverting else Drive(on=high, off=low)
