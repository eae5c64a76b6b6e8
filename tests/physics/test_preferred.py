"""Preferred values against the IEC 60063 E6 / E12 / E24 tables."""

# Physics functions are typed with float aliases but are called here with pint quantities
# on purpose, so attribute and argument checks on those calls are switched off.
# mypy: disable-error-code="attr-defined, arg-type, type-arg"

from __future__ import annotations

import math

import pint
import pytest
from hypothesis import given, settings
from hypothesis import strategies as st

from drivelint.physics.preferred import next_preferred, preferred_values

# IEC 60063, one decade of each series, written out here independently of the module
# (two significant figures, as the standard tabulates them).
IEC_60063 = {
    "E6": "10 15 22 33 47 68",
    "E12": "10 12 15 18 22 27 33 39 47 56 68 82",
    "E24": "10 11 12 13 15 16 18 20 22 24 27 30 33 36 39 43 47 51 56 62 68 75 82 91",
}


@pytest.mark.parametrize("series", sorted(IEC_60063))
def test_tables_match_iec_60063(series: str) -> None:
    expected = tuple(int(text) / 10 for text in IEC_60063[series].split())
    assert preferred_values(series) == expected
    assert preferred_values(series.lower()) == expected


def test_e6_and_e12_are_subsets_of_e24() -> None:
    # IEC 60063: each coarser E series takes every second value of the next finer one.
    assert preferred_values("E12") == preferred_values("E24")[::2]
    assert preferred_values("E6") == preferred_values("E12")[::2]


@pytest.mark.parametrize(
    ("value", "series", "expected"),
    [
        (2.2e-7, "E12", 2.2e-7),  # already preferred: stays, despite float error
        (2.2 * 1e-7, "E12", 2.2e-7),  # 2.2000000000000002e-07
        (0.22e-6 * (1 - 1e-12), "E12", 2.2e-7),
        (2.2e-7 * (1 + 1e-6), "E12", 2.7e-7),  # just over: next value
        (183.75e-9, "E12", 220e-9),  # the SLUA887 minimum rounds up to 220 nF
        (183.75e-9, "E24", 200e-9),
        (59.75e-9, "E6", 68e-9),
        (8.3, "E12", 10.0),  # past the top of a decade: next decade's 1.0
        (9.5, "E24", 10.0),
        (9.1, "E24", 9.1),
        (6.9, "E6", 10.0),
        (0.99, "E6", 1.0),
        (1.0, "E6", 1.0),
        (1e-12, "E12", 1e-12),
        (1.0000001e-12, "E12", 1.2e-12),
        (47e3, "E6", 47e3),
        (4.71e3, "E12", 5.6e3),
        (4.71e3, "E24", 5.1e3),
        (3.835e-6, "E12", 3.9e-6),
        (1e6, "E24", 1e6),
        (999e6, "E12", 1e9),
    ],
)
def test_next_preferred_boundaries(value: float, series: str, expected: float) -> None:
    assert next_preferred(value, series) == expected


def test_next_preferred_keeps_units(ureg: pint.UnitRegistry) -> None:
    c = next_preferred(183.75 * ureg.nF)
    assert c.check("[capacitance]") and c.to("nF").magnitude == pytest.approx(220.0)


def test_next_preferred_rejects_bad_input() -> None:
    for bad in (0.0, -1.0, math.inf, math.nan):
        with pytest.raises(ValueError):
            next_preferred(bad)
    with pytest.raises(ValueError, match="E12"):
        next_preferred(1.0, "E7")


@settings(max_examples=300, deadline=None)
@given(
    mantissa=st.floats(1.0, 10.0, exclude_max=True),
    decade=st.integers(-15, 12),
    series=st.sampled_from(sorted(IEC_60063)),
)
def test_next_preferred_is_the_smallest_series_value_not_below(
    mantissa: float, decade: int, series: str
) -> None:
    value = mantissa * 10.0**decade
    result = next_preferred(value, series)
    steps = [int(text) / 10 for text in IEC_60063[series].split()]
    # Every member of the series, this decade and the first of the next.
    members = [s * 10.0**decade for s in steps] + [10.0 ** (decade + 1)]
    candidates = [m for m in members if m >= value * (1 - 1e-9)]
    assert result == pytest.approx(min(candidates), rel=1e-12)
    assert result >= value * (1 - 1e-9)
