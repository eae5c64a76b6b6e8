"""The numbers of one stage that the rules share, each computed once with its origin.

A rule reads these and the physics functions; it never digs into parts files or model
cards itself, so a value means the same in every rule and every finding can say where it
came from.
"""

from __future__ import annotations

import math
from collections.abc import Callable, Mapping, Sequence
from functools import cached_property
from typing import TYPE_CHECKING

from drivelint.circuit.model import Circuit, Device
from drivelint.diagnostics import Span
from drivelint.netlist.waveforms import Waveform
from drivelint.physics import bootstrap as boot_physics
from drivelint.physics import diode as diode_physics
from drivelint.physics import gate as gate_physics
from drivelint.ratings.directives import DirectiveSet
from drivelint.ratings.ratings import Ratings
from drivelint.ratings.values import Value
from drivelint.stages.model import DriveStage

if TYPE_CHECKING:
    from drivelint.checks.drains import Drain, OnDrains

# The smallest current at which a model card's forward drop is evaluated: a boot supply
# at rest still feeds about a microampere of capacitor and board leakage (common
# practice), and the ideal Shockley law would otherwise give a drop of zero.
DIODE_VF_MIN_CURRENT = 1e-6


def devices_by_net(circuit: Circuit) -> dict[str, list[Device]]:
    """Every device touching each net; built once per circuit and shared by its stages."""
    index: dict[str, list[Device]] = {}
    for device in circuit.devices.values():
        for net in set(device.nets):
            index.setdefault(net, []).append(device)
    return index


class StageFacts:
    """Lazily computed quantities of one floating stage."""

    def __init__(
        self,
        stage: DriveStage,
        circuit: Circuit,
        ratings: Ratings,
        directives: DirectiveSet,
        conditions: dict[str, Value] | None = None,
        by_net: Mapping[str, Sequence[Device]] | None = None,
    ) -> None:
        self.by_net = by_net if by_net is not None else devices_by_net(circuit)
        self.stage = stage
        self.circuit = circuit
        self.ratings = ratings
        self.directives = directives
        self.configured = conditions or {}

    # -- devices --------------------------------------------------------------------------

    def device(self, name: str | None) -> Device | None:
        return self.circuit.devices.get(name) if name else None

    @cached_property
    def switch(self) -> Device:
        return self.circuit.devices[self.stage.switch]

    @cached_property
    def diode(self) -> Device | None:
        return self.device(self.stage.supply.diode)

    @cached_property
    def capacitor(self) -> Device | None:
        return self.device(self.stage.supply.capacitor)

    def span_of(self, name: str) -> Span:
        device = self.device(name)
        if device is not None:
            return device.span
        instance = self.circuit.instances.get(name)
        return instance.span if instance else self.stage.span

    # -- operating conditions ---------------------------------------------------------------

    def condition(self, key: str) -> Value | None:
        given = self.directives.conditions.get(key)
        if given is not None:
            value, span = given
            unit = {
                "fsw": "Hz",
                "duty_max": "1",
                "on_time_max": "s",
                "ambient": "K",
                "load_current": "A",
            }.get(key, "V")
            return Value(value, unit, f"directive ({span.path}:{span.line})")
        return self.configured.get(key)

    @cached_property
    def threshold(self) -> float | None:
        waveform = self.stage.control.waveform if self.stage.control else None
        if waveform is None:
            return None
        return (waveform.high() + waveform.low()) / 2

    def _control_origin(self) -> str:
        control = self.stage.control
        source = control.source if control else None
        device = self.device(source)
        where = f" ({device.span.path}:{device.span.line})" if device else ""
        return f"control waveform of {source}{where}"

    @cached_property
    def v_bus(self) -> Value | None:
        given = self.condition("v_bus")
        if given is not None:
            return given
        bus = self.stage.bus
        if bus is None or bus.volts is None:
            return None
        return Value(bus.volts, "V", f"DC rail {bus.net}")

    @cached_property
    def v_aux(self) -> Value | None:
        given = self.condition("v_aux")
        if given is not None:
            return given
        aux = self.stage.supply.aux
        if aux is None or aux.volts is None:
            return None
        return Value(aux.volts, "V", f"DC rail {aux.net}")

    @cached_property
    def fsw(self) -> Value | None:
        given = self.condition("fsw")
        if given is not None:
            return given
        waveform = self.stage.control.waveform if self.stage.control else None
        frequency = waveform.frequency() if waveform else None
        return Value(frequency, "Hz", self._control_origin()) if frequency else None

    def _measure_control(
        self,
        key: str,
        unit: str,
        above: Callable[[Waveform, float], float | None],
        below: Callable[[Waveform, float], float | None],
    ) -> Value | None:
        """A condition given by directive or configuration, else measured on the control
        waveform: the time (or fraction) it commands the switch on. An inverting drive
        commands it on while its input is low."""
        given = self.condition(key)
        if given is not None:
            return given
        control = self.stage.control
        if control is None or control.waveform is None or self.threshold is None:
            return None
        measure = below if control.inverting else above
        value = measure(control.waveform, self.threshold)
        return Value(value, unit, self._control_origin()) if value is not None else None

    @cached_property
    def duty_max(self) -> Value | None:
        return self._measure_control(
            "duty_max", "1", lambda w, t: w.duty_above(t), lambda w, t: w.duty_below(t)
        )

    @cached_property
    def on_time(self) -> Value | None:
        """The longest continuous on-time the control demands (inf for a DC command)."""
        return self._measure_control(
            "on_time_max",
            "s",
            lambda w, t: w.longest_time_above(t),
            lambda w, t: w.longest_time_below(t),
        )

    @cached_property
    def off_time(self) -> Value | None:
        """The shortest off-time per cycle, when the control is periodic."""
        if self.fsw is None or self.duty_max is None:
            return None
        return Value((1 - self.duty_max.value) / self.fsw.value, "s", "computed: (1 − D)/f_sw")

    # -- the floating supply --------------------------------------------------------------

    @cached_property
    def diode_vf(self) -> Value:
        rated = self.ratings.get(self.diode, "vf")
        if rated is not None:
            return rated
        model = self.diode.model if self.diode else None
        if model is not None and model.params.get("is"):
            # At the end of a recharge the diode carries only what the boot supply draws,
            # so its drop is taken at that current (Shockley relation), not at a rated one.
            current = max(self.recharge_end_current, DIODE_VF_MIN_CURRENT)
            n = model.params.get("n", 1.0)
            drop = diode_physics.forward_voltage(current, model.params["is"], n)
            drop += current * model.params.get("rs", 0.0)
            from drivelint.netlist.values import format_si

            return Value(
                drop,
                "V",
                f"model {model.name} IS/N/RS at the end-of-recharge current "
                f"{format_si(current, 'A')} ({model.span.path}:{model.span.line})",
            )
        return Value(0.7, "V", "default: silicon junction forward drop (common practice)")

    @cached_property
    def v_boot0(self) -> Value | None:
        """The boot supply just after a full recharge (V_boot,0)."""
        supply = self.stage.supply
        if supply.kind == "isolated" and supply.aux and supply.aux.volts is not None:
            return Value(supply.aux.volts, "V", f"isolated source {supply.source}")
        if supply.kind != "bootstrap" or self.v_aux is None or self.diode is None:
            return None
        volts = boot_physics.bootstrap_voltage(self.v_aux.value, self.diode_vf.value)
        return Value(volts, "V", "computed: V_aux − V_F")

    @cached_property
    def vgs_on(self) -> Value:
        found = self.ratings.get_or_default(self.switch, "vgs_on")
        assert found is not None
        return found

    @cached_property
    def uvlo(self) -> Value | None:
        driver = self.stage.driver
        if driver is None:
            return None
        from drivelint.ratings.units import parse_quantity

        part = self.ratings.parts.get(driver.subckt)
        raw = part.raw("uvlo_boot") if part else None
        if raw is None:
            return None
        return Value(parse_quantity(raw, "V"), "V", f"{part.origin} (part {part.name} uvlo_boot)")  # type: ignore[union-attr]

    @cached_property
    def v_boot_min(self) -> Value:
        """The lowest boot voltage that still drives the switch fully on."""
        candidates = [self.vgs_on] + ([self.uvlo] if self.uvlo else [])
        return max(candidates, key=lambda v: v.value)

    @cached_property
    def c_hold(self) -> Value | None:
        cap = self.capacitor
        if cap is None or cap.value is None:
            return None
        return Value(
            cap.value * cap.multiplier, "F", f"{cap.name} ({cap.span.path}:{cap.span.line})"
        )

    # -- charge and current ---------------------------------------------------------------------

    @cached_property
    def qg_switch(self) -> Value | None:
        """The switch's own gate charge: rated, or estimated from its model's capacitances."""
        rated = self.ratings.get(self.switch, "qg")
        multiplier = self.switch.multiplier
        if rated is not None:
            return Value(rated.value * multiplier, "C", rated.origin)
        model = self.switch.model
        drive = self.v_boot0.value if self.v_boot0 else 10.0
        bus = self.v_bus.value if self.v_bus else 0.0
        if model is None:
            return None
        params = model.params
        width = self.switch.params.get("w", 1.0)
        if model.type == "vdmos" and "cgs" in params:
            c_gs, c_gd = params["cgs"], params.get("cgdmax", 0.0)
        elif "cgso" in params or "cgdo" in params:
            c_gs, c_gd = params.get("cgso", 0.0) * width, params.get("cgdo", 0.0) * width
        else:
            return None
        charge = gate_physics.gate_charge_estimate(c_gs, c_gd, drive, bus) * multiplier
        return Value(
            charge,
            "C",
            f"estimate from model {model.name} capacitances: C_gs·V_drive + C_gd·(V_bus + V_drive)",
        )

    @cached_property
    def qg_external(self) -> Value:
        """Charge taken by capacitors on the gate: to the source C·V_boot, elsewhere
        C·(V_bus + V_boot), as the gate rises from off to V_bus + V_boot."""
        stage = self.stage
        drive = self.v_boot0.value if self.v_boot0 else 0.0
        bus = self.v_bus.value if self.v_bus else 0.0
        total = 0.0
        names = []
        for device in self.by_net.get(stage.gate, ()):
            if device.kind != "capacitor" or device.value is None or device.name in stage.related:
                continue
            far = next((n for n in device.nets if n != stage.gate), None)
            if far is None:
                continue
            swing = drive if far == stage.source else bus + drive
            total += device.value * device.multiplier * swing
            names.append(device.name)
        how = f"computed: capacitors on the gate ({', '.join(names)})" if names else "none"
        return Value(total, "C", how)

    @cached_property
    def qg(self) -> Value | None:
        """Charge the boot supply gives the gate at each turn-on (switch plus external)."""
        own = self.qg_switch
        if own is None:
            return None
        if self.qg_external.value == 0:
            return own
        return Value(
            own.value + self.qg_external.value,
            "C",
            f"{own.origin}; plus {self.qg_external.text()} {self.qg_external.origin}",
        )

    def _driver_value(self, key: str, unit: str) -> Value | None:
        driver = self.stage.driver
        if driver is None:
            return None
        from drivelint.ratings.units import parse_quantity

        part = self.ratings.parts.get(driver.subckt)
        raw = part.raw(key) if part else None
        if part is None or raw is None:
            return None
        return Value(parse_quantity(raw, unit), unit, f"{part.origin} (part {part.name} {key})")

    @cached_property
    def q_ls(self) -> Value:
        found = self._driver_value("q_levelshift", "C")
        return found or Value(0.0, "C", "no driver IC level shifter")

    @cached_property
    def i_quiescent(self) -> Value:
        found = self._driver_value("iq_boot", "A")
        return found or Value(0.0, "A", "no driver IC on the boot supply")

    @cached_property
    def i_leak(self) -> Value:
        found = self.ratings.get(self.diode, "ir_leak")
        return found or Value(0.0, "A", "no bootstrap diode leakage known")

    @cached_property
    def on_drains(self) -> OnDrains:
        """Every steady current out of the hold capacitor while the switch is on."""
        from drivelint.checks.drains import on_drains

        return on_drains(self.stage, self, self.v_boot0.value if self.v_boot0 else 0.0)

    @cached_property
    def drains(self) -> tuple[Drain, ...]:
        """The resistive drains (resistors, level-shift branches) while the switch is on."""
        return self.on_drains.resistive if self.v_boot0 is not None else ()

    @cached_property
    def recharge_end_current(self) -> float:
        """What the boot supply draws at the end of a recharge, with the switch off: the
        driver's quiescent current and the leakage it supplies (the gate is low, so gate and
        level-shift resistors carry next to nothing)."""
        return self.i_quiescent.value + self.i_leak.value

    @cached_property
    def i_resistive(self) -> Value:
        return self.on_drains.i_resistive

    @cached_property
    def i_drain(self) -> Value:
        """Every current that discharges the hold capacitor while the switch is on."""
        return self.on_drains.total

    @cached_property
    def delta_v_allowed(self) -> Value | None:
        if self.v_boot0 is None:
            return None
        droop = boot_physics.allowed_droop(self.v_boot0.value, self.v_boot_min.value)
        return Value(droop, "V", "computed: V_boot,0 − V_boot,min")

    def finite(self, value: Value | None) -> bool:
        return value is not None and math.isfinite(value.value)
