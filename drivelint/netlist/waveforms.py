"""Time-domain waveforms of independent V and I sources.

The control source of a switch is where drivelint learns the switching
frequency, the duty and the longest on-time, so each waveform answers those
questions exactly rather than by sampling.

Semantics follow the ngspice User's Manual, chapter 4 "Voltage and Current
Sources", §4.1 "Independent Sources for Voltage or Current" (§4.1.1 PULSE,
§4.1.2 SIN, §4.1.3 EXP, §4.1.4 PWL), and where the manual is silent or the
simulator disagrees with it, what ngspice 39 computes:

* A zero in a PULSE TR/TF/PW/PER, SIN FREQ or EXP TAU1/TD2/TAU2 field is read
  as "not given", as ngspice does (a zero rise time becomes TSTEP).
* Before its delay a SIN source sits at ``VO + VA·sin(PHASE)``; the manual's
  table says ``VO``, ngspice evaluates the phase.
* EXP TD1 defaults to 0 as the manual says; ngspice 39 itself substitutes
  TSTEP for an omitted or zero TD1, so the rise there starts one TSTEP later.
* PULSE NP (the 8th field) bounds the train to NP pulses; after them the
  source rests at V1.
* PWL ``r=`` must name one of the time points and repeats the segment from it
  to the last point; ``td=`` delays the whole waveform.

One policy departs from the literal simulator output on purpose: a PULSE
whose trailing edge has not come back across a threshold when its period
ends (at a threshold of V1 that is PW >= PER - TR - TF) counts as never
falling. ngspice drops such a pulse to V1 for an instant at each period
boundary and climbs again within TR; that sliver is an artefact of a pulse
longer than its period, not an off-time. ``value_at`` still shows it.

Without a ``.tran`` card every TSTEP default is taken as 0 (instantaneous
edges), an omitted PW as unbounded (the pulse never falls), an omitted PER as
"no repetition" (one pulse) and an omitted SIN FREQ as unknown (the sine is
held at its starting value, the limit of a very slow sine). Each waveform
lists these choices in ``notes`` and the parameters it filled in ``defaulted``.
"""

from __future__ import annotations

import abc
import dataclasses
import math
from collections.abc import Callable, Mapping, Sequence
from dataclasses import dataclass, field
from types import MappingProxyType
from typing import ClassVar

INF = math.inf
_TWO_PI = 2.0 * math.pi
# The bound on every value and time that keeps the waveform arithmetic finite: past it a
# time times a rate overflows a float (1e308 degrees of SIN phase is already inf radians).
# No power stage comes near it (common practice: picoseconds to hours, up to megavolts).
LARGEST_MAGNITUDE = 1e30


class WaveformError(ValueError):
    """A source waveform whose values cannot describe a waveform; the message says what fits."""


@dataclass(frozen=True, slots=True)
class TransientSettings:
    """The deck's ``.tran`` step and stop time, when the deck has one."""

    tstep: float | None = None
    tstop: float | None = None

    def __post_init__(self) -> None:
        for name in ("tstep", "tstop"):
            value = getattr(self, name)
            if value is not None:
                check_tran_time(name, value)


def check_tran_time(name: str, value: float) -> None:
    """Raise WaveformError unless ``value`` can be the ``.tran`` TSTEP or TSTOP (``name``)."""
    if not (math.isfinite(value) and value > 0.0):
        raise WaveformError(f".tran {name.upper()} is {value!r}; expected a time > 0 s")
    if not 1.0 / LARGEST_MAGNITUDE <= value <= LARGEST_MAGNITUDE:
        # The lower bound too: 1/TSTOP becomes the default SIN frequency.
        raise WaveformError(
            f".tran {name.upper()} is {value:g} s; expected a time from "
            f"{1.0 / LARGEST_MAGNITUDE:g} s to {LARGEST_MAGNITUDE:g} s"
        )


_NO_TRAN = TransientSettings()
_NO_OPTIONS: Mapping[str, float] = MappingProxyType({})


def _wrap(time: float, period: float) -> float:
    """``time`` less its whole periods, in the simulator's arithmetic where that has a float."""
    cycles = time / period
    if math.isinf(cycles):
        # A period so short that the count of periods overflows: fmod needs no count.
        return math.fmod(time, period)
    wrapped = time - period * math.floor(cycles)
    if not 0.0 <= wrapped <= period:
        # so many periods that the product's rounding exceeds a period: fmod is exact
        return math.fmod(time, period)
    return wrapped


def _json_number(value: float | None) -> float | str | None:
    """JSON has no infinity; spell it out so the output stays valid JSON."""
    if value is None:
        return None
    if math.isinf(value):
        return "inf" if value > 0 else "-inf"
    return float(value)


@dataclass(frozen=True, slots=True)
class Waveform(abc.ABC):
    """A source value as a function of time, with the timing facts a gate-drive check needs."""

    kind: ClassVar[str]
    notes: tuple[str, ...] = field(default=(), kw_only=True)
    defaulted: tuple[str, ...] = field(default=(), kw_only=True)

    @abc.abstractmethod
    def value_at(self, t: float) -> float:
        """The source value at time ``t`` (seconds), as the simulator computes it."""

    @abc.abstractmethod
    def high(self) -> float:
        """The highest value the waveform reaches (its supremum for asymptotic shapes)."""

    @abc.abstractmethod
    def low(self) -> float:
        """The lowest value the waveform reaches (its infimum for asymptotic shapes)."""

    @abc.abstractmethod
    def period(self) -> float | None:
        """The repetition period in seconds, or None if the waveform does not repeat."""

    @abc.abstractmethod
    def longest_time_above(self, threshold: float) -> float:
        """The longest continuous time with value > threshold; ``math.inf`` if it never ends."""

    @abc.abstractmethod
    def duty_above(self, threshold: float) -> float | None:
        """The fraction of each period with value > threshold; None if not periodic."""

    @abc.abstractmethod
    def _parameters(self) -> dict[str, object]:
        """The defining parameters by SPICE name, SI units."""

    def dc_level(self) -> float:
        """The value at t = 0, before anything happens: what the operating point sees.

        A separate ``DC`` value on the same source line, which SPICE uses for
        the operating point instead, is the reader's to keep.
        """
        return self.value_at(0.0)

    def frequency(self) -> float | None:
        period = self.period()
        return None if period is None else 1.0 / period

    def negated(self) -> Waveform:
        """The same waveform with every value's sign flipped (timing unchanged)."""
        if isinstance(self, Pwl):
            return dataclasses.replace(self, points=tuple((t, -v) for t, v in self.points))
        names = _VALUE_FIELDS[self.kind]
        return dataclasses.replace(self, **{n: -getattr(self, n) for n in names})

    def longest_time_below(self, threshold: float) -> float:
        """Longest continuous interval with value < threshold (an active-low command's on-time)."""
        return self.negated().longest_time_above(-threshold)

    def duty_below(self, threshold: float) -> float | None:
        """Fraction of a period below threshold (periodic waveforms only)."""
        return self.negated().duty_above(-threshold)

    def to_json(self) -> dict[str, object]:
        record: dict[str, object] = {"kind": self.kind}
        record.update(self._parameters())
        record["period"] = _json_number(self.period())
        record["frequency"] = _json_number(self.frequency())
        record["high"] = _json_number(self.high())
        record["low"] = _json_number(self.low())
        record["defaulted"] = list(self.defaulted)
        record["notes"] = list(self.notes)
        return record


# --------------------------------------------------------------------------- DC


# The fields holding values (not times) of each kind, for ``negated``.
_VALUE_FIELDS: Mapping[str, tuple[str, ...]] = {
    "dc": ("value",),
    "pulse": ("v1", "v2"),
    "sin": ("vo", "va"),
    "exp": ("v1", "v2"),
}


@dataclass(frozen=True, slots=True)
class Dc(Waveform):
    """A constant level."""

    kind: ClassVar[str] = "dc"
    value: float

    def value_at(self, t: float) -> float:
        return self.value

    def high(self) -> float:
        return self.value

    def low(self) -> float:
        return self.value

    def period(self) -> float | None:
        return None

    def longest_time_above(self, threshold: float) -> float:
        return INF if self.value > threshold else 0.0

    def duty_above(self, threshold: float) -> float | None:
        return None

    def _parameters(self) -> dict[str, object]:
        return {"value": _json_number(self.value)}


# ------------------------------------------------------------------------ PULSE


@dataclass(frozen=True, slots=True)
class Pulse(Waveform):
    """``PULSE(V1 V2 TD TR TF PW PER NP)`` with its defaults already applied.

    ``pw`` is ``math.inf`` for a pulse that never falls, ``per`` is None for a
    single pulse, ``pulses`` is None for an unbounded train.
    """

    kind: ClassVar[str] = "pulse"
    v1: float
    v2: float
    td: float
    tr: float
    tf: float
    pw: float
    per: float | None
    pulses: int | None = None

    def value_at(self, t: float) -> float:
        # The branch order and the strict/loose comparisons copy the simulator,
        # so the two agree exactly at corners and at the period boundary.
        time = t - self.td
        if self.per is not None:
            if self.pulses is not None and time > self.pulses * self.per:
                return self.v1
            if time > self.per:
                time = _wrap(time, self.per)
        if time <= 0.0 or time >= self.tr + self.pw + self.tf:
            return self.v1
        if self.tr <= time <= self.tr + self.pw:
            return self.v2
        if time < self.tr:
            return self.v1 + (self.v2 - self.v1) * time / self.tr
        return self.v2 + (self.v1 - self.v2) * (time - (self.tr + self.pw)) / self.tf

    def _peak(self) -> float:
        # A rise slower than the period is cut off by the wrap before it reaches V2.
        if self.per is not None and self.tr > self.per:
            return self.v1 + (self.v2 - self.v1) * self.per / self.tr
        return self.v2

    def high(self) -> float:
        return max(self.v1, self._peak())

    def low(self) -> float:
        return min(self.v1, self._peak())

    def period(self) -> float | None:
        if self.per is None or (self.pulses is not None and self.pulses < 2):
            return None
        return self.per

    def _crossings(self, threshold: float) -> tuple[float, float]:
        """Times after each pulse start where the edges cross the threshold.

        ``a`` on the leading edge (TR), ``b`` on the trailing edge (after
        TR + PW, within TF), both on the uncut pulse shape; the caller has
        checked that the threshold lies between the levels.
        """
        toward_v2 = (threshold - self.v1) / (self.v2 - self.v1)
        a = self.tr * toward_v2
        b = self.tr + self.pw + self.tf * (1.0 - toward_v2)
        return a, b

    def _sawtooth(self) -> bool:
        # A rise no shorter than the period never reaches V2: each period is a
        # ramp cut off by the wrap, taken literally (there is no "on" level to hold).
        return self.per is not None and self.tr >= self.per

    def _latched(self, b: float) -> bool:
        # The trailing edge has not come back across the threshold when the
        # next period begins. ngspice then drops to V1 for an instant at the
        # wrap and climbs again within TR; that sliver is an artefact of a
        # pulse longer than its period, not an off-time, so the level counts
        # as held. At a threshold of V1 this is the rule PW >= PER - TR - TF.
        return self.per is not None and b >= self.per

    def longest_time_above(self, threshold: float) -> float:
        if self.v1 == self.v2:
            return INF if self.v1 > threshold else 0.0
        if self.v2 > self.v1:
            return self._longest_above_positive(threshold)
        return self._longest_above_inverted(threshold)

    def _longest_above_positive(self, threshold: float) -> float:
        if threshold < self.v1:
            return INF
        if threshold >= self.v2:
            return 0.0
        a, b = self._crossings(threshold)
        if self.per is None:
            return b - a
        if a >= self.per:
            return 0.0  # the rise is cut off before it reaches the threshold
        if self._sawtooth():
            return self.per - a
        if self._latched(b):
            return INF if self.pulses is None else self.pulses * self.per - a
        return b - a

    def _longest_above_inverted(self, threshold: float) -> float:
        # V1 is the high level: the source is above the threshold from t = 0
        # until the first leading edge crosses it, between pulses, and after
        # the last pulse of a bounded train.
        if threshold < self.v2:
            return INF
        if threshold >= self.v1:
            return 0.0
        a, b = self._crossings(threshold)
        lead = self.td + a
        if self.per is None:
            return lead if math.isinf(b) else INF
        if a >= self.per or self.pulses is not None:
            return INF
        if self._sawtooth() or self._latched(b):
            # Stuck below after the first edge, but for the wrap's brief
            # return to V1 (as long as ``a`` at most, shorter than the lead).
            return lead
        return max(lead, self.per - (b - a))

    def duty_above(self, threshold: float) -> float | None:
        period = self.period()
        if period is None:
            return None
        if self.v1 == self.v2:
            return 1.0 if self.v1 > threshold else 0.0
        if threshold < min(self.v1, self.v2):
            return 1.0
        if threshold >= max(self.v1, self.v2):
            return 0.0
        a, b = self._crossings(threshold)
        # The fraction of each period spent past the threshold on V2's side.
        if a >= period:
            toward_v2 = 0.0
        elif self._sawtooth():
            toward_v2 = (period - a) / period
        elif self._latched(b):
            toward_v2 = 1.0
        else:
            toward_v2 = (b - a) / period
        return toward_v2 if self.v2 > self.v1 else 1.0 - toward_v2

    def _parameters(self) -> dict[str, object]:
        return {
            "v1": _json_number(self.v1),
            "v2": _json_number(self.v2),
            "td": _json_number(self.td),
            "tr": _json_number(self.tr),
            "tf": _json_number(self.tf),
            "pw": _json_number(self.pw),
            "per": _json_number(self.per),
            "np": self.pulses,
        }


# -------------------------------------------------------------------- runs above


@dataclass(frozen=True, slots=True)
class _Piece:
    """A stretch of time on which the waveform is monotone (or a zero-length step)."""

    start: float
    end: float
    start_value: float
    end_value: float
    # None for a straight line; otherwise the exact value, used by bisection.
    curve: Callable[[float], float] | None = None


@dataclass(frozen=True, slots=True)
class _Run:
    """A maximal interval above the threshold; the flags say whether its ends are above."""

    start: float
    end: float
    start_above: bool
    end_above: bool

    @property
    def length(self) -> float:
        return self.end - self.start


def _bisect(curve: Callable[[float], float], lo: float, hi: float, threshold: float) -> float:
    """The time in [lo, hi] where a monotone curve crosses the threshold, to float precision."""
    lo_above = curve(lo) > threshold
    for _ in range(200):
        mid = 0.5 * (lo + hi)
        if mid <= lo or mid >= hi:
            break
        if (curve(mid) > threshold) == lo_above:
            lo = mid
        else:
            hi = mid
    return 0.5 * (lo + hi)


def _crossing(piece: _Piece, threshold: float) -> float:
    if piece.end == piece.start:
        return piece.start
    if piece.curve is None:
        fraction = (threshold - piece.start_value) / (piece.end_value - piece.start_value)
        return piece.start + (piece.end - piece.start) * fraction
    end = piece.end
    if math.isinf(end):
        # The curve approaches its limit; widen the bracket until it crosses.
        span = 1e-12 if piece.start == 0.0 else abs(piece.start)
        start_above = piece.curve(piece.start) > threshold
        end = piece.start + span
        while (piece.curve(end) > threshold) == start_above:
            if math.isinf(end):
                return INF  # no float time reaches the crossing: it lies at infinity
            span *= 2.0
            end = piece.start + span
    return _bisect(piece.curve, piece.start, end, threshold)


def _runs_above(pieces: Sequence[_Piece], threshold: float) -> list[_Run]:
    """The maximal intervals above the threshold over consecutive monotone pieces.

    Two runs join only where the shared instant is itself above the threshold,
    so a waveform that just touches the threshold splits there.
    """
    runs: list[_Run] = []
    for piece in pieces:
        start_above = piece.start_value > threshold
        end_above = piece.end_value > threshold
        if start_above and end_above:
            run = _Run(piece.start, piece.end, True, True)
        elif start_above:
            run = _Run(piece.start, _crossing(piece, threshold), True, False)
        elif end_above:
            run = _Run(_crossing(piece, threshold), piece.end, False, True)
        else:
            continue
        last = runs[-1] if runs else None
        if last is not None and last.end == run.start and last.end_above and run.start_above:
            runs[-1] = _Run(last.start, run.end, last.start_above, run.end_above)
        else:
            runs.append(run)
    return runs


# -------------------------------------------------------------------------- PWL


@dataclass(frozen=True, slots=True)
class Pwl(Waveform):
    """``PWL(t1 v1 t2 v2 ...) r=... td=...``: straight lines between points.

    Before its first point the source holds the first value and after its
    last point the last value, unless ``repeat_from`` (``r=``) names a time
    point: then the stretch from that point to the last repeats for ever.
    """

    kind: ClassVar[str] = "pwl"
    points: tuple[tuple[float, float], ...]
    repeat_from: float | None = None
    delay: float = 0.0

    def _repeat_index(self) -> int | None:
        if self.repeat_from is None:
            return None
        for index, (t, _) in enumerate(self.points):
            if t == self.repeat_from:
                return index
        raise WaveformError(f"PWL r={self.repeat_from:g} s is not one of the time points")

    def value_at(self, t: float) -> float:
        # Same order of operations as the simulator, so the wrap lands on the same float.
        points = self.points
        time = t - self.delay
        if time <= points[0][0]:
            return points[0][1]
        end_time = points[-1][0]
        if time > end_time:
            if self.repeat_from is None:
                return points[-1][1]
            period = end_time - self.repeat_from
            time -= self.repeat_from
            time = _wrap(time, period)
            time += self.repeat_from
        for (t0, v0), (t1, v1) in zip(points, points[1:], strict=False):
            if t1 >= time:
                if t1 == t0:
                    return v0
                return v0 + (time - t0) / (t1 - t0) * (v1 - v0)
        return points[-1][1]

    def high(self) -> float:
        return max(v for _, v in self.points)

    def low(self) -> float:
        return min(v for _, v in self.points)

    def period(self) -> float | None:
        if self.repeat_from is None:
            return None
        return self.points[-1][0] - self.repeat_from

    def _first_pass(self) -> list[_Piece]:
        shifted = [(self.delay + t, v) for t, v in self.points]
        pieces: list[_Piece] = []
        if shifted[0][0] > 0.0:
            pieces.append(_Piece(0.0, shifted[0][0], shifted[0][1], shifted[0][1]))
        for (t0, v0), (t1, v1) in zip(shifted, shifted[1:], strict=False):
            pieces.append(_Piece(t0, t1, v0, v1))
        return pieces

    def _repeated_pass(self, base: float, index: int) -> tuple[list[_Piece], float]:
        """One repetition starting at absolute time ``base``; returns it and its end."""
        points = self.points
        origin = points[index][0]
        last_value = points[-1][1]
        # The wrap is a step from the last value back to the value at r.
        pieces = [_Piece(base, base, last_value, points[index][1])]
        for (t0, v0), (t1, v1) in zip(points[index:], points[index + 1 :], strict=False):
            pieces.append(_Piece(base + (t0 - origin), base + (t1 - origin), v0, v1))
        return pieces, pieces[-1].end

    def _timeline(self) -> tuple[list[_Piece], float | None, float | None]:
        """The first pass plus enough repetitions to see every run; and where period 2 starts."""
        pieces = self._first_pass()
        end = self.delay + self.points[-1][0]
        index = self._repeat_index()
        if index is None:
            last = self.points[-1][1]
            pieces.append(_Piece(end, INF, last, last))
            return pieces, None, None
        # Runs inside the first pass, across the first wrap, inside a
        # repetition and across a later wrap all appear within the first
        # pass and two repetitions; later ones are copies.
        first, second_start = self._repeated_pass(end, index)
        second, _ = self._repeated_pass(second_start, index)
        return pieces + first + second, end, second_start

    def longest_time_above(self, threshold: float) -> float:
        pieces, _, second_start = self._timeline()
        runs = _runs_above(pieces, threshold)
        if not runs:
            return 0.0
        final = runs[-1]
        if math.isinf(final.end):
            return INF
        if second_start is not None and final.end == pieces[-1].end and final.end_above:
            if final.start < second_start:
                return INF  # above through a whole repetition, wrap included
        return max(run.length for run in runs)

    def duty_above(self, threshold: float) -> float | None:
        period = self.period()
        if period is None:
            return None
        pieces, first_start, second_start = self._timeline()
        assert first_start is not None and second_start is not None
        total = 0.0
        for run in _runs_above(pieces, threshold):
            overlap = min(run.end, second_start) - max(run.start, first_start)
            if overlap > 0.0:
                total += overlap
        return min(total / period, 1.0)

    def _parameters(self) -> dict[str, object]:
        return {
            "points": [[_json_number(t), _json_number(v)] for t, v in self.points],
            "r": _json_number(self.repeat_from),
            "td": _json_number(self.delay),
        }


# -------------------------------------------------------------------------- SIN


@dataclass(frozen=True, slots=True)
class Sine(Waveform):
    """``SIN(VO VA FREQ TD THETA PHASE)``; ``freq`` None when unknown (no FREQ, no .tran).

    A damped sine (THETA > 0) does not repeat, so it has no period; its
    oscillation frequency stays in ``freq``.
    """

    kind: ClassVar[str] = "sin"
    vo: float
    va: float
    freq: float | None
    td: float = 0.0
    theta: float = 0.0
    phase: float = 0.0  # degrees

    def value_at(self, t: float) -> float:
        phase = self.phase * math.pi / 180.0
        time = t - self.td
        if time <= 0.0:
            return self.vo + self.va * math.sin(phase)
        freq = 0.0 if self.freq is None else self.freq
        return self.vo + self.va * math.sin(freq * time * 2.0 * math.pi + phase) * math.exp(
            -time * self.theta
        )

    def _start(self) -> float:
        return self.value_at(0.0)

    def _amplitude_and_phase(self) -> tuple[float, float]:
        """|VA| and the phase (radians, in [0, 2π)) of ``|VA|·sin(x)`` at the delay's end."""
        phase = math.radians(self.phase) + (math.pi if self.va < 0 else 0.0)
        return abs(self.va), phase % _TWO_PI

    def _extremes(self) -> tuple[float, float]:
        start = self._start()
        if self.freq is None or self.va == 0.0:
            if self.theta > 0.0:
                return max(start, self.vo), min(start, self.vo)
            return start, start
        if self.theta == 0.0:
            return self.vo + abs(self.va), self.vo - abs(self.va)
        # Stationary points of e^(-θτ)·sin(ωτ+φ) lie at tan(ωτ+φ) = ω/θ; the
        # envelope only shrinks, so the first two of them hold the extremes.
        omega = _TWO_PI * self.freq
        phase = math.radians(self.phase)
        beta = math.atan2(omega, self.theta)
        k = math.ceil((phase - beta) / math.pi)
        values = [start]
        for step in (k, k + 1):
            tau = (beta + step * math.pi - phase) / omega
            values.append(self.value_at(self.td + max(tau, 0.0)))
        return max(values), min(values)

    def high(self) -> float:
        return self._extremes()[0]

    def low(self) -> float:
        return self._extremes()[1]

    def period(self) -> float | None:
        if self.freq is None or self.theta > 0.0:
            return None
        return 1.0 / self.freq

    def longest_time_above(self, threshold: float) -> float:
        start = self._start()
        if self.freq is None or self.va == 0.0:
            return self._longest_above_without_oscillation(threshold, start)
        if self.theta == 0.0:
            return self._longest_above_steady(threshold, start)
        return self._longest_above_damped(threshold, start)

    def _longest_above_without_oscillation(self, threshold: float, start: float) -> float:
        # The value decays (or stays) monotonically from its start toward VO.
        if self.theta == 0.0:
            return INF if start > threshold else 0.0
        if self.vo > threshold or (self.vo == threshold and start > threshold):
            return INF
        if start <= threshold:
            return 0.0
        return self.td + math.log((start - self.vo) / (threshold - self.vo)) / self.theta

    def _longest_above_steady(self, threshold: float, start: float) -> float:
        assert self.freq is not None
        amplitude, x0 = self._amplitude_and_phase()
        level = (threshold - self.vo) / amplitude
        if level < -1.0:
            return INF
        if level >= 1.0:
            return 0.0
        # sin(x) > level on the arc (asin(level), π − asin(level)) of each cycle.
        alpha = math.asin(level)
        arc = math.pi - 2.0 * alpha
        omega = _TWO_PI * self.freq
        longest = arc / omega
        if start > threshold:
            into_arc = (x0 - alpha) % _TWO_PI
            longest = max(longest, self.td + (arc - into_arc) / omega)
        return longest

    def _longest_above_damped(self, threshold: float, start: float) -> float:
        assert self.freq is not None
        if threshold < self.vo:
            return INF  # the envelope shrinks until the whole swing is above
        amplitude, x0 = self._amplitude_and_phase()
        omega = _TWO_PI * self.freq
        theta = self.theta

        def value(tau: float) -> float:
            return self.vo + amplitude * math.exp(-theta * tau) * math.sin(omega * tau + x0)

        # On each positive half-cycle e^(-θτ)·sin is single-peaked (peak where
        # the phase is atan2(ω, θ)), so its time above is one interval. For a
        # threshold at or above VO, half-cycle k+1 shifted back one cycle lies
        # inside half-cycle k, so the longest run is in the half-cycle under
        # way when the delay ends or in the first full one after it.
        beta = math.atan2(omega, theta)
        longest = 0.0
        if 0.0 <= x0 < math.pi:
            peak = max((beta - x0) / omega, 0.0)
            if value(peak) > threshold:
                end = _bisect(value, peak, (math.pi - x0) / omega, threshold)
                if start > threshold:
                    longest = self.td + end  # joined to the level held before TD
                else:
                    longest = end - _bisect(value, 0.0, peak, threshold)
        first = ((0.0 if x0 == 0.0 else _TWO_PI) - x0) / omega
        peak = first + beta / omega
        if value(peak) > threshold:
            end = _bisect(value, peak, first + math.pi / omega, threshold)
            longest = max(longest, end - _bisect(value, first, peak, threshold))
        return longest

    def duty_above(self, threshold: float) -> float | None:
        if self.period() is None:
            return None
        if self.va == 0.0:
            return 1.0 if self.vo > threshold else 0.0
        level = (threshold - self.vo) / abs(self.va)
        if level < -1.0:
            return 1.0
        if level >= 1.0:
            return 0.0
        return 0.5 - math.asin(level) / math.pi

    def _parameters(self) -> dict[str, object]:
        return {
            "vo": _json_number(self.vo),
            "va": _json_number(self.va),
            "freq": _json_number(self.freq),
            "td": _json_number(self.td),
            "theta": _json_number(self.theta),
            "phase": _json_number(self.phase),
        }


# -------------------------------------------------------------------------- EXP


def _settled(elapsed: float, tau: float) -> float:
    """1 − e^(−elapsed/τ); a zero τ (no .tran to default from) settles at once."""
    return 1.0 - _remaining(elapsed, tau)


def _remaining(elapsed: float, tau: float) -> float:
    """e^(−elapsed/τ), the part not yet settled; 0 for a zero τ."""
    if tau == 0.0:
        return 0.0
    return math.exp(-elapsed / tau)


@dataclass(frozen=True, slots=True)
class Exponential(Waveform):
    """``EXP(V1 V2 TD1 TAU1 TD2 TAU2)``: one exponential excursion from V1 toward V2 and back."""

    kind: ClassVar[str] = "exp"
    v1: float
    v2: float
    td1: float
    tau1: float
    td2: float
    tau2: float

    def value_at(self, t: float) -> float:
        if t <= self.td1:
            return self.v1
        if t <= self.td2:
            return self.v1 + (self.v2 - self.v1) * _settled(t - self.td1, self.tau1)
        # The rise and the fall written as one difference of exponentials, so a fall
        # that cancels the rise leaves V1 exactly rather than its rounding error.
        return self.v1 + (self.v2 - self.v1) * (
            _remaining(t - self.td2, self.tau2) - _remaining(t - self.td1, self.tau1)
        )

    def _after_fall_start(self, t: float) -> float:
        """The value just after TD2 onward (the right-hand limit at TD2 itself)."""
        return self.v1 + (self.v2 - self.v1) * (
            _remaining(max(t - self.td2, 0.0), self.tau2) - _remaining(t - self.td1, self.tau1)
        )

    def _turning_point(self) -> float | None:
        """Where the slope after TD2 changes sign, if it does.

        The slope there is proportional to e^(−(t−TD1)/τ1)/τ1 − e^(−(t−TD2)/τ2)/τ2,
        a difference of two exponentials that vanishes at most once.
        """
        tau1, tau2 = self.tau1, self.tau2
        if tau1 == 0.0 or tau2 == 0.0 or tau1 == tau2:
            return None
        # log(τ1) − log(τ2), not log(τ1/τ2): the ratio of extreme constants underflows to 0.
        t = (math.log(tau1) - math.log(tau2) + self.td2 / tau2 - self.td1 / tau1) / (
            1.0 / tau2 - 1.0 / tau1
        )
        return t if t > self.td2 else None

    def _pieces(self) -> list[_Piece]:
        def rise(t: float) -> float:
            return self.v1 + (self.v2 - self.v1) * _settled(t - self.td1, self.tau1)

        pieces = [_Piece(0.0, self.td1, self.v1, self.v1)] if self.td1 > 0.0 else []
        if self.td2 > self.td1:
            # The right-hand limit at TD1 is V1 unless TAU1 = 0 makes it a step.
            start = self.v1 if self.tau1 > 0.0 else self.v2
            if start != self.v1:
                pieces.append(_Piece(self.td1, self.td1, self.v1, start))
            pieces.append(_Piece(self.td1, self.td2, start, rise(self.td2), rise))
        before, after = self.value_at(self.td2), self._after_fall_start(self.td2)
        if after != before:
            pieces.append(_Piece(self.td2, self.td2, before, after))
        turn = self._turning_point()
        curve = self._after_fall_start
        if turn is not None:
            pieces.append(_Piece(self.td2, turn, after, curve(turn), curve))
            pieces.append(_Piece(turn, INF, curve(turn), self.v1, curve))
        else:
            pieces.append(_Piece(self.td2, INF, after, self.v1, curve))
        return pieces

    def _extremes(self) -> tuple[float, float]:
        values = [piece.start_value for piece in self._pieces()]
        values.append(self.v1)
        # A fall far faster than the rise turns round within one float step of TD2,
        # where no turning point can be placed: the next float time holds that extreme.
        values.append(self._after_fall_start(math.nextafter(self.td2, INF)))
        return max(values), min(values)

    def high(self) -> float:
        return self._extremes()[0]

    def low(self) -> float:
        return self._extremes()[1]

    def period(self) -> float | None:
        return None

    def longest_time_above(self, threshold: float) -> float:
        pieces = self._pieces()
        final = pieces[-1]
        if final.start_value > threshold and final.end_value == threshold:
            return INF  # settles back onto the threshold from above, never reaching it
        runs = _runs_above(pieces, threshold)
        if not runs:
            return 0.0
        return max(run.length for run in runs)

    def duty_above(self, threshold: float) -> float | None:
        return None

    def _parameters(self) -> dict[str, object]:
        return {
            "v1": _json_number(self.v1),
            "v2": _json_number(self.v2),
            "td1": _json_number(self.td1),
            "tau1": _json_number(self.tau1),
            "td2": _json_number(self.td2),
            "tau2": _json_number(self.tau2),
        }


# ---------------------------------------------------------------------- building


_SIGNATURES: dict[str, tuple[str, int, tuple[str, ...]]] = {
    # kind: (how it is written, required count, every field in order)
    "dc": ("DC v", 1, ("V",)),
    "pulse": (
        "PULSE(V1 V2 [TD TR TF PW PER NP])",
        2,
        ("V1", "V2", "TD", "TR", "TF", "PW", "PER", "NP"),
    ),
    "sin": ("SIN(VO VA [FREQ TD THETA PHASE])", 2, ("VO", "VA", "FREQ", "TD", "THETA", "PHASE")),
    "exp": ("EXP(V1 V2 [TD1 TAU1 TD2 TAU2])", 2, ("V1", "V2", "TD1", "TAU1", "TD2", "TAU2")),
}


def _check_count(kind: str, args: Sequence[float]) -> None:
    form, required, names = _SIGNATURES[kind]
    if not required <= len(args) <= len(names):
        if required == len(names):
            expected = f"{required} value"
        else:
            expected = f"{required} to {len(names)} values"
        raise WaveformError(f"{form} takes {expected}; got {len(args)}")


def _check_finite(kind: str, args: Sequence[float]) -> None:
    for position, value in enumerate(args, start=1):
        if not math.isfinite(value):
            raise WaveformError(
                f"{kind.upper()} value {position} is {value!r}; expected a finite number"
            )
        if abs(value) > LARGEST_MAGNITUDE:
            raise WaveformError(
                f"{kind.upper()} value {position} is {value:g}; expected a magnitude of at most "
                f"{LARGEST_MAGNITUDE:g}"
            )


def _check_time(kind: str, name: str, value: float) -> None:
    if value < 0.0:
        raise WaveformError(f"{kind.upper()} {name} is {value:g} s; expected a time ≥ 0 s")


class _Defaults:
    """Fills omitted fields and records what was filled and why."""

    def __init__(self, kind: str, args: Sequence[float], tran: TransientSettings) -> None:
        self.kind = kind
        self.args = args
        self.names = _SIGNATURES[kind][2]
        self.tran = tran
        self.defaulted: list[str] = []
        self.notes: list[str] = []

    def given(self, name: str, zero_is_omitted: bool = False) -> float | None:
        index = self.names.index(name)
        if index >= len(self.args):
            return None
        value = self.args[index]
        if zero_is_omitted and value == 0.0:
            self.notes.append(f"{name} = 0 is read as not given, as ngspice does")
            return None
        return value

    def time(self, name: str, zero_is_omitted: bool = False) -> float | None:
        value = self.given(name, zero_is_omitted)
        if value is not None:
            _check_time(self.kind, name, value)
        return value

    def fill(self, name: str, value: float, why: str) -> float:
        self.defaulted.append(name)
        self.notes.append(f"{name} not given: {why}")
        return value

    def tstep(self, name: str) -> float:
        if self.tran.tstep is not None:
            return self.fill(name, self.tran.tstep, f"TSTEP = {self.tran.tstep:g} s from .tran")
        return self.fill(name, 0.0, "no .tran card for TSTEP; taken as 0 s (instantaneous)")


def _build_dc(args: Sequence[float]) -> Dc:
    return Dc(args[0])


def _build_pulse(args: Sequence[float], tran: TransientSettings) -> Pulse:
    d = _Defaults("pulse", args, tran)
    v1, v2 = args[0], args[1]
    td = d.time("TD")
    if td is None:
        td = d.fill("TD", 0.0, "0 s")
    tr = d.time("TR", zero_is_omitted=True)
    tr = d.tstep("TR") if tr is None else tr
    tf = d.time("TF", zero_is_omitted=True)
    tf = d.tstep("TF") if tf is None else tf
    pw = d.time("PW", zero_is_omitted=True)
    if pw is None:
        if tran.tstop is not None:
            pw = d.fill("PW", tran.tstop, f"TSTOP = {tran.tstop:g} s from .tran")
        else:
            pw = d.fill("PW", INF, "no .tran card for TSTOP; the pulse never falls")
    per = d.time("PER", zero_is_omitted=True)
    if per is None:
        if tran.tstop is not None:
            per = d.fill("PER", tran.tstop, f"TSTOP = {tran.tstop:g} s from .tran")
        else:
            d.defaulted.append("PER")
            d.notes.append("PER not given: no .tran card for TSTOP; a single pulse, not repeated")
    pulses: int | None = None
    count = d.given("NP")
    if count is not None:
        if count < 0.0 or count != math.floor(count):
            raise WaveformError(f"PULSE NP is {count:g}; expected a whole number of pulses ≥ 0")
        pulses = int(count) if count > 0.0 else None
    return Pulse(
        v1, v2, td, tr, tf, pw, per, pulses, notes=tuple(d.notes), defaulted=tuple(d.defaulted)
    )


def _build_sine(args: Sequence[float], tran: TransientSettings) -> Sine:
    d = _Defaults("sin", args, tran)
    vo, va = args[0], args[1]
    freq = d.given("FREQ", zero_is_omitted=True)
    if freq is not None and freq < 0.0:
        raise WaveformError(f"SIN FREQ is {freq:g} Hz; expected a frequency > 0 Hz")
    if freq is not None and freq < 1.0 / LARGEST_MAGNITUDE:
        # Its reciprocal, the period, and the times of the extremes would overflow.
        raise WaveformError(
            f"SIN FREQ is {freq:g} Hz; expected a frequency of at least "
            f"{1.0 / LARGEST_MAGNITUDE:g} Hz"
        )
    if freq is None:
        if tran.tstop is not None:
            freq = d.fill("FREQ", 1.0 / tran.tstop, f"1/TSTOP = {1.0 / tran.tstop:g} Hz")
        else:
            d.defaulted.append("FREQ")
            d.notes.append(
                "FREQ not given: no .tran card for 1/TSTOP; frequency unknown, "
                "the sine is held at its starting value"
            )
    td = d.time("TD")
    if td is None:
        td = d.fill("TD", 0.0, "0 s")
    theta = d.given("THETA")
    if theta is None:
        theta = d.fill("THETA", 0.0, "0 1/s (undamped)")
    elif theta < 0.0:
        raise WaveformError(
            f"SIN THETA is {theta:g} 1/s; expected a damping factor ≥ 0 (a growing sine has no"
            " bounded level)"
        )
    phase = d.given("PHASE")
    if phase is None:
        phase = d.fill("PHASE", 0.0, "0 degrees")
    return Sine(vo, va, freq, td, theta, phase, notes=tuple(d.notes), defaulted=tuple(d.defaulted))


def _build_exponential(args: Sequence[float], tran: TransientSettings) -> Exponential:
    d = _Defaults("exp", args, tran)
    v1, v2 = args[0], args[1]
    td1 = d.time("TD1")
    if td1 is None:
        td1 = d.fill("TD1", 0.0, "0 s")
    tau1 = d.time("TAU1", zero_is_omitted=True)
    tau1 = d.tstep("TAU1") if tau1 is None else tau1
    td2 = d.time("TD2", zero_is_omitted=True)
    if td2 is None:
        step = 0.0 if tran.tstep is None else tran.tstep
        td2 = d.fill("TD2", td1 + step, f"TD1 + TSTEP = {td1 + step:g} s")
    elif td2 < td1:
        raise WaveformError(f"EXP TD2 is {td2:g} s, before TD1 = {td1:g} s; expected TD2 ≥ TD1")
    tau2 = d.time("TAU2", zero_is_omitted=True)
    tau2 = d.tstep("TAU2") if tau2 is None else tau2
    return Exponential(
        v1, v2, td1, tau1, td2, tau2, notes=tuple(d.notes), defaulted=tuple(d.defaulted)
    )


def _build_pwl(args: Sequence[float], options: Mapping[str, float]) -> Pwl:
    form = "PWL(t1 v1 [t2 v2 ...]) [r=...] [td=...]"
    if len(args) < 2 or len(args) % 2:
        raise WaveformError(f"{form} takes time-value pairs; got {len(args)} values")
    points = tuple((args[i], args[i + 1]) for i in range(0, len(args), 2))
    for number, (t, _) in enumerate(points, start=1):
        _check_time("pwl", f"time point {number}", t)
    for number, ((t0, _), (t1, _)) in enumerate(zip(points, points[1:], strict=False), start=2):
        if t1 < t0:
            raise WaveformError(
                f"PWL time point {number} is {t1:g} s, before the previous {t0:g} s; "
                "expected times in non-decreasing order"
            )
    repeat_from: float | None = None
    delay = 0.0
    for key, value in options.items():
        name = key.lower()
        if not math.isfinite(value):
            raise WaveformError(f"PWL {name}= is {value!r}; expected a finite time")
        if abs(value) > LARGEST_MAGNITUDE:
            raise WaveformError(
                f"PWL {name}= is {value:g} s; expected a time of at most {LARGEST_MAGNITUDE:g} s"
            )
        if name == "r":
            repeat_from = value
        elif name == "td":
            _check_time("pwl", "td=", value)
            delay = value
        else:
            raise WaveformError(f"unknown PWL option {key}=; expected r= or td=")
    if repeat_from is not None:
        match = next(
            (t for t, _ in points if math.isclose(t, repeat_from, rel_tol=1e-9, abs_tol=1e-21)),
            None,
        )
        if match is None:
            listed = " ".join(f"{t:g}" for t, _ in points)
            raise WaveformError(
                f"PWL r={repeat_from:g} s is not one of the time points ({listed}); "
                "expected r to name the point the repetition starts from"
            )
        if match >= points[-1][0]:
            raise WaveformError(
                f"PWL r={repeat_from:g} s is the last time point; expected an earlier point "
                "so that something repeats"
            )
        repeat_from = match
    return Pwl(points, repeat_from, delay)


def build_waveform(
    kind: str,
    args: Sequence[float],
    options: Mapping[str, float] = _NO_OPTIONS,
    tran: TransientSettings = _NO_TRAN,
) -> Waveform:
    """Build a waveform from evaluated source arguments, applying the SPICE defaults.

    ``kind`` is "dc", "pulse", "pwl", "sin" or "exp"; ``options`` carries PWL's
    ``r=`` and ``td=``; ``tran`` the deck's ``.tran`` settings for the defaults
    that depend on them. Raises WaveformError with what was expected.
    """
    kind = kind.lower()
    values = [float(a) for a in args]
    if kind == "pwl":
        _check_finite(kind, values)
        return _build_pwl(values, options)
    if kind not in _SIGNATURES:
        raise WaveformError(
            f"unknown source waveform {kind!r}; expected dc, pulse, pwl, sin or exp"
        )
    if options:
        listed = ", ".join(f"{k}=" for k in options)
        raise WaveformError(f"{kind.upper()} takes no options ({listed}); r= and td= belong to PWL")
    _check_count(kind, values)
    _check_finite(kind, values)
    if kind == "dc":
        return _build_dc(values)
    if kind == "pulse":
        return _build_pulse(values, tran)
    if kind == "sin":
        return _build_sine(values, tran)
    return _build_exponential(values, tran)


# ------------------------------------------------------------------ steady windows


def steady_windows(
    waveform: Waveform, threshold: float, below: bool = False
) -> tuple[float, float, tuple[tuple[float, float], ...]] | None:
    """One steady period of a periodic PULSE or PWL and the stretches of it above (or,
    with ``below``, under) ``threshold``: ``(origin, period, runs)``, each run a
    ``(start, end)`` in absolute time with ``origin <= start < origin + period``; a run that
    wraps past the period's end continues into the next one (``end`` beyond it).

    None when the waveform does not repeat, or repeats in a form whose edges are not a
    plain train (a pulse longer than its period, a rise slower than it): whoever needs
    edge times then does not get a guess.
    """
    wave = waveform.negated() if below else waveform
    level = -threshold if below else threshold
    period = wave.period()
    if period is None or period <= 0:
        return None
    pieces: list[_Piece]
    if isinstance(wave, Pulse):
        if wave.v1 == wave.v2 or wave._sawtooth():
            return None
        if wave.tr + wave.pw + wave.tf > period:
            return None
        origin = wave.td
        t1 = origin + wave.tr
        t2 = t1 + wave.pw
        t3 = t2 + wave.tf
        pieces = [
            _Piece(origin, t1, wave.v1, wave.v2),
            _Piece(t1, t2, wave.v2, wave.v2),
            _Piece(t2, t3, wave.v2, wave.v1),
            _Piece(t3, origin + period, wave.v1, wave.v1),
        ]
    elif isinstance(wave, Pwl):
        index = wave._repeat_index()
        if index is None:
            return None
        origin = wave.delay + wave.points[-1][0]
        pieces, _ = wave._repeated_pass(origin, index)
    else:
        return None
    runs = [(r.start, r.end) for r in _runs_above(pieces, level)]
    end = origin + period
    if len(runs) >= 2 and runs[0][0] == origin and runs[-1][1] == end:
        # above across the period boundary: one run, wrapping
        first = runs.pop(0)
        runs[-1] = (runs[-1][0], end + (first[1] - origin))
    elif runs and runs[0] == (origin, end):
        runs = [(origin, math.inf)]
    return origin, period, tuple(runs)
