"""Driver ICs: subcircuit instances kept opaque and given pin roles.

An instance is a driver when the parts library says so (``kind = "driver"`` with a pin
table), or when its port names follow the usual pin naming of gate-driver parts. Naming is
a fact of the trade with no single source (common practice): boot supply pins are called
VB, BOOT, HB or BST; the switch-node return VS, HS, SW or PH; the high output HO, GH or HG;
a negative supply the output sinks to (split turn-off supplies) VEE or VNEG.
"""

from __future__ import annotations

from collections.abc import Mapping

from drivelint.circuit.model import Circuit
from drivelint.ratings.parts import PartsLibrary
from drivelint.stages.model import DriverInfo

PIN_NAMES: Mapping[str, frozenset[str]] = {
    "boot": frozenset({"vb", "boot", "hb", "bst", "vboot", "cboot", "bs", "vbs", "bootstrap"}),
    "switch": frozenset({"vs", "hs", "sw", "ph", "lx", "phase", "sh", "vsw", "swn"}),
    "high_out": frozenset(
        {"ho", "gh", "hg", "dh", "ugate", "hdrv", "tg", "hout", "gate_h", "outh"}
    ),
    "low_out": frozenset({"lo", "gl", "lg", "dl", "lgate", "ldrv", "bg", "lout", "gate_l", "outl"}),
    "high_in": frozenset({"hin", "inh", "hi", "in_h", "pwmh", "ina", "in", "pwm"}),
    "low_in": frozenset({"lin", "inl", "li", "in_l", "pwml", "inb"}),
    "supply": frozenset({"vcc", "vdd", "vin", "vcc1", "pvcc", "vdrv"}),
    "ground": frozenset({"com", "gnd", "vss", "pgnd", "agnd", "sgnd"}),
    "enable": frozenset({"en", "sd", "enable", "sdn", "shdn", "dis"}),
    # the negative supply the output sinks to, below the switch node (split supplies)
    "negative": frozenset({"vee", "vee2", "vneg"}),
}
_ROLE_BY_NAME = {name: role for role, names in PIN_NAMES.items() for name in names}
REQUIRED_ROLES = frozenset({"boot", "switch", "high_out"})


def roles_from_pin_names(ports: tuple[str, ...]) -> dict[str, str] | None:
    """Port -> role when the names say "driver"; None when they do not."""
    roles = {port: _ROLE_BY_NAME[port] for port in ports if port in _ROLE_BY_NAME}
    if not REQUIRED_ROLES <= set(roles.values()):
        return None
    return roles


def find_drivers(circuit: Circuit, parts: PartsLibrary) -> dict[str, DriverInfo]:
    """Every subcircuit instance that is a driver, keyed by instance name."""
    drivers: dict[str, DriverInfo] = {}
    for instance in circuit.instances.values():
        ports = tuple(port for port, _ in instance.ports)
        part = parts.get(instance.subckt)
        if part is not None and part.kind == "driver" and part.pins:
            roles = {port: role for port, role in part.pins.items() if port in ports}
            origin = f"parts library ({part.origin})"
        else:
            found = roles_from_pin_names(ports)
            if found is None:
                continue
            roles, origin = found, "pin names"
        nets = dict(instance.ports)
        pins = {role: nets[port] for port, role in roles.items()}
        drivers[instance.name] = DriverInfo(instance.name, instance.subckt, pins, origin)
    # An instance inside a driver (a driver built from sub-blocks) is part of that driver.
    return {name: info for name, info in drivers.items() if not _inside_another(name, drivers)}


def _inside_another(name: str, drivers: Mapping[str, object]) -> bool:
    """True when an enclosing instance of ``name`` (``x1`` of ``x1.xu``) is a driver too:
    a lookup of each enclosing name, not a scan of every driver."""
    parts = name.split(".")
    return any(".".join(parts[:depth]) in drivers for depth in range(1, len(parts)))
