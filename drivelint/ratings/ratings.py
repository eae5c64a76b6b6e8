"""Ratings of one device, by precedence: directive, parts library, model card, default.

Every value carries its origin, so a finding can say where each input came from.
"""

from __future__ import annotations

from collections.abc import Mapping
from dataclasses import dataclass

from drivelint.circuit.model import Device
from drivelint.ratings.directives import PART_KEYS, DirectiveSet
from drivelint.ratings.parts import SWITCH_TECHNOLOGY, PartsLibrary
from drivelint.ratings.units import UnitError, parse_quantity
from drivelint.ratings.values import Value

# Documented defaults, used when nothing else gives a value.
DEFAULTS: Mapping[str, tuple[float, str]] = {
    # Power MOSFETs are typically rated V_GS(max) = ±20 V (common practice).
    "vgs_max": (20.0, "default: typical power MOSFET rating (common practice)"),
    # A silicon junction conducts about 0.7 V (textbook).
    "vf": (0.7, "default: silicon junction forward drop (common practice)"),
}

# Defaults by switch technology, used before DEFAULTS where the parts file and the model
# give nothing. Gate ratings of SiC MOSFETs are asymmetric: +22 V / −8 V is a usual
# absolute-maximum pair, and they are rated on at 15 to 18 V (common practice, from
# memory; give the part's own figures). IGBTs are rated V_GE = ±20 V; their V_CE(sat) is
# specified at V_GE = 15 V and rises only a little down to about 13 V, the lowest on-level
# a 15 V drive at its tolerance is judged against (common practice, from memory).
TECHNOLOGY_DEFAULTS: Mapping[str, Mapping[str, tuple[float, str]]] = {
    "sic": {
        "vgs_max": (
            22.0,
            "default: typical SiC MOSFET rating +22 V (common practice, from memory)",
        ),
        "vgs_min": (-8.0, "default: typical SiC MOSFET rating −8 V (common practice, from memory)"),
        "vgs_on": (
            15.0,
            "default: SiC MOSFETs are rated on at 15 V (common practice, from memory)",
        ),
    },
    "igbt": {
        "vgs_max": (20.0, "default: typical IGBT V_GE rating ±20 V (common practice)"),
        "vgs_on": (
            13.0,
            "default: IGBTs are fully on from V_GE = 13 V, V_CE(sat) rated at 15 V "
            "(common practice, from memory)",
        ),
    },
}


class RatingError(ValueError):
    """A parts-library value that cannot be read; names the part and key."""


@dataclass(frozen=True, slots=True)
class Ratings:
    """Ratings by precedence: directives, then the parts library, then the model card."""

    parts: PartsLibrary
    directives: DirectiveSet

    def get(self, device: Device | None, key: str) -> Value | None:
        """The rating ``key`` of ``device`` from the first source that has it."""
        if device is None:
            return None
        unit = PART_KEYS[key]
        given = self.directives.parts.get(device.name, {}).get(key)
        if given is not None:
            value, span = given
            return Value(value, unit, f"directive ({span.path}:{span.line})")
        part = self.parts.get(device.model_name)
        if part is not None:
            raw = part.raw(key)
            if raw is not None:
                try:
                    number = parse_quantity(raw, unit)
                except UnitError as exc:
                    raise RatingError(f"{part.origin}: part.{part.name}.{key}: {exc}") from None
                return Value(number, unit, f"{part.origin} (part {part.name} {key})")
        return self.from_model(device, key)

    def from_model(self, device: Device, key: str) -> Value | None:
        model = device.model
        if model is None:
            return None
        where = f"model {model.name} ({model.span.path}:{model.span.line})"
        params = model.params
        if device.kind == "diode":
            if key in ("vrrm", "vz") and params.get("bv"):
                return Value(params["bv"], "V", f"{where} BV")
            if key == "trr" and params.get("tt"):
                # The charge-control model stores TT·I_F; recovery lasts about TT when the
                # reverse current equals the forward current (t_s = TT·ln 2 ≈ 0.7·TT), so TT is
                # the estimate used (charge-control model, standard semiconductor texts).
                return Value(params["tt"], "s", f"{where} TT (estimate)")
            if key == "ir_leak" and params.get("is"):
                return Value(params["is"], "A", f"{where} IS (reverse saturation, a lower bound)")
        if device.kind == "mosfet":
            if key == "vth" and "vto" in params:
                return Value(abs(params["vto"]), "V", f"{where} VTO")
        return None

    def get_or_default(self, device: Device | None, key: str) -> Value | None:
        found = self.get(device, key)
        if found is not None:
            return found
        default = TECHNOLOGY_DEFAULTS.get(self.technology(device), {}).get(key)
        default = default or DEFAULTS.get(key)
        return Value(default[0], PART_KEYS[key], default[1]) if default else None

    def technology(self, device: Device | None) -> str:
        return switch_technology(self.parts, device)

    def part_kind(self, device: Device | None) -> str | None:
        part = self.parts.get(device.model_name) if device else None
        return part.kind if part else None


def switch_technology(parts: PartsLibrary, device: Device | None) -> str:
    """ "igbt", "sic" or "" (a plain MOSFET): the parts library's kind first, then an IGBT
    macro recognised in elaboration."""
    if device is None:
        return ""
    part = parts.get(device.model_name)
    if part is not None and part.kind in SWITCH_TECHNOLOGY:
        return SWITCH_TECHNOLOGY[part.kind]
    return device.wrapper.technology if device.wrapper is not None else ""
