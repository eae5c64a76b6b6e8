"""Tolerance corners: the worst-case value of a part or a supply, as plain functions.

Sources, named beside each function:

- Capacitance tolerance letter codes (K = ±10 %, M = ±20 %) and the class-2 ceramic
  temperature codes (X7R: ±15 % from −55 °C to +125 °C; X5R: ±15 %, −55 to +85 °C; X6S,
  X7S: ±22 %; Y5V: +22/−82 %, −30 to +85 °C; C0G is class 1, 0 ± 30 ppm/K): EIA-198 (the
  letters also in IEC 60062). A code bounds the change over its whole range; where in the
  range a board runs is not known, so the bound is taken.
- Reverse leakage of a silicon junction doubles about every 10 K (common practice; the
  doubling interval runs from about 7 K to 12 K with the part and the voltage).
- A supply within ±tolerance of its nominal level, measured from the rail it is
  referenced to (common practice for regulator outputs: ±5 % covers line, load and
  temperature of most).
- A gate charge spread: the datasheet maximum Q_g over the typical one (common practice:
  datasheets that give both put the maximum 20–50 % above the typical).
"""

from __future__ import annotations

from collections.abc import Mapping

from drivelint.physics._units import Amps, Coulombs, Farads, Kelvin, Ratio, Volts, _ratio

# EIA-198 class-2 temperature characteristics: the largest fall and rise of capacitance
# over the code's temperature range, relative to 25 °C. C0G (class 1) for comparison.
CLASS2_TEMPERATURE_CHANGE: Mapping[str, tuple[float, float]] = {
    "C0G": (0.0, 0.0),
    "X5R": (0.15, 0.15),
    "X6S": (0.22, 0.22),
    "X7R": (0.15, 0.15),
    "X7S": (0.22, 0.22),
    "X8R": (0.15, 0.15),
    "Y5V": (0.82, 0.22),
    "Z5U": (0.56, 0.22),
}
LEAKAGE_DOUBLING = 10.0  # K: reverse leakage doubles about every 10 K (common practice)
LEAKAGE_REFERENCE = 298.15  # K: 25 °C, where datasheets give the reverse current I_R


def temperature_change(code: str) -> tuple[Ratio, Ratio]:
    """(largest fall, largest rise) of capacitance over a dielectric code's range, as
    fractions (EIA-198); KeyError for a code not in the table."""
    return CLASS2_TEMPERATURE_CHANGE[code.upper()]


def capacitance_low(
    c: Farads, tolerance: Ratio, temperature_fall: Ratio = 0.0, bias_factor: Ratio = 1.0
) -> Farads:
    """The lowest capacitance of a part: C·(1 − tolerance)·(1 − temperature fall)·bias.

    c: nominal capacitance [F]; tolerance: the part's relative tolerance (K = 0.10);
    temperature_fall: the largest fall of its dielectric code (X7R: 0.15); bias_factor:
    C(V)/C(0) at the operating voltage, 1 where the DC bias is not known (a class-2
    ceramic's C falls with DC bias; common practice).
    """
    if not (0 <= tolerance < 1 and 0 <= temperature_fall < 1 and 0 < bias_factor <= 1):
        raise ValueError("tolerance and temperature fall must be in [0, 1), bias in (0, 1]")
    return c * (1.0 - tolerance) * (1.0 - temperature_fall) * bias_factor


def capacitance_high(
    c: Farads, tolerance: Ratio, temperature_rise: Ratio = 0.0, bias_factor: Ratio = 1.0
) -> Farads:
    """The highest capacitance of a part: C·(1 + tolerance)·(1 + temperature rise)·bias
    (DC bias never raises a ceramic's capacitance, so the bias factor at the operating
    voltage still applies)."""
    if not (tolerance >= 0 and temperature_rise >= 0 and 0 < bias_factor <= 1):
        raise ValueError("tolerance and temperature rise must be ≥ 0, bias in (0, 1]")
    return c * (1.0 + tolerance) * (1.0 + temperature_rise) * bias_factor


def leakage_at(
    i_reference: Amps,
    t_junction: Kelvin,
    t_reference: Kelvin = LEAKAGE_REFERENCE,
    doubling: Kelvin = LEAKAGE_DOUBLING,
) -> Amps:
    """Reverse leakage at ``t_junction`` from its value at ``t_reference``: it doubles every
    ``doubling`` kelvin, I(T) = I(T_ref)·2^((T − T_ref)/ΔT) (common practice).

    i_reference: leakage at the reference temperature [A]; t_junction, t_reference [K];
    doubling: the interval in which it doubles [K].
    """
    factor: float = 2.0 ** _ratio(t_junction - t_reference, doubling)
    return i_reference * factor


def supply_low(level: Volts, reference: Volts, tolerance: Ratio) -> Volts:
    """A supply at the low end of its tolerance: its reference plus (1 − tolerance) of
    what it stands above it (a 12 V gate rail stacked on −45 V is 12 V ± 5 %, not −33 V ±
    5 %). level, reference [V]; tolerance: relative (0.05 = ±5 %)."""
    return reference + (level - reference) * (1.0 - tolerance)


def supply_high(level: Volts, reference: Volts, tolerance: Ratio) -> Volts:
    """A supply at the high end of its tolerance (see :func:`supply_low`)."""
    return reference + (level - reference) * (1.0 + tolerance)


def charge_with_spread(q: Coulombs, spread: Ratio) -> Coulombs:
    """A gate charge at the top of its part-to-part spread: Q·(1 + spread).

    q: the typical (datasheet or model) charge [C]; spread: the maximum over the typical,
    less one (0.2 for a maximum 20 % above the typical).
    """
    if spread < 0:
        raise ValueError("spread must be ≥ 0")
    return q * (1.0 + spread)
