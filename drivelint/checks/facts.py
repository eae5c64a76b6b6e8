"""The numbers of one stage that the rules share, each computed once with its origin.

A rule reads these and the physics functions; it never digs into parts files or model
cards itself, so a value means the same in every rule and every finding can say where it
came from.

Voltages are to ground unless a name says otherwise. A supply given as a waveform (a surge,
a dip, a soft start) has a highest and a lowest level: stress figures use the highest
(``v_bus``, ``v_aux_max``, ``v_boot_max``), headroom and hold figures the lowest
(``v_aux``, ``v_boot0``).
"""

from __future__ import annotations

import math
from collections.abc import Callable, Mapping, Sequence
from dataclasses import dataclass
from functools import cached_property
from typing import TYPE_CHECKING

from drivelint.checks.corners import (
    Corners,
    charge_spread,
    corners_of,
    hold_capacitance,
    leakage,
    stress_capacitance,
)
from drivelint.checks.corners import supply as supply_corner
from drivelint.circuit.model import GROUND, Circuit, Device
from drivelint.diagnostics import Span
from drivelint.netlist.values import format_si
from drivelint.netlist.waveforms import Waveform
from drivelint.physics import bootstrap as boot_physics
from drivelint.physics import commutation
from drivelint.physics import diode as diode_physics
from drivelint.physics import gate as gate_physics
from drivelint.ratings.directives import DirectiveSet
from drivelint.ratings.ratings import Ratings
from drivelint.ratings.values import Value, computed
from drivelint.stages.model import DriveStage, Rail

if TYPE_CHECKING:
    from drivelint.checks.drains import Drain, OnDrains

# The smallest current at which a model card's forward drop is evaluated (the ideal
# Shockley law would otherwise give a drop of zero). A boot supply at rest feeds only what
# the netlist shows drawing from it; a real board adds capacitor and board leakage of up to
# a microampere (common practice), worth giving as the capacitor's or diode's ir_leak when
# a hold time depends on the last few tenths of a volt.
DIODE_VF_MIN_CURRENT = 1e-9
# Junction temperature when no ambient is given: SPICE's nominal temperature (TNOM, 27 °C),
# which is also what a simulation of the deck runs at (SPICE3 / ngspice manual).
DEFAULT_TEMPERATURE = 300.15
# A charge pump's diodes carry little more than the gate's steady current: their drop is
# taken at this current when nothing better is known (common practice: small-signal
# diodes at about a milliampere).
PUMP_DIODE_CURRENT = 1e-3
# A freewheeling load current at the switch node is taken at this current when nothing gives
# it (a body diode's drop changes by n·V_T·ln 10 ≈ 60 mV per decade).
FREEWHEEL_CURRENT_DEFAULT = 1.0
# Stray parts (leads, ammeters, shunts) followed from a driver pin along a commutation loop.
MAX_STRAY_STEPS = 6
# The gate takes its charge up to the Miller plateau within about this long of the driver's
# edge (tens of nanoseconds for a driver IC, common practice): a hold capacitor refilled
# faster than this through the bootstrap path while the node is still low gets that charge
# back before the node rises.
PLATEAU_TIME = 100e-9
# The diode refills a dip down to a few n·V_T, where its current has fallen back to what it
# carried before (Shockley law: e³ ≈ 20×).
REFILL_RESIDUE_NVT = 3.0
# The documented default for V_GS(on) when neither the parts library nor a gate-charge test
# voltage gives one: the V_GS at which R_DS(on) is rated, 10 V for standard-level parts and
# 4.5 V for logic-level ones, told apart by the model's threshold (common practice:
# logic-level parts have V_th of about 1–2 V, standard-level ones 2–4 V).
VGS_ON_DEFAULT = 10.0
VGS_ON_LOGIC_LEVEL = 4.5
LOGIC_LEVEL_MAX_VTO = 2.0


# A driver IC with no parts entry (recognised by its pin names) is charged conservative
# figures, never zero. From memory: the boot-supply quiescent current of high-side gate
# drivers is typically 50-150 uA, a few hundred uA at most; bootstrap-sizing application
# notes take about 5 nC of level-shifter charge per cycle for high-voltage (600 V)
# half-bridge drivers, and low-voltage drivers need well under 1 nC. The quiescent
# default is used only where the driver's model shows no drain of its own from the boot
# pin; the level-shift charge, which no behavioural model shows, always.
DRIVER_IQ_BOOT_DEFAULT = 250e-6
DRIVER_Q_LEVELSHIFT_DEFAULT = 1e-9  # buses up to DRIVER_HIGH_VOLTAGE
DRIVER_Q_LEVELSHIFT_HIGH_VOLTAGE = 5e-9
DRIVER_HIGH_VOLTAGE = 100.0


def _driver_default(facts: StageFacts, key: str, amount: float | None = None) -> str:
    driver = facts.stage.driver
    assert driver is not None
    part = facts.ratings.parts.get(driver.subckt)
    if part is not None:
        # The user's own entry leaves it out: taken as none, and listed as assumed.
        return f"none given: part {part.name} ({part.origin}) has no {key}, taken as 0"
    if key == "q_levelshift":
        figure = format_si(amount or 0.0, "C")
        high = amount == DRIVER_Q_LEVELSHIFT_HIGH_VOLTAGE
        what = f"level-shift charge for a {'high' if high else 'low'}-voltage bus"
    else:
        figure, what = format_si(DRIVER_IQ_BOOT_DEFAULT, "A"), "boot-supply quiescent current"
    return (
        f"default: {figure}, a conservative {what} for driver {driver.device} (no parts "
        f"entry for {driver.subckt}; typical drivers take less, from memory); give {key} "
        "for the part"
    )


class NetIndex(dict[str, list[Device]]):
    """Every device touching each net, and (built when first asked) the devices of one kind
    on a net and the two-terminal devices between two nets: a rule that looks along a net
    every stage shares (a gate rail, ground) reads an index, not the whole net per stage."""

    def __init__(self, devices: Mapping[str, Device]) -> None:
        super().__init__()
        self._devices = devices
        self._kinds: dict[tuple[str, str], list[Device]] = {}
        self._pairs: dict[frozenset[str], list[Device]] | None = None

    def of_kind(self, net: str, kind: str) -> Sequence[Device]:
        """The devices of ``kind`` on ``net``, in circuit order."""
        key = (net, kind)
        found = self._kinds.get(key)
        if found is None:
            found = self._kinds[key] = [d for d in self.get(net, ()) if d.kind == kind]
        return found

    def between(self, a: str, b: str) -> Sequence[Device]:
        """The devices whose terminals are on ``a`` and ``b`` and nowhere else (a != b)."""
        if self._pairs is None:
            pairs: dict[frozenset[str], list[Device]] = {}
            for device in self._devices.values():
                nets = frozenset(device.nets)
                if len(nets) == 2:
                    pairs.setdefault(nets, []).append(device)
            self._pairs = pairs
        return self._pairs.get(frozenset((a, b)), ())


def devices_by_net(circuit: Circuit) -> NetIndex:
    """Every device touching each net; built once per circuit and shared by its stages."""
    index = NetIndex(circuit.devices)
    for device in circuit.devices.values():
        for net in set(device.nets):
            index.setdefault(net, []).append(device)
    return index


def _diode_law(model: object) -> bool:
    """A model card whose junction law can be evaluated: IS and N both positive (N = 0 or a
    negative IS is no Shockley law; the documented defaults stand in)."""
    params = getattr(model, "params", None)
    if not params:
        return False
    return bool(params.get("is", 0.0) > 0 and params.get("n", 1.0) > 0)


def _where(device: Device) -> str:
    return f"{device.span.path}:{device.span.line}"


@dataclass(frozen=True, slots=True)
class SwitchGate:
    """What a switch's turn-off and on-state take, for any switch of the stage's leg: its
    input capacitance with the switch on, Miller charge, plateau, threshold, on-resistance
    and a turn-off time given outright; None where nothing gives it."""

    c_iss: Value | None
    q_gd: Value | None
    v_plateau: Value | None
    v_threshold: Value | None
    rds_on: Value | None
    t_off: Value | None
    rg_internal: Value | None


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
        overrides: Mapping[str, Value] | None = None,
    ) -> None:
        self.by_net = by_net if by_net is not None else devices_by_net(circuit)
        self.stage = stage
        self.circuit = circuit
        self.ratings = ratings
        self.directives = directives
        self.configured = conditions or {}
        # Conditions that win over directives and configuration (the nominal twin).
        self.overrides: Mapping[str, Value] = overrides or {}

    # -- devices --------------------------------------------------------------------------

    def device(self, name: str | None) -> Device | None:
        return self.circuit.devices.get(name) if name else None

    @cached_property
    def _index(self) -> NetIndex:
        return self.by_net if isinstance(self.by_net, NetIndex) else devices_by_net(self.circuit)

    def of_kind(self, net: str, kind: str) -> Sequence[Device]:
        """The devices of ``kind`` on ``net``, in circuit order (indexed once per circuit)."""
        return self._index.of_kind(net, kind)

    def between(self, a: str, b: str) -> Sequence[Device]:
        """The devices with terminals on ``a`` and ``b`` only, in circuit order."""
        return self._index.between(a, b)

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
        if key in self.overrides:
            return self.overrides[key]
        given = self.directives.conditions.get(key)
        if given is not None:
            value, span = given
            from drivelint.ratings.directives import CONDITION_KEYS

            unit = CONDITION_KEYS.get(key, "V")
            return Value(value, unit, f"directive ({span.path}:{span.line})")
        return self.configured.get(key)

    @cached_property
    def nominal(self) -> StageFacts:
        """The same stage judged at its nominal values (every tolerance corner off): what a
        design margin is applied to, beside the worst corner taken at face value."""
        return StageFacts(
            self.stage,
            self.circuit,
            self.ratings,
            self.directives,
            dict(self.configured),
            self.by_net,
            {**self.overrides, "corners": Value(0.0, "1", "the nominal values (corners off)")},
        )

    @cached_property
    def waveform(self) -> Waveform | None:
        control = self.stage.control
        return control.waveform if control else None

    @cached_property
    def modulated(self) -> bool:
        """The command comes out of a modulator: its duty is the loop's, not the netlist's."""
        control = self.stage.control
        return control is not None and control.modulated

    @cached_property
    def threshold(self) -> float | None:
        waveform = self.waveform
        if waveform is None:
            return None
        if waveform.kind == "dc":
            from drivelint.stages.recognise import DC_LOGIC_THRESHOLD

            return DC_LOGIC_THRESHOLD
        return (waveform.high() + waveform.low()) / 2

    def _control_origin(self) -> str:
        control = self.stage.control
        source = control.source if control else None
        if control is not None and control.kind == "tied":
            return "control input tied to a fixed level"
        device = self.device(source)
        where = f" ({_where(device)})" if device else ""
        if control is not None and control.modulated:
            return f"carrier of the modulator {source}{where}"
        return f"control waveform of {source}{where}"

    @cached_property
    def temperature(self) -> Value:
        given = self.condition("ambient")
        if given is not None:
            return given
        return Value(DEFAULT_TEMPERATURE, "K", "default: 27 °C, SPICE's nominal temperature (TNOM)")

    @cached_property
    def corners(self) -> Corners:
        """The tolerance corners the stage's figures are judged at (checks/corners.py)."""
        return corners_of(self)

    def _rail_value(self, rail: Rail | None, key: str, lowest: bool) -> Value | None:
        found = self._rail_nominal(rail, key, lowest)
        if found is None:
            return None
        # The corner: a gate rail within supply_tolerance of its level above the node it
        # charges from, the bus within bus_tolerance; low for hold figures, high for stress.
        bus = self.stage.bus.net if self.stage.bus else None
        if key == "v_aux" and (rail is None or rail.net != bus):
            reference = self.v_sw_low.value if self.stage.supply.kind == "bootstrap" else 0.0
            return supply_corner(self, found, reference, "supply_tolerance", not lowest, "rail")
        # the bus, or a pump fed from the bus itself: the bus's own tolerance
        return supply_corner(self, found, 0.0, "bus_tolerance", not lowest, "bus")

    def _rail_nominal(self, rail: Rail | None, key: str, lowest: bool) -> Value | None:
        given = self.condition(key)
        if given is not None:
            return given
        if rail is not None and rail.volts is None and key == "v_bus":
            return self._boost_output(rail)
        if rail is None or rail.volts is None:
            return None
        if rail.low is None:
            return Value(rail.volts, "V", f"DC rail {rail.net}")
        if lowest:
            return Value(rail.low, "V", f"lowest level of {rail.source} once up (rail {rail.net})")
        return Value(rail.volts, "V", f"highest level of {rail.source} (rail {rail.net})")

    def _boost_output(self, rail: Rail) -> Value | None:
        """A converter's output the drain sits on, as a synchronous boost's: an inductor from
        a DC rail V_in to the switch node, the high side (the rectifier) commanded on for
        D of the period: V_out = V_in/D (the ideal boost in continuous conduction, V_in/(1 −
        D_low) with D = 1 − D_low; textbook converter relation). Dead time in which the body
        diode conducts makes D smaller than 1 − D_low, so the figure errs high, as stresses
        should. None where the inductor does not come from a rail or the duty is not read."""
        duty = self.duty_max
        if duty is None or not 0.05 <= duty.value < 1.0:
            return None
        source = self.stage.source
        rails = self.circuit.rails
        for device in self.by_net.get(source, ()):
            if device.kind != "inductor" or len(device.nets) != 2:
                continue
            far = next((n for n in device.nets if n != source), source)
            v_in = rails.get(far)
            if v_in is None or not v_in > 0:
                continue
            return computed(
                v_in / duty.value,
                "V",
                f"computed: V_in/D = {format_si(v_in, 'V')}/{duty.value:.3g}, the output "
                f"{rail.net} of an ideal synchronous boost fed through {device.name} from rail "
                f"{far} (the duty from {duty.origin}; give v_bus)",
            )
        return None

    @cached_property
    def v_bus(self) -> Value | None:
        """The bus the drain switches, at its highest (stress)."""
        return self._rail_value(self.stage.bus, "v_bus", lowest=False)

    @cached_property
    def v_bus_min(self) -> Value | None:
        return self._rail_value(self.stage.bus, "v_bus", lowest=True)

    @cached_property
    def v_aux(self) -> Value | None:
        """The auxiliary rail (or pump feed) at its lowest once up (headroom, hold)."""
        return self._rail_value(self._aux_rail, "v_aux", lowest=True)

    @cached_property
    def v_aux_nominal(self) -> Value | None:
        """The auxiliary rail at its lowest as the netlist (or a condition) gives it,
        before its tolerance corner."""
        return self._rail_nominal(self._aux_rail, "v_aux", lowest=True)

    @cached_property
    def v_aux_max(self) -> Value | None:
        return self._rail_value(self._aux_rail, "v_aux", lowest=False)

    @cached_property
    def _aux_rail(self) -> Rail | None:
        supply = self.stage.supply
        if supply.kind not in ("bootstrap", "charge-pump"):
            return None
        return supply.aux

    @cached_property
    def v_sw_low(self) -> Value:
        """Where the switch node sits while it is pulled low: the refresh path's return."""
        levels = []
        for refresh in self.stage.refresh:
            if refresh.kind not in ("low-side switch", "freewheel diode"):
                continue
            ref = refresh.reference
            volts = 0.0 if ref in (None, GROUND) else self.circuit.rails.get(ref or "")
            if volts is not None:
                levels.append((volts, refresh.devices[0], ref or GROUND))
        if not levels:
            return Value(0.0, "V", "ground")
        volts, device, net = min(levels)
        if net == GROUND:
            return Value(0.0, "V", f"ground ({device} returns the switch node there)")
        return Value(volts, "V", f"rail {net} ({device} returns the switch node there)")

    @cached_property
    def fsw(self) -> Value | None:
        given = self.condition("fsw")
        if given is not None:
            return given
        waveform = self.waveform
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
        commands it on while its input is low. A modulator's duty is not measured: only
        a configured condition gives it."""
        given = self.condition(key)
        if given is not None:
            return given
        control = self.stage.control
        if control is None or control.waveform is None or self.threshold is None:
            return None
        if control.modulated:
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
        """The longest continuous on-time the control demands (inf for a DC command).

        Under a modulator with nothing configured, one period of its carrier stands in: a
        switching cycle cannot hold the switch on longer without the loop going to 100 %.
        """
        found = self._measure_control(
            "on_time_max",
            "s",
            lambda w, t: w.longest_time_above(t),
            lambda w, t: w.longest_time_below(t),
        )
        if found is None and self.waveform is None and self.condition("duty_max") is not None:
            fsw = self.condition("fsw")
            duty = self.condition("duty_max")
            if fsw is not None and duty is not None:
                # Conditions without a waveform: one period's share stands in.
                return computed(duty.value / fsw.value, "s", "computed: D/f_sw (conditions)")
        if found is not None and self.condition("on_time_max") is None:
            found = self._capped_by_duty(found)
        if found is not None or not self.modulated:
            return found
        if self.duty_max is not None and self.fsw is not None:
            return computed(
                self.duty_max.value / self.fsw.value,
                "s",
                f"computed: D_max/f_sw with the configured duty ({self.duty_max.origin})",
            )
        waveform = self.waveform
        period = waveform.period() if waveform else None
        if period is None:
            return None
        return Value(
            period,
            "s",
            f"one period of the carrier of the modulator {self.stage.control.source}"  # type: ignore[union-attr]
            " (the loop sets the duty, the netlist does not; set duty_max or on_time_max "
            "to refine)",
        )

    def _capped_by_duty(self, found: Value) -> Value:
        """A periodic command's on-time read from its waveform, capped at D_max/f_sw where
        a duty_max is given: the configured duty bounds each on-time (as on_time_max sets
        it outright) but never lengthens the pulse the waveform shows. A DC command keeps
        its unbounded on-time."""
        duty, waveform = self.condition("duty_max"), self.waveform
        if duty is None or waveform is None or waveform.period() is None or self.fsw is None:
            return found
        cap = duty.value / self.fsw.value
        if not found.value > cap:
            return found
        return computed(
            cap,
            "s",
            f"computed: D_max/f_sw = {duty.text()} / {self.fsw.text()} ({duty.origin}), "
            f"capping the {found.text()} of the {found.origin}",
        )

    @cached_property
    def never_on(self) -> bool:
        """The command never turns the switch on (a leg held off in this scenario)."""
        on = self.on_time
        return on is not None and on.value <= 0 and self.condition("on_time_max") is None

    @cached_property
    def off_time(self) -> Value | None:
        """The shortest time per cycle the switch node is held low: the high side's off-time
        (1 − D)/f_sw, less the dead time where the low side's own command shows it."""
        if self.fsw is None or self.duty_max is None:
            return None
        high_off = (1 - self.duty_max.value) / self.fsw.value
        best = Value(high_off, "s", "computed: (1 − D)/f_sw")
        for refresh in self.stage.refresh:
            command = refresh.command
            wave = command.waveform if command else None
            if command is None or wave is None or command.modulated:
                continue
            period = wave.period()
            if period is None:
                continue
            threshold = (wave.high() + wave.low()) / 2
            duty = wave.duty_below(threshold) if command.inverting else wave.duty_above(threshold)
            if duty is None:
                continue
            window = duty * period
            if 0 < window < best.value:
                device = self.device(command.source)
                where = f" ({_where(device)})" if device else ""
                best = Value(
                    window,
                    "s",
                    f"on-time of the low side {refresh.devices[0]}'s command "
                    f"{command.source}{where}: (1 − D)/f_sw = {format_si(high_off, 's')} "
                    "less the dead time",
                )
        return best

    # -- the diode -----------------------------------------------------------------------

    def diode_vf_at(self, current: float, why: str, device: Device | None = None) -> Value:
        """The forward drop of ``device`` (the bootstrap diode) at ``current``.

        A directive's vf is used as given. A model card with IS is evaluated at the current
        and the junction temperature (Shockley law with IS at temperature, plus I·RS), since
        a datasheet V_F is one point at a rated current (typically 1 A). Then the parts
        library's vf, then the documented default.
        """
        device = device if device is not None else self.diode
        if device is None:
            return Value(0.7, "V", "default: silicon junction forward drop (common practice)")
        given = self.directives.parts.get(device.name, {}).get("vf")
        if given is not None:
            return Value(given[0], "V", f"directive ({given[1].path}:{given[1].line})")
        model = device.model
        if model is not None and _diode_law(model):
            params = model.params
            amps = max(current, DIODE_VF_MIN_CURRENT) / device.multiplier
            drop = diode_physics.diode_drop(
                amps,
                params["is"],
                params.get("n", 1.0),
                params.get("rs", 0.0),
                self.temperature.value,
            )
            return Value(
                drop,
                "V",
                f"model {model.name} IS/N/RS at {format_si(amps * device.multiplier, 'A')} "
                f"({why}) and {self.temperature.text()} ({model.span.path}:{model.span.line})",
            )
        rated = self.ratings.get(device, "vf")
        if rated is not None:
            return rated
        return Value(0.7, "V", "default: silicon junction forward drop (common practice)")

    @cached_property
    def _n_vt(self) -> float | None:
        """N·V_T of the bootstrap diode's model at the junction temperature."""
        model = self.diode.model if self.diode else None
        if model is None or not _diode_law(model):
            return None
        return model.params.get("n", 1.0) * diode_physics.thermal_voltage(self.temperature.value)

    @cached_property
    def _tt(self) -> float:
        model = self.diode.model if self.diode else None
        return model.params.get("tt", 0.0) if model is not None else 0.0

    # -- dead time and freewheeling ---------------------------------------------------------

    @cached_property
    def freewheeling(self) -> bool:
        """A load current flows out of the switch node while the switch is off: an inductor
        on the node (directly or behind one series resistor) carries it, and a low-side
        switch's body diode or a freewheel diode takes it whenever nothing else conducts."""
        stage = self.stage
        if not any(r.kind in ("low-side switch", "freewheel diode") for r in stage.refresh):
            return False
        for device in self.by_net.get(stage.source, ()):
            if device.kind == "inductor":
                return True
            if device.kind == "resistor" and device.value is not None:
                far = next((n for n in device.nets if n != stage.source), None)
                # a resistor to ground or a rail is a load, not a lead to an inductor
                if not far or far == GROUND or far in self.circuit.rails:
                    continue
                if any(d.kind == "inductor" for d in self.by_net.get(far, ())):
                    return True
        return False

    @cached_property
    def dead_time(self) -> Value | None:
        """The gap before each turn-on in which neither switch conducts: half the difference
        between the high side's off-time and the low side's own on-time (taken as split
        evenly between the two edges)."""
        if self.off_time is None or self.fsw is None or self.duty_max is None:
            return None
        high_off = (1 - self.duty_max.value) / self.fsw.value
        gap = high_off - self.off_time.value
        if gap <= 0:
            return None
        return computed(gap / 2, "s", "computed: ((1 − D)/f_sw − low-side on-time)/2")

    @cached_property
    def freewheel_drop(self) -> Value:
        """Forward drop of what carries the freewheeling current in a dead time: the low
        side's body diode (VDMOS or bulk-junction model IS/N), or the freewheel diode."""
        load = self.condition("load_current")
        current = load.value if load else FREEWHEEL_CURRENT_DEFAULT
        why = f"{format_si(current, 'A')} of load current" + ("" if load else " (default)")
        return self.freewheel_drop_at(current, why)

    def freewheel_drop_at(self, current: float, why: str) -> Value:
        """The freewheeling part's forward drop at ``current`` (``why`` says where that
        current comes from)."""
        for refresh in self.stage.refresh:
            device = self.device(refresh.devices[0])
            model = device.model if device else None
            if device is None or model is None or not _diode_law(model):
                continue
            if refresh.kind in ("low-side switch", "freewheel diode"):
                params = model.params
                drop = diode_physics.diode_drop(
                    current / device.multiplier,
                    params["is"],
                    params.get("n", 1.0),
                    params.get("rs", 0.0) if refresh.kind == "freewheel diode" else 0.0,
                    self.temperature.value,
                )
                return Value(drop, "V", f"model {model.name} IS/N at {why}")
        return Value(0.7, "V", "default: silicon junction forward drop (common practice)")

    def commutation_strays(
        self, top: str, bottom: str
    ) -> tuple[float, tuple[str, ...], tuple[str, str]] | None:
        """The stray inductance on the loop from the driver's switch pin to the top of the
        freewheeling part (``top``, e.g. a low side's drain) and from its bottom
        (``bottom``) to the driver's common, with the parts on it, from the circuit as
        written (the wire merge took them out), and the two pins' nets as written. ``top``
        and ``bottom`` are the part's nets as written. None where the loop is not the
        driver's (its pins are not on the part's nets) or a pin's net is ambiguous."""
        driver = self.stage.driver
        if driver is None:
            return None
        pins = [driver.pins.get("switch"), driver.pins.get("ground")]
        original = self.circuit.unmerged or self.circuit
        if pins[0] != self._merged_net(top) or pins[1] != self._merged_net(bottom):
            return None
        merged, written = (
            self.circuit.instances.get(driver.device),
            original.instances.get(driver.device),
        )
        if merged is None or written is None or len(merged.ports) != len(written.ports):
            return None
        ends: list[str] = []
        for pin in pins:
            found = {w[1] for m, w in zip(merged.ports, written.ports) if m[1] == pin}
            if len(found) != 1:
                return None
            ends.append(found.pop())
        henries, names = 0.0, []
        for start, end in ((ends[0], top), (bottom, ends[1])):
            path = self._stray_path(start, end)
            if path is None:
                return None
            henries += path[0]
            names.extend(path[1])
        return henries, tuple(names), (ends[0], ends[1])

    def _merged_net(self, net: str) -> str:
        return self._net_of.get(net, net)

    @cached_property
    def _net_of(self) -> dict[str, str]:
        """Net as written -> merged net, from the devices the merge kept (renamed pins)."""
        original = self.circuit.unmerged
        out: dict[str, str] = {}
        if original is None:
            return out
        for name, device in self.circuit.devices.items():
            before = original.devices.get(name)
            if before is None:
                continue
            for (_, merged), (_, written) in zip(device.pins, before.pins):
                if merged != written:
                    out[written] = merged
        return out

    @cached_property
    def _strays_by_net(self) -> dict[str, list[Device]]:
        """The parts the wire merge took out (strays, ammeters, milliohm parts), by net."""
        original = self.circuit.unmerged
        out: dict[str, list[Device]] = {}
        if original is None:
            return out
        for name, device in original.devices.items():
            if name not in self.circuit.devices:
                for n in dict.fromkeys(device.nets):
                    out.setdefault(n, []).append(device)
        return out

    def _stray_path(self, start: str, end: str) -> tuple[float, list[str]] | None:
        """The fewest merged parts from ``start`` to ``end`` (nets as written) and their
        inductance; None when none joins them within a few steps."""
        frontier: list[tuple[str, float, list[str]]] = [(start, 0.0, [])]
        seen = {start}
        for _ in range(MAX_STRAY_STEPS + 1):
            nxt: list[tuple[str, float, list[str]]] = []
            for at, henries, names in frontier:
                if at == end:
                    return henries, names
                for device in self._strays_by_net.get(at, ()):
                    far = next((n for n in device.nets if n != at), None)
                    if far is None or far in seen:
                        continue
                    seen.add(far)
                    own = abs(device.value or 0.0) / device.multiplier
                    nxt.append(
                        (
                            far,
                            henries + (own if device.kind == "inductor" else 0.0),
                            [*names, device.name],
                        )
                    )
            frontier = nxt
        return None

    @cached_property
    def _refill_tau(self) -> float | None:
        """R·C of the bootstrap path with the diode conducting hard (series resistors and
        the diode's RS)."""
        c = self.c_hold
        if c is None or self.diode is None:
            return None
        model = self.diode.model
        rs = model.params.get("rs", 0.0) / self.diode.multiplier if model else 0.0
        return ((self.stage.supply.series_resistance or 0.0) + rs) * c.value

    @cached_property
    def dead_time_boost(self) -> Value:
        """How much higher the hold capacitor charges while a freewheeling current holds the
        switch node a diode drop below its low level just before the turn-on."""
        none = Value(0.0, "V", "no freewheeling dead time before the turn-on")
        if not self.freewheeling or self._refill_tau is None:
            return none
        only_diode = all(r.kind != "low-side switch" for r in self.stage.refresh)
        window = self.off_time if only_diode else self.dead_time
        if window is None:
            return none
        tau = self._refill_tau
        boost = commutation.boot_overcharge(self.freewheel_drop.value, window.value, tau)
        return computed(
            boost,
            "V",
            f"computed: V_F,freewheel {self.freewheel_drop.text()} × (1 − exp(−t/τ)), "
            f"t = {window.text()} ({'off-time' if only_diode else 'dead time'}), "
            f"τ = {format_si(tau, 's')}",
        )

    @cached_property
    def v_refresh(self) -> float:
        """The switch node's level at the end of the recharge, as the capacitor sees it.

        The dead-time boost is not counted here: it needs the load current to flow out of
        the node, which a light load or a reversed current takes away. Hold, sizing and
        headroom figures are judged without it; the stress maximum (``v_boot_max``) and the
        recovery charge count it.
        """
        return self.v_sw_low.value

    @cached_property
    def recharge_time(self) -> Value | None:
        """How long each recharge lasts: the off-time of a switching stage.

        A statically commanded stage has none: its capacitor has been charging since the
        supply came up, and at rest the diode carries only what the boot supply draws (the
        state a simulator's operating point also starts from).
        """
        if self.off_time is not None and self.off_time.value > 0:
            return self.off_time
        return None

    @cached_property
    def recharge_end_current(self) -> Value:
        """What the bootstrap diode still carries as the recharge ends.

        The diode's own charging law (:func:`drivelint.physics.diode.recharge_end_current`:
        Shockley current and TT diffusion charge into the hold capacitor), for the charge
        each cycle takes back, plus what the boot supply draws with the switch off (the
        driver's quiescent current, the leakage it feeds, and resistors across the hold
        capacitor).
        """
        across = self.off_drain.value
        steady = self.i_quiescent.value + self.i_leak.value + across
        c_hold, t_rest, n_vt = self.c_hold, self.recharge_time, self._n_vt
        if c_hold is None or t_rest is None or n_vt is None:
            how = "computed: driver quiescent + leakage"
            how += f" + {self.off_drain.text()} {self.off_drain.origin}" if across else ""
            return Value(steady, "A", how + " (switch off)")
        q = self._q_cycle_guess
        charging = diode_physics.recharge_end_current(c_hold.value, n_vt, self._tt, q, t_rest.value)
        return computed(
            charging + steady,
            "A",
            f"computed: diode charging law for {format_si(q, 'C')} in {t_rest.text()} "
            f"({t_rest.origin}), plus {format_si(steady, 'A')} drawn with the switch off",
        )

    @cached_property
    def off_drain(self) -> Value:
        """Resistors straight across the hold capacitor (boot net to the switch node): they
        draw V_boot/R with the switch off as well, so the diode carries it at rest. Taken at
        V_aux − 0.7 V − V_sw,low (the drop only moves the diode's V_F logarithmically)."""
        from drivelint.checks.drains import hidden_in_driver

        stage = self.stage
        boot = stage.supply.boot_net
        if stage.supply.kind != "bootstrap" or not boot or self.v_aux is None:
            return Value(0.0, "A", "none")
        v_boot = max(self.v_aux.value - 0.7 - self.v_sw_low.value, 0.0)
        total, names = 0.0, []
        for device in self.by_net.get(boot, ()):
            if device.kind != "resistor" or not device.value or hidden_in_driver(self, device):
                continue
            if set(device.nets) == {boot, stage.source}:
                total += v_boot * device.multiplier / device.value
                names.append(device.name)
        if not names:
            return Value(0.0, "A", "none")
        return computed(total, "A", f"through {', '.join(names)} across the hold capacitor")

    @cached_property
    def diode_vf(self) -> Value:
        return self.diode_vf_at(self.recharge_end_current.value, "as the recharge ends")

    # -- the floating supply --------------------------------------------------------------

    @cached_property
    def _pump(self) -> tuple[Value, Value] | None:
        """(lowest, highest) output of a charge pump, to ground or (riding on the source)
        above the source, with its two diode drops and the clock's swing."""
        supply = self.stage.supply
        if supply.kind != "charge-pump" or supply.clock is None or supply.clock.volts is None:
            return None
        drops = 0.0
        for name in (supply.feed_diode, supply.diode):
            drops += self.diode_vf_at(
                PUMP_DIODE_CURRENT, "a pump diode at a milliampere", self.device(name)
            ).value
        clock = supply.clock.volts
        how = f"{supply.clock.source}'s {clock:g} V swing − two diode drops ({drops:.2f} V)"
        if supply.aux is not None and supply.aux.net == self.stage.source:
            level = clock - drops
            return (
                computed(level, "V", f"computed: above the source, {how}"),
                computed(level, "V", f"computed: above the source, {how}"),
            )
        if self.v_aux is None or self.v_aux_max is None:
            return None
        return (
            computed(
                self.v_aux.value + clock - drops, "V", f"computed: {self.v_aux.text()} + {how}"
            ),
            computed(
                self.v_aux_max.value + clock - drops,
                "V",
                f"computed: {self.v_aux_max.text()} + {how}",
            ),
        )

    @cached_property
    def pump_output(self) -> Value | None:
        """A charge pump's output to ground at its highest (None when riding on the source)."""
        supply = self.stage.supply
        if self._pump is None or (supply.aux is not None and supply.aux.net == self.stage.source):
            return None
        return self._pump[1]

    @cached_property
    def v_boot0(self) -> Value | None:
        """The gate supply above the source with the switch on, at its lowest: for a
        bootstrap V_aux − V_F − V_sw,low just after a recharge (V_boot,0)."""
        supply = self.stage.supply
        if supply.kind == "isolated" and supply.aux and supply.aux.volts is not None:
            level = Value(supply.aux.lowest or 0.0, "V", f"isolated source {supply.source}")
            return supply_corner(self, level, 0.0, "supply_tolerance", False, "supply")
        if supply.kind == "charge-pump":
            pump = self._pump
            if pump is None:
                return None
            low = pump[0]
            if self.pump_output is None:
                return low
            if self.v_bus is None:
                return None
            return computed(
                low.value - self.v_bus.value,
                "V",
                f"computed: pump output {low.text()} − bus {self.v_bus.text()}",
            )
        if supply.kind != "bootstrap" or self.v_aux is None or self.diode is None:
            return None
        volts = boot_physics.bootstrap_voltage(
            self.v_aux.value, self.diode_vf.value, v_refresh=self.v_refresh
        )
        how = "V_aux − V_F" + (" − V_sw,low" if self.v_sw_low.value else "")
        return self.regulated(Value(volts, "V", f"computed: {how}"))

    @cached_property
    def boot_zener(self) -> tuple[Device, Value] | None:
        """A Zener across the hold capacitor (cathode on the boot net, anode on the switch
        node) and its voltage: it holds the boot supply at V_Z, as a bootstrap fed from a
        rail above the gate's rating through a resistor is built. Diodes rated above
        ZENER_MAX_BV are not taken for Zeners."""
        from drivelint.stages.recognise import ZENER_MAX_BV

        stage = self.stage
        boot = stage.supply.boot_net
        if stage.supply.kind != "bootstrap" or not boot:
            return None
        found: tuple[Device, Value] | None = None
        for device in self.by_net.get(boot, ()):
            if device.kind != "diode" or (device.net("k"), device.net("a")) != (boot, stage.source):
                continue
            vz = self.ratings.get(device, "vz")
            if vz is None or not 0 < vz.value <= ZENER_MAX_BV:
                continue
            if found is None or vz.value < found[1].value:
                found = (device, vz)
        return found

    def regulated(self, level: Value) -> Value:
        """``level`` held down to the boot Zener's V_Z where one is across the capacitor."""
        zener = self.boot_zener
        if zener is None or not zener[1].value < level.value:
            return level
        device, vz = zener
        return Value(
            vz.value,
            "V",
            f"the Zener {device.name} across the hold capacitor holds it at {vz.text()} "
            f"({vz.origin}), below {level.text()} ({level.origin})",
        )

    def _turn_off_level(self, furthest: bool) -> Value | None:
        """The turn-off supply below the source (negative) at one side of its tolerance."""
        negative = self.stage.supply.negative
        if negative is None or negative.volts is None:
            return None
        level = Value(-negative.volts, "V", f"isolated turn-off source {negative.source}")
        moved = supply_corner(self, level, 0.0, "supply_tolerance", furthest, "supply")
        return Value(-moved.value, "V", moved.origin)

    @cached_property
    def v_off_negative(self) -> Value | None:
        """The turn-off supply below the source (negative), at its furthest from the source
        (the supply tolerance's high side, as the positive supply at v_boot_max)."""
        return self._turn_off_level(furthest=True)

    @cached_property
    def v_off_nearest(self) -> Value | None:
        """The same turn-off supply at its nearest to the source (the low end of its
        tolerance): the least help it gives against an induced rise or a slow turn-off."""
        return self._turn_off_level(furthest=False)

    @cached_property
    def v_boot_max(self) -> Value | None:
        """The same supply at its highest (a surge on the auxiliary rail)."""
        supply = self.stage.supply
        if supply.kind == "isolated" and supply.aux and supply.aux.volts is not None:
            level = Value(supply.aux.volts, "V", f"isolated source {supply.source}")
            return supply_corner(self, level, 0.0, "supply_tolerance", True, "supply")
        if supply.kind == "charge-pump":
            pump = self._pump
            if pump is None:
                return None
            if self.pump_output is None:
                return pump[1]
            # A reservoir riding on the source charges to the pump's full output while the
            # source is low, and brings it to the gate at the next turn-on.
            if supply.riding:
                return computed(
                    pump[1].value - self.v_sw_low.value,
                    "V",
                    f"computed: pump output {pump[1].text()} held by the reservoir "
                    f"{supply.capacitor} from the off-state (source at {self.v_sw_low.text()})",
                )
            if self.v_bus_min is None:
                return None
            return computed(
                pump[1].value - self.v_bus_min.value,
                "V",
                f"computed: pump output {pump[1].text()} − bus {self.v_bus_min.text()}",
            )
        if supply.kind != "bootstrap" or self.v_aux_max is None or self.diode is None:
            return None
        volts = boot_physics.boot_voltage_max(
            self.v_aux_max.value, self.diode_vf.value, self.v_refresh - self.dead_time_boost.value
        )
        how = "V_aux,max − V_F − V_sw,low"
        if self.dead_time_boost.value:
            how += f" + {self.dead_time_boost.text()} dead-time boost"
        return self.regulated(Value(volts, "V", f"computed: {how}"))

    @cached_property
    def vgs_on_max(self) -> Value | None:
        """The on-state V_GS at its highest: what a gate–source clamp must stay off at."""
        supply = self.stage.supply
        if supply.kind == "charge-pump":
            pump = self._pump
            if pump is None:
                return None
            if self.pump_output is None:
                return pump[1]
            if self.v_bus_min is None:
                return None
            return computed(
                pump[1].value - self.v_bus_min.value,
                "V",
                f"computed: pump output {pump[1].text()} − bus {self.v_bus_min.text()}",
            )
        return self.v_boot_max

    @cached_property
    def vgs_on(self) -> Value:
        """The V_GS the switch needs to be fully on: the parts library's (or a directive's)
        vgs_on, else its gate-charge test voltage vgs_qg, else the documented default."""
        found = self.ratings.get(self.switch, "vgs_on")
        if found is not None:
            return found
        tested = self.ratings.get(self.switch, "vgs_qg")
        if tested is not None:
            return Value(tested.value, "V", f"gate-charge test voltage vgs_qg ({tested.origin})")
        by_technology = self.ratings.get_or_default(self.switch, "vgs_on")
        if by_technology is not None:  # a SiC MOSFET or an IGBT: not by its threshold
            return by_technology
        model = self.switch.model
        vto = abs(model.params["vto"]) if model is not None and "vto" in model.params else None
        if vto is not None and vto <= LOGIC_LEVEL_MAX_VTO:
            return Value(
                VGS_ON_LOGIC_LEVEL,
                "V",
                f"default: 4.5 V, the V_GS at which logic-level parts are rated (model "
                f"{model.name} VTO = {vto:g} V; common practice; give vgs_on for the part)",  # type: ignore[union-attr]
            )
        return Value(
            VGS_ON_DEFAULT,
            "V",
            "default: the V_GS at which R_DS(on) of standard-level parts is rated, 10 V "
            "(common practice; give vgs_on for the part)",
        )

    @cached_property
    def uvlo(self) -> Value | None:
        driver = self.stage.driver
        if driver is None:
            return None
        from drivelint.ratings.units import parse_quantity

        part = self.ratings.parts.get(driver.subckt)
        raw = part.raw("uvlo_boot") if part else None
        if part is None or raw is None:
            return None
        return Value(parse_quantity(raw, "V"), "V", f"{part.origin} (part {part.name} uvlo_boot)")

    @cached_property
    def v_boot_min(self) -> Value:
        """The lowest boot voltage that still drives the switch fully on."""
        candidates = [self.vgs_on] + ([self.uvlo] if self.uvlo else [])
        return max(candidates, key=lambda v: v.value)

    @cached_property
    def c_hold_nominal(self) -> Value | None:
        """The hold capacitor as the netlist gives it (a voltage-dependent C at 0 V)."""
        cap = self.capacitor
        if cap is None or cap.value is None:
            return None
        return Value(cap.value * cap.multiplier, "F", f"{cap.name} ({_where(cap)})")

    @cached_property
    def _c_hold_volts(self) -> float:
        """The highest voltage the hold capacitor holds, where a ceramic has the least
        capacitance: V_aux,max − V_sw,low for a bootstrap (a diode drop above its charge,
        a little on the safe side), else the supply's highest level."""
        if self.stage.supply.kind == "bootstrap":
            top = self.v_aux_max.value if self.v_aux_max else 0.0
            return top - self.v_sw_low.value
        return self.v_boot_max.value if self.v_boot_max else 0.0

    @cached_property
    def c_hold(self) -> Value | None:
        """The hold capacitor at its low corner (tolerance, temperature, DC bias)."""
        nominal = self.c_hold_nominal
        if nominal is None:
            return None
        return hold_capacitance(self, nominal, self._c_hold_volts)

    @cached_property
    def c_hold_high(self) -> Value | None:
        """The hold capacitor at its high corner: what shares least with the gate."""
        nominal = self.c_hold_nominal
        if nominal is None:
            return None
        return stress_capacitance(self, nominal, self._c_hold_volts)

    # -- charge and current ---------------------------------------------------------------------

    @cached_property
    def v_switched(self) -> float:
        """The drain–source voltage the switch blocks when off: bus to the node's low level."""
        bus = self.v_bus.value if self.v_bus else 0.0
        return bus - self.v_sw_low.value

    def _qg_at(self, drive: float) -> Value | None:
        """The switch's own gate charge at a drive level ``drive``, at the top of its
        part-to-part spread (the corner)."""
        typical = self._qg_typical_at(drive)
        factor = charge_spread(self)
        if typical is None or factor == 1.0:
            return typical
        spread = self.corners.qg_spread
        return Value(
            typical.value * factor,
            "C",
            f"{typical.origin}; {typical.text()} at the top of its spread (+{spread.value:.0%}, "
            f"qg_spread {spread.origin})",
        )

    def _qg_typical_at(self, drive: float) -> Value | None:
        """The switch's own gate charge at a drive level ``drive`` (typical)."""
        multiplier = self.switch.multiplier
        rated = self.ratings.get(self.switch, "qg")
        if rated is not None:
            tested = self.ratings.get(self.switch, "vgs_qg")
            qgd = self.ratings.get(self.switch, "qgd")
            # A charge given by directive is the user's figure for this design: it is scaled
            # only with a test voltage given the same way.
            mixed = tested is not None and (
                rated.origin.startswith("directive") != tested.origin.startswith("directive")
            )
            if tested is None or drive <= 0 or mixed:
                return Value(rated.value * multiplier, "C", rated.origin)
            if qgd is not None and qgd.origin.startswith("directive") != rated.origin.startswith(
                "directive"
            ):
                qgd = None
            charge = gate_physics.gate_charge_at_drive(
                rated.value, tested.value, drive, qgd.value if qgd else None
            )
            how = "Q_gd + (Q_g − Q_gd)·V/V_qg" if qgd else "Q_g·V/V_qg"
            return Value(
                charge * multiplier,
                "C",
                f"computed: {how} at V = {format_si(drive, 'V')} from {rated.text()} at "
                f"{tested.text()} ({rated.origin})",
            )
        model = self.switch.model
        if model is None:
            return None
        params = model.params
        width = self.switch.params.get("w", 1.0)
        drive = drive if drive > 0 else 10.0
        if model.type == "vdmos" and "cgs" in params:
            charge = gate_physics.vdmos_gate_charge(
                params["cgs"],
                params.get("cgdmin", params.get("cgdmax", 0.0)),
                params.get("cgdmax", 0.0),
                params.get("a", 1.0),
                drive,
                self.v_switched,
            )
            how = "C_gs·V + Q_gd(V) − Q_gd(−V_DS) of the VDMOS capacitance model"
        elif "cgso" in params or "cgdo" in params:
            charge = gate_physics.gate_charge_estimate(
                params.get("cgso", 0.0) * width,
                params.get("cgdo", 0.0) * width,
                drive,
                self.v_switched,
            )
            how = "C_gs·V + C_gd·(V_DS + V) from the overlap capacitances"
        else:
            return None
        return Value(
            charge * multiplier,
            "C",
            f"computed: {how} of model {model.name}, V = {format_si(drive, 'V')}, "
            f"V_DS = {format_si(self.v_switched, 'V')}",
        )

    @cached_property
    def qg_switch(self) -> Value | None:
        """The switch's own gate charge at the drive level the supply gives."""
        return self._qg_at(self.v_boot0.value if self.v_boot0 else 0.0)

    @cached_property
    def c_gate(self) -> Value:
        """The gate's capacitance near the drive level, at the top of its spread (it
        scales with the gate charge)."""
        typical = self.c_gate_typical
        factor = charge_spread(self)
        if factor == 1.0 or typical.value == 0:
            return typical
        return computed(typical.value * factor, "F", f"{typical.origin}, × {factor:g} (qg_spread)")

    @cached_property
    def qg_typical(self) -> Value | None:
        """Charge the gate takes at each turn-on at its typical value (switch plus
        external): the stress side of a figure, where more charge would mean less V_GS."""
        own = self._qg_typical_at(self.v_boot0.value if self.v_boot0 else 0.0)
        if own is None:
            return None
        return Value(own.value + self.qg_external.value, "C", own.origin)

    @cached_property
    def c_gate_typical(self) -> Value:
        """Slope of the gate-charge curve near the drive level (what shares the hold
        capacitor's charge): (Q_g − Q_gd)/V_qg from the parts library, else the model's
        C_gs + C_gd at V_GD = V_drive."""
        multiplier = self.switch.multiplier
        rated = self.ratings.get(self.switch, "qg")
        tested = self.ratings.get(self.switch, "vgs_qg")
        if rated is not None and tested is not None:
            qgd = self.ratings.get(self.switch, "qgd")
            return computed(
                gate_physics.gate_capacitance_above_plateau(
                    rated.value, tested.value, qgd.value if qgd else None
                )
                * multiplier,
                "F",
                "computed: (Q_g − Q_gd)/V_qg",
            )
        model = self.switch.model
        params = model.params if model else {}
        drive = self.v_boot0.value if self.v_boot0 else 10.0
        if model is not None and model.type == "vdmos" and "cgs" in params:
            c = params["cgs"] + gate_physics.vdmos_gate_drain_capacitance(
                drive,
                params.get("cgdmin", params.get("cgdmax", 0.0)),
                params.get("cgdmax", 0.0),
                params.get("a", 1.0),
            )
            return computed(c * multiplier, "F", f"computed: C_gs + C_gd(V_GD = {drive:.3g} V)")
        width = self.switch.params.get("w", 1.0)
        c = (params.get("cgso", 0.0) + params.get("cgdo", 0.0)) * width
        return computed(c * multiplier, "F", "computed: overlap C_gs + C_gd" if c else "none known")

    def _external_at(self, drive: float) -> tuple[float, list[str]]:
        """Charge of capacitors on the gate at a drive level: to the source C·V, elsewhere
        C·(V_DS + V), as the gate rises from off to V_bus + V."""
        stage = self.stage
        total = 0.0
        names = []
        for device in self.by_net.get(stage.gate, ()):
            if device.kind != "capacitor" or device.value is None or device.name in stage.related:
                continue
            far = next((n for n in device.nets if n != stage.gate), None)
            if far is None:
                continue
            swing = drive if far == stage.source else self.v_switched + drive
            total += device.value * device.multiplier * swing
            names.append(device.name)
        return total, names

    @cached_property
    def qg_external(self) -> Value:
        """Charge taken by capacitors on the gate at the supply's drive level."""
        total, names = self._external_at(self.v_boot0.value if self.v_boot0 else 0.0)
        how = f"computed: capacitors on the gate ({', '.join(names)})" if names else "none"
        return Value(total, "C", how)

    def gate_charge_at(self, drive: float) -> Value | None:
        """The charge the gate takes at a drive level ``drive`` (switch at the top of its
        spread, plus capacitors on the gate): what the drive moves at each edge."""
        own = self._qg_at(drive)
        if own is None:
            return None
        external, names = self._external_at(drive)
        if not external:
            return own
        return Value(
            own.value + external,
            "C",
            f"{own.origin}; plus {format_si(external, 'C')} in capacitors on the gate "
            f"({', '.join(names)})",
        )

    def q_cycle_at(self, drive: float) -> float | None:
        """The charge per on-time with the supply at ``drive``: gate, level shifter, drains
        (which follow the boot voltage) and recovery. None when the gate charge is unknown."""
        from drivelint.checks.drains import on_drains

        own = self._qg_at(drive)
        on = self.on_time
        if own is None or on is None or not math.isfinite(on.value):
            return None
        drains = on_drains(self.stage, self, drive)
        q_rr = self.recovery_charge.value if self.recovery_charge else 0.0
        return boot_physics.charge_budget(
            own.value + self._external_at(drive)[0],
            self.q_ls.value,
            drains.quiescent.value,
            drains.i_leak.value,
            drains.i_resistive.value,
            on.value,
            q_rr,
        )

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
        if found is None and self.stage.driver is not None:
            if self._driver_part is not None:
                return Value(0.0, "C", _driver_default(self, "q_levelshift"))
            high = self.v_bus is not None and self.v_bus.value > DRIVER_HIGH_VOLTAGE
            charge = DRIVER_Q_LEVELSHIFT_HIGH_VOLTAGE if high else DRIVER_Q_LEVELSHIFT_DEFAULT
            return Value(charge, "C", _driver_default(self, "q_levelshift", charge))
        return found or Value(0.0, "C", "no driver IC level shifter")

    @cached_property
    def _driver_part(self) -> object | None:
        driver = self.stage.driver
        return self.ratings.parts.get(driver.subckt) if driver is not None else None

    @cached_property
    def i_quiescent(self) -> Value:
        found = self._driver_value("iq_boot", "A")
        driver = self.stage.driver
        if found is None and driver is not None:
            own = sorted(
                d.name
                for d in self.by_net.get(self.stage.supply.boot_net or "", ())
                if d.name.startswith(driver.device + ".") and d.kind == "resistor"
            )
            if self._driver_part is not None:
                return Value(0.0, "A", _driver_default(self, "iq_boot"))
            if own:
                # The driver's model draws from its boot pin itself: those drains count.
                return Value(0.0, "A", f"none beside the driver model's own ({', '.join(own)})")
            return Value(DRIVER_IQ_BOOT_DEFAULT, "A", _driver_default(self, "iq_boot"))
        return found or Value(0.0, "A", "no driver IC on the boot supply")

    @cached_property
    def i_leak(self) -> Value:
        """The bootstrap diode's leakage at the junction's highest temperature."""
        found = self.ratings.get(self.diode, "ir_leak")
        if found is None:
            return Value(0.0, "A", "no bootstrap diode leakage known")
        return leakage(self, found)

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
    def i_resistive(self) -> Value:
        return self.on_drains.i_resistive

    @cached_property
    def i_drain(self) -> Value:
        """Every current that discharges the hold capacitor while the switch is on."""
        return self.on_drains.total

    @cached_property
    def drain_slope(self) -> Value:
        """How the on-time drain changes with the boot voltage, dI/dV [A/V]: resistive drains
        follow it, the driver's quiescent current and leakage do not. From the account of
        drains at V_boot,0 and at 80 % of it."""
        from drivelint.checks.drains import on_drains

        v0 = self.v_boot0.value if self.v_boot0 else 0.0
        if v0 <= 0:
            return Value(0.0, "1", "none")
        low = on_drains(self.stage, self, 0.8 * v0).total.value
        slope = max(0.0, (self.i_drain.value - low) / (0.2 * v0))
        return Value(slope, "1", "computed: (I(V_boot,0) − I(0.8·V_boot,0))/(0.2·V_boot,0), in A/V")

    @cached_property
    def _q_cycle_guess(self) -> float:
        """Charge per cycle before the diode's drop is known (it only sets that drop)."""
        v_aux = self.v_aux.value if self.v_aux else 10.0
        drive = v_aux - 0.7 - self.v_sw_low.value
        own = self._qg_at(drive)
        on = self.on_time.value if self.on_time and math.isfinite(self.on_time.value) else 0.0
        base = (own.value if own else 0.0) + self.q_ls.value
        drain = self.i_quiescent.value + self.i_leak.value
        return base + drain * on

    @cached_property
    def recovery_charge(self) -> Value | None:
        """Charge the bootstrap diode gives back each time the switch node rises.

        The charge-control model of the SPICE diode: the diffusion charge TT·I_F stored at
        the current I_F still flowing as the recharge ends (the parts library's qrr when
        it gives one). Re-supplied by the next off-time, so it belongs in the budget.
        """
        rated = self.ratings.get(self.diode, "qrr")
        if rated is not None:
            return rated
        if self.diode is None or self.stage.mode != "switching":
            return None
        model = self.diode.model
        current = self.recharge_end_current.value
        if self._tt > 0 and model is not None:
            tau = self._tt
            where = f"model {model.name} TT {format_si(tau, 's')}"
        else:
            # Without TT, t_rr stands in for the lifetime: with the reverse current equal to
            # the forward one, the charge-control model recovers in about TT.
            trr = self.ratings.get(self.diode, "trr")
            if trr is None:
                return None
            tau = trr.value
            where = f"t_rr {trr.text()} taken as the carrier lifetime ({trr.origin})"
        step = self.freewheel_drop.value if self.dead_time_boost.value > 0 else 0.0
        c, n_vt, dead = self.c_hold, self._n_vt, self.dead_time
        params = model.params if model is not None else {}
        slow = dead is not None and self._tt > dead.value
        if step > 0 and c is not None and n_vt is not None and dead is not None and not slow:
            # A dead time just before the turn-on drops the node a diode drop lower and the
            # diode charges the capacitor that much further: the current it still carries at
            # the edge follows its charging law over the dead time (C·n·V_T/t), at most what
            # the path's resistance lets through.
            refill = c.value * n_vt / dead.value
            tau_path = self._refill_tau or 0.0
            if tau_path > 0:
                limit = step * math.exp(-dead.value / tau_path) * c.value / tau_path
                refill = min(refill, max(limit, 0.0))
            if refill > current:
                current = refill
                where += " (the current still charging it at the end of the dead time)"
        stored = diode_physics.recovery_charge(tau, current)
        how = f"computed: TT·I_F = {where} × {format_si(current, 'A')} flowing as the recharge ends"
        if step > 0 and c is not None and n_vt is not None and dead is not None and slow:
            # A diode whose TT outlasts the dead time cannot follow the step: its diffusion
            # charge grows with the current the step drives into the capacitor (SPICE3
            # diode with RS and TT in series with C), and comes back at the rising edge.
            r_path = (self.stage.supply.series_resistance or 0.0) + params.get("rs", 0.0)
            after = diode_physics.stored_charge_after_step(
                c.value, params["is"], n_vt, r_path, self._tt, current, step, dead.value
            )
            if after > stored:
                how += (
                    f"; the diode cannot recover within the {dead.text()} dead time, whose "
                    f"{format_si(step, 'V')} step drives its stored charge to "
                    f"{format_si(after, 'C')}"
                )
                stored = after
        return computed(stored, "C", how)

    @cached_property
    def q_per_cycle(self) -> Value | None:
        """Charge the hold capacitor delivers per on-time: Q_g + Q_ls + I_drain·t_on + Q_rr."""
        qg, on = self.qg, self.on_time
        if qg is None or on is None or not math.isfinite(on.value):
            return None
        drains = self.on_drains
        q_rr = self.recovery_charge.value if self.recovery_charge else 0.0
        total = boot_physics.charge_budget(
            qg.value,
            self.q_ls.value,
            drains.quiescent.value,
            drains.i_leak.value,
            drains.i_resistive.value,
            on.value,
            q_rr,
        )
        return computed(total, "C", "computed: Q_g + Q_ls + (I_q + I_leak + I_R)·t_on + Q_rr")

    @cached_property
    def refilled_charge(self) -> Value:
        """The part of the gate charge the bootstrap path puts back before the node rises.

        Up to the Miller plateau the gate charges while a freewheeling current still holds
        the switch node low: the dip it makes in the hold capacitor is refilled through the
        diode when that path is fast (R·C within the plateau time), down to a residue of a
        few n·V_T·C. Only a small capacitor dips that far; a well-sized one gets nothing
        back this way, and the full Q_g counts.
        """
        none = Value(0.0, "C", "none (no fast refill before the node rises)")
        tau, c, n_vt = self._refill_tau, self.c_hold, self._n_vt
        if not self.freewheeling or tau is None or c is None or n_vt is None:
            return none
        if (
            tau > PLATEAU_TIME
            or self.dead_time is None
            and any(r.kind == "low-side switch" for r in self.stage.refresh)
        ):
            return none
        plateau = self.ratings.get(self.switch, "vgs_plateau")
        vth = self.ratings.get(self.switch, "vth")
        level = plateau if plateau is not None else vth
        if level is None:
            return none
        q_pre = self._charge_before_plateau(level.value)
        if q_pre is None:
            return none
        credit = q_pre - REFILL_RESIDUE_NVT * n_vt * c.value
        if credit <= 0:
            return none
        return computed(
            credit,
            "C",
            f"computed: gate charge to {level.text()} ({format_si(q_pre, 'C')}) less "
            f"{REFILL_RESIDUE_NVT:g}·n·V_T·C, refilled through the diode (τ = "
            f"{format_si(tau, 's')}) while the node is still low",
        )

    def _charge_before_plateau(self, level: float) -> float | None:
        """Gate charge to ``level`` with the drain–source voltage still at the bus."""
        multiplier = self.switch.multiplier
        rated = self.ratings.get(self.switch, "qg")
        tested = self.ratings.get(self.switch, "vgs_qg")
        if rated is not None and tested is not None:
            qgd = self.ratings.get(self.switch, "qgd")
            return (
                gate_physics.gate_charge_at_drive(
                    rated.value, tested.value, level, qgd.value if qgd else None
                )
                - (qgd.value if qgd else 0.0)
            ) * multiplier
        model = self.switch.model
        params = model.params if model else {}
        if model is not None and model.type == "vdmos" and "cgs" in params:
            lo, hi, a = (
                params.get("cgdmin", params.get("cgdmax", 0.0)),
                params.get("cgdmax", 0.0),
                params.get("a", 1.0),
            )
            swing = self.v_switched
            q_gd = gate_physics.vdmos_gate_drain_charge(
                level - swing, lo, hi, a
            ) - gate_physics.vdmos_gate_drain_charge(-swing, lo, hi, a)
            return (params["cgs"] * level + q_gd) * multiplier
        width = self.switch.params.get("w", 1.0)
        c = (params.get("cgso", 0.0) + params.get("cgdo", 0.0)) * width
        return c * level * multiplier if c else None

    @cached_property
    def droop_per_cycle(self) -> Value | None:
        """The hold capacitor's droop over one on-time, with charge sharing with the gate."""
        q, c, v0 = self.q_per_cycle, self.c_hold, self.v_boot0
        if q is None or c is None or v0 is None or self.qg is None:
            return None
        credit = self.refilled_charge.value
        droop = gate_physics.shared_droop(
            v0.value, c.value, self.qg.value - credit, self.c_gate.value, q.value - self.qg.value
        )
        how = "computed: (Q_total − Q_refilled)/(C + C_g) (charge shared with the gate)"
        return computed(droop, "V", how if credit else how.replace(" − Q_refilled", ""))

    @cached_property
    def delta_v_allowed(self) -> Value | None:
        if self.v_boot0 is None:
            return None
        droop = boot_physics.allowed_droop(self.v_boot0.value, self.v_boot_min.value)
        return Value(droop, "V", "computed: V_boot,0 − V_boot,min")

    def switch_gate(
        self, device: Device, drive: float, v_blocked: float, spread: float = 1.0
    ) -> SwitchGate:
        """The gate figures of ``device`` (this stage's switch or its leg partner) driven
        to ``drive`` volts and blocking ``v_blocked`` when off: parts library first, then
        the model card (VDMOS C_gs and C_gd(V), or the overlap capacitances), each with
        its origin. The plateau falls back to the threshold (the plateau at light load).
        ``spread`` scales the charges and capacitances (a gate charge's corner)."""
        ratings = self.ratings
        multiplier = device.multiplier * spread
        model = device.model
        params = model.params if model else {}
        where = f"model {model.name} ({model.span.path}:{model.span.line})" if model else ""
        rated, tested = ratings.get(device, "qg"), ratings.get(device, "vgs_qg")
        qgd = ratings.get(device, "qgd")
        vdmos = model is not None and model.type == "vdmos" and "cgs" in params
        cgd_args = (
            params.get("cgdmin", params.get("cgdmax", 0.0)),
            params.get("cgdmax", 0.0),
            params.get("a", 1.0),
        )
        width = device.params.get("w", 1.0)
        c_iss: Value | None = None
        if rated is not None and tested is not None:
            c = gate_physics.gate_capacitance_above_plateau(
                rated.value, tested.value, qgd.value if qgd else None
            )
            c_iss = computed(c * multiplier, "F", f"computed: (Q_g − Q_gd)/V_qg ({rated.origin})")
        elif vdmos:
            c = params["cgs"] + gate_physics.vdmos_gate_drain_capacitance(drive, *cgd_args)
            c_iss = computed(
                c * multiplier, "F", f"computed: C_gs + C_gd(V_GD = {drive:.3g} V) of {where}"
            )
        elif params.get("cgso", 0.0) + params.get("cgdo", 0.0) > 0:
            c = (params.get("cgso", 0.0) + params.get("cgdo", 0.0)) * width
            c_iss = computed(c * multiplier, "F", f"computed: CGSO + CGDO of {where}")
        plateau = ratings.get(device, "vgs_plateau")
        threshold = ratings.get(device, "vth")
        if plateau is None and threshold is not None:
            plateau = Value(
                threshold.value,
                "V",
                f"threshold {threshold.text()} ({threshold.origin}) taken as the plateau "
                "(its level at light load; give vgs_plateau)",
            )
        q_gd: Value | None = None
        if qgd is not None:
            q_gd = Value(qgd.value * multiplier, "C", qgd.origin)
        elif vdmos and plateau is not None:
            # V_GD moves from V_pl (on) to V_pl − V_blocked (off) on the plateau
            charge = gate_physics.vdmos_gate_drain_charge(
                plateau.value, *cgd_args
            ) - gate_physics.vdmos_gate_drain_charge(plateau.value - v_blocked, *cgd_args)
            q_gd = computed(
                charge * multiplier,
                "C",
                f"computed: Q_gd(V_pl) − Q_gd(V_pl − {format_si(v_blocked, 'V')}) of {where}",
            )
        elif params.get("cgdo", 0.0) > 0:
            q_gd = computed(
                params["cgdo"] * width * v_blocked * multiplier,
                "C",
                f"computed: CGDO·{format_si(v_blocked, 'V')} of {where}",
            )
        if spread != 1.0:
            c_iss, q_gd = (
                None
                if v is None
                else computed(v.value, v.unit, f"{v.origin}, × {spread:g} (qg_spread)")
                for v in (c_iss, q_gd)
            )
        rds = ratings.get(device, "rds_on")
        overdrive = drive - params.get("vto", 0.0)
        if rds is None and model is not None and params.get("kp", 0.0) > 0 and overdrive > 0:
            # the MOS1 equations' linear region at small V_DS, I = KP·(W/L)·(V_GS − VTO)·V_DS
            # (SPICE3 / ngspice manual, MOSFET level 1; VDMOS is built on them, W/L = 1)
            ratio = 1.0 if model.type == "vdmos" else width / device.params.get("l", 1.0)
            ohms = params.get("rd", 0.0) + params.get("rs", 0.0)
            ohms += 1.0 / (params["kp"] * ratio * overdrive)
            rds = computed(
                ohms,
                "Ohm",
                f"computed: RD + RS + 1/(KP·(V_GS − VTO)) at V_GS = {format_si(drive, 'V')} "
                f"of {where} (an estimate)",
            )
        if rds is not None and device.multiplier != 1:
            count = device.multiplier
            rds = Value(rds.value / count, "Ohm", f"{rds.origin}, {count:g} in parallel")
        internal = ratings.get(device, "rg_internal")
        if internal is None and params.get("rg", 0.0) > 0:
            internal = Value(params["rg"], "Ohm", f"{where} RG")
        return SwitchGate(
            c_iss, q_gd, plateau, threshold, rds, ratings.get(device, "t_off"), internal
        )

    def driver_value(self, key: str, unit: str) -> Value | None:
        """A figure of the stage's driver IC from the parts library (``t_prop``, ``i_sink``…)."""
        return self._driver_value(key, unit)

    def finite(self, value: Value | None) -> bool:
        return value is not None and math.isfinite(value.value)
