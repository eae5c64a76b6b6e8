"""One self-contained HTML page for a library scan.

The page carries a summary, a sortable table of designs, every finding with its numbers,
origins and fix, a block diagram of each recognised stage that has findings, and for the
bootstrap hold rules a plot of the boot voltage over the on-time. Everything is inline
(CSS, a few lines of JS, SVG) and a Content-Security-Policy forbids any fetch, so the file
can be mailed, archived or opened offline and shows the same thing everywhere.
"""

from __future__ import annotations

import math
from collections import Counter
from collections.abc import Iterable, Mapping, Sequence
from dataclasses import dataclass, replace
from html import escape
from typing import TYPE_CHECKING

from drivelint import __version__
from drivelint.checks.base import Finding
from drivelint.checks.runner import CheckResult
from drivelint.circuit.model import Circuit
from drivelint.diagnostics import Diagnostic, Severity, excerpt, printable
from drivelint.netlist.values import format_si
from drivelint.physics.bootstrap import boot_voltage_after, hold_time
from drivelint.report.status import file_status
from drivelint.stages.model import DriveStage, GatePath

if TYPE_CHECKING:
    from drivelint.report.formats import ReportOptions

# Rules whose findings are about the hold capacitor running down during an on-time.
PLOT_RULES = frozenset({"dc-hold", "bootstrap-capacitor-small"})

# Value names the hold rules use, in order of preference.
V_START_NAMES = ("v_boot0", "v_boot")
V_MIN_NAMES = ("v_boot_min",)
CAPACITANCE_NAMES = ("c_hold", "capacitance")
GATE_CHARGE_NAMES = ("qg", "gate_charge")
SHIFTER_CHARGE_NAMES = ("level_shift_charge", "q_ls")
SUGGESTED_NAMES = ("suggested_capacitance",)
DRAIN_NAMES = ("i_drain",)
ON_TIME_NAMES = ("on_time", "t_on")
HOLD_TIME_NAMES = ("hold_time",)

SEVERITIES = (Severity.ERROR, Severity.WARNING, Severity.NOTE)


def _e(text: object) -> str:
    return escape(printable(str(text)), quote=True)


def _status(result: CheckResult) -> str:
    return file_status(result)


def _input_errors(result: CheckResult) -> list[Diagnostic]:
    return [d for d in result.diagnostics if d.severity is Severity.ERROR]


# --------------------------------------------------------------------------- diagram

BOX_W = 104
BOX_H = 34
PITCH = 124.0  # column spacing
LEFT = 70.0  # x of column 0
STACK = 48  # vertical room per box in a chain
NAME_CHARS = 14


@dataclass(frozen=True, slots=True)
class _Canvas:
    """What the device boxes of one diagram need to know to draw themselves."""

    circuit: Circuit
    stage: DriveStage
    highlight: frozenset[str]
    commanded: str | None  # the stage device the control signal enters


def _short(text: str, limit: int = NAME_CHARS) -> str:
    return text if len(text) <= limit else text[: limit - 1] + "…"


def _caption(canvas: _Canvas, name: str) -> str:
    """A second line for a device box: its value, model or subcircuit."""
    stage = canvas.stage
    if stage.driver is not None and name == stage.driver.device:
        return f"driver {stage.driver.subckt}"
    device = canvas.circuit.devices.get(name)
    if device is None:
        instance = canvas.circuit.instances.get(name)
        return instance.subckt if instance is not None else ""
    units = {"resistor": "Ω", "capacitor": "F", "inductor": "H"}
    if device.kind in units and device.value is not None:
        return format_si(device.value, units[device.kind])
    return device.model_name or device.kind


def _box(
    canvas: _Canvas, cx: float, cy: float, name: str, caption: str = "", height: float = BOX_H
) -> str:
    hit = name in canvas.highlight
    classes = "dev hit" if hit else "dev"
    caption = caption or _caption(canvas, name)
    top = cy - height / 2
    parts = [
        f'<g class="{classes}" data-device="{_e(name)}"><title>{_e(name)}'
        f"{_e(' — ' + caption) if caption else ''}{' (has a finding)' if hit else ''}</title>",
        f'<rect x="{cx - BOX_W / 2:.1f}" y="{top:.1f}" width="{BOX_W}" height="{height:.1f}" '
        'rx="3"/>',
        f'<text class="name" x="{cx:.1f}" y="{cy - 2 if caption else cy + 4:.1f}">'
        f"{_e(_short(name))}</text>",
    ]
    if caption:
        parts.append(
            f'<text class="cap" x="{cx:.1f}" y="{cy + 11:.1f}">{_e(_short(caption, 18))}</text>'
        )
    if name == canvas.commanded:
        # A small tab on the box's left edge: where the control signal enters the stage.
        x = cx - BOX_W / 2
        parts.append(
            f'<path class="cmd" d="M{x - 9:.1f},{cy - 5:.1f} L{x:.1f},{cy:.1f} '
            f'L{x - 9:.1f},{cy + 5:.1f} Z"/>'
        )
    parts.append("</g>")
    return "".join(parts)


def _wire(x1: float, y1: float, x2: float, y2: float, cls: str = "wire") -> str:
    return f'<line class="{cls}" x1="{x1:.1f}" y1="{y1:.1f}" x2="{x2:.1f}" y2="{y2:.1f}"/>'


def _dot(x: float, y: float) -> str:
    return f'<circle class="dot" cx="{x:.1f}" cy="{y:.1f}" r="3"/>'


def _terminal(x: float, y: float) -> str:
    return f'<circle class="term" cx="{x:.1f}" cy="{y:.1f}" r="3.5"/>'


def _label(x: float, y: float, text: str, anchor: str = "start", cls: str = "net") -> str:
    return f'<text class="{cls}" x="{x:.1f}" y="{y:.1f}" text-anchor="{anchor}">{_e(text)}</text>'


def _ground(x: float, y: float) -> str:
    return (
        f'<path class="gnd" d="M{x - 10:.1f},{y:.1f} H{x + 10:.1f} '
        f'M{x - 6:.1f},{y + 4:.1f} H{x + 6:.1f} M{x - 2.5:.1f},{y + 8:.1f} H{x + 2.5:.1f}"/>'
    )


def _chain(canvas: _Canvas, x: float, y_a: float, y_b: float, names: Sequence[str]) -> list[str]:
    """Boxes spaced evenly on a vertical wire from ``y_a`` to ``y_b`` (wire drawn by caller)."""
    step = (y_b - y_a) / (len(names) + 1)
    return [_box(canvas, x, y_a + step * (i + 1), name) for i, name in enumerate(names)]


def _volts(volts: float | None) -> str:
    return "" if volts is None else f" = {format_si(volts, 'V')}"


def stage_svg(stage: DriveStage, circuit: Circuit, highlight: Iterable[str] = ()) -> str:
    """A block diagram of a recognised stage as inline SVG, ``highlight`` devices in red.

    Supply on the top left (auxiliary rail, series resistors, diode) feeding the boot rail;
    hold capacitor (or isolated source) from the boot rail to the switch node; pull-ups from
    their rail down to the gate node; pull-downs and clamps from the gate node down to
    where they return; the switch on the right with its drain rail above and the refresh
    paths hanging below the switch node.
    """
    control = stage.control
    commanded = control.path[0] if control is not None and control.path else None
    canvas = _Canvas(circuit, stage, frozenset(highlight), commanded)
    supply = stage.supply

    # The top-left chain: what charges the boot rail, left to right.
    chain: list[str] = []
    aux_terminal = supply.kind == "bootstrap" and supply.aux is not None
    if supply.kind == "charge-pump" and supply.source:
        chain.append(supply.source)
    chain.extend(supply.series_resistors)
    if supply.diode:
        chain.append(supply.diode)
    first = 1 if aux_terminal else 0
    has_control = control is not None and control.source is not None
    start = max(first + len(chain), 1 if has_control else 0)
    if aux_terminal and not chain:
        start = max(start, 1)

    holds: list[str] = []
    if supply.kind == "isolated" and supply.source:
        holds.append(supply.source)
    if supply.capacitor:
        holds.append(supply.capacitor)
    boot_ups = [p for p in stage.pullups if p.returns_to == "boot"]
    rail_ups = [p for p in stage.pullups if p.returns_to != "boot"]
    pullups: list[GatePath] = boot_ups + rail_ups
    pulldowns = list(stage.pulldowns)
    clamps = list(stage.clamps)

    column = start
    hold_x: list[float] = []
    for _ in holds:
        hold_x.append(LEFT + column * PITCH)
        column += 1
    up_x: list[float] = []
    for _ in pullups:
        up_x.append(LEFT + column * PITCH)
        column += 1
    down_x: list[float] = []
    for _ in pulldowns:
        down_x.append(LEFT + column * PITCH)
        column += 1
    clamp_x: list[float] = []
    for _ in clamps:
        clamp_x.append(LEFT + column * PITCH)
        column += 1
    switch_col = column
    x_sw = LEFT + switch_col * PITCH
    refresh_x = [LEFT + (switch_col + i) * PITCH for i in range(len(stage.refresh))]

    n_up = max((len(p.devices) for p in pullups), default=1)
    n_down = max([len(p.devices) for p in pulldowns] + [1])
    y_top = 76.0
    y_gate = y_top + max(96.0, STACK * (n_up + 1))
    y_node = y_gate + max(96.0, STACK * (n_down + 1))
    y_gnd = y_node + 96.0
    last_x = max([x_sw, *refresh_x])
    width = last_x + BOX_W / 2 + 150
    grounded = stage.refresh or any(p.returns_to == "ground" for p in pulldowns)
    height = y_gnd + 28 if grounded else y_node + 34

    wires: list[str] = []
    boxes: list[str] = []
    marks: list[str] = []

    # Supply chain and boot rail.
    chain_x = [LEFT + (first + i) * PITCH for i in range(len(chain))]
    boot_right = max(
        hold_x + [x for x, p in zip(up_x, pullups, strict=True) if p in boot_ups], default=LEFT
    )
    has_boot_rail = supply.boot_net is not None and bool(hold_x or boot_ups)
    if aux_terminal and supply.aux is not None:
        marks.append(_terminal(LEFT, y_top))
        marks.append(
            _label(LEFT, y_top - 14, f"{supply.aux.net}{_volts(supply.aux.volts)}", "middle")
        )
    if chain or aux_terminal:
        end = boot_right if has_boot_rail else (chain_x[-1] if chain_x else LEFT)
        wires.append(_wire(LEFT, y_top, end, y_top))
        for x, name in zip(chain_x, chain, strict=True):
            caption = _caption(canvas, name)
            if name == supply.diode and supply.diode_orientation == "reversed":
                caption = "reversed!"
            boxes.append(_box(canvas, x, y_top, name, caption))
    if has_boot_rail and supply.boot_net is not None:
        rail_left = (chain_x[-1] + BOX_W / 2) if chain_x else min(hold_x + up_x[: len(boot_ups)])
        if not chain and not aux_terminal:
            wires.append(_wire(rail_left, y_top, boot_right, y_top))
        marks.append(_label(rail_left + 8, y_top - 8, f"{supply.boot_net} (boot)"))

    # Hold capacitor or isolated source: boot rail to switch node.
    for x, name in zip(hold_x, holds, strict=True):
        wires.append(_wire(x, y_top, x, y_node))
        caption = "isolated supply" if name == supply.source else _caption(canvas, name)
        boxes.append(_box(canvas, x, (y_top + y_node) / 2, name, caption))
        marks.extend((_dot(x, y_top), _dot(x, y_node)))

    # Pull-ups: rail (or boot) down to the gate node.
    for x, path in zip(up_x, pullups, strict=True):
        wires.append(_wire(x, y_top, x, y_gate))
        boxes.extend(_chain(canvas, x, y_top, y_gate, path.devices))
        marks.append(_dot(x, y_gate))
        if path.returns_to == "boot" and has_boot_rail:
            marks.append(_dot(x, y_top))
        else:
            volts = circuit.rails.get(path.returns_to)
            marks.append(_terminal(x, y_top))
            marks.append(_label(x, y_top - 10, f"{path.returns_to}{_volts(volts)}", "middle"))

    # Pull-downs: gate node down to the source, ground or another net.
    ground_x: list[float] = []
    for x, path in zip(down_x, pulldowns, strict=True):
        marks.append(_dot(x, y_gate))
        if path.returns_to == "source":
            wires.append(_wire(x, y_gate, x, y_node))
            marks.append(_dot(x, y_node))
            boxes.extend(_chain(canvas, x, y_gate, y_node, path.devices))
        elif path.returns_to == "ground":
            # Crosses the switch-node rail without a junction dot: not connected to it.
            wires.append(_wire(x, y_gate, x, y_gnd))
            ground_x.append(x)
            boxes.extend(_chain(canvas, x, y_gate, y_node, path.devices))
        else:
            step = (y_node - y_gate) / (len(path.devices) + 1)
            stop = y_gate + step * len(path.devices) + BOX_H / 2 + 14
            wires.append(_wire(x, y_gate, x, stop))
            boxes.extend(_chain(canvas, x, y_gate, y_node, path.devices))
            marks.append(_terminal(x, stop))
            marks.append(_label(x + 7, stop + 4, path.returns_to))

    # Clamps across gate and source.
    for x, clamp in zip(clamp_x, clamps, strict=True):
        wires.append(_wire(x, y_gate, x, y_node))
        marks.extend((_dot(x, y_gate), _dot(x, y_node)))
        names = clamp.devices or (clamp.device,)
        rated = f" {format_si(clamp.voltage, 'V')}" if clamp.voltage else ""
        label = " + ".join(names)
        box_names = [label] if len(names) > 1 else [clamp.device]
        cx = (y_gate + y_node) / 2
        caption = f"clamp {clamp.kind}{rated}"
        if clamp.orientation != "normal":
            caption += f" {clamp.orientation}"
        for name in box_names:
            hit_canvas = canvas
            if len(names) > 1 and any(n in canvas.highlight for n in names):
                hit_canvas = _Canvas(circuit, stage, canvas.highlight | {label}, commanded)
            boxes.append(_box(hit_canvas, x, cx, name, caption))

    # Gate node and the switch.
    gate_left = min(up_x + down_x + clamp_x, default=x_sw - PITCH)
    wires.append(_wire(gate_left, y_gate, x_sw - BOX_W / 2, y_gate))
    marks.append(_label(x_sw - BOX_W / 2 - 6, y_gate - 6, _short(stage.gate, 10), "end"))
    drain_top = y_top - 34
    wires.append(_wire(x_sw, drain_top, x_sw, y_node))
    drain = f"{stage.bus.net}{_volts(stage.bus.volts)}" if stage.bus else stage.drain
    marks.append(_terminal(x_sw, drain_top))
    marks.append(_label(x_sw, drain_top - 9, f"drain {drain}", "middle"))
    boxes.append(_box(canvas, x_sw, y_gate, stage.switch, f"{stage.channel}, {stage.mode}", 54))
    for text, dx, dy in (("D", 7, -30), ("S", 7, 38)):
        marks.append(_label(x_sw + dx, y_gate + dy, text, "start", "pin"))
    marks.append(_dot(x_sw, y_node))

    # Switch-node rail and the refresh paths below it.
    node_left = min(
        hold_x
        + [x for x, p in zip(down_x, pulldowns, strict=True) if p.returns_to == "source"]
        + clamp_x
        + [x_sw]
    )
    wires.append(_wire(node_left, y_node, last_x, y_node))
    marks.append(_label(last_x + BOX_W / 2 + 4, y_node + 4, f"{stage.source} (switch node)"))
    for x, refresh in zip(refresh_x, stage.refresh, strict=True):
        name = ", ".join(refresh.devices)
        marks.append(_dot(x, y_node))
        if refresh.kind in ("low-side switch", "freewheel diode", "load"):
            wires.append(_wire(x, y_node, x, y_gnd))
            ground_x.append(x)
        else:
            wires.append(_wire(x, y_node, x, y_node + 78))
            marks.append(_terminal(x, y_node + 78))
        single = refresh.devices[0] if len(refresh.devices) == 1 else name
        hit_canvas = canvas
        if len(refresh.devices) > 1 and any(d in canvas.highlight for d in refresh.devices):
            hit_canvas = _Canvas(circuit, stage, canvas.highlight | {name}, commanded)
        boxes.append(_box(hit_canvas, x, y_node + 44, single, refresh.kind))
    if refresh_x:
        marks.append(_label(x_sw - BOX_W / 2 - 6, y_node + 48, "refresh", "end", "cap"))
    marks.extend(_ground(x, y_gnd) for x in ground_x)

    # Control: a box at the left of the gate row, naming where it enters the stage.
    if has_control and control is not None and control.source is not None:
        detail = "inverting" if control.inverting else "command"
        if control.waveform is not None:
            detail = control.waveform.kind + (", inverting" if control.inverting else "")
        boxes.append(_box(canvas, LEFT, y_gate, control.source, f"control: {detail}"))
        if commanded:
            marks.append(
                _label(
                    LEFT,
                    y_gate + BOX_H / 2 + 14,
                    f"into {_short(commanded, 12)} ▸",
                    "middle",
                    "cap",
                )
            )

    title = f"Recognised gate drive of {stage.switch} ({stage.supply.kind} supply)"
    return (
        f'<svg class="stage" viewBox="0 0 {width:.0f} {height:.0f}" width="{width:.0f}" '
        f'height="{height:.0f}" role="img" data-switch="{_e(stage.switch)}">'
        f"<title>{_e(title)}</title>" + "".join(wires) + "".join(boxes) + "".join(marks) + "</svg>"
    )


def drawn_devices(stage: DriveStage) -> frozenset[str]:
    """Every device name that :func:`stage_svg` draws a box for."""
    names: set[str] = {stage.switch}
    supply = stage.supply
    names.update(supply.series_resistors)
    for name in (supply.diode, supply.capacitor):
        if name:
            names.add(name)
    if supply.source and supply.kind in ("isolated", "charge-pump"):
        names.add(supply.source)
    for path in (*stage.pullups, *stage.pulldowns):
        names.update(path.devices)
    for clamp in stage.clamps:
        names.update(clamp.devices or (clamp.device,))
    for refresh in stage.refresh:
        names.update(refresh.devices)
    if stage.control is not None and stage.control.source:
        names.add(stage.control.source)
    return frozenset(names)


# --------------------------------------------------------------------------- plot


@dataclass(frozen=True, slots=True)
class BootDroop:
    """The numbers a boot-voltage plot needs, read from a finding's values (SI units)."""

    v_start: float
    v_min: float
    capacitance: float
    gate_charge: float
    shifter_charge: float  # level-shifter charge, taken at the same edge as the gate's
    drain: float | None
    on_time: float | None
    hold: float | None
    suggested: float | None = None  # the hold capacitance the finding's fix proposes

    @property
    def step_charge(self) -> float:
        return self.gate_charge + self.shifter_charge

    def at(self, t: float) -> float:
        return boot_voltage_after(
            t, self.v_start, self.capacitance, self.step_charge, self.drain or 0.0
        )

    def crossing(self) -> float | None:
        """Time after turn-on when the boot voltage reaches the minimum, None if never."""
        if self.at(0.0) < self.v_min:
            return 0.0
        if not self.drain:
            return None
        return hold_time(self.capacitance, self.v_start - self.v_min, self.step_charge, self.drain)

    def span(self) -> float | None:
        """How much time to plot: the on-time, shortened when the fall happens early."""
        crossing = self.crossing()
        if self.on_time is not None and self.on_time > 0 and math.isfinite(self.on_time):
            if crossing is not None and 0 < crossing < self.on_time / 3:
                return 3 * crossing
            return self.on_time
        if self.hold is not None and self.hold > 0 and math.isfinite(self.hold):
            return 2 * self.hold
        if crossing is not None and crossing > 0 and math.isfinite(crossing):
            return 2 * crossing
        return None


def _number(values: Mapping[str, object], names: Sequence[str], unit: str) -> float | None:
    from drivelint.ratings.values import Value

    for name in names:
        value = values.get(name)
        if isinstance(value, Value) and value.unit == unit and not math.isnan(value.value):
            return value.value
    return None


def _positive(value: float | None) -> float | None:
    return value if value is not None and value > 0 and math.isfinite(value) else None


def boot_droop(finding: Finding) -> BootDroop | None:
    """The plot inputs of a hold finding, or None when the values needed are missing.

    Needed: the starting boot voltage, the minimum, the hold capacitance and the gate
    charge. The drain current and the on-time or hold time are optional (no drain means
    the gate charge alone takes the voltage down).
    """
    values = finding.values
    v_start = _number(values, V_START_NAMES, "V")
    v_min = _number(values, V_MIN_NAMES, "V")
    capacitance = _number(values, CAPACITANCE_NAMES, "F")
    gate_charge = _number(values, GATE_CHARGE_NAMES, "C")
    if v_start is None or v_min is None or capacitance is None or gate_charge is None:
        return None
    if not (math.isfinite(v_start) and math.isfinite(v_min) and math.isfinite(gate_charge)):
        return None
    if not (capacitance > 0 and math.isfinite(capacitance)):
        return None
    drain = _number(values, DRAIN_NAMES, "A")
    if drain is not None and not (math.isfinite(drain) and drain >= 0):
        drain = None
    shifter = _number(values, SHIFTER_CHARGE_NAMES, "C")
    droop = BootDroop(
        v_start,
        v_min,
        capacitance,
        gate_charge,
        shifter if shifter is not None and math.isfinite(shifter) else 0.0,
        drain,
        _number(values, ON_TIME_NAMES, "s"),
        _number(values, HOLD_TIME_NAMES, "s"),
        _positive(_number(values, SUGGESTED_NAMES, "F")),
    )
    return droop if droop.span() is not None else None


def nice_ticks(low: float, high: float, count: int = 5) -> list[float]:
    """Round tick positions (1, 2 or 5 times a power of ten) covering ``low``..``high``."""
    if not high > low:
        return [low]
    raw = (high - low) / max(count, 1)
    power = 10.0 ** math.floor(math.log10(raw))
    step = next(m * power for m in (1.0, 2.0, 5.0, 10.0) if m * power >= raw)
    first = math.ceil(low / step - 1e-9) * step
    ticks = []
    value = first
    while value <= high + step * 1e-9:
        ticks.append(0.0 if abs(value) < step * 1e-9 else value)
        value += step
    return ticks


PLOT_W, PLOT_H = 660, 290
MARGIN_L, MARGIN_R, MARGIN_T, MARGIN_B = 64, 150, 22, 46
PLOT_SAMPLES = 120


def _polyline(cls: str, points: Sequence[tuple[float, float]]) -> str:
    return (
        f'<polyline class="{cls}" points="'
        + " ".join(f"{x:.1f},{y:.1f}" for x, y in points)
        + '"/>'
    )


def _side_labels(
    x: float, labels: Sequence[tuple[float, str, str]], gap: float = 13.0
) -> list[str]:
    """Labels at the right of the plot, moved apart so that none overlaps the next."""
    placed: list[str] = []
    last = -math.inf
    for y, text, cls in sorted(labels):
        y = max(y, last + gap)
        last = y
        placed.append(_label(x, y + 4, text, "start", cls))
    return placed


def boot_plot_svg(finding: Finding) -> str | None:
    """The boot voltage over the on-time against its minimum, as inline SVG, or None."""
    droop = boot_droop(finding)
    if droop is None:
        return None
    span = droop.span()
    assert span is not None  # boot_droop returns None otherwise
    times = [span * k / PLOT_SAMPLES for k in range(PLOT_SAMPLES + 1)]
    volts = [droop.at(t) for t in times]
    top = max(droop.v_start, droop.v_min)
    bottom = min(droop.v_min, min(volts))
    pad = 0.08 * (top - bottom) or 1.0
    # Below 0 V the linear model has no meaning (the supply has collapsed): stop the axis there.
    floor = 0.0 if droop.v_min >= 0 else bottom - pad
    y_low = max(bottom - pad, floor)
    y_high = top + pad
    clamped = any(v < y_low for v in volts)

    inner_w = PLOT_W - MARGIN_L - MARGIN_R
    inner_h = PLOT_H - MARGIN_T - MARGIN_B

    def px(t: float) -> float:
        return MARGIN_L + inner_w * t / span

    def py(v: float) -> float:
        v = min(max(v, y_low), y_high)
        return MARGIN_T + inner_h * (y_high - v) / (y_high - y_low)

    parts: list[str] = [
        f'<svg class="plot" viewBox="0 0 {PLOT_W} {PLOT_H}" width="{PLOT_W}" height="{PLOT_H}" '
        f'role="img" data-rule="{_e(finding.rule)}"><title>Boot voltage of {_e(finding.switch)} '
        "over the on-time</title>",
        # The region below the minimum: where the switch is no longer fully driven.
        f'<rect class="bad" x="{MARGIN_L}" y="{py(droop.v_min):.1f}" width="{inner_w}" '
        f'height="{max(py(y_low) - py(droop.v_min), 0):.1f}"/>',
    ]
    for tick in nice_ticks(y_low, y_high):
        y = py(tick)
        parts.append(_wire(MARGIN_L, y, MARGIN_L + inner_w, y, "grid"))
        parts.append(_label(MARGIN_L - 6, y + 4, f"{tick:g}", "end", "tick"))
    for tick in nice_ticks(0.0, span):
        x = px(tick)
        parts.append(_wire(x, MARGIN_T, x, MARGIN_T + inner_h, "grid"))
        parts.append(_label(x, MARGIN_T + inner_h + 16, format_si(tick, "s"), "middle", "tick"))
    parts.append(
        f'<rect class="frame" x="{MARGIN_L}" y="{MARGIN_T}" width="{inner_w}" height="{inner_h}"/>'
    )
    parts.append(_label(MARGIN_L + inner_w / 2, PLOT_H - 6, "time after turn-on", "middle", "axis"))
    parts.append(
        f'<text class="axis" transform="translate(14,{MARGIN_T + inner_h / 2:.1f}) rotate(-90)" '
        'text-anchor="middle">boot voltage (V)</text>'
    )
    y_min = py(droop.v_min)
    parts.append(_wire(MARGIN_L, y_min, MARGIN_L + inner_w, y_min, "limit"))
    right = MARGIN_L + inner_w + 8
    side: list[tuple[float, str, str]] = [
        (y_min, f"min {format_si(droop.v_min, 'V')}", "limit-label"),
        (py(volts[-1]), f"{format_si(volts[-1], 'V')} at end", "curve-label"),
        (py(droop.v_start), f"start {format_si(droop.v_start, 'V')}", "curve-label"),
    ]
    points = [(px(0.0), py(droop.v_start))] + [
        (px(t), py(v)) for t, v in zip(times, volts, strict=True)
    ]
    parts.append(_polyline("curve", points))
    suggested = droop.suggested
    if suggested is not None:
        # The same on-time with the capacitor the fix proposes: shows the fix is enough.
        better = replace(droop, capacitance=suggested)
        parts.append(
            _polyline(
                "suggested",
                [(px(0.0), py(droop.v_start))] + [(px(t), py(better.at(t))) for t in times],
            )
        )
        side.append((py(better.at(span)), f"with {format_si(suggested, 'F')}", "suggested-label"))
    parts.extend(_side_labels(right, side))
    crossing = droop.crossing()
    if crossing is not None and crossing <= span:
        x = px(crossing)
        parts.append(_wire(x, MARGIN_T, x, MARGIN_T + inner_h, "cross"))
        parts.append(f'<circle class="cross-dot" cx="{x:.1f}" cy="{y_min:.1f}" r="4"/>')
        text = (
            "below the minimum at turn-on"
            if crossing == 0
            else f"below the minimum after {format_si(crossing, 's')}"
        )
        anchor = "start" if x < MARGIN_L + inner_w * 0.6 else "end"
        parts.append(
            _label(x + (6 if anchor == "start" else -6), MARGIN_T + 14, text, anchor, "cross-label")
        )
    on_time = droop.on_time
    if on_time is not None and math.isfinite(on_time) and 0 < on_time < span * 0.999:
        x = px(on_time)
        parts.append(_wire(x, MARGIN_T, x, MARGIN_T + inner_h, "ontime"))
        parts.append(_label(x - 4, MARGIN_T + inner_h - 6, "end of on-time", "end", "tick"))
    parts.append("</svg>")

    drain_text = (
        f"I_drain = {format_si(droop.drain, 'A')}"
        if droop.drain is not None
        else "no steady drain given: gate charge only"
    )
    on_text = ""
    if on_time is not None and not math.isfinite(on_time):
        on_text = " The on-time is unbounded (DC command); the plot ends at twice the hold time."
    elif on_time is not None and on_time > span * 1.001:
        on_text = (
            f" The on-time ({format_si(on_time, 's')}) runs on beyond the plot;"
            f" the model gives {format_si(droop.at(on_time), 'V')} at its end."
        )
    clamp_text = " Drawn at the axis floor where the model goes below it." if clamped else ""
    if droop.suggested is not None:
        clamp_text += (
            f" Dashed green: the same on-time with {format_si(droop.suggested, 'F')}, "
            "the capacitance the fix proposes."
        )
    rows = [("0 (before turn-on)", droop.v_start)] + [
        (format_si(span * k / 4, "s"), droop.at(span * k / 4)) for k in range(5)
    ]
    table = "".join(
        f'<tr><td class="num">{_e(t)}</td><td class="num">{_e(format_si(v, "V"))}</td></tr>'
        for t, v in rows
    )
    return (
        '<figure class="plot-figure">'
        + "".join(parts)
        + "<figcaption>Boot supply over the on-time: V(t) = V<sub>boot,0</sub> − "
        "(Q<sub>g</sub> + Q<sub>ls</sub>)/C − I<sub>drain</sub>·t/C, with "
        f"V<sub>boot,0</sub> = {_e(format_si(droop.v_start, 'V'))}, "
        f"C = {_e(format_si(droop.capacitance, 'F'))}, "
        f"Q<sub>g</sub> = {_e(format_si(droop.gate_charge, 'C'))}, "
        f"Q<sub>ls</sub> = {_e(format_si(droop.shifter_charge, 'C'))}, {_e(drain_text)}; "
        f"it must stay above {_e(format_si(droop.v_min, 'V'))}.{_e(on_text)}{_e(clamp_text)}"
        "</figcaption>"
        '<details class="plot-data"><summary>plotted values</summary>'
        '<table class="plot-values"><thead><tr><th>t</th><th>V<sub>boot</sub></th></tr></thead>'
        f"<tbody>{table}</tbody></table></details>"
        "</figure>"
    )


# --------------------------------------------------------------------------- page parts


def _severity_badge(severity: Severity) -> str:
    return f'<span class="sev {severity.label}">{severity.label}</span>'


def _finding_html(
    finding: Finding, circuit: Circuit, anchor: str, explain: bool, accepted: bool = False
) -> str:
    line = excerpt(circuit.line_text(finding.span))
    head = (
        f'<div class="fhead">{_severity_badge(finding.severity)} '
        f'<code class="rule">{_e(finding.rule)}</code> '
        f'<span class="loc">{_e(finding.span)}</span> '
        f'<span class="on">device <code>{_e(finding.device)}</code>'
        f" on switch <code>{_e(finding.switch)}</code></span></div>"
    )
    rows = "".join(
        f'<tr><td><code>{_e(name)}</code></td><td class="num">{_e(value.text())}</td>'
        f'<td class="origin">{_e(value.origin)}</td></tr>'
        for name, value in sorted(finding.values.items())
    )
    values = (
        '<table class="values"><thead><tr><th>quantity</th><th>value</th><th>origin</th>'
        f"</tr></thead><tbody>{rows}</tbody></table>"
        if rows
        else ""
    )
    source = f'<pre class="src">{finding.span.line:>5} | {_e(line)}</pre>' if line else ""
    derivation = ""
    if finding.derivation:
        steps = _e("\n".join(finding.derivation))
        derivation = (
            f'<details class="derivation"{" open" if explain else ""}>'
            f"<summary>derivation</summary><pre>{steps}</pre></details>"
        )
    plot = boot_plot_svg(finding) if finding.rule in PLOT_RULES else None
    classes = f"finding {finding.severity.label}" + (" accepted" if accepted else "")
    return (
        f'<div class="{classes}" id="{anchor}">'
        + head
        + f'<p class="finding-message">{_e(finding.message)}</p>'
        + source
        + values
        + f'<p class="fix"><span class="fix-label">Fix</span> {_e(finding.fix)}</p>'
        + derivation
        + (plot or "")
        + "</div>"
    )


def _stage_heading(stage: DriveStage) -> str:
    supply = stage.supply
    kind = "no floating supply" if supply.kind == "none" else f"{supply.kind} supply"
    parts = [f"{stage.channel}", stage.mode, kind]
    if stage.bus is not None:
        parts.append(f"drain rail {stage.bus.net}{_volts(stage.bus.volts)}")
    if stage.driver is not None:
        parts.append(f"driver {stage.driver.device} ({stage.driver.subckt})")
    return (
        f'<h4><code>{_e(stage.switch)}</code> <span class="stage-meta">'
        f"{_e(' · '.join(parts))} · line {stage.span.line}</span></h4>"
    )


def _diagram_figure(stage: DriveStage, circuit: Circuit, findings: Sequence[Finding]) -> str:
    hits = sorted({f.device for f in findings})
    drawn = drawn_devices(stage)
    missing = [name for name in hits if name not in drawn]
    note = ""
    if missing:
        note = f" Not drawn: {', '.join(missing)}."
    return (
        '<figure class="diagram">'
        + stage_svg(stage, circuit, hits)
        + "<figcaption>Stage as recognised. Red: device with a finding ("
        + _e(", ".join(hits))
        + ")."
        + _e(note)
        + " Dots are connections; a line crossing without a dot is not connected.</figcaption>"
        "</figure>"
    )


@dataclass(frozen=True, slots=True)
class _Numbered:
    """A finding with its page anchor, so the summary can link to it."""

    finding: Finding
    anchor: str


def _design_article(
    result: CheckResult, anchor: str, numbered: Sequence[_Numbered], explain: bool
) -> str:
    circuit = result.circuit
    status = _status(result)
    parts = [
        f'<article class="design" id="{anchor}">',
        f'<h3><code>{_e(circuit.path)}</code> <span class="status {status}">{status}</span></h3>',
    ]
    if circuit.title:
        parts.append(f'<p class="design-title">{_e(circuit.title)}</p>')
    floating = [s for s in result.stages if s.floating]
    others = [s for s in result.stages if not s.floating]
    summary = (
        f"{len(result.stages)} switch{'es' * (len(result.stages) != 1)} recognised, "
        f"{len(floating)} with a floating source."
    )
    if others:
        summary += (
            " Not floating: " + "; ".join(f"{s.switch} ({s.floating_reason})" for s in others) + "."
        )
    parts.append(f'<p class="design-summary">{_e(summary)}</p>')
    shown = [d for d in result.diagnostics if d.severity >= Severity.WARNING]
    if shown:
        rows = "".join(
            f'<tr><td>{_severity_badge(d.severity)}</td><td class="loc">{_e(d.span)}</td>'
            f"<td>{_e(d.message)}</td><td><code>{_e(d.code)}</code></td></tr>"
            for d in shown
        )
        # Positions only: the line an input problem is on may not be a netlist line at all.
        parts.append(
            '<h4>Input problems</h4><table class="diagnostics"><thead><tr><th>severity</th>'
            "<th>where</th><th>message</th><th>code</th></tr></thead>"
            f"<tbody>{rows}</tbody></table>"
        )
    placed: set[int] = set()
    for stage in floating:
        mine = [n for n in numbered if n.finding.switch == stage.switch]
        placed.update(id(n) for n in mine)
        parts.append('<section class="stage">' + _stage_heading(stage))
        if mine:
            parts.append(_diagram_figure(stage, circuit, [n.finding for n in mine]))
            parts.extend(_finding_html(n.finding, circuit, n.anchor, explain) for n in mine)
        else:
            parts.append('<p class="clean-stage">No findings for this stage.</p>')
        parts.append("</section>")
    rest = [n for n in numbered if id(n) not in placed]
    if rest:
        parts.append('<section class="stage"><h4>Other findings</h4>')
        parts.extend(_finding_html(n.finding, circuit, n.anchor, explain) for n in rest)
        parts.append("</section>")
    if result.accepted:
        parts.append(
            f'<details class="accepted-list"><summary>{len(result.accepted)} accepted by a '
            "directive</summary>"
        )
        parts.extend(
            _finding_html(f, circuit, f"{anchor}-a{i}", explain, accepted=True)
            for i, f in enumerate(result.accepted, 1)
        )
        parts.append("</details>")
    parts.append("</article>")
    return "".join(parts)


def _summary(results: Sequence[CheckResult], numbered: Mapping[str, Sequence[_Numbered]]) -> str:
    from drivelint.checks.registry import registry

    findings = [f for r in results for f in r.findings]
    stages = sum(1 for r in results for s in r.stages if s.floating)
    by_severity = Counter(f.severity for f in findings)
    accepted = sum(len(r.accepted) for r in results)
    broken = [r for r in results if _input_errors(r)]
    tiles = [
        ("designs", str(len(results)), ""),
        ("floating stages", str(stages), ""),
        ("findings", str(len(findings)), "bad" if findings else "good"),
        *(
            (s.label + "s", str(by_severity[s]), s.label if by_severity[s] else "")
            for s in SEVERITIES
        ),
        ("accepted", str(accepted), ""),
        ("files with input errors", str(len(broken)), "bad" if broken else "good"),
    ]
    parts = ['<section id="summary"><h2>Summary</h2><div class="tiles">']
    parts.extend(
        f'<div class="tile {cls}" data-tile="{_e(name)}"><div class="tile-n">{_e(number)}</div>'
        f'<div class="tile-l">{_e(name)}</div></div>'
        for name, number, cls in tiles
    )
    parts.append("</div>")
    rules = registry()
    counts: Counter[tuple[str, Severity]] = Counter((f.rule, f.severity) for f in findings)
    first_anchor: dict[str, str] = {}
    for path in sorted(numbered):
        for item in numbered[path]:
            first_anchor.setdefault(item.finding.rule, item.anchor)
    if findings:
        rows = []
        for rule_id in sorted({f.rule for f in findings}):
            rule = rules.get(rule_id)
            cells = "".join(
                f'<td class="num">{counts[(rule_id, s)] or ""}</td>' for s in SEVERITIES
            )
            total = sum(counts[(rule_id, s)] for s in SEVERITIES)
            rows.append(
                f'<tr data-rule="{_e(rule_id)}"><td><a href="#{first_anchor[rule_id]}">'
                f"<code>{_e(rule_id)}</code></a></td><td>{_e(rule.title if rule else '')}</td>"
                f'{cells}<td class="num total">{total}</td></tr>'
            )
        totals = "".join(f'<td class="num">{by_severity[s]}</td>' for s in SEVERITIES)
        parts.append(
            '<h3>Findings by rule and severity</h3><table id="by-rule"><thead><tr><th>rule</th>'
            "<th>title</th><th>errors</th><th>warnings</th><th>notes</th><th>total</th></tr>"
            f"</thead><tbody>{''.join(rows)}</tbody><tfoot><tr><td>all rules</td><td></td>"
            f'{totals}<td class="num total">{len(findings)}</td></tr></tfoot></table>'
        )
    else:
        parts.append('<p class="all-clean">No findings in any design.</p>')
    parts.append("<h3>Files with input errors</h3>")
    if broken:
        items = "".join(
            f"<li><code>{_e(r.circuit.path)}</code>: {len(_input_errors(r))} error"
            f"{'s' * (len(_input_errors(r)) != 1)} — first: {_e(_input_errors(r)[0].span)}: "
            f"{_e(_input_errors(r)[0].message)}</li>"
            for r in broken
        )
        parts.append(f'<ul id="input-errors">{items}</ul>')
    else:
        parts.append('<p id="input-errors" class="none">None: every file was read.</p>')
    parts.append("</section>")
    return "".join(parts)


DESIGN_COLUMNS = (
    ("design", "design"),
    ("switches", "switches"),
    ("floating", "floating"),
    ("errors", "errors"),
    ("warnings", "warnings"),
    ("notes", "notes"),
    ("findings", "findings"),
    ("accepted", "accepted"),
    ("input", "input problems"),
    ("status", "status"),
)


def _designs_table(results: Sequence[CheckResult], anchors: Mapping[str, str]) -> str:
    heads = "".join(
        f'<th data-key="{key}" aria-sort="none" tabindex="0">{_e(label)}</th>'
        for key, label in DESIGN_COLUMNS
    )
    rows = []
    for order, result in enumerate(results):
        circuit = result.circuit
        by = Counter(f.severity for f in result.findings)
        problems = sum(1 for d in result.diagnostics if d.severity >= Severity.WARNING)
        status = _status(result)
        rank = {"error": 3, "partial": 2, "findings": 1, "clean": 0}[status]
        numbers = [
            len(result.stages),
            sum(1 for s in result.stages if s.floating),
            by[Severity.ERROR],
            by[Severity.WARNING],
            by[Severity.NOTE],
            len(result.findings),
            len(result.accepted),
            problems,
        ]
        cells = "".join(f'<td class="num" data-sort="{n}">{n}</td>' for n in numbers)
        rows.append(
            f'<tr data-order="{order}" data-path="{_e(circuit.path)}">'
            f'<td data-sort="{_e(circuit.path)}"><a href="#{anchors[circuit.path]}">'
            f'<code>{_e(circuit.path)}</code></a><div class="title-cell">{_e(circuit.title)}</div>'
            f"</td>{cells}"
            f'<td data-sort="{rank}"><span class="status {status}">{status}</span></td></tr>'
        )
    return (
        '<section id="designs-section"><h2>Designs</h2>'
        '<p class="hint">Click a column header to sort; click again to reverse.</p>'
        f'<table id="designs" class="sortable"><thead><tr>{heads}</tr></thead>'
        f"<tbody>{''.join(rows)}</tbody></table></section>"
    )


STYLE = """
:root{--ink:#1d2433;--mute:#5d6778;--line:#d5dae1;--soft:#f4f6f9;--err:#b3261e;
--warn:#a85a00;--note:#1f5fae;--ok:#1d7a46;--hit:#fdeceb}
*{box-sizing:border-box}
body{margin:0;color:var(--ink);background:#fff;font:14px/1.45 system-ui,sans-serif}
header{padding:18px 32px 14px;border-bottom:3px solid var(--ink);background:var(--soft)}
header h1{margin:0;font-size:21px;letter-spacing:.2px}
header .meta{margin:4px 0 0;color:var(--mute);font-size:13px}
main{padding:4px 32px 32px;max-width:1280px}
h2{font-size:17px;border-bottom:1px solid var(--line);padding-bottom:4px;margin:26px 0 10px}
h3{font-size:15px;margin:18px 0 8px}
h4{font-size:14px;margin:14px 0 6px}
code,pre,.loc{font-family:ui-monospace,monospace;font-size:12.5px}
pre{margin:0;white-space:pre-wrap}
a{color:var(--note);text-decoration:none}
a:hover{text-decoration:underline}
table{border-collapse:collapse;margin:6px 0 10px}
th,td{padding:4px 10px;border-bottom:1px solid var(--line);text-align:left;vertical-align:top}
th{background:var(--soft);font-weight:600;font-size:12.5px;white-space:nowrap}
td.num{text-align:right;font-variant-numeric:tabular-nums;white-space:nowrap}
#designs td.num[data-sort="0"]{color:#a3aab5}
tfoot td{font-weight:600;border-top:2px solid var(--line)}
#designs th{cursor:pointer;user-select:none}
#designs th:hover{background:#e7ebf1}
#designs th[aria-sort=ascending]::after{content:" \\25B2";font-size:10px}
#designs th[aria-sort=descending]::after{content:" \\25BC";font-size:10px}
#designs{width:100%}
#designs .title-cell{color:var(--mute);font-size:12.5px;max-width:640px}
.hint{color:var(--mute);font-size:12.5px;margin:0}
.tiles{display:flex;flex-wrap:wrap;gap:10px;margin:8px 0 14px}
.tile{border:1px solid var(--line);border-radius:4px;padding:8px 14px;min-width:110px;
background:#fff}
.tile-n{font-size:22px;font-weight:650;font-variant-numeric:tabular-nums}
.tile-l{font-size:12px;color:var(--mute)}
.tile.bad{border-left:4px solid var(--err)}
.tile.good{border-left:4px solid var(--ok)}
.tile.error .tile-n{color:var(--err)}
.tile.warning .tile-n{color:var(--warn)}
.tile.note .tile-n{color:var(--note)}
.sev,.status{display:inline-block;padding:0 6px;border-radius:3px;font-size:11px;
font-weight:650;text-transform:uppercase;letter-spacing:.4px;color:#fff;vertical-align:1px}
.sev.error,.status.error{background:var(--err)}
.sev.warning{background:var(--warn)}
.sev.note{background:var(--note)}
.status.findings{background:var(--warn)}
.status.partial{background:var(--warn);font-style:italic}
.status.clean{background:var(--ok)}
article.design{border-top:2px solid var(--ink);margin-top:22px;padding-top:2px}
.design-title{margin:0 0 4px;font-style:italic}
.design-summary{margin:0 0 6px;color:var(--mute);font-size:13px}
section.stage{margin:8px 0 16px 12px}
.stage-meta{font-weight:400;color:var(--mute);font-size:13px}
.clean-stage{color:var(--ok);margin:2px 0}
.finding{border:1px solid var(--line);border-left:5px solid var(--note);border-radius:3px;
padding:8px 12px;margin:10px 0;background:#fff}
.finding.error{border-left-color:var(--err)}
.finding.warning{border-left-color:var(--warn)}
.finding.accepted{opacity:.75}
.fhead{display:flex;flex-wrap:wrap;gap:8px;align-items:baseline}
.fhead .on{color:var(--mute);font-size:13px}
.finding-message{margin:6px 0;font-weight:600}
pre.src{background:var(--soft);padding:3px 8px;border-radius:3px;color:#333;margin:4px 0}
table.values td.origin{color:var(--mute);font-size:12.5px}
.fix{margin:6px 0}
.fix-label{display:inline-block;background:var(--ok);color:#fff;font-size:11px;font-weight:650;
text-transform:uppercase;padding:0 6px;border-radius:3px;margin-right:4px}
details summary{cursor:pointer;color:var(--mute);font-size:12.5px}
details pre{background:var(--soft);padding:6px 8px;margin:4px 0}
figure{margin:8px 0;overflow-x:auto}
figcaption{font-size:12px;color:var(--mute);max-width:900px}
svg{max-width:100%;height:auto;font-family:system-ui,sans-serif}
svg .wire{stroke:#3a4252;stroke-width:1.5}
svg .dot{fill:#3a4252}
svg .term{fill:#fff;stroke:#3a4252;stroke-width:1.5}
svg .gnd{stroke:#3a4252;stroke-width:1.5;fill:none}
svg .dev rect{fill:#fff;stroke:#3a4252;stroke-width:1.2}
svg .dev.hit rect{fill:var(--hit);stroke:var(--err);stroke-width:2.6}
svg .dev text{text-anchor:middle}
svg .dev .name{font:600 11.5px ui-monospace,monospace;fill:var(--ink)}
svg .dev.hit .name{fill:var(--err)}
svg .dev .cap{font-size:9.5px;fill:var(--mute)}
svg .cmd{fill:var(--note)}
svg text.cap{font-size:9.5px;fill:var(--mute)}
svg .net{font:10.5px ui-monospace,monospace;fill:var(--note)}
svg .pin{font-size:9px;fill:var(--mute)}
svg.plot .grid{stroke:#e3e7ed;stroke-width:1}
svg.plot .frame{fill:none;stroke:#8a93a3}
svg.plot .bad{fill:#fbe3e1}
svg.plot .limit{stroke:var(--err);stroke-width:1.6;stroke-dasharray:6 4}
svg.plot .cross{stroke:var(--err);stroke-width:1;stroke-dasharray:2 3}
svg.plot .ontime{stroke:#5d6778;stroke-width:1;stroke-dasharray:4 3}
svg.plot .cross-dot{fill:var(--err)}
svg.plot .curve{fill:none;stroke:var(--note);stroke-width:2.2}
svg.plot .tick{font-size:10.5px;fill:var(--mute)}
svg.plot .axis{font-size:11.5px;fill:var(--ink)}
svg.plot .limit-label,svg.plot .cross-label{font-size:11px;fill:var(--err)}
svg.plot .curve-label{font-size:11px;fill:var(--note)}
svg.plot .suggested{fill:none;stroke:var(--ok);stroke-width:1.8;stroke-dasharray:7 4}
svg.plot .suggested-label{font-size:11px;fill:var(--ok)}
table.plot-values td{padding:1px 10px}
footer{padding:10px 32px 24px;color:var(--mute);font-size:12px;border-top:1px solid var(--line)}
@media print{header{background:none}#designs th::after{content:none}
.finding{break-inside:avoid}figure{break-inside:avoid}}
"""

# Sorting of the designs table. The sort state lives in the address (#sort=key:dir) so a
# sorted view can be bookmarked or shared, and a page opened that way arrives sorted.
SCRIPT = """
(function () {
  "use strict";
  var table = document.getElementById("designs");
  if (!table) { return; }
  var heads = Array.prototype.slice.call(table.tHead.rows[0].cells);
  function keyOf(cell) {
    var v = cell.getAttribute("data-sort");
    return v === null ? cell.textContent.trim() : v;
  }
  function sortBy(index, dir) {
    var body = table.tBodies[0];
    var rows = Array.prototype.slice.call(body.rows);
    var numeric = rows.every(function (r) {
      var k = keyOf(r.cells[index]);
      return k !== "" && !isNaN(Number(k));
    });
    rows.sort(function (a, b) {
      var x = keyOf(a.cells[index]), y = keyOf(b.cells[index]);
      var c = numeric ? Number(x) - Number(y) : (x < y ? -1 : (x > y ? 1 : 0));
      if (dir === "desc") { c = -c; }
      if (c === 0) {
        c = Number(a.getAttribute("data-order")) - Number(b.getAttribute("data-order"));
      }
      return c;
    });
    rows.forEach(function (r) { body.appendChild(r); });
    heads.forEach(function (th, i) {
      th.setAttribute("aria-sort",
        i === index ? (dir === "asc" ? "ascending" : "descending") : "none");
    });
  }
  function fromAddress() {
    var m = /^#sort=([a-z]+):(asc|desc)$/.exec(window.location.hash);
    if (!m) { return; }
    heads.forEach(function (th, i) {
      if (th.getAttribute("data-key") === m[1]) { sortBy(i, m[2]); }
    });
  }
  heads.forEach(function (th, i) {
    function activate() {
      var dir = th.getAttribute("aria-sort") === "ascending" ? "desc" : "asc";
      sortBy(i, dir);
      try {
        history.replaceState(null, "", "#sort=" + th.getAttribute("data-key") + ":" + dir);
      } catch (e) { /* some browsers refuse on file: pages; sorting still works */ }
    }
    th.addEventListener("click", activate);
    th.addEventListener("keydown", function (ev) {
      if (ev.key === "Enter" || ev.key === " ") { ev.preventDefault(); activate(); }
    });
  });
  fromAddress();
  window.addEventListener("hashchange", fromAddress);
})();
"""

# Nothing may be fetched: the page is complete in itself.
CSP = (
    "default-src 'none'; style-src 'unsafe-inline'; script-src 'unsafe-inline'; "
    "img-src data:; base-uri 'none'; form-action 'none'"
)


def format_html(results: Sequence[CheckResult], options: ReportOptions) -> str:
    """The whole library scan as one self-contained HTML page."""
    ordered = sorted(results, key=lambda r: r.circuit.path)
    anchors = {r.circuit.path: f"d{i}" for i, r in enumerate(ordered, 1)}
    numbered: dict[str, list[_Numbered]] = {}
    count = 0
    for result in ordered:
        items = []
        for finding in sorted(result.findings, key=Finding.sort_key):
            count += 1
            items.append(_Numbered(finding, f"f{count}"))
        numbered[result.circuit.path] = items
    files = len(ordered)
    meta = (
        f"drivelint {__version__} · {files} netlist{'s' * (files != 1)} · "
        f"{count} finding{'s' * (count != 1)}"
    )
    body = [
        "<!DOCTYPE html>",
        '<html lang="en"><head><meta charset="utf-8">',
        f'<meta http-equiv="Content-Security-Policy" content="{_e(CSP)}">',
        '<meta name="viewport" content="width=device-width, initial-scale=1">',
        '<meta name="generator" content="drivelint">',
        "<title>drivelint report: floating gate drives</title>",
        f"<style>{STYLE}</style></head><body>",
        "<header><h1>drivelint report: floating gate drives</h1>"
        f'<p class="meta">{_e(meta)}</p></header><main>',
    ]
    if not ordered:
        body.append('<p class="all-clean">No netlists were checked.</p>')
    else:
        body.append(_summary(ordered, numbered))
        body.append(_designs_table(ordered, anchors))
        body.append('<section id="details"><h2>Designs in detail</h2>')
        body.extend(
            _design_article(r, anchors[r.circuit.path], numbered[r.circuit.path], options.explain)
            for r in ordered
        )
        body.append("</section>")
    body.append(
        "</main><footer>Generated by drivelint "
        f"{_e(__version__)}. Values are in SI units with their origins; every finding names "
        "the netlist line it comes from. This page is self-contained and fetches nothing."
        f"</footer><script>{SCRIPT}</script></body></html>"
    )
    return "\n".join(body) + "\n"
