"""Voltage and power stress of a stage's parts against their derated ratings.

Three questions per stage, each over the switching states (on, off, dead time):

- does each switch of the leg block the bus, with the ringing allowance, within its V_DS
  rating (the floating switch while its partner is on, the partner while it is on)?
- does each capacitor or resistor across a known voltage (the hold capacitor across the
  boot supply, a part across gate and source) stay within its voltage rating?
- does each gate resistor dissipate its share of the gate-drive power within its power
  rating?

A part with no rating given (parts library, directive, model card) is not judged: a
missing rating is not a finding of this rule. The bootstrap diode's reverse voltage is
bootstrap-diode-voltage's and a clamp that conducts in normal drive is gate-overvoltage's,
so neither is repeated here.
"""

from __future__ import annotations

from collections.abc import Iterator, Mapping
from dataclasses import dataclass

from drivelint.checks.base import CheckContext, Finding
from drivelint.checks.corners import STRESS, with_corner
from drivelint.checks.facts import StageFacts
from drivelint.circuit.model import GROUND, Device
from drivelint.diagnostics import Severity
from drivelint.netlist.values import format_si
from drivelint.physics import stress as stress_physics
from drivelint.physics import switching
from drivelint.ratings.values import Value, computed
from drivelint.stages.model import DriveStage

# Ratings parts come in (common practice): chip resistors' power from 0402 to 2512 [W];
# capacitors' voltage codes, ceramic and electrolytic [V]; power MOSFETs' V_DS classes [V].
RESISTOR_POWERS: tuple[float, ...] = (0.0625, 0.1, 0.125, 0.25, 0.333, 0.5, 0.75, 1, 2, 3)
CAPACITOR_VOLTAGES: tuple[float, ...] = (
    *(4, 6.3, 10, 16, 25, 35, 50, 63, 100, 160, 200, 250, 400, 450, 630, 1000),
)
SWITCH_VOLTAGES: tuple[float, ...] = (
    *(20, 25, 30, 40, 60, 75, 80, 100, 120, 150, 200, 250, 300, 400, 500, 600),
    *(650, 700, 800, 900, 1000, 1200, 1500, 1700),
)


def next_rating(needed: float, steps: tuple[float, ...]) -> float | None:
    """The smallest usual rating above ``needed`` (strictly: a part used exactly at its
    derated limit has no margin left for the figure's rounding), None beyond the table."""
    return next((float(step) for step in steps if step > needed * (1 + 1e-6)), None)


def _rating_text(needed: float, steps: tuple[float, ...], unit: str) -> str:
    """The usual rating to choose, or the least rating needed beyond the table."""
    usual = next_rating(needed, steps)
    return format_si(usual, unit) if usual is not None else f"at least {format_si(needed, unit)}"


def _within(needed: float, applied: float, derating: float, unit: str) -> str:
    return (
        f"{format_si(needed, unit)} keeps {format_si(applied, unit)} within {derating:.0%} "
        "of the rating"
    )


BUS_ONLY = frozenset({"bus"})
SUPPLY_ONLY = frozenset({"supply"})
DRIVE_USES = frozenset({"supply", "charge"})


def _v(value: float) -> str:
    return format_si(value, "V")


@dataclass(frozen=True, slots=True)
class _Limit:
    """A rating, the derating applied to it, and the verdict on a stress against them."""

    rating: Value
    derating: float

    @property
    def limit(self) -> float:
        return stress_physics.derated_limit(self.rating.value, self.derating)

    def severity(self, applied: float) -> Severity | None:
        """Error beyond the rating itself, a warning beyond only its derated part."""
        if applied > self.rating.value:
            return Severity.ERROR
        if applied > self.limit:
            return Severity.WARNING
        return None

    def values(self, prefix: str, option: str) -> dict[str, Value]:
        return {
            f"{prefix}_rating": self.rating,
            "derating": Value(self.derating, "1", f"option {option}"),
            "derated_limit": computed(self.limit, self.rating.unit, "computed: rating × derating"),
        }

    def beyond(self, applied: float, unit: str) -> str:
        """The clause saying how far the stress is beyond what it may use."""
        text = format_si(self.rating.value, unit)
        if applied > self.rating.value:
            return f"beyond its {text} rating"
        return f"above {format_si(self.limit, unit)} ({self.derating:.0%} of its {text} rating)"


# -- the switches of the leg -------------------------------------------------------------------


def _partner(stage: DriveStage, facts: StageFacts) -> Device | None:
    """The leg's other switch: a low-side switch that refreshes the stage, its source at
    ground or a rail (a switch whose own source floats is judged as its own stage)."""
    for refresh in stage.refresh:
        if refresh.kind != "low-side switch" or not refresh.devices:
            continue
        device = facts.device(refresh.devices[0])
        if device is None or device.kind != "mosfet":
            continue
        source = device.net("s")
        if source == GROUND or source in facts.circuit.rails:
            return device
    return None


def _switch_finding(
    stage: DriveStage, ctx: CheckContext, device: Device, state: str
) -> Finding | None:
    facts = ctx.facts
    rating = facts.ratings.get(device, "vds_max")
    if rating is None or facts.v_bus is None:
        return None
    k_ring = ctx.options["ringing"]
    steady = facts.v_switched
    applied = stress_physics.off_state_voltage(facts.v_bus.value, facts.v_sw_low.value, k_ring)
    limit = _Limit(rating, ctx.options["derating"])
    severity = limit.severity(applied)
    if severity is None:
        return None
    needed = applied / limit.derating
    values = {
        "vds_off": computed(applied, "V", "computed: (V_bus − V_sw,low)·(1 + k_ring)"),
        "vds_off_steady": computed(steady, "V", "computed: V_bus − V_sw,low"),
        "v_bus": facts.v_bus,
        "v_sw_low": facts.v_sw_low,
        "ringing_margin": computed(steady * k_ring, "V", "option ringing × (V_bus − V_sw,low)"),
        **limit.values("vds", "derating"),
    }
    return ctx.finding(
        device.name,
        f"{device.name} blocks {_v(applied)} while {state} ({_v(steady)} from the bus "
        f"{facts.v_bus.text()} to the switch node's low level, plus {k_ring:.0%} ringing), "
        f"{limit.beyond(applied, 'V')}: an overshoot beyond V_DS(max) avalanches the switch",
        values,
        fix=f"use a switch rated {_rating_text(needed, SWITCH_VOLTAGES, 'V')} V_DS "
        f"({_within(needed, applied, limit.derating, 'V')}), or lower the overshoot with a "
        "snubber and a tighter bus loop and give the smaller ringing allowance as option "
        "ringing",
        derivation=(
            "V_DS,off = (V_bus − V_sw,low)·(1 + k_ring)",
            f"         = ({facts.v_bus.text()} − {facts.v_sw_low.text()}) × (1 + {k_ring:g})"
            f" = {_v(applied)}",
            f"limit = V_DS(max) × derating = {rating.text()} × {limit.derating:g} "
            f"= {_v(limit.limit)}",
        ),
        severity=severity,
    )


def switch_findings(stage: DriveStage, ctx: CheckContext) -> Iterator[Finding]:
    """The floating switch blocks the bus while its partner holds the node low; the
    partner blocks it while the floating switch is on."""
    facts = ctx.facts
    if stage.mode == "linear" or stage.channel == "pmos":
        return
    own = _switch_finding(stage, ctx, facts.switch, "off with the leg's other side on")
    if own is not None:
        yield with_corner(own, facts, STRESS, BUS_ONLY)
    partner = _partner(stage, facts)
    if partner is not None and not facts.never_on:
        found = _switch_finding(stage, ctx, partner, f"off with {stage.switch} on")
        if found is not None:
            yield with_corner(found, facts, STRESS, BUS_ONLY)


# -- parts across a known voltage --------------------------------------------------------------


def _across(facts: StageFacts, a: str, b: str) -> list[Device]:
    """Two-terminal capacitors and resistors connected between nets ``a`` and ``b``."""
    found = []
    for device in facts.by_net.get(a, ()):
        if device.kind in ("capacitor", "resistor") and set(device.nets) == {a, b}:
            found.append(device)
    return sorted(found, key=lambda d: d.name)


def _boot_at_rest(stage: DriveStage, facts: StageFacts) -> Value | None:
    """The highest voltage across a bootstrap's hold capacitor: after a long off-time (a
    start-up, a leg held off) the diode carries only the off-state drains, so its drop is
    the one at that small current, not the drop as a periodic recharge ends."""
    if stage.supply.kind != "bootstrap" or facts.v_aux_max is None:
        return facts.v_boot_max
    quiescent = facts._driver_value("iq_boot", "A")
    current = facts.off_drain.value + (quiescent.value if quiescent is not None else 0.0)
    drop = facts.diode_vf_at(current, "at rest: the diode carries only the off-state drains")
    volts = facts.v_aux_max.value - drop.value - facts.v_sw_low.value
    return computed(
        volts,
        "V",
        f"computed: V_aux,max − V_F at rest − V_sw,low = {facts.v_aux_max.text()} − "
        f"{drop.text()} − {facts.v_sw_low.text()} (V_F: {drop.origin})",
    )


def _held_voltages(stage: DriveStage, facts: StageFacts) -> list[tuple[Device, Value, str]]:
    """Each part across the boot supply or across gate and source, with the highest
    voltage it holds and what that voltage is."""
    out: list[tuple[Device, Value, str]] = []
    boot = stage.supply.boot_net
    held = _boot_at_rest(stage, facts)
    if held is None:
        return out
    if boot is not None:
        for device in _across(facts, boot, stage.source):
            out.append((device, held, "the boot supply"))
    if stage.gate != boot:
        for device in _across(facts, stage.gate, stage.source):
            out.append((device, held, "gate–source, with the switch on"))
    return out


def part_voltage_findings(stage: DriveStage, ctx: CheckContext) -> Iterator[Finding]:
    facts = ctx.facts
    for device, held, what in _held_voltages(stage, facts):
        rating = facts.ratings.get(device, "v_max")
        if rating is None:
            continue
        option = "capacitor_derating" if device.kind == "capacitor" else "derating"
        limit = _Limit(rating, ctx.options[option])
        severity = limit.severity(held.value)
        if severity is None:
            continue
        needed = held.value / limit.derating
        kind = "capacitor" if device.kind == "capacitor" else "resistor"
        values = {"v_part": Value(held.value, "V", held.origin), **limit.values("v", option)}
        found = ctx.finding(
            device.name,
            f"{device.name} holds {_v(held.value)} ({what}), {limit.beyond(held.value, 'V')}",
            values,
            fix=(
                f"use a capacitor rated {_rating_text(needed, CAPACITOR_VOLTAGES, 'V')} "
                f"({_within(needed, held.value, limit.derating, 'V')}); a ceramic also loses "
                "less of its capacitance to DC bias well below its rating"
                if kind == "capacitor"
                else f"use a resistor rated at least {_v(needed)} (so that {_v(held.value)} is "
                f"within {limit.derating:.0%} of the rating), or several in series"
            ),
            derivation=(
                f"V = {held.text()} ({held.origin})",
                f"limit = V_max × derating = {rating.text()} × {limit.derating:g} "
                f"= {_v(limit.limit)}",
            ),
            severity=severity,
        )
        yield with_corner(found, facts, STRESS, SUPPLY_ONLY)


# -- gate resistor power -----------------------------------------------------------------------


def _ohms(device: Device | None) -> float:
    if device is None or device.kind != "resistor" or device.value is None:
        return 0.0
    return device.value / device.multiplier


def _path_resistance(facts: StageFacts, devices: tuple[str, ...], driver_key: str) -> float:
    """Every resistance of one gate path: its resistors, the driver's output resistance
    (parts ``r_source`` / ``r_sink``) and the switch's internal gate resistance."""
    stage = facts.stage
    ohms = sum(_ohms(facts.device(name)) for name in devices)
    if stage.driver is not None and stage.driver.device in devices:
        own = facts._driver_value(driver_key, "Ohm")
        ohms += own.value if own is not None else 0.0
    internal = facts.ratings.get(facts.switch, "rg_internal")
    return ohms + (internal.value if internal is not None else 0.0)


@dataclass(frozen=True, slots=True)
class _Edge:
    """One gate resistor's place in one edge's path."""

    edge: str  # "turn-on" or "turn-off"
    ohms: float
    path: float  # every resistance of that path

    def text(self) -> str:
        return f"{format_si(self.ohms, 'Ω')} of {format_si(self.path, 'Ω')} at {self.edge}"


def _edge_shares(facts: StageFacts) -> dict[str, list[_Edge]]:
    """For each gate resistor, its place in each edge whose path it is in (the fastest
    path of each edge: the one with the least resistance carries the charge)."""
    stage = facts.stage
    shares: dict[str, list[_Edge]] = {}
    for edge, paths, key in (
        ("turn-on", stage.pullups, "r_source"),
        ("turn-off", stage.pulldowns, "r_sink"),
    ):
        totals = [(_path_resistance(facts, p.devices, key), p) for p in paths]
        totals = [(total, p) for total, p in totals if total > 0]
        if not totals:
            continue
        total, path = min(totals, key=lambda item: item[0])
        for name in path.devices:
            ohms = _ohms(facts.device(name))
            if ohms > 0:
                shares.setdefault(name, []).append(_Edge(edge, ohms, total))
    return shares


def _unknown_driver_resistance(facts: StageFacts) -> tuple[str, ...]:
    driver = facts.stage.driver
    if driver is None:
        return ()
    missing = [k for k in ("r_source", "r_sink") if facts._driver_value(k, "Ohm") is None]
    if not missing:
        return ()
    return (
        f"the driver {driver.device}'s output resistance is not known (give "
        f"{' and '.join(missing)} in its parts entry): R_path leaves it out, so P_R is an "
        "upper bound",
    )


def power_findings(stage: DriveStage, ctx: CheckContext) -> Iterator[Finding]:
    facts = ctx.facts
    drive, f = facts.vgs_on_max, facts.fsw
    if stage.mode != "switching" or drive is None or f is None or facts.never_on:
        return
    q_g = facts.gate_charge_at(drive.value)
    if q_g is None:
        return
    p_gate = switching.gate_drive_power(q_g.value, drive.value, f.value)
    for name, edges in sorted(_edge_shares(facts).items()):
        device = facts.device(name)
        rating = facts.ratings.get(device, "p_max")
        if device is None or rating is None:
            continue
        # each edge's path takes half the gate-drive power; its resistors share it in series
        power = sum(switching.resistor_share(p_gate / 2, e.ohms, e.path) for e in edges)
        limit = _Limit(rating, ctx.options["power_derating"])
        severity = limit.severity(power)
        if severity is None:
            continue
        needed = power / limit.derating
        size = next_rating(needed, RESISTOR_POWERS)
        edge_text = ", ".join(e.text() for e in edges)
        values = {
            "p_resistor": computed(power, "W", "computed: Σ ½·Q_G·V_drv·f·R/R_path"),
            "p_gate": computed(p_gate, "W", "computed: Q_G·V_drv·f"),
            "qg": q_g,
            "vgs_drive": drive,
            "fsw": f,
            **limit.values("p", "power_derating"),
        }
        found = ctx.finding(
            name,
            f"{name} dissipates {format_si(power, 'W')} of the {format_si(p_gate, 'W')} gate "
            f"drive power ({edge_text}), {limit.beyond(power, 'W')}",
            values,
            fix=(
                f"use a resistor rated {format_si(size, 'W')}"
                if size is not None
                else f"share the gate resistance among parts rated {format_si(needed, 'W')} in all"
            )
            + f" ({_within(needed, power, limit.derating, 'W')}); the gate "
            "drive power does not depend on the resistance, only its share does",
            derivation=(
                *_unknown_driver_resistance(facts),
                "P_G = Q_G·V_drv·f = "
                f"{q_g.text()} × {drive.text()} × {f.text()} = {format_si(p_gate, 'W')}",
                "P_R = Σ over its edges of ½·P_G·R/R_path "
                "(R_path: the path's resistors, the driver's output, the internal gate R)",
                f"limit = P_max × derating = {rating.text()} × {limit.derating:g} "
                f"= {format_si(limit.limit, 'W')}",
            ),
            severity=severity,
        )
        yield with_corner(found, facts, STRESS, DRIVE_USES)


def check_voltage_stress(stage: DriveStage, ctx: CheckContext) -> Iterator[Finding]:
    yield from switch_findings(stage, ctx)
    yield from part_voltage_findings(stage, ctx)
    yield from power_findings(stage, ctx)


def finding_kind(values: Mapping[str, Value]) -> str:
    """Which of this rule's findings a finding is, from its values."""
    if "vds_off" in values:
        return "switch"
    if "p_resistor" in values:
        return "power"
    return "part"


CHECKS = {"voltage-stress": check_voltage_stress}
