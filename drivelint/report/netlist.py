"""What `drivelint netlist` prints: the elaborated circuit, as text or JSON."""

from __future__ import annotations

import math
from typing import Any

from drivelint.circuit.model import Circuit, Device
from drivelint.diagnostics import printable


def _number(value: float) -> float | str:
    return value if math.isfinite(value) else ("inf" if value > 0 else "-inf")


def device_json(device: Device) -> dict[str, Any]:
    return {
        "name": device.name,
        "kind": device.kind,
        "model": device.model_name,
        "model_type": device.model_type,
        "value": None if device.value is None else _number(device.value),
        "nodes": {role: net for role, net in device.pins},
        "params": {k: _number(v) for k, v in sorted(device.params.items())},
        "multiplier": device.multiplier,
        "path": device.span.path,
        "line": device.span.line,
        **({"wrapper": device.wrapper.subckt} if device.wrapper else {}),
        **({"controls": list(device.controls)} if device.controls else {}),
        **({"behaviour": _behaviour_json(device)} if device.behaviour else {}),
    }


def _behaviour_json(device: Device) -> dict[str, Any]:
    assert device.behaviour is not None
    record = device.behaviour.to_json()
    value = record["value_at_0"]
    record["value_at_0"] = None if value is None else _number(value)
    return record


def netlist_json(circuit: Circuit) -> dict[str, Any]:
    return {
        "path": circuit.path,
        "title": circuit.title,
        "files": list(circuit.files),
        "devices": [device_json(d) for d in circuit.devices.values()],
        "nets": list(circuit.nets),
        "rails": {net: volts for net, volts in circuit.rails.items()},
        "sources": [
            {"name": d.name, "waveform": d.waveform.to_json()}
            for d in circuit.devices.values()
            if d.waveform is not None
        ],
        "instances": [
            {
                "name": i.name,
                "subckt": i.subckt,
                "ports": dict(i.ports),
                **({"opaque": True} if i.opaque else {}),
            }
            for i in circuit.instances.values()
        ],
        "missing": [
            {"kind": m.kind, "name": m.name, "path": m.span.path, "line": m.span.line}
            for m in circuit.missing
        ],
        "diagnostics": [d.to_json() for d in circuit.diagnostics],
    }


def netlist_text(circuit: Circuit) -> str:
    from drivelint.netlist.values import format_si

    lines = [f"{circuit.path}: {circuit.title}".rstrip(": ")]
    if len(circuit.files) > 1:
        lines.append("  files: " + ", ".join(circuit.files))
    lines.append(f"  {len(circuit.devices)} devices, {len(circuit.nets)} nets")
    for device in circuit.devices.values():
        pins = " ".join(f"{role}={net}" for role, net in device.pins)
        extra = []
        if device.model_name:
            extra.append(
                device.model_name + (f" ({device.model_type})" if device.model_type else "")
            )
        if device.value is not None:
            extra.append(format_si(device.value))
        if device.waveform is not None and device.waveform.kind != "dc":
            extra.append(device.waveform.kind)
        if device.behaviour is not None:
            extra.append(f"behavioural: {device.behaviour.expression}"[:80])
        lines.append(f"    {device.name:<14} {device.kind:<10} {pins}  {' '.join(extra)}".rstrip())
    if circuit.rails:
        rails = ", ".join(f"{net}={format_si(v, 'V')}" for net, v in circuit.rails.items())
        lines.append(f"  rails: {rails}")
    if circuit.missing:
        lines.append("  read in part, without: " + ", ".join(m.describe() for m in circuit.missing))
    for diagnostic in circuit.diagnostics:
        lines.append(diagnostic.render())
    return "\n".join(printable(line) for text in lines for line in text.split("\n"))
