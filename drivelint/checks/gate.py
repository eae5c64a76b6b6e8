"""Gate–source voltage of a floating switch against its rating, and the clamps meant to hold it.

Three questions per stage, each answered from the stage's paths and the shared facts:

- how high can V_GS go (the floating supply, or a ground-referenced rail with the source
  down at ground while the switch is off)?
- how low can V_GS go (a pull-down returned to ground while something holds the source up)?
- does a gate–source clamp hold V_GS inside the rating without conducting in normal drive?
"""

from __future__ import annotations

import math
from collections.abc import Iterator, Mapping
from dataclasses import dataclass

from drivelint.checks.base import CheckContext, Finding
from drivelint.checks.corners import STRESS, with_corner
from drivelint.checks.facts import StageFacts
from drivelint.circuit.model import GROUND, Device
from drivelint.diagnostics import Severity
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
class _Rating:
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


def _rating(facts: StageFacts, derating: float) -> _Rating:
    positive = facts.ratings.get_or_default(facts.switch, "vgs_max")
    assert positive is not None  # vgs_max has a documented default
    # a SiC part's asymmetric default (−8 V) where nothing gives its own
    given = facts.ratings.get_or_default(facts.switch, "vgs_min")
    if given is None:
        negative = Value(-abs(positive.value), "V", f"−vgs_max ({positive.origin})")
    else:
        # Parts lists write the negative limit either signed (-8 V) or as a magnitude.
        negative = Value(-abs(given.value), "V", given.origin)
    return _Rating(Value(abs(positive.value), "V", positive.origin), negative, derating)


# -- clamps ----------------------------------------------------------------------------------


@dataclass(frozen=True, slots=True)
class _ClampLevels:
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


def _clamp_levels(clamp: Clamp, stage: DriveStage, facts: StageFacts) -> _ClampLevels:
    names = clamp.devices or (clamp.device,)
    steps: dict[str, list[float | None]] = {"positive": [], "negative": []}
    zener_sum = {"positive": 0.0, "negative": 0.0}
    inputs: dict[str, Value] = {}
    near = stage.gate  # the chain runs gate → (middle) → source
    for name in names:
        device = facts.device(name)
        if device is None:
            return _ClampLevels(clamp, None, None, 0.0, 0.0, {})
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
    return _ClampLevels(
        clamp,
        _chain_sum(steps["positive"]),
        -negative if negative is not None else None,
        zener_sum["positive"],
        zener_sum["negative"],
        inputs,
    )


# -- the positive side -------------------------------------------------------------------------


@dataclass(frozen=True, slots=True)
class _Drive:
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


def _drives(stage: DriveStage, facts: StageFacts, undershoot: float) -> list[_Drive]:
    out: list[_Drive] = []
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
                    _Drive(
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
            out.append(_Drive(level, path, True, top, series, note, steady=steady))
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
            _Drive(
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
class _SourceHold:
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


def _source_hold(stage: DriveStage, facts: StageFacts, fall: Value) -> _SourceHold:
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
        return _SourceHold(True, tuple(reasons), values)
    return _SourceHold(None if unknown else False, (), values)


@dataclass(frozen=True, slots=True)
class _Pulldown:
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
    stage: DriveStage, facts: StageFacts, hold: _SourceHold, vth: Value | None
) -> tuple[list[_Pulldown], bool]:
    """Pull-downs that do not return to the source, and whether every one could be judged."""
    out: list[_Pulldown] = []
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
            out.append(_Pulldown(path, _pulldown_device(path, facts), level, level.value, True))
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
        out.append(_Pulldown(path, _pulldown_device(path, facts), v_return, vgs, bool(hold.held)))
    return out, complete


# -- Zener choice for the fix --------------------------------------------------------------------


def _preferred_at_most(value: float, series: str = ZENER_SERIES) -> float | None:
    """Largest value of ``series`` that is ≤ ``value``."""
    return preferred_at_most(value, series)


def _zener_between(drive: float | None, limit: float, tolerance: float) -> float | None:
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


def gate_extremes(stage: DriveStage, facts: StageFacts, options: Mapping[str, float]) -> _Extremes:
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
    return _Extremes(
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
class _Extremes:
    rating: _Rating
    clamps: list[_ClampLevels]
    drive: _Drive | None
    short: _Drive | None
    boot_drive: _Drive | None
    hold: _SourceHold
    pulls: list[_Pulldown]
    worst: _Pulldown | None
    vth: Value | None
    vgs_pos: float | None
    vgs_short: float | None
    vgs_neg: float | None
    holding_pos: bool
    unknown_pos: bool
    holding_neg: bool
    unknown_neg: bool
    tolerance: float


def check_gate_overvoltage(stage: DriveStage, ctx: CheckContext) -> Iterator[Finding]:
    """V_GS beyond the rating either way with no clamp holding it; clamps that misbehave;
    each at the corner where V_GS is highest (corners.STRESS)."""
    for found in _check_gate_overvoltage(stage, ctx):
        yield with_corner(found, ctx.facts, STRESS)


def _check_gate_overvoltage(stage: DriveStage, ctx: CheckContext) -> Iterator[Finding]:
    if stage.channel != "nmos":
        return  # a P-channel switch's on-state V_GS is negative; not this rule's model
    facts = ctx.facts
    if facts.never_on:
        return  # never commanded on: its gate stays low in this scenario
    found = gate_extremes(stage, facts, ctx.options)
    rating, clamps, drive, boot_drive, worst = (
        found.rating,
        found.clamps,
        found.drive,
        found.boot_drive,
        found.worst,
    )
    limit_pos, limit_neg = rating.limit_positive, rating.limit_negative
    linear = stage.mode == "linear"

    summary: dict[str, Value] = dict(rating.values())
    if found.vgs_pos is not None:
        summary["vgs_max_positive"] = computed(
            found.vgs_pos,
            "V",
            "computed: highest V_GS of the pull-ups in normal operation, after any clamp "
            "within the limit",
        )
    if found.vgs_short is not None:
        summary["vgs_output_short"] = computed(
            found.vgs_short,
            "V",
            "computed: V_GS with the source held at its low level (output short), after any "
            "clamp within the limit",
        )
    if found.vgs_neg is not None:
        summary["vgs_max_negative"] = computed(
            found.vgs_neg,
            "V",
            "computed: lowest V_GS of the pull-downs, after any clamp within the limit"
            if worst is not None
            else "computed: no pull-down returns anywhere but the source",
        )
    if drive is not None:
        summary["vgs_drive"] = computed(drive.level, "V", f"computed: {drive.note}")
        summary["v_gate_supply"] = drive.origin
    undershoot = ctx.options.get("undershoot", 0.0)
    if undershoot and stage.supply.kind == "bootstrap":
        summary["undershoot"] = Value(undershoot, "V", "option undershoot")

    clear_pos = not found.holding_pos and not found.unknown_pos
    positive_fired = drive is not None and drive.level > limit_pos and clear_pos
    short_fired = (
        not positive_fired
        and found.short is not None
        and found.short.short is not None
        and found.short.short > limit_pos
        and clear_pos
    )
    negative_fired = (
        worst is not None
        and worst.vgs < limit_neg
        and not found.holding_neg
        and not found.unknown_neg
    )

    off_supply = next((p for p in found.pulls if p.path.returns_to == "negative"), None)
    for levels in clamps:
        if off_supply is not None and _conducts_off(levels, ctx.facts):
            yield _clamp_against_turn_off(stage, ctx, summary, rating, levels, off_supply)
            continue
        yield from _clamp_findings(
            levels,
            stage,
            ctx,
            summary,
            rating,
            boot_drive,
            found.tolerance,
            positive_fired or short_fired,
            negative_fired,
        )
    if positive_fired:
        assert drive is not None
        yield _positive_finding(stage, ctx, summary, rating, drive, clamps, found.tolerance, linear)
    if short_fired:
        assert found.short is not None
        yield _short_finding(stage, ctx, summary, rating, found.short, clamps, found.tolerance)
    if negative_fired and worst is not None and worst.path.returns_to == "negative":
        yield _turn_off_supply_finding(stage, ctx, summary, rating, worst, clamps)
    elif negative_fired:
        assert worst is not None and facts.v_bus is not None
        yield _negative_finding(
            stage,
            ctx,
            summary,
            rating,
            worst,
            found.hold,
            found.vth,
            clamps,
            boot_drive,
            found.tolerance,
            linear,
        )


def _conducts_off(levels: _ClampLevels, facts: StageFacts) -> bool:
    """A gate–source clamp that conducts before the gate reaches the turn-off supply's
    level (its nearest to the source): it conducts every off-time."""
    nearest = facts.v_off_nearest
    return (
        nearest is not None
        and levels.negative is not None
        and math.isfinite(levels.negative)
        and levels.negative > nearest.value
    )


def _clamp_against_turn_off(
    stage: DriveStage,
    ctx: CheckContext,
    summary: Mapping[str, Value],
    rating: _Rating,
    levels: _ClampLevels,
    pull: _Pulldown,
) -> Finding:
    """A clamp that conducts against the turn-off supply below the source: it holds V_GS at
    its own level every off-time and draws the supply through the pull-down."""
    facts = ctx.facts
    nearest = facts.v_off_nearest
    assert nearest is not None and levels.negative is not None
    clamp = levels.clamp
    device = (clamp.devices or (clamp.device,))[0]
    ohms = sum(
        d.value
        for d in (facts.device(n) for n in pull.path.devices)
        if d is not None and d.kind == "resistor" and d.value
    )
    values: dict[str, Value] = {
        **summary,
        **levels.inputs,
        "clamp_negative_level": computed(
            levels.negative, "V", "computed: Zener voltages plus forward drops, source above gate"
        ),
        "v_off_negative": pull.v_return,
        "v_off_nearest": nearest,
    }
    current = ""
    if ohms > 0:
        amps = (levels.negative - pull.v_return.value) / ohms
        values["clamp_current_bound"] = computed(
            amps, "A", f"computed: (V_clamp− − V_neg)/R, R = {format_si(ohms, 'Ohm')} on the path"
        )
        current = f", drawing up to {format_si(amps, 'A')} through {'+'.join(pull.path.devices)}"
    # a Zener in series, anode to anode, so the pair conducts only beyond the turn-off level
    tolerance = ctx.options["zener_tolerance"]
    vf = 0.7
    low = (abs(pull.v_return.value) - vf) / (1.0 - tolerance) * (1 + 1e-9)
    zener = next_preferred(low, ZENER_SERIES) if low > 0 else None
    if zener is not None and zener * (1.0 + tolerance) + vf >= abs(rating.limit_negative):
        zener = None
    fix = (
        f"add a {_v(zener)} Zener in series with {device}, anode to anode, so the pair conducts "
        f"only at about {_v(-(zener + vf))}, beyond the turn-off level and within the "
        f"{_v(rating.limit_negative)} limit, or remove the clamp"
        if zener is not None
        else f"remove {device}, or use a clamp that conducts only beyond the turn-off level"
    )
    return ctx.finding(
        device,
        f"{levels.describe()} conducts at {_v(levels.negative)} against the turn-off supply "
        f"{stage.supply.negative.source if stage.supply.negative else ''} "
        f"({nearest.text()} at its nearest): every off-time it holds {stage.switch}'s V_GS at "
        f"{_v(levels.negative)} instead of the negative bias{current}",
        values,
        fix=fix,
        derivation=(
            f"V_clamp− = {_v(levels.negative)} > V_neg = {nearest.text()} ({nearest.origin})",
        ),
    )


def _clamp_findings(
    levels: _ClampLevels,
    stage: DriveStage,
    ctx: CheckContext,
    summary: Mapping[str, Value],
    rating: _Rating,
    boot_drive: _Drive | None,
    tolerance: float,
    positive_fired: bool,
    negative_fired: bool,
) -> Iterator[Finding]:
    clamp = levels.clamp
    device = (clamp.devices or (clamp.device,))[0]
    vth = ctx.facts.ratings.get(ctx.facts.switch, "vth")
    what = levels.describe()
    values: dict[str, Value] = {**summary, **levels.inputs}
    if levels.positive is not None:
        values["clamp_positive_level"] = computed(
            levels.positive, "V", "computed: Zener voltages plus forward drops, gate above source"
        )
    if levels.negative is not None:
        values["clamp_negative_level"] = computed(
            levels.negative, "V", "computed: Zener voltages plus forward drops, source above gate"
        )
    limit_pos, limit_neg = rating.limit_positive, rating.limit_negative
    drive_level = boot_drive.on_level if boot_drive else None
    zener = _zener_between(drive_level, limit_pos, tolerance)
    zener_text = (
        f"a Zener of {_v(zener)} (cathode at the gate {stage.gate}, "
        f"anode at the source {stage.source})"
        if zener
        else None
    )

    if levels.forward_only_positive:
        assert levels.positive is not None
        yield ctx.finding(
            device,
            f"{what} across {stage.switch} gate–source is reversed: it conducts forward at "
            f"{_v(levels.positive)} as the gate rises, so V_GS cannot reach the "
            f"{_v(drive_level) + ' ' if drive_level else ''}drive and the supply is shorted "
            "through it",
            values,
            fix=f"turn {device} round: cathode at the gate {stage.gate}, anode at the source "
            f"{stage.source}" + (f"; {zener_text} clamps both ways" if zener_text else ""),
            derivation=(
                "V_clamp+ = Σ V_F (forward conduction only)",
                f"         = {_v(levels.positive)}"
                + (
                    f" < V_th = {vth.text()} ({vth.origin}): the switch cannot turn on"
                    if vth is not None and levels.positive < vth.value
                    else ": V_GS is held there"
                ),
            ),
        )
        return

    if levels.positive is not None and math.isfinite(levels.positive) and levels.positive_zener:
        tolerance_low = levels.positive - tolerance * levels.positive_zener
        if boot_drive is not None and levels.positive < boot_drive.on_level:
            current = (
                (boot_drive.on_level - levels.positive) / boot_drive.resistance
                if boot_drive.resistance
                else None
            )
            if current is not None:
                values["clamp_current_bound"] = computed(
                    current,
                    "A",
                    "computed: (V_drive − V_clamp) / series resistance of the pull-up "
                    "(an upper bound: the driver's own resistance is not counted)",
                )
            drain = (
                f", draws up to {format_si(current, 'A')} from the floating supply"
                if current is not None
                else ", draws from the floating supply"
            )
            fix = (
                f"use {zener_text} — it stays off at the {_v(boot_drive.on_level)} drive "
                f"(±{tolerance:.0%}) and clamps within the {_v(limit_pos)} limit — "
                f"or remove {device}"
                if zener_text
                else f"remove {device}, or lower the drive below {_v(levels.positive)}"
            )
            yield ctx.finding(
                device,
                f"{what} clamps {stage.switch} V_GS at {_v(levels.positive)}, below the "
                f"{_v(boot_drive.on_level)} drive level: it conducts every on-time{drain} and pins "
                f"V_GS at about {_v(levels.positive)}",
                values,
                fix=fix,
                derivation=(
                    f"V_drive = {boot_drive.origin.text()} ({boot_drive.origin.origin})",
                    f"V_clamp+ = {_v(levels.positive)} < V_drive = {_v(boot_drive.on_level)}",
                    *(
                        (
                            f"I ≤ (V_drive − V_clamp+)/R_series = ({_v(boot_drive.on_level)} − "
                            f"{_v(levels.positive)})/{format_si(boot_drive.resistance or 0, 'Ω')} "
                            f"= {format_si(current, 'A')}",
                        )
                        if current is not None
                        else ()
                    ),
                ),
            )
        elif boot_drive is not None and tolerance_low < boot_drive.on_level:
            values["clamp_positive_low"] = computed(
                tolerance_low, "V", "computed: V_clamp+ − tolerance × V_Z"
            )
            values["zener_tolerance"] = Value(tolerance, "1", "option zener_tolerance")
            yield ctx.finding(
                device,
                f"{what} may conduct at the {_v(boot_drive.on_level)} drive level: with "
                f"±{tolerance:.0%} tolerance it clamps from {_v(tolerance_low)}, "
                f"so it can draw from the floating supply every on-time",
                values,
                fix=(
                    f"use {zener_text}"
                    if zener_text
                    else f"lower the drive below {_v(tolerance_low)}"
                ),
                derivation=(
                    f"V_clamp+,low = V_clamp+ − tol·V_Z = {_v(levels.positive)} − "
                    f"{tolerance:g}·{_v(levels.positive_zener)} = {_v(tolerance_low)}",
                    f"V_drive = {_v(boot_drive.on_level)} > V_clamp+,low",
                ),
                severity=Severity.WARNING,
            )
        elif levels.positive > limit_pos and not positive_fired:
            yield ctx.finding(
                device,
                f"{what} clamps {stage.switch} V_GS only at {_v(levels.positive)}, above "
                f"the {_v(limit_pos)} limit: it protects nothing",
                values,
                fix=(
                    f"use {zener_text}" if zener_text else f"use a Zener of at most {_v(limit_pos)}"
                ),
                derivation=(
                    f"V_clamp+ = {_v(levels.positive)} > limit = V_GS(max) × derating = "
                    f"{rating.positive.text()} × {rating.derating:g} = {_v(limit_pos)}",
                ),
                severity=Severity.WARNING,
            )

    if (
        levels.negative is not None
        and math.isfinite(levels.negative)
        and levels.negative_zener
        and levels.negative < limit_neg
        and not negative_fired
    ):
        yield ctx.finding(
            device,
            f"{what} clamps {stage.switch} V_GS only at {_v(levels.negative)}, beyond "
            f"the {_v(limit_neg)} limit: it protects nothing on the negative side",
            values,
            fix=f"use Zeners whose sum with a forward drop stays within {_v(limit_neg)}",
            derivation=(
                f"V_clamp− = {_v(levels.negative)} < limit = V_GS(min) × derating = "
                f"{rating.negative.text()} × {rating.derating:g} = {_v(limit_neg)}",
            ),
            severity=Severity.WARNING,
        )


def _not_holding(clamps: list[_ClampLevels], side: str) -> str:
    """Clause naming clamps that exist but do not hold this side, for the message."""
    if not clamps:
        return "and no gate–source clamp holds it"
    parts = []
    for c in clamps:
        level = c.positive if side == "positive" else c.negative
        if level is None or not math.isfinite(level):
            parts.append(f"{c.describe()} does not conduct this way")
        else:
            parts.append(f"{c.describe()} conducts only at {_v(level)}")
    return "and " + "; ".join(parts)


def _clamp_fix(stage: DriveStage, limit: float, tolerance: float) -> str:
    zener = _zener_between(None, limit, tolerance)
    if zener is None:
        return f"drive the gate from a rail of at most {_v(limit)}"
    return (
        f"clamp it with a Zener of {_v(zener)} (cathode at the gate {stage.gate}, anode at "
        f"the source {stage.source}) behind a series resistor from the supply"
    )


def _positive_finding(
    stage: DriveStage,
    ctx: CheckContext,
    summary: Mapping[str, Value],
    rating: _Rating,
    drive: _Drive,
    clamps: list[_ClampLevels],
    tolerance: float,
    linear: bool,
) -> Finding:
    limit = rating.limit_positive
    values = dict(summary)
    supply = stage.supply
    if drive.from_boot and not (supply.kind == "charge-pump" and supply.riding):
        fix = (
            f"lower the floating supply to at most {_v(limit)} (a lower auxiliary or isolated "
            "rail); a Zener clamp here would conduct every on-time and drain it"
        )
    elif drive.from_boot:
        fix = _clamp_fix(stage, limit, tolerance) + (
            f", or return the reservoir {supply.capacitor} to ground instead of the source"
        )
    else:
        fix = (
            _clamp_fix(stage, limit, tolerance)
            + f", or drive it from a rail of at most {_v(limit)} above the bus"
        )
    return ctx.finding(
        stage.switch,
        f"{stage.switch} V_GS reaches {_v(drive.level)} from {drive.note}, above the "
        f"{_v(limit)} limit{rating.derated_text(rating.positive)}, "
        f"{_not_holding(clamps, 'positive')}",
        values,
        fix=fix,
        derivation=(
            "V_GS,max = V_gate,max − V_source (normal operation)",
            f"         = {drive.origin.text()} ({drive.origin.origin}) → {_v(drive.level)}",
            f"limit = V_GS(max) × derating = {rating.positive.text()} × {rating.derating:g} "
            f"= {_v(limit)}",
        ),
        severity=Severity.WARNING if linear else None,
    )


def _short_finding(
    stage: DriveStage,
    ctx: CheckContext,
    summary: Mapping[str, Value],
    rating: _Rating,
    drive: _Drive,
    clamps: list[_ClampLevels],
    tolerance: float,
) -> Finding:
    """The output-short case: the gate pulled up while the source cannot follow."""
    assert drive.short is not None
    limit = rating.limit_positive
    facts = ctx.facts
    where = "the source" if stage.mode == "linear" else "the output"
    return ctx.finding(
        stage.switch,
        f"with {where} {stage.source} shorted to {facts.v_sw_low.text()}, {stage.switch}'s "
        f"gate is still pulled up from {drive.short_note.split(' with ')[0]}: V_GS reaches "
        f"{_v(drive.short)}, above the {_v(limit)} limit{rating.derated_text(rating.positive)}, "
        f"{_not_holding(clamps, 'positive')} (in normal operation the source follows the "
        f"gate and V_GS stays at {_v(drive.level)})",
        dict(summary),
        fix=_clamp_fix(stage, limit, tolerance) + ", so that an output short cannot break the gate",
        derivation=(
            "V_GS,short = V_gate,max − V_source,low (the source held down by a short)",
            f"           = {drive.short_note} → {_v(drive.short)}",
            f"limit = V_GS(max) × derating = {rating.positive.text()} × {rating.derating:g} "
            f"= {_v(limit)}",
        ),
        severity=Severity.WARNING,
    )


def _turn_off_supply_finding(
    stage: DriveStage,
    ctx: CheckContext,
    summary: Mapping[str, Value],
    rating: _Rating,
    pull: _Pulldown,
    clamps: list[_ClampLevels],
) -> Finding:
    """The turn-off supply below the source holds V_GS beyond the negative rating."""
    limit = rating.limit_negative
    negative = stage.supply.negative
    assert negative is not None and negative.volts is not None
    values: dict[str, Value] = {**summary, "v_off_negative": pull.v_return}
    # the largest standard step within the limit, with the supply's own tolerance
    spread = ctx.facts.corners.supply_tolerance.value
    allowed = abs(limit) / (1.0 + spread)
    suggested = math.floor(allowed * 2.0 + 1e-9) / 2.0  # to 0.5 V, as supplies are set
    fix = (
        f"set the turn-off supply {negative.source} to {_v(suggested)} (within the "
        f"{_v(limit)} limit at its +{spread:.0%} tolerance)"
        if suggested > 0
        else f"return the pull-down to the source {stage.source}"
    )
    return ctx.finding(
        negative.source or pull.device,
        f"the turn-off supply {negative.source} holds {stage.switch}'s gate at "
        f"{pull.v_return.text()} against its source through {pull.device}: V_GS "
        f"stays beyond the {_v(limit)} limit{rating.derated_text(rating.negative)} for "
        f"every off-time, {_not_holding(clamps, 'negative')}",
        values,
        fix=fix + f", or use a part rated for {_v(-pull.v_return.value)} below its source",
        derivation=(
            f"V_GS,off = V_neg = {pull.v_return.text()} ({pull.v_return.origin})",
            f"limit = V_GS(min) × derating = {rating.negative.text()} × {rating.derating:g} "
            f"= {_v(limit)}",
        ),
    )


def _negative_finding(
    stage: DriveStage,
    ctx: CheckContext,
    summary: Mapping[str, Value],
    rating: _Rating,
    pull: _Pulldown,
    hold: _SourceHold,
    vth: Value | None,
    clamps: list[_ClampLevels],
    boot_drive: _Drive | None,
    tolerance: float,
    linear: bool = False,
) -> Finding:
    facts = ctx.facts
    assert facts.v_bus is not None
    limit = rating.limit_negative
    values: dict[str, Value] = {**summary, **hold.values}
    values["v_bus"] = facts.v_bus
    values["v_return"] = pull.v_return
    values["vgs_pulled_down"] = computed(pull.vgs, "V", "computed: V_return − V_source,held")
    if vth is not None:
        values["v_threshold"] = vth
    where = "ground" if pull.path.returns_to == "ground" else f"rail {pull.path.end_net}"
    zener = _zener_between(
        boot_drive.on_level if boot_drive else None, rating.limit_positive, tolerance
    )
    held_by = " and ".join(r for r in hold.reasons if r) or "what holds the switch node up"
    clamp_fix = (
        f"clamp it with a Zener of {_v(zener)} from the source {stage.source} (anode) to the "
        f"gate {stage.gate} (cathode), which holds V_GS at about -0.7 V and stays off at the "
        f"drive level"
        if zener
        else f"clamp it with a diode from the source {stage.source} (anode) to the gate "
        f"{stage.gate} (cathode), which holds V_GS at about -0.7 V"
    )
    return ctx.finding(
        pull.device,
        f"{pull.device} pulls {stage.switch}'s gate to {where} while the source is held at "
        f"{facts.v_bus.text()} by {held_by}: V_GS reaches {_v(pull.vgs)} "
        f"at turn-off, beyond the {_v(limit)} limit{rating.derated_text(rating.negative)}, "
        f"{_not_holding(clamps, 'negative')}"
        + (
            " (a linear stage: its loop pulls the gate this far only in a transient or a "
            "fault, with the output above its set point)"
            if linear
            else ""
        ),
        values,
        fix=f"return {pull.device} to the source {stage.source} instead of {where}, or {clamp_fix}",
        derivation=(
            "V_GS,min = V_return − V_source,held (the source is held up, it cannot follow)",
            f"         = {pull.v_return.text()} − {facts.v_bus.text()} = {_v(pull.vgs)}",
            *(
                (
                    f"τ = R_discharge·C = {values['tau_source_node'].text()} ≥ τ_fall = "
                    f"{values['pulldown_fall_time'].text()} "
                    f"({values['pulldown_fall_time'].origin}): the source stays up while the "
                    "gate falls",
                )
                if "tau_source_node" in values and math.isfinite(values["tau_source_node"].value)
                else ()
            ),
            f"limit = V_GS(min) × derating = {rating.negative.text()} × {rating.derating:g} "
            f"= {_v(limit)}",
        ),
        severity=Severity.WARNING if linear else None,
    )


CHECKS = {"gate-overvoltage": check_gate_overvoltage}
