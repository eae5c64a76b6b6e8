"""bootstrap-diode-voltage: V_R = V_bus + V_boot − V_aux (+ ringing) against V_RRM × derating."""

from __future__ import annotations

import pytest
from nominal import at_nominal

from drivelint.pipeline import check_path, check_text
from drivelint.ratings.parts import Part, PartsLibrary

STAGE = """24 V bus, 12 V bootstrap
VBUS bus 0 DC 24
VAUX aux 0 DC 12
VIN in 0 PULSE(0 5 0 10n 10n 20u 50u)
D1 aux boot dboot
C1 boot sw 470n
RPU boot g 1k
Q1 g b 0 qn
RB in b 1k
M1 bus g sw nfet
M2 sw gl 0 nfet
VGL gl 0 PULSE(0 12 0.5u 10n 10n 19u 50u)
.model dboot D(IS=1n N=1 BV={bv} TT=20n)
.model qn NPN(BF=100)
.model nfet VDMOS(VTO=3 KP=20 Cgs=2n Cgdmax=1n)
"""


def findings(bv: float, **parts: str):
    library = (
        PartsLibrary({"dboot": Part("dboot", "diode", parts, {}, "parts.toml:1")})
        if parts
        else None
    )
    result = check_text(at_nominal(STAGE).replace("{bv}", str(bv)), parts=library)
    return [f for f in result.findings if f.rule == "bootstrap-diode-voltage"]


def test_reverse_voltage_follows_the_floating_side() -> None:
    # With a 12 V bootstrap on a 24 V bus the floating side reaches about 36 V, so the diode
    # from the 12 V rail blocks about 24 V (common practice); ringing adds 10 % of the bus.
    (finding,) = findings(30)
    values = finding.values
    v_boot = values["v_boot"].value
    assert 11 < v_boot < 12  # 12 V less the diode's drop at the end of a recharge
    assert values["diode_reverse_voltage"].value == pytest.approx(24 + v_boot - 12 + 2.4)
    assert values["derated_limit"].value == pytest.approx(24.0)  # 80 % of 30 V
    assert finding.device == "d1" and finding.span.line == 5
    assert "rated at least" in finding.fix
    assert "model dboot" in values["diode_rating"].origin


def test_enough_rating_is_quiet_and_the_parts_library_wins_over_the_model() -> None:
    assert findings(40) == []
    (finding,) = findings(40, vrrm="30 V")
    assert finding.values["diode_rating"].value == 30
    assert finding.values["diode_rating"].origin.startswith("parts.toml:1")


def test_example_boot_diode_under_rated_for_the_bus() -> None:
    # examples/README.md: DSCH_50 (50 V) blocks about 54 V + ringing in leg A. Leg B's high
    # side is held off in this scenario (HIB DC 0, its low side on): its diode never blocks
    # the bus, and a while-on stress is not reported for a switch never commanded on. Both
    # legs are the same subcircuit, so the finding on line 47 covers leg B's part too.
    result = check_path("examples/mower48v_hbridge_wrapped_fets.cir")
    found = [f for f in result.findings if f.rule == "bootstrap-diode-voltage"]
    assert sorted(f.device for f in found) == ["xlega.d_bt"]
    for finding in found:
        assert finding.span.line == 47
        assert finding.values["diode_rating"].value == 50
        assert finding.values["diode_reverse_voltage"].value == pytest.approx(59.6, abs=0.3)


@pytest.mark.parametrize(
    "example",
    [
        "lev48_phase_leg_npn_shifter.cir",
        "induction325_half_bridge_driver.cir",
        "heater96v_isolated_supply.cir",
        "buck12v_5v_400k_sync.cir",
    ],
)
def test_examples_with_adequate_diodes_are_quiet(example: str) -> None:
    result = check_path(f"examples/{example}")
    assert not [f for f in result.findings if f.rule == "bootstrap-diode-voltage"]
