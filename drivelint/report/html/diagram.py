"""The stage sketch: a block diagram of one recognised drive stage, as inline SVG."""

from __future__ import annotations

from collections.abc import Iterable, Sequence
from dataclasses import dataclass, field

from drivelint.circuit.model import Circuit
from drivelint.netlist.values import format_si
from drivelint.report.html.markup import dot as _dot
from drivelint.report.html.markup import esc as _e
from drivelint.report.html.markup import ground as _ground
from drivelint.report.html.markup import label as _label
from drivelint.report.html.markup import terminal as _terminal
from drivelint.report.html.markup import wire as _wire
from drivelint.stages.model import DriveStage, GatePath

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
    # Boxes drawn so far: a device on two paths (a gate resistor shared by the pull-up and
    # the pull-down) is drawn once, and named where the second path passes through it.
    drawn: set[str] = field(default_factory=set)


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
    if name in canvas.drawn:
        return (
            f'<g class="ref" data-ref="{_e(name)}"><title>{_e(name)}, drawn once</title>'
            + _label(cx, cy + 4, f"via {_short(name, 12)}", "middle", "ref")
            + "</g>"
        )
    canvas.drawn.add(name)
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
            label = path.returns_to
            negative = stage.supply.negative
            if path.returns_to == "negative" and negative is not None:
                # a turn-off supply: its level is against the source, not ground
                level = f" {format_si(negative.volts, 'V')}" if negative.volts is not None else ""
                label = f"{path.end_net}{level} to source"
            marks.append(_label(x + 7, stop + 4, label))

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
                hit_canvas = _Canvas(
                    circuit, stage, canvas.highlight | {label}, commanded, canvas.drawn
                )
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
            hit_canvas = _Canvas(circuit, stage, canvas.highlight | {name}, commanded, canvas.drawn)
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
