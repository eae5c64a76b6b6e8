"""Plots: the boot voltage over the on-time as computed, and a simulated waveform."""

from __future__ import annotations

import math
from collections.abc import Mapping, Sequence
from dataclasses import dataclass, replace

from drivelint.checks.base import Finding
from drivelint.netlist.values import format_si
from drivelint.physics.bootstrap import boot_voltage_after, hold_time_linear
from drivelint.report.html.markup import esc as _e
from drivelint.report.html.markup import label as _label
from drivelint.report.html.markup import polyline as _polyline
from drivelint.report.html.markup import wire as _wire
from drivelint.report.html.testbench import SimWaveform

# Rules whose findings are about the hold capacitor running down during an on-time.
PLOT_RULES = frozenset({"dc-hold", "bootstrap-capacitor-small"})

# Value names the hold rules use, in order of preference.
V_START_NAMES = ("v_boot0", "v_boot")
V_MIN_NAMES = ("v_boot_min",)
CAPACITANCE_NAMES = ("c_hold", "capacitance")
GATE_CHARGE_NAMES = ("qg", "gate_charge")
SHIFTER_CHARGE_NAMES = ("level_shift_charge", "q_ls")
SUGGESTED_NAMES = ("suggested_capacitance",)
DRAIN_NAMES = ("i_drain",)
ON_TIME_NAMES = ("on_time", "t_on")
HOLD_TIME_NAMES = ("hold_time",)
GATE_CAPACITANCE_NAMES = ("gate_capacitance", "c_gate")
# 1/g: the resistance the drains behave like as the boot voltage sags (dc-hold gives it)
DRAIN_RESISTANCE_NAMES = ("r_drain_equivalent",)


@dataclass(frozen=True, slots=True)
class BootDroop:
    """The numbers a boot-voltage plot needs, read from a finding's values (SI units)."""

    v_start: float
    v_min: float
    capacitance: float
    gate_charge: float
    shifter_charge: float  # level-shifter charge, taken at the same edge as the gate's
    drain: float | None
    on_time: float | None
    hold: float | None
    suggested: float | None = None  # the hold capacitance the finding's fix proposes
    gate_capacitance: float = 0.0  # shares the hold capacitor's charge
    slope: float = 0.0  # g = dI/dV of the drain [A/V]: resistive drains fall with the voltage
    # The charge taken at the turn-on edge when the finding's per-cycle droop fixes it (the
    # gate's charge less what the bootstrap path refills before the node rises, with the
    # diode's recovery charge): droop·(C + C_g) − I_drain·t_on. None: Q_g + Q_ls.
    edge_charge: float | None = None

    @property
    def step_charge(self) -> float:
        if self.edge_charge is not None:
            return self.edge_charge
        return self.gate_charge + self.shifter_charge

    @property
    def c_total(self) -> float:
        return self.capacitance + self.gate_capacitance

    def at(self, t: float) -> float:
        """The boot voltage ``t`` after turn-on, by the same law as the hold time: a drain
        I(V) = I_drain + g·(V − V_boot,0) is a resistance 1/g with a constant current
        I_drain − g·V_boot,0 beside it (:func:`boot_voltage_after`)."""
        drain = self.drain or 0.0
        if self.slope > 0:
            return boot_voltage_after(
                t,
                self.v_start,
                self.c_total,
                self.step_charge,
                drain - self.slope * self.v_start,
                1.0 / self.slope,
            )
        return boot_voltage_after(t, self.v_start, self.c_total, self.step_charge, drain)

    def crossing(self) -> float | None:
        """Time after turn-on when the boot voltage reaches the minimum, None if never: the
        hold time :func:`hold_time_linear` gives, the one dc-hold reports."""
        if self.at(0.0) < self.v_min:
            return 0.0
        if not self.drain:
            return None
        found = hold_time_linear(
            self.c_total, self.v_start, self.v_min, self.step_charge, self.drain, self.slope
        )
        return found if math.isfinite(found) else None

    def span(self) -> float | None:
        """How much time to plot: the on-time, shortened when the fall happens early."""
        crossing = self.crossing()
        if self.on_time is not None and self.on_time > 0 and math.isfinite(self.on_time):
            if crossing is not None and 0 < crossing < self.on_time / 3:
                return 3 * crossing
            return self.on_time
        if self.hold is not None and self.hold > 0 and math.isfinite(self.hold):
            return 2 * self.hold
        if crossing is not None and crossing > 0 and math.isfinite(crossing):
            return 2 * crossing
        return None


def _number(values: Mapping[str, object], names: Sequence[str], unit: str) -> float | None:
    from drivelint.ratings.values import Value

    for name in names:
        value = values.get(name)
        if isinstance(value, Value) and value.unit == unit and not math.isnan(value.value):
            return value.value
    return None


def _positive(value: float | None) -> float | None:
    return value if value is not None and value > 0 and math.isfinite(value) else None


def boot_droop(finding: Finding) -> BootDroop | None:
    """The plot inputs of a hold finding, or None when the values needed are missing.

    Needed: the starting boot voltage, the minimum, the hold capacitance and the gate
    charge. The drain current and the on-time or hold time are optional (no drain means
    the gate charge alone takes the voltage down).
    """
    values = finding.values
    v_start = _number(values, V_START_NAMES, "V")
    v_min = _number(values, V_MIN_NAMES, "V")
    capacitance = _number(values, CAPACITANCE_NAMES, "F")
    gate_charge = _number(values, GATE_CHARGE_NAMES, "C")
    if v_start is None or v_min is None or capacitance is None or gate_charge is None:
        return None
    if not (math.isfinite(v_start) and math.isfinite(v_min) and math.isfinite(gate_charge)):
        return None
    if not (capacitance > 0 and math.isfinite(capacitance)):
        return None
    drain = _number(values, DRAIN_NAMES, "A")
    if drain is not None and not (math.isfinite(drain) and drain >= 0):
        drain = None
    shifter = _number(values, SHIFTER_CHARGE_NAMES, "C")
    c_gate = _positive(_number(values, GATE_CAPACITANCE_NAMES, "F")) or 0.0
    r_equivalent = _positive(_number(values, DRAIN_RESISTANCE_NAMES, "Ohm"))
    droop = BootDroop(
        v_start,
        v_min,
        capacitance,
        gate_charge,
        shifter if shifter is not None and math.isfinite(shifter) else 0.0,
        drain,
        _number(values, ON_TIME_NAMES, "s"),
        _number(values, HOLD_TIME_NAMES, "s"),
        _positive(_number(values, SUGGESTED_NAMES, "F")),
        c_gate,
        1.0 / r_equivalent if r_equivalent is not None and drain else 0.0,
    )
    per_cycle = _number(values, ("droop_per_cycle",), "V")
    on = droop.on_time
    if per_cycle is not None and on is not None and 0 < on < math.inf and droop.slope == 0:
        # The plot ends where the finding says one on-time leaves the supply.
        edge = per_cycle * droop.c_total - (drain or 0.0) * on
        if edge >= 0 and math.isfinite(edge):
            droop = replace(droop, edge_charge=edge)
    return droop if droop.span() is not None else None


def nice_ticks(low: float, high: float, count: int = 5) -> list[float]:
    """Round tick positions (1, 2 or 5 times a power of ten) covering ``low``..``high``."""
    if not high > low:
        return [low]
    raw = (high - low) / max(count, 1)
    power = 10.0 ** math.floor(math.log10(raw))
    step = next(m * power for m in (1.0, 2.0, 5.0, 10.0) if m * power >= raw)
    first = math.ceil(low / step - 1e-9) * step
    ticks = []
    value = first
    while value <= high + step * 1e-9:
        ticks.append(0.0 if abs(value) < step * 1e-9 else value)
        value += step
    return ticks


PLOT_W, PLOT_H = 660, 290
MARGIN_L, MARGIN_R, MARGIN_T, MARGIN_B = 64, 150, 22, 46
PLOT_SAMPLES = 120


def _side_labels(
    x: float, labels: Sequence[tuple[float, str, str]], gap: float = 13.0
) -> list[str]:
    """Labels at the right of the plot, moved apart so that none overlaps the next."""
    placed: list[str] = []
    last = -math.inf
    for y, text, cls in sorted(labels):
        y = max(y, last + gap)
        last = y
        placed.append(_label(x, y + 4, text, "start", cls))
    return placed


def boot_plot_svg(finding: Finding) -> str | None:
    """The boot voltage over the on-time against its minimum, as inline SVG, or None."""
    droop = boot_droop(finding)
    if droop is None:
        return None
    span = droop.span()
    assert span is not None  # boot_droop returns None otherwise
    times = [span * k / PLOT_SAMPLES for k in range(PLOT_SAMPLES + 1)]
    volts = [droop.at(t) for t in times]
    top = max(droop.v_start, droop.v_min)
    bottom = min(droop.v_min, min(volts))
    pad = 0.08 * (top - bottom) or 1.0
    # Below 0 V the linear model has no meaning (the supply has collapsed): stop the axis there.
    floor = 0.0 if droop.v_min >= 0 else bottom - pad
    y_low = max(bottom - pad, floor)
    y_high = top + pad
    clamped = any(v < y_low for v in volts)

    inner_w = PLOT_W - MARGIN_L - MARGIN_R
    inner_h = PLOT_H - MARGIN_T - MARGIN_B

    def px(t: float) -> float:
        return MARGIN_L + inner_w * t / span

    def py(v: float) -> float:
        v = min(max(v, y_low), y_high)
        return MARGIN_T + inner_h * (y_high - v) / (y_high - y_low)

    parts: list[str] = [
        f'<svg class="plot" viewBox="0 0 {PLOT_W} {PLOT_H}" width="{PLOT_W}" height="{PLOT_H}" '
        f'role="img" data-rule="{_e(finding.rule)}"><title>Boot voltage of {_e(finding.switch)} '
        "over the on-time</title>",
        # The region below the minimum: where the switch is no longer fully driven.
        f'<rect class="bad" x="{MARGIN_L}" y="{py(droop.v_min):.1f}" width="{inner_w}" '
        f'height="{max(py(y_low) - py(droop.v_min), 0):.1f}"/>',
    ]
    for tick in nice_ticks(y_low, y_high):
        y = py(tick)
        parts.append(_wire(MARGIN_L, y, MARGIN_L + inner_w, y, "grid"))
        parts.append(_label(MARGIN_L - 6, y + 4, f"{tick:g}", "end", "tick"))
    for tick in nice_ticks(0.0, span):
        x = px(tick)
        parts.append(_wire(x, MARGIN_T, x, MARGIN_T + inner_h, "grid"))
        parts.append(_label(x, MARGIN_T + inner_h + 16, format_si(tick, "s"), "middle", "tick"))
    parts.append(
        f'<rect class="frame" x="{MARGIN_L}" y="{MARGIN_T}" width="{inner_w}" height="{inner_h}"/>'
    )
    parts.append(_label(MARGIN_L + inner_w / 2, PLOT_H - 6, "time after turn-on", "middle", "axis"))
    parts.append(
        f'<text class="axis" transform="translate(14,{MARGIN_T + inner_h / 2:.1f}) rotate(-90)" '
        'text-anchor="middle">boot voltage (V)</text>'
    )
    y_min = py(droop.v_min)
    parts.append(_wire(MARGIN_L, y_min, MARGIN_L + inner_w, y_min, "limit"))
    right = MARGIN_L + inner_w + 8
    side: list[tuple[float, str, str]] = [
        (y_min, f"min {format_si(droop.v_min, 'V')}", "limit-label"),
        (py(volts[-1]), f"{format_si(volts[-1], 'V')} at end", "curve-label"),
        (py(droop.v_start), f"start {format_si(droop.v_start, 'V')}", "curve-label"),
    ]
    points = [(px(0.0), py(droop.v_start))] + [
        (px(t), py(v)) for t, v in zip(times, volts, strict=True)
    ]
    parts.append(_polyline("curve", points))
    suggested = droop.suggested
    if suggested is not None:
        # The same on-time with the capacitor the fix proposes: shows the fix is enough.
        better = replace(droop, capacitance=suggested)
        parts.append(
            _polyline(
                "suggested",
                [(px(0.0), py(droop.v_start))] + [(px(t), py(better.at(t))) for t in times],
            )
        )
        side.append((py(better.at(span)), f"with {format_si(suggested, 'F')}", "suggested-label"))
    parts.extend(_side_labels(right, side))
    crossing = droop.crossing()
    if crossing is not None and crossing <= span:
        x = px(crossing)
        parts.append(_wire(x, MARGIN_T, x, MARGIN_T + inner_h, "cross"))
        parts.append(f'<circle class="cross-dot" cx="{x:.1f}" cy="{y_min:.1f}" r="4"/>')
        text = (
            "below the minimum at turn-on"
            if crossing == 0
            else f"below the minimum after {format_si(crossing, 's')}"
        )
        anchor = "start" if x < MARGIN_L + inner_w * 0.6 else "end"
        parts.append(
            _label(x + (6 if anchor == "start" else -6), MARGIN_T + 14, text, anchor, "cross-label")
        )
    on_time = droop.on_time
    if on_time is not None and math.isfinite(on_time) and 0 < on_time < span * 0.999:
        x = px(on_time)
        parts.append(_wire(x, MARGIN_T, x, MARGIN_T + inner_h, "ontime"))
        parts.append(_label(x - 4, MARGIN_T + inner_h - 6, "end of on-time", "end", "tick"))
    parts.append("</svg>")

    drain_text = (
        f"I_drain = {format_si(droop.drain, 'A')}"
        if droop.drain is not None
        else "no steady drain given: gate charge only"
    )
    on_text = ""
    if on_time is not None and not math.isfinite(on_time):
        on_text = " The on-time is unbounded (DC command); the plot ends at twice the hold time."
    elif on_time is not None and on_time > span * 1.001:
        on_text = (
            f" The on-time ({format_si(on_time, 's')}) runs on beyond the plot;"
            f" the model gives {format_si(droop.at(on_time), 'V')} at its end."
        )
    clamp_text = " Drawn at the axis floor where the model goes below it." if clamped else ""
    if droop.suggested is not None:
        clamp_text += (
            f" Dashed green: the same on-time with {format_si(droop.suggested, 'F')}, "
            "the capacitance the fix proposes."
        )
    rows = [("0 (before turn-on)", droop.v_start)] + [
        (format_si(span * k / 4, "s"), droop.at(span * k / 4)) for k in range(5)
    ]
    table = "".join(
        f'<tr><td class="num">{_e(t)}</td><td class="num">{_e(format_si(v, "V"))}</td></tr>'
        for t, v in rows
    )
    if droop.slope > 0:
        law = (
            "from V<sub>boot,0</sub> − (Q<sub>g</sub> + Q<sub>ls</sub>)/C at turn-on, "
            "C·dV/dt = −I(V) with I(V) = I<sub>drain</sub> + g·(V − V<sub>boot,0</sub>) "
            "(resistive drains fall with the voltage; the law dc-hold's hold time uses), "
            f"g = {_e(format_si(droop.slope, 'A'))}/V, "
        )
    elif droop.edge_charge is not None:
        law = (
            "V(t) = V<sub>boot,0</sub> − Q<sub>edge</sub>/C − I<sub>drain</sub>·t/C, where "
            "Q<sub>edge</sub> is the charge the finding counts at the turn-on edge "
            f"({_e(format_si(droop.edge_charge, 'C'))}: its per-cycle droop × C less "
            "I<sub>drain</sub>·t<sub>on</sub>; the gate's charge less what the bootstrap path "
            "refills before the node rises, and the diode's recovery charge), "
        )
    else:
        law = (
            "V(t) = V<sub>boot,0</sub> − (Q<sub>g</sub> + Q<sub>ls</sub>)/C − "
            "I<sub>drain</sub>·t/C, "
        )
    c_text = format_si(droop.capacitance, "F")
    if droop.gate_capacitance:
        c_text += f" + C_g {format_si(droop.gate_capacitance, 'F')}"
    return (
        '<figure class="plot-figure">'
        + "".join(parts)
        + f"<figcaption>Boot supply over the on-time as computed: {law}with "
        f"V<sub>boot,0</sub> = {_e(format_si(droop.v_start, 'V'))}, "
        f"C = {_e(c_text)}, "
        f"Q<sub>g</sub> = {_e(format_si(droop.gate_charge, 'C'))}, "
        f"Q<sub>ls</sub> = {_e(format_si(droop.shifter_charge, 'C'))}, {_e(drain_text)}; "
        f"it must stay above {_e(format_si(droop.v_min, 'V'))}.{_e(on_text)}{_e(clamp_text)}"
        "</figcaption>"
        '<details class="plot-data"><summary>plotted values</summary>'
        '<table class="plot-values"><thead><tr><th>t</th><th>V<sub>boot</sub></th></tr></thead>'
        f"<tbody>{table}</tbody></table></details>"
        "</figure>"
    )


# --------------------------------------------------------------------------- simulated

SIM_POINTS = 400  # drawn at most; each bucket keeps its lowest and highest value


def _thinned(time: Sequence[float], values: Sequence[float]) -> list[tuple[float, float]]:
    """At most ~SIM_POINTS points, keeping each bucket's extremes (no peak is lost)."""
    if len(time) <= SIM_POINTS:
        return list(zip(time, values, strict=True))
    out: list[tuple[float, float]] = []
    step = len(time) / (SIM_POINTS / 2)
    start = 0
    while start < len(time):
        stop = min(len(time), int(start + step) + 1)
        chunk = range(start, stop)
        low = min(chunk, key=lambda i: values[i])
        high = max(chunk, key=lambda i: values[i])
        out.extend((time[i], values[i]) for i in sorted({low, high}))
        start = stop
    return out


def simulated_svg(waveform: SimWaveform, finding: Finding) -> str:
    """The simulated waveform of a finding's testbench, beside the computed one.

    Each series of the waveform file on one time axis; where the file names the claim it
    shows and the finding has that value, the claimed value is marked (a level for a
    quantity in the series' unit, a time for a duration). Only numbers reach the page.
    """
    time = waveform.time
    t0, t1 = time[0], time[-1]
    series = waveform.series
    unit = series[0].unit
    low = min(min(s.values) for s in series)
    high = max(max(s.values) for s in series)
    claim = finding.values.get(waveform.claim) if waveform.claim else None
    level = claim.value if claim is not None and claim.unit == unit else None
    moment = claim.value if claim is not None and claim.unit == "s" and unit != "s" else None
    if level is not None and math.isfinite(level):
        low, high = min(low, level), max(high, level)
    pad = 0.08 * (high - low) or 1.0
    y_low, y_high = low - pad, high + pad
    inner_w = PLOT_W - MARGIN_L - MARGIN_R
    inner_h = PLOT_H - MARGIN_T - MARGIN_B

    def px(t: float) -> float:
        return MARGIN_L + inner_w * (t - t0) / (t1 - t0)

    def py(v: float) -> float:
        return MARGIN_T + inner_h * (y_high - v) / (y_high - y_low)

    parts = [
        f'<svg class="plot sim" viewBox="0 0 {PLOT_W} {PLOT_H}" width="{PLOT_W}" '
        f'height="{PLOT_H}" role="img" data-rule="{_e(finding.rule)}"><title>Simulated '
        f"waveform of the testbench for {_e(finding.device)}</title>"
    ]
    for tick in nice_ticks(y_low, y_high):
        y = py(tick)
        parts.append(_wire(MARGIN_L, y, MARGIN_L + inner_w, y, "grid"))
        parts.append(_label(MARGIN_L - 6, y + 4, f"{tick:g}", "end", "tick"))
    for tick in nice_ticks(t0, t1):
        x = px(tick)
        parts.append(_wire(x, MARGIN_T, x, MARGIN_T + inner_h, "grid"))
        parts.append(_label(x, MARGIN_T + inner_h + 16, format_si(tick, "s"), "middle", "tick"))
    parts.append(
        f'<rect class="frame" x="{MARGIN_L}" y="{MARGIN_T}" width="{inner_w}" height="{inner_h}"/>'
    )
    parts.append(_label(MARGIN_L + inner_w / 2, PLOT_H - 6, "simulated time", "middle", "axis"))
    side: list[tuple[float, str, str]] = []
    for index, entry in enumerate(series):
        points = [(px(t), py(v)) for t, v in _thinned(time, entry.values)]
        parts.append(_polyline(f"sim-curve sim-{index % 4}", points))
        side.append((py(entry.values[-1]), f"{entry.name} [{entry.unit or '1'}]", "curve-label"))
    if level is not None and claim is not None:
        y = py(level)
        parts.append(_wire(MARGIN_L, y, MARGIN_L + inner_w, y, "claim"))
        side.append((y, f"claimed {format_si(level, unit)}", "limit-label"))
    if moment is not None and math.isfinite(moment) and t0 <= t0 + moment <= t1:
        x = px(t0 + moment)
        parts.append(_wire(x, MARGIN_T, x, MARGIN_T + inner_h, "claim"))
        parts.append(
            _label(
                x + 4, MARGIN_T + 14, f"claimed {format_si(moment, 's')}", "start", "limit-label"
            )
        )
    parts.extend(_side_labels(MARGIN_L + inner_w + 8, side))
    parts.append("</svg>")
    names = ", ".join(f"{s.name} ({s.unit or '1'})" for s in series)
    return (
        '<figure class="plot-figure sim-figure">'
        + "".join(parts)
        + f"<figcaption>Simulated in the finding's testbench deck: {_e(names)}, "
        f"{_e(format_si(t0, 's'))} to {_e(format_si(t1, 's'))}, {len(time)} points."
        + (" Dashed: the value the finding claims." if level is not None or moment else "")
        + "</figcaption></figure>"
    )
