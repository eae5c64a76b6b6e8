"""Waveform files: the simulated quantity a finding's claims are about, for the HTML report.

With ``--run``, each deck is run once more for its saved vectors (``ngspice.run_vectors``);
the series its bench names (``measure.Trace``: the boot supply, V_GS, the diode's reverse
voltage or current) are computed from them and written beside the deck as
``<rule>__<device>.wave.json``::

    {"time": [s, …], "series": {"<name>": [value, …]}, "units": {"<name>": "V"},
     "claim": "<value key>"}

at most ``MAX_POINTS`` points, chosen deterministically: the run is cut into equal spans
of time and each span keeps the points where the first series is lowest and highest (in
time order), so peaks and dips survive the thinning. Values have 6 significant digits.
"""

from __future__ import annotations

import json
import math
from collections.abc import Mapping, Sequence
from pathlib import Path

from drivelint.testbench.measure import Trace

MAX_POINTS = 2000
DIGITS = 6


class RawError(ValueError):
    """A raw file that cannot be read as ngspice's ASCII format, or one over its bound."""


def read_ascii_raw(path: Path, wanted: set[str], max_bytes: int) -> dict[str, tuple[float, ...]]:
    """The vectors ``wanted`` (lower-case names, ``"time"`` included) of an ngspice ASCII
    raw file of one real-valued plot."""
    if path.stat().st_size > max_bytes:
        raise RawError(f"the raw file is larger than {max_bytes} bytes; no waveform written")
    names: list[str] = []
    values: list[list[float]] = []
    with path.open(encoding="ascii", errors="replace") as handle:
        count = 0
        for line in handle:
            if line.startswith("No. Variables:"):
                count = int(line.split(":", 1)[1])
            elif line.startswith("Flags:") and "complex" in line:
                raise RawError("the raw file holds complex vectors")
            elif line.startswith("Variables:"):
                for _ in range(count):
                    fields = handle.readline().split()
                    if len(fields) < 2:
                        raise RawError("a variable line of the raw file is short")
                    names.append(fields[1].lower())
                values = [[] for _ in names]
            elif line.startswith("Values:"):
                break
        if not names:
            raise RawError("the raw file names no vectors")
        index = 0
        for line in handle:
            if line[:1].isalpha():
                break  # the next plot: only the first is read
            fields = line.split()
            if not fields:
                continue
            number = fields[-1]
            try:
                values[index % len(names)].append(float(number))
            except ValueError:
                raise RawError(f"'{number}' in the raw file is not a number") from None
            index += 1
    out = {}
    for name, column in zip(names, values, strict=True):
        if name in wanted:
            out[name] = tuple(column[: len(values[0])])
    missing = wanted - set(out)
    if missing:
        raise RawError(f"the raw file lacks {', '.join(sorted(missing))}")
    return out


def series_of(
    traces: Sequence[Trace], vectors: Mapping[str, Sequence[float]]
) -> dict[str, list[float]]:
    """Each trace's values from the run's vectors."""
    out: dict[str, list[float]] = {}
    for trace in traces:
        plus = vectors[trace.plus.lower()]
        minus = vectors[trace.minus.lower()] if trace.minus else None
        if minus is None:
            out[trace.name] = [trace.scale * p for p in plus]
        else:
            out[trace.name] = [trace.scale * (p - m) for p, m in zip(plus, minus, strict=True)]
    return out


def thinned(time: Sequence[float], primary: Sequence[float], most: int = MAX_POINTS) -> list[int]:
    """Indices of at most ``most`` points: per equal span of time, the lowest and highest
    of ``primary`` (and the first and last point of the run)."""
    count = len(time)
    if count <= most:
        return list(range(count))
    spans = max(1, (most - 2) // 2)
    start, end = time[0], time[-1]
    width = (end - start) / spans if end > start else 1.0
    keep = {0, count - 1}
    low: dict[int, int] = {}
    high: dict[int, int] = {}
    for index in range(count):
        span = min(int((time[index] - start) / width), spans - 1)
        if span not in low or primary[index] < primary[low[span]]:
            low[span] = index
        if span not in high or primary[index] > primary[high[span]]:
            high[span] = index
    keep.update(low.values())
    keep.update(high.values())
    return sorted(keep)


def _rounded(value: float) -> float | str:
    if not math.isfinite(value):
        return "nan" if math.isnan(value) else ("inf" if value > 0 else "-inf")
    return float(f"{value:.{DIGITS}g}")


def waveform_text(
    traces: Sequence[Trace], vectors: Mapping[str, Sequence[float]], claim: str | None
) -> str:
    """The waveform file's JSON (the same bytes for the same run)."""
    time = list(vectors["time"])
    series = series_of(traces, vectors)
    primary = series[traces[0].name] if traces else time
    keep = thinned(time, primary)
    payload = {
        "claim": claim,
        "series": {name: [_rounded(values[i]) for i in keep] for name, values in series.items()},
        "time": [_rounded(time[i]) for i in keep],
        "units": {trace.name: trace.unit for trace in traces},
    }
    return json.dumps(payload, sort_keys=True, separators=(",", ":")) + "\n"
