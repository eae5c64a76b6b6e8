"""Derating factors as quoted from published guidelines, and the stress arithmetic."""

# Physics functions are typed with float aliases but are called here with pint quantities
# on purpose, so attribute and argument checks on those calls are switched off.
# mypy: disable-error-code="attr-defined, arg-type, type-arg"

from __future__ import annotations

import pint
import pytest

from drivelint.physics.stress import (
    DERATING,
    NASA_JUNCTION_LIMIT,
    derated_limit,
    derating_factor,
    junction_temperature_limit,
    off_state_voltage,
    stress_ratio,
)


@pytest.mark.parametrize(
    ("guideline", "kind", "quantity", "factor", "from_memory"),
    [
        # RAC part derating parameters: diodes' reverse voltage 70 % severe / 80 % benign
        # (from memory), ceramic capacitors' voltage 60 % / 70 % (seen in a stored copy).
        ("rac-severe", "rectifier-diode", "reverse-voltage", 0.70, True),
        ("rac-severe", "fast-recovery-diode", "reverse-voltage", 0.70, True),
        ("rac-severe", "schottky-diode", "reverse-voltage", 0.70, True),
        ("rac-benign", "rectifier-diode", "reverse-voltage", 0.80, True),
        ("rac-benign", "fast-recovery-diode", "reverse-voltage", 0.80, True),
        ("rac-benign", "schottky-diode", "reverse-voltage", 0.80, True),
        ("rac-severe", "ceramic-capacitor", "voltage", 0.60, False),
        ("rac-benign", "ceramic-capacitor", "voltage", 0.70, False),
        # MIL-DTL-917: FET gate–source voltage 70 % (from memory).
        ("mil-dtl-917", "fet", "vgs", 0.70, True),
        # NASA EEE-INST-002 (from memory): V_DS and V_CEO 75 %, V_GS 60 %, diode PIV 70 %.
        ("nasa-eee-inst-002", "fet", "vds", 0.75, True),
        ("nasa-eee-inst-002", "fet", "vgs", 0.60, True),
        ("nasa-eee-inst-002", "bjt", "vceo", 0.75, True),
        ("nasa-eee-inst-002", "diode", "piv", 0.70, True),
    ],
)
def test_quoted_factors(
    guideline: str, kind: str, quantity: str, factor: float, from_memory: bool
) -> None:
    entry = derating_factor(guideline, kind, quantity)
    assert entry.factor == factor
    assert entry.from_memory is from_memory
    assert entry.source


def test_table_sources_name_their_documents() -> None:
    for guideline, kinds in DERATING.items():
        for kind, quantities in kinds.items():
            for quantity, entry in quantities.items():
                expected = {"rac": "RAC", "mil": "MIL-DTL-917", "nas": "EEE-INST-002"}
                assert expected[guideline[:3]] in entry.source, (guideline, kind, quantity)
                assert 0.0 < entry.factor <= 1.0


def test_table_is_read_only() -> None:
    with pytest.raises(TypeError):
        DERATING["made-up"] = DERATING["rac-severe"]  # type: ignore[index]
    with pytest.raises(TypeError):
        DERATING["rac-severe"]["ceramic-capacitor"]["voltage"] = None  # type: ignore[index]


def test_unknown_key_lists_what_exists() -> None:
    with pytest.raises(KeyError, match="rac-benign"):
        derating_factor("rac-mild", "fet", "vgs")
    with pytest.raises(KeyError, match="vds"):
        derating_factor("nasa-eee-inst-002", "fet", "vdss")


def test_derated_limit_and_stress_ratio(ureg: pint.UnitRegistry) -> None:
    # A 600 V diode at 70 % may see 420 V; 450 V on it is a stress of 0.75 (> 0.70).
    u = ureg
    limit = derated_limit(
        600 * u.V, derating_factor("rac-severe", "rectifier-diode", "reverse-voltage").factor
    )
    assert limit.check("[electric_potential]") and limit.to("V").magnitude == pytest.approx(420)
    ratio = stress_ratio(450 * u.V, 600 * u.V)
    assert isinstance(ratio, float) and ratio == pytest.approx(0.75)
    assert stress_ratio(-48.0, 20.0) == pytest.approx(2.4)
    assert stress_ratio(450 * u.V, 0.6 * u.kV) == pytest.approx(0.75)
    assert derated_limit(20.0, 0.6) == pytest.approx(12.0)


def test_nasa_junction_temperature_rule(ureg: pint.UnitRegistry) -> None:
    # NASA EEE-INST-002 (from memory): T_j ≤ 125 °C or T_j,max − 40 °C, whichever is lower.
    assert NASA_JUNCTION_LIMIT.from_memory
    assert junction_temperature_limit(423.15) == pytest.approx(383.15)  # 150 °C → 110 °C
    assert junction_temperature_limit(448.15) == pytest.approx(398.15)  # 175 °C → 125 °C
    q = junction_temperature_limit(ureg.Quantity(150, "degC"))
    assert q.check("[temperature]") and q.to("degC").magnitude == pytest.approx(110.0)


def test_off_state_voltage_adds_the_ringing_to_the_swing(ureg: pint.UnitRegistry) -> None:
    u = ureg
    # the bus less the node's low level, plus k_ring of it (arithmetic of the definition)
    assert off_state_voltage(56.0, 0.0, 0.1) == pytest.approx(61.6)
    # a split rail: the whole rail-to-rail swing
    assert off_state_voltage(45.0, -45.0, 0.1) == pytest.approx(99.0)
    got = off_state_voltage(56 * u.V, 0 * u.V, 0.1)
    assert got.to("V").magnitude == pytest.approx(61.6)
