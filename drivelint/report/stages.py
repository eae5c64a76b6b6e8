"""What `drivelint stages` prints: a compact block per recognised switch."""

from __future__ import annotations

from collections.abc import Mapping, Sequence

from drivelint.circuit.model import Circuit
from drivelint.diagnostics import printable
from drivelint.ratings.values import Value
from drivelint.stages.model import DriveStage


def _waveform_text(stage: DriveStage) -> str:
    from drivelint.netlist.values import format_si

    control = stage.control
    if control is None:
        return "none recognised"
    head = control.source or (
        "tied to a fixed level" if control.kind == "tied" else "no source found"
    )
    if control.kind == "modulator":
        head = f"modulator {control.source}" + (
            f" ({', '.join(control.inputs)})" if control.inputs else ""
        )
    if control.waveform is None:
        return head + (" (inverting)" if control.inverting else "")
    wave = control.waveform
    detail = wave.kind
    frequency = wave.frequency()
    if frequency:
        duty = wave.duty_above((wave.high() + wave.low()) / 2)
        detail += f" {format_si(frequency, 'Hz')}"
        if duty is not None:
            detail += f", duty {duty:.1%}"
    elif wave.kind == "dc":
        detail += f" {format_si(wave.dc_level(), 'V')}"
    return f"{head}: {detail}" + (" (inverting)" if control.inverting else "")


def shifter_text(stage: DriveStage, current: Value | None) -> str | None:
    """The level shifter line: transistor, resistors, what it draws from the boot supply."""
    from drivelint.netlist.values import format_si

    shifter = stage.level_shifter
    if shifter is None:
        return None
    drives = f", drives pull-up {shifter.pull_up}" if shifter.pull_up else ""
    line = (
        f"    level shift: {shifter.transistor} via {', '.join(shifter.resistors) or 'no resistor'}"
    )
    line += drives
    if current is not None:
        when = "" if shifter.on_with_switch else " (it conducts while the switch is off)"
        line += (
            f"; draws {format_si(current.value, 'A')} from the boot supply while "
            f"{stage.switch} is on{when}"
        )
    return line


def stage_text(stage: DriveStage, shifter_current: Value | None = None) -> str:
    from drivelint.netlist.values import format_si

    kind = f"{stage.channel}, {stage.technology}" if stage.technology else stage.channel
    head = f"{stage.span}: {stage.switch} ({kind})"
    if not stage.floating:
        return f"{head}: not floating: {stage.floating_reason}"
    supply = stage.supply
    lines = [f"{head}: floating, {stage.mode}", f"    why:      {stage.floating_reason}"]
    bus = stage.bus
    if bus is not None:
        level = format_si(bus.volts, "V") if bus.volts is not None else "level not known"
        if bus.low is not None:
            level = f"{format_si(bus.low, 'V')} to {level} ({bus.source})"
        lines.append(f"    bus:      {bus.net} = {level}")
    parts = [supply.kind]
    if supply.boot_net:
        parts.append(f"boot net {supply.boot_net}")
    if supply.capacitor:
        parts.append(f"hold {supply.capacitor}")
    if supply.diode:
        parts.append(f"diode {supply.diode} ({supply.diode_orientation})")
    if supply.series_resistors:
        parts.append(f"via {'+'.join(supply.series_resistors)}")
    if supply.aux is not None:
        volts = "" if supply.aux.volts is None else f" = {format_si(supply.aux.volts, 'V')}"
        parts.append(f"from {supply.aux.net}{volts}")
    if supply.source:
        parts.append(f"source {supply.source}")
    negative = supply.negative
    if negative is not None and negative.volts is not None:
        parts.append(
            f"turn-off {negative.net} = {format_si(negative.volts, 'V')} to the source "
            f"({negative.source})"
        )
    lines.append("    supply:   " + ", ".join(parts))
    if stage.driver is not None:
        pins = " ".join(f"{r}={n}" for r, n in sorted(stage.driver.pins.items()))
        lines.append(
            f"    driver:   {stage.driver.device} ({stage.driver.subckt}, "
            f"by {stage.driver.origin}) {pins}"
        )
    for path in stage.pullups:
        lines.append(f"    pull-up:  {' -> '.join(path.devices)} from {path.returns_to}")
    if not stage.pullups:
        lines.append("    pull-up:  none recognised")
    for path in stage.pulldowns:
        lines.append(f"    pull-down: {' -> '.join(path.devices)} to {path.returns_to}")
    if not stage.pulldowns:
        lines.append("    pull-down: none recognised")
    for clamp in stage.clamps:
        volts = f" {format_si(clamp.voltage, 'V')}" if clamp.voltage else ""
        lines.append(f"    clamp:    {clamp.device} {clamp.kind}{volts}, {clamp.orientation}")
    if not stage.clamps:
        lines.append("    clamp:    none")
    for refresh in stage.refresh:
        lines.append(f"    refresh:  {refresh.kind}: {', '.join(refresh.devices)}")
    if not stage.refresh:
        lines.append("    refresh:  none recognised")
    lines.append(f"    control:  {_waveform_text(stage)}")
    shifter = shifter_text(stage, shifter_current)
    if shifter is not None:
        lines.append(shifter)
    lines.extend(f"    note:     {note}" for note in stage.notes)
    return "\n".join(lines)


def stages_text(
    circuit: Circuit,
    stages: Sequence[DriveStage],
    show_all: bool = False,
    shifter_currents: Mapping[str, Value] | None = None,
) -> str:
    shown = [s for s in stages if s.floating or show_all]
    floating = sum(1 for s in stages if s.floating)
    currents = shifter_currents or {}
    lines = [f"{circuit.path}: {len(stages)} switches, {floating} floating"]
    lines.extend(stage_text(s, currents.get(s.switch)) for s in shown)
    lines.extend(d.render() for d in circuit.diagnostics)
    # Names come from the netlist: no control character reaches a terminal.
    return "\n".join(printable(line) for text in lines for line in text.split("\n"))
