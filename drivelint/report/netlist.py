"""What `drivelint netlist` prints: the elaborated circuit, as text or JSON."""

from __future__ import annotations

import json
import math
from collections.abc import Callable, Iterable, Iterator
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


class _Array:
    """A JSON array written element by element, never held as a list."""

    __slots__ = ("items",)

    def __init__(self, items: Iterable[Any]) -> None:
        self.items = items


class _Object:
    """A JSON object whose values may be :class:`_Array` or :class:`_Object` (in key order)."""

    __slots__ = ("fields",)

    def __init__(self, fields: Iterable[tuple[str, Any]]) -> None:
        self.fields = fields


def _fields(circuit: Circuit) -> Iterator[tuple[str, Any]]:
    yield "path", circuit.path
    yield "title", circuit.title
    yield "files", list(circuit.files)
    yield "devices", _Array(device_json(d) for d in circuit.devices.values())
    yield "nets", _Array(circuit.nets)
    yield "rails", {net: volts for net, volts in circuit.rails.items()}
    yield (
        "sources",
        _Array(
            {"name": d.name, "waveform": d.waveform.to_json()}
            for d in circuit.devices.values()
            if d.waveform is not None
        ),
    )
    yield (
        "instances",
        _Array(
            {
                "name": i.name,
                "subckt": i.subckt,
                "ports": dict(i.ports),
                **({"opaque": True} if i.opaque else {}),
            }
            for i in circuit.instances.values()
        ),
    )
    yield (
        "missing",
        [
            {"kind": m.kind, "name": m.name, "path": m.span.path, "line": m.span.line}
            for m in circuit.missing
        ],
    )
    yield "diagnostics", [d.to_json() for d in circuit.diagnostics]


def _plain(value: Any) -> Any:
    if isinstance(value, _Array):
        return [_plain(v) for v in value.items]
    if isinstance(value, _Object):
        return {k: _plain(v) for k, v in value.fields}
    return value


def netlist_json(circuit: Circuit) -> dict[str, Any]:
    """What ``netlist --format json`` prints for one circuit, as one dict (for small ones;
    the command writes it with :func:`write_netlist_json`)."""
    plain: dict[str, Any] = _plain(_Object(_fields(circuit)))
    return plain


_END = object()


def _write(value: Any, write: Callable[[str], object], level: int) -> None:
    """``value`` exactly as ``json.dumps(value, indent=2)`` writes it at nesting ``level``,
    arrays and objects of the stream one element at a time."""
    pad = "  " * level
    inner = pad + "  "
    if isinstance(value, _Array | _Object):
        pairs = iter(value.items if isinstance(value, _Array) else value.fields)
        first = next(pairs, _END)
        if first is _END:
            write("[]" if isinstance(value, _Array) else "{}")
            return
        write("[" if isinstance(value, _Array) else "{")
        item: Any = first
        separator = "\n"
        while item is not _END:
            write(separator + inner)
            if isinstance(value, _Array):
                _write(item, write, level + 1)
            else:
                key, field = item
                write(json.dumps(key) + ": ")
                _write(field, write, level + 1)
            separator = ",\n"
            item = next(pairs, _END)
        write("\n" + pad + ("]" if isinstance(value, _Array) else "}"))
        return
    text = json.dumps(value, indent=2)
    write(text.replace("\n", "\n" + pad) if level else text)


def write_netlist_json(
    circuits: Iterable[Circuit], count: int, write: Callable[[str], object]
) -> None:
    """``netlist --format json``: one circuit as an object, several as ``{"decks": […]}``,
    written device by device (the output of a 100k-device deck is never one string).
    ``circuits`` may be a generator loading each in turn; ``count`` says how many."""
    if count == 1:
        value: Any = _Object(_fields(next(iter(circuits))))
    else:
        value = _Object([("decks", _Array(_Object(_fields(c)) for c in circuits))])
    _write(value, write, 0)
    write("\n")


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
