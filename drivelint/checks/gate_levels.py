"""How high and how low a floating switch's gate–source voltage can go, after its clamps.

The computations of gate-overvoltage (``checks/gate.py`` judges them): the switch's V_GS
rating in both directions with its derating; each gate–source clamp's levels; the drives
that raise the gate (the floating supply, a ground-referenced rail while the source is
down, an output short); the pull-downs that take it below the source while something holds
the source up; and the Zener a fix would choose.
"""

from __future__ import annotations

import math
from collections.abc import Mapping
from dataclasses import dataclass

from drivelint.checks.facts import StageFacts
from drivelint.circuit.model import GROUND, Device
from drivelint.netlist.values import format_si
from drivelint.physics import bootstrap as boot_physics
from drivelint.physics import gate as gate_physics
from drivelint.physics import stress
from drivelint.physics.preferred import next_preferred, preferred_at_most
from drivelint.ratings.values import Value, computed
from drivelint.stages.model import Clamp, DriveStage, GatePath
from drivelint.stages.recognise import ZENER_MAX_BV

ZENER_SERIES = "E24"  # Zener voltages are offered in the E24 steps (common practice)
_ACTIVE_KINDS = frozenset({"bjt", "mosfet", "switch", "subckt", "cswitch"})


def _v(value: float) -> str:
    return format_si(value, "V")


# -- the rating ------------------------------------------------------------------------------


@dataclass(frozen=True, slots=True)
class GateRating:
    """The switch's V_GS rating in both directions, and the limits after derating."""

    positive: Value
    negative: Value
    derating: float

    @property
    def limit_positive(self) -> float:
        return stress.derated_limit(self.positive.value, self.derating)

    @property
    def limit_negative(self) -> float:
        return stress.derated_limit(self.negative.value, self.derating)

    def derated_text(self, rating: Value) -> str:
        """Clause naming the derating, empty when the absolute rating is the limit."""
        if self.derating == 1.0:
            return ""
        return f" ({self.derating:.0%} of the {rating.text()} rating)"

    def values(self) -> dict[str, Value]:
        return {
            "vgs_rating": self.positive,
            "vgs_rating_negative": self.negative,
            "derating": Value(self.derating, "1", "option derating"),
            "vgs_limit_positive": computed(
                self.limit_positive, "V", "computed: V_GS(max) × derating"
            ),
            "vgs_limit_negative": computed(
                self.limit_negative, "V", "computed: V_GS(min) × derating"
            ),
        }


def _rating(facts: StageFacts, derating: float) -> GateRating:
    positive = facts.ratings.get_or_default(facts.switch, "vgs_max")
    assert positive is not None  # vgs_max has a documented default
    # a SiC part's asymmetric default (−8 V) where nothing gives its own
    given = facts.ratings.get_or_default(facts.switch, "vgs_min")
    if given is None:
        negative = Value(-abs(positive.value), "V", f"−vgs_max ({positive.origin})")
    else:
        # Parts lists write the negative limit either signed (-8 V) or as a magnitude.
        negative = Value(-abs(given.value), "V", given.origin)
    return GateRating(Value(abs(positive.value), "V", positive.origin), negative, derating)


# -- clamps ----------------------------------------------------------------------------------


@dataclass(frozen=True, slots=True)
class ClampLevels:
    """Where a gate–source clamp conducts, in each direction.

    ``positive`` is the V_GS at which it conducts with the gate above the source (inf when
    an element blocks that way, None when a Zener voltage is unknown); ``negative`` the
    same with the source above the gate (≤ 0, −inf when blocked). ``*_zener`` is the sum of
    the Zener voltages in that conduction (0 when only forward drops conduct).
    """

    clamp: Clamp
    positive: float | None
    negative: float | None
    positive_zener: float
    negative_zener: float
    inputs: Mapping[str, Value]

    @property
    def forward_only_positive(self) -> bool:
        """It conducts forward as soon as the gate rises: reversed."""
        return (
            self.positive is not None and math.isfinite(self.positive) and not self.positive_zener
        )

    def describe(self) -> str:
        names = "+".join(self.clamp.devices or (self.clamp.device,))
        if self.positive_zener and self.negative_zener:
            return f"{names} (back-to-back Zeners)"
        zener = self.positive_zener or self.negative_zener
        if zener:
            return f"{names} ({_v(zener)} Zener)"
        return f"{names} ({'Zener' if self.clamp.kind == 'zener' else 'diode'})"


def _breakdown(device: Device, facts: StageFacts) -> tuple[Value | None, bool]:
    """The Zener voltage of a clamp diode, and whether it is a Zener at all.

    A rectifier's breakdown sits far above any gate rating and is not a clamp level
    (common practice); the same bound as recognition tells the two apart.
    """
    kind = facts.ratings.part_kind(device)
    vz = facts.ratings.get(device, "vz")
    if kind == "zener":
        return vz, True
    if kind == "diode":
        return None, False
    if vz is not None and 0 < vz.value <= ZENER_MAX_BV:
        return vz, True
    return None, False


def _chain_sum(steps: list[float | None]) -> float | None:
    """Sum of the voltages across a series chain: inf if any element blocks, None if unknown."""
    if any(step == math.inf for step in steps):
        return math.inf
    if any(step is None for step in steps):
        return None
    return sum(step for step in steps if step is not None)


def _clamp_levels(clamp: Clamp, stage: DriveStage, facts: StageFacts) -> ClampLevels:
    names = clamp.devices or (clamp.device,)
    steps: dict[str, list[float | None]] = {"positive": [], "negative": []}
    zener_sum = {"positive": 0.0, "negative": 0.0}
    inputs: dict[str, Value] = {}
    near = stage.gate  # the chain runs gate → (middle) → source
    for name in names:
        device = facts.device(name)
        if device is None:
            return ClampLevels(clamp, None, None, 0.0, 0.0, {})
        gate_side = "a" if device.net("a") == near else "k"
        vz, zener = _breakdown(device, facts)
        vf = facts.ratings.get_or_default(device, "vf")
        assert vf is not None  # vf has a documented default
        inputs[f"{device.name}_vf"] = vf
        if zener and vz is not None:
            inputs[f"{device.name}_vz"] = vz
        # A rectifier's reverse direction blocks; a Zener's breaks down at V_Z.
        blocking: float | None = (vz.value if vz is not None else None) if zener else math.inf
        for direction in ("positive", "negative"):
            # Gate above source: current runs gate → source, forward through an element
            # whose anode is on the gate side; source above gate, the other way round.
            forward = (gate_side == "a") == (direction == "positive")
            steps[direction].append(vf.value if forward else blocking)
            if not forward and zener and vz is not None:
                zener_sum[direction] += vz.value
        near = device.net("k" if gate_side == "a" else "a") or ""
    negative = _chain_sum(steps["negative"])
    return ClampLevels(
        clamp,
        _chain_sum(steps["positive"]),
        -negative if negative is not None else None,
        zener_sum["positive"],
        zener_sum["negative"],
        inputs,
    )


# -- the positive side -------------------------------------------------------------------------


@dataclass(frozen=True, slots=True)
class GateDrive:
    """The highest V_GS one pull-up path can apply.

    ``level`` is the highest in normal operation (switch off with its gate low, or on with
    its source up); ``short`` the V_GS with the source held at its low level while the gate
    is pulled up — an output short, or the first instant of a turn-on into a load that
    cannot move — where that differs (a gate fed from a ground-referenced rail or pump).
    """

    level: float
    path: GatePath
    from_boot: bool
    origin: Value
    resistance: float | None  # series resistance of the path, None when it has none
    note: str
    short: float | None = None
    short_note: str = ""
    steady: float | None = None  # the on-state level a clamp must stay off at (None: level)

    @property
    def on_level(self) -> float:
        return self.level if self.steady is None else self.steady


def _resistance(device: Device | None) -> float | None:
    if device is None or device.kind != "resistor" or device.value is None:
        return None
    return device.value / device.multiplier


def _ground_zener(path: GatePath, stage: DriveStage, facts: StageFacts) -> tuple[Value, str] | None:
    """The lowest Zener from a net of a rail-fed pull-up (or the gate) to ground, if any.

    A reference Zener to ground caps the gate voltage to ground at V_Z whatever the rail.
    """
    nets = {stage.gate}
    for name in path.devices:
        device = facts.device(name)
        if device is not None and device.kind in ("resistor", "inductor"):
            nets.update(device.nets)
    nets -= {path.end_net, GROUND}
    best: tuple[Value, str] | None = None
    for net in sorted(nets):
        for device in facts.by_net.get(net, ()):
            if device.kind != "diode" or device.net("k") != net or device.net("a") != GROUND:
                continue
            vz, zener = _breakdown(device, facts)
            if zener and vz is not None and (best is None or vz.value < best[0].value):
                best = (vz, device.name)
    return best


def _drives(stage: DriveStage, facts: StageFacts, undershoot: float) -> list[GateDrive]:
    out: list[GateDrive] = []
    supply = stage.supply
    for path in stage.pullups:
        ohms = [_resistance(facts.device(n)) for n in path.devices]
        series = sum(r for r in ohms if r is not None) or None
        if path.returns_to == "boot":
            top = facts.v_boot_max
            if top is None:
                continue
            level = top.value
            note = "the floating supply across gate and source"
            if supply.capacitor and facts.c_hold is not None and facts.qg is not None:
                # The gate takes its charge from the hold capacitor: the two settle together,
                # Q_g/(C + C_g) below where the capacitor started.
                # A recovering diode takes its stored charge back during the same edge.
                # The stress corner: the gate charge at its typical value, the capacitor at
                # its highest (they share least).
                q_rr = facts.recovery_charge.value if facts.recovery_charge else 0.0
                qg, c_high = facts.qg_typical or facts.qg, facts.c_hold_high or facts.c_hold
                share = (qg.value + q_rr) / (c_high.value + facts.c_gate_typical.value)
                level = max(0.0, level - share)
                note += f" after sharing its charge with the gate ({_v(share)})"
            steady = facts.vgs_on_max.value if facts.vgs_on_max else level
            steady = min(steady, level)
            if supply.kind == "bootstrap" and undershoot > 0:
                level = boot_physics.boot_voltage_max(top.value, 0.0, 0.0, undershoot)
                note += f" (charged {_v(undershoot)} higher by the switch node's undershoot)"
            pump = facts.pump_output
            if supply.kind == "charge-pump" and pump is not None and not supply.riding:
                # A pump to ground: the source follows the gate up; with it held low the
                # gate sees the pump's whole output.
                note = "the charge pump's output with the source up at the bus"
                out.append(
                    GateDrive(
                        level,
                        path,
                        True,
                        top,
                        series,
                        note,
                        gate_physics.worst_positive_vgs(pump.value, facts.v_sw_low.value),
                        f"the charge pump's output {pump.text()} with the source held at "
                        f"{facts.v_sw_low.text()}",
                        steady,
                    )
                )
                continue
            if supply.kind == "charge-pump" and supply.riding:
                note = (
                    f"the reservoir {supply.capacitor}, charged to the pump's output while the "
                    "source was low, at each turn-on"
                )
            out.append(GateDrive(level, path, True, top, series, note, steady=steady))
            continue
        rail = facts.circuit.rails.get(path.end_net)
        if rail is None or rail <= 0:
            continue
        level_value = Value(rail, "V", f"DC rail {path.end_net}")
        where = f"rail {path.end_net}"
        capped = _ground_zener(path, stage, facts)
        if capped is not None and capped[0].value < rail:
            level_value = Value(
                capped[0].value, "V", f"Zener {capped[1]} to ground ({capped[0].origin})"
            )
            where = f"the Zener {capped[1]} to ground on the pull-up from rail {path.end_net}"
        # With the switch on its source rises to the bus (or follows the gate a threshold
        # below it); off, its gate is low. Only a source held down (an output short) sees
        # the whole gate voltage.
        bus_low = facts.v_bus_min.value if facts.v_bus_min else 0.0
        normal = max(0.0, gate_physics.worst_positive_vgs(level_value.value, bus_low))
        short = gate_physics.worst_positive_vgs(level_value.value, facts.v_sw_low.value)
        out.append(
            GateDrive(
                normal,
                path,
                False,
                level_value,
                series,
                f"{where} with the source up at the bus",
                short,
                f"{where} with the source held at {facts.v_sw_low.text()}",
            )
        )
    return out


# -- the negative side -------------------------------------------------------------------------


@dataclass(frozen=True, slots=True)
class SourceHold:
    """Whether the source stays up while the gate is pulled to ground, and why."""

    held: bool | None  # None: cannot tell
    reasons: tuple[str, ...]
    values: Mapping[str, Value]


def _fall_time(stage: DriveStage, facts: StageFacts, floor: float) -> Value:
    """How long the fastest pull-down that does not return to the source takes to bring the
    gate down: R·C_g of its resistors (and a driver's sink resistance) with the gate's
    capacitance, at least ``floor`` (option hold_time_constant: about the fall time of a
    transistor or driver pull-down with no resistor of its own)."""
    best: tuple[float, str] | None = None
    for path in stage.pulldowns:
        if path.returns_to == "source":
            continue
        ohms = 0.0
        for name in path.devices:
            ohms += _resistance(facts.device(name)) or 0.0
            if stage.driver is not None and name == stage.driver.device:
                sink = facts._driver_value("r_sink", "Ohm")
                ohms += sink.value if sink is not None else 0.0
        names = "+".join(path.devices)
        if best is None or ohms < best[0]:
            best = (ohms, names)
    c_gate = facts.c_gate.value
    if best is None or best[0] * c_gate <= floor:
        how = "option hold_time_constant (a pull-down with no resistance of its own"
        if best is not None and best[0] > 0:
            how += f"; R·C_g through {best[1]} = {format_si(best[0] * c_gate, 's')}"
        return Value(floor, "s", how + ")")
    return computed(
        best[0] * c_gate,
        "s",
        f"computed: R·C_g through {best[1]} = {format_si(best[0], 'Ω')} × {facts.c_gate.text()}",
    )


def _source_hold(stage: DriveStage, facts: StageFacts, fall: Value) -> SourceHold:
    reasons: list[str] = []
    values: dict[str, Value] = {}
    for refresh in stage.refresh:
        if refresh.kind == "low-side switch":
            reasons.append(
                f"bridge partner {refresh.devices[0]} (in the dead time the load current can "
                f"hold the node at the bus through {stage.switch}'s body diode)"
            )
    rails = facts.circuit.rails
    caps: list[Device] = []
    for device in facts.by_net.get(stage.source, ()):
        if device.kind != "capacitor" or device.value is None:
            continue
        far = next((n for n in device.nets if n != stage.source), None)
        if far is not None and (far == GROUND or far in rails):
            caps.append(device)
    unknown = False
    if caps:
        farads = sum(c.value * c.multiplier for c in caps if c.value is not None)
        siemens = 0.0
        for refresh in stage.refresh:
            if refresh.kind not in ("load", "inductor-load"):
                continue
            ohms = _resistance(facts.device(refresh.devices[-1]))
            if ohms is None or ohms <= 0:
                # An inductive load with no resistance known discharges the node at a rate
                # set by its current, which the netlist does not give.
                unknown = True
                continue
            siemens += 1.0 / ohms
        tau = farads / siemens if siemens else math.inf
        names = ", ".join(c.name for c in caps)
        values["c_source_node"] = computed(
            farads, "F", f"computed: {names} from the source to a fixed net"
        )
        if siemens:
            values["r_discharge"] = computed(
                1.0 / siemens, "Ohm", "computed: loads from the source, in parallel"
            )
        values["tau_source_node"] = computed(tau, "s", "computed: R_discharge · C_source_node")
        values["pulldown_fall_time"] = fall
        if not unknown and tau >= fall.value:
            how = (
                f"it discharges with τ = {format_si(tau, 's')}"
                if math.isfinite(tau)
                else "nothing discharges it"
            )
            how += f", longer than the ≈ {fall.text()} the gate takes to fall"
            reasons.append(f"{names} ({format_si(farads, 'F')} to a fixed net; {how})")
    if reasons:
        return SourceHold(True, tuple(reasons), values)
    return SourceHold(None if unknown else False, (), values)


@dataclass(frozen=True, slots=True)
class Pulldown:
    """A pull-down of the gate: its path, device, return level and the V_GS it holds."""

    path: GatePath
    device: str
    v_return: Value
    vgs: float
    held: bool


def _pulldown_device(path: GatePath, facts: StageFacts) -> str:
    """The active part of a pull-down path (the transistor or driver), else its first part."""
    for name in path.devices:
        device = facts.device(name)
        if device is None or device.kind in _ACTIVE_KINDS:
            return name
    return path.devices[0]


def _pulldowns(
    stage: DriveStage, facts: StageFacts, hold: SourceHold, vth: Value | None
) -> tuple[list[Pulldown], bool]:
    """Pull-downs that do not return to the source, and whether every one could be judged."""
    out: list[Pulldown] = []
    complete = True
    for path in stage.pulldowns:
        if path.returns_to == "source":
            continue
        if path.returns_to == "negative":
            # a turn-off supply riding on the source: V_GS is its level, whatever the source
            level = facts.v_off_negative
            if level is None:
                complete = False
                continue
            out.append(Pulldown(path, _pulldown_device(path, facts), level, level.value, True))
            continue
        if path.returns_to == "ground":
            v_return = Value(0.0, "V", "ground")
        else:
            volts = facts.circuit.rails.get(path.end_net)
            if volts is None:
                complete = False
                continue
            v_return = Value(volts, "V", f"DC rail {path.end_net}")
        if facts.v_bus is None or hold.held is None or (not hold.held and vth is None):
            complete = False
            continue
        v_bus = facts.v_bus.value
        if hold.held:
            vgs = gate_physics.negative_vgs_when_pulled_to_ground(v_bus, v_return.value, 0.0, False)
        else:
            assert vth is not None
            following = gate_physics.negative_vgs_when_pulled_to_ground(
                v_bus, v_return.value, vth.value, True
            )
            # Once the source has followed down to ground, a return below ground still
            # leaves V_GS = V_return − 0.
            vgs = min(following, gate_physics.worst_negative_vgs(v_return.value, 0.0))
        out.append(Pulldown(path, _pulldown_device(path, facts), v_return, vgs, bool(hold.held)))
    return out, complete


# -- Zener choice for the fix --------------------------------------------------------------------


def _preferred_at_most(value: float, series: str = ZENER_SERIES) -> float | None:
    """Largest value of ``series`` that is ≤ ``value``."""
    return preferred_at_most(value, series)


def zener_between(drive: float | None, limit: float, tolerance: float) -> float | None:
    """The lowest standard Zener that stays off at ``drive`` and clamps strictly inside ``limit``.

    With tolerance t a Zener of nominal V_Z conducts anywhere from V_Z·(1 − t) to V_Z·(1 + t):
    it must start above the drive, V_Z·(1 − t) > V_drive, and end below the limit,
    V_Z·(1 + t) < V_limit (a clamp at the rating itself protects nothing).
    """
    if not 0 <= tolerance < 1:
        return None
    ceiling = limit / (1.0 + tolerance)
    if drive is None or drive <= 0:
        choice = _preferred_at_most(ceiling * (1 - 1e-9))
        return choice if choice is not None and choice * (1.0 + tolerance) < limit else None
    choice = next_preferred(drive / (1.0 - tolerance) * (1 + 1e-9), ZENER_SERIES)
    return choice if choice * (1.0 + tolerance) < limit else None


# -- the check -----------------------------------------------------------------------------------


def gate_extremes(stage: DriveStage, facts: StageFacts, options: Mapping[str, float]) -> Extremes:
    """The highest and lowest V_GS of a stage, after the clamps that hold them."""
    tolerance = options["zener_tolerance"]
    rating = _rating(facts, options["derating"])
    limit_pos, limit_neg = rating.limit_positive, rating.limit_negative
    clamps = [_clamp_levels(c, stage, facts) for c in stage.clamps]
    drives = _drives(stage, facts, options.get("undershoot", 0.0))
    vth = facts.ratings.get(facts.switch, "vth")
    fall = _fall_time(stage, facts, options["hold_time_constant"])
    hold = _source_hold(stage, facts, fall)
    pulls, complete = _pulldowns(stage, facts, hold, vth)

    # Positive side: the highest drive, held down by any clamp that conducts within the limit.
    drive = max(drives, key=lambda d: d.level) if drives else None
    short = max(
        (d for d in drives if d.short is not None), key=lambda d: d.short or 0.0, default=None
    )
    boot_drive = max((d for d in drives if d.from_boot), key=lambda d: d.level, default=None)
    holding_pos = [c for c in clamps if c.positive is not None and 0 < c.positive <= limit_pos]
    unknown_pos = any(c.positive is None for c in clamps)
    clamp_pos = min((c.positive for c in holding_pos if c.positive is not None), default=None)
    vgs_pos: float | None = None
    if drive is not None:
        vgs_pos = drive.level if clamp_pos is None else min(drive.level, clamp_pos)
    vgs_short: float | None = None
    if short is not None and short.short is not None:
        vgs_short = short.short if clamp_pos is None else min(short.short, clamp_pos)

    # Negative side: the lowest pull-down result, held up by a clamp within the limit.
    holding_neg = [c for c in clamps if c.negative is not None and limit_neg <= c.negative < 0]
    unknown_neg = any(c.negative is None for c in clamps)
    worst = min(pulls, key=lambda p: p.vgs) if pulls else None
    vgs_neg: float | None
    if worst is not None:
        vgs_neg = max([worst.vgs, *(c.negative for c in holding_neg if c.negative is not None)])
    elif complete:
        vgs_neg = 0.0  # every pull-down returns to the source
    else:
        vgs_neg = None
    return Extremes(
        rating,
        clamps,
        drive,
        short,
        boot_drive,
        hold,
        pulls,
        worst,
        vth,
        vgs_pos,
        vgs_short,
        vgs_neg,
        bool(holding_pos),
        unknown_pos,
        bool(holding_neg),
        unknown_neg,
        tolerance,
    )


@dataclass(frozen=True, slots=True)
class Extremes:
    """What bounds a gate's V_GS: its rating, clamps, drive and a shorted driver."""

    rating: GateRating
    clamps: list[ClampLevels]
    drive: GateDrive | None
    short: GateDrive | None
    boot_drive: GateDrive | None
    hold: SourceHold
    pulls: list[Pulldown]
    worst: Pulldown | None
    vth: Value | None
    vgs_pos: float | None
    vgs_short: float | None
    vgs_neg: float | None
    holding_pos: bool
    unknown_pos: bool
    holding_neg: bool
    unknown_neg: bool
    tolerance: float
