"""cross-conduction: the two commands of a leg against each other, the driver's mismatch and
the outgoing switch's turn-off time."""

from __future__ import annotations

import math
from pathlib import Path

import pytest
from nominal import at_nominal, check_nominal
from simulator import run_transient

from drivelint.checks.base import Finding
from drivelint.checks.leg import HELD, LegTiming, leg_timing
from drivelint.checks.registry import registry
from drivelint.diagnostics import Severity
from drivelint.netlist.waveforms import Dc, Pulse, Pwl, steady_windows
from drivelint.pipeline import check_path, check_text

RULE = "cross-conduction"
ROOT = Path(__file__).resolve().parents[2]
EXAMPLES = ROOT / "examples"
OUTSIDE = Path(__file__).resolve().parent / "outside"
OWN = Path(__file__).resolve().parent / "cross_conduction"
CARD = registry()[RULE]


def lint(text: str) -> list[Finding]:
    result = check_text(at_nominal(text))
    assert not [d for d in result.diagnostics if d.severity.label == "error"], result.diagnostics
    return [f for f in result.findings if f.rule == RULE]


# -- command windows -----------------------------------------------------------------------


def test_steady_windows_of_a_pulse_train_and_its_inverse() -> None:
    # ngspice manual §4.1.1: on from TD + TR/2 to TD + TR + PW + TF/2 at the midpoint
    pulse = Pulse(0.0, 5.0, 1e-6, 10e-9, 10e-9, 4e-6, 10e-6)
    origin, period, runs = steady_windows(pulse, 2.5)  # type: ignore[misc]
    assert (origin, period) == (1e-6, 10e-6)
    assert runs[0] == pytest.approx((1.005e-6, 5.015e-6))
    _, _, below = steady_windows(pulse, 2.5, below=True)  # type: ignore[misc]
    assert below[0] == pytest.approx((5.015e-6, 11.005e-6))  # wraps into the next period
    pwl = Pwl(((0, 0), (1e-6, 0), (1.01e-6, 5), (5e-6, 5), (5.01e-6, 0), (10e-6, 0)), 0.0)
    _, period, runs = steady_windows(pwl, 2.5)  # type: ignore[misc]
    assert period == pytest.approx(10e-6) and runs[0][1] - runs[0][0] == pytest.approx(4e-6)
    # no period, or a pulse longer than its period: no edges to read
    assert steady_windows(Pulse(0.0, 5.0, 0.0, 1e-9, 1e-9, 4e-6, None), 2.5) is None
    assert steady_windows(Pulse(0.0, 5.0, 0.0, 1e-9, 1e-9, 12e-6, 10e-6), 2.5) is None


def test_leg_timing_dead_times_overlap_and_held() -> None:
    high = Pulse(0.0, 5.0, 0.0, 10e-9, 10e-9, 10e-6, 25e-6)
    low = Pulse(0.0, 12.0, 10.3e-6, 10e-9, 10e-9, 14.4e-6, 25e-6)
    timing = leg_timing(high, False, low, False)
    assert isinstance(timing, LegTiming) and not timing.overlaps
    assert timing.trail == pytest.approx(290e-9) and timing.lead == pytest.approx(290e-9)
    # the same low side written active-low (an inverting path) is the same leg
    inverted = Pulse(12.0, 0.0, 10.3e-6, 10e-9, 10e-9, 14.4e-6, 25e-6)
    again = leg_timing(high, False, inverted, True)
    assert isinstance(again, LegTiming) and again.trail == pytest.approx(290e-9)
    early = Pulse(0.0, 12.0, 9.8e-6, 10e-9, 10e-9, 14.5e-6, 25e-6)
    overlap = leg_timing(high, False, early, False)
    assert isinstance(overlap, LegTiming)
    ((start, end),) = overlap.overlaps
    assert end - start == pytest.approx(210e-9) and start == pytest.approx(9.8e-6)
    assert leg_timing(high, False, Dc(0.0), False) == HELD
    slower = Pulse(0.0, 12.0, 10.3e-6, 10e-9, 10e-9, 14.4e-6, 26e-6)
    assert leg_timing(high, False, slower, False) is None


# -- the rule on small netlists --------------------------------------------------------------


def test_card_bad_example_overlaps_at_the_high_sides_turn_off() -> None:
    (finding,) = lint(CARD.bad)
    values = finding.values
    assert finding.severity is Severity.ERROR
    assert (finding.device, finding.span.line) == ("vgl", 12)
    assert values["command_overlap"].value == pytest.approx(210e-9)
    assert values["overlap_start"].value == pytest.approx(9.8e-6, rel=1e-3)
    # the high side's turn-off: 4.7 Ω against C_gs + C_gd of the VDMOS card
    assert values["r_off"].value == pytest.approx(4.7)
    needed = values["dead_time_needed"].value
    assert needed == pytest.approx(math.ceil(values["t_off"].value / 10e-9) * 10e-9)
    assert values["dead_time_shift"].value == pytest.approx(210e-9 + needed)
    assert "turn-on edge" in finding.fix and "vgl" in finding.fix
    # no rds_on given: the MOS1 linear region of the card, 1/(KP·(V_GS − VTO)) (SPICE3 /
    # ngspice manual, level 1; VDMOS with W/L = 1), at each switch's drive
    high, low = values["rds_on_high"].value, values["rds_on_low"].value
    assert low == pytest.approx(1 / (20 * (12 - 3.5)))
    assert high == pytest.approx(1 / (20 * (values["v_drive"].value - 3.5)))
    assert values["shoot_through_bound"].value == pytest.approx(36 / (high + low))
    assert "estimate" in values["rds_on_high"].origin
    assert lint(CARD.good) == []


def test_on_resistances_bound_the_shoot_through() -> None:
    text = CARD.bad.replace(
        "VBUS bus", "* drivelint: part M1 rds_on=0.02\n* drivelint: part M2 rds_on=0.01\nVBUS bus"
    )
    (finding,) = lint(text)
    assert finding.values["shoot_through_bound"].value == pytest.approx(36 / 0.03)
    assert "1.2 kA" in finding.message


def test_held_legs_cannot_overlap() -> None:
    # the low side held off, or the high side never commanded on
    assert lint(CARD.bad.replace("PULSE(0 12 9.8u 10n 10n 14.5u 25u)", "DC 0")) == []
    assert lint(CARD.bad.replace("PULSE(0 5 0 10n 10n 10u 25u)", "DC 0")) == []


def test_one_command_reshaped_by_logic_is_not_judged() -> None:
    # the low side's command made from the high side's own by a behavioural stage: its
    # edges (a dead-time generator's) are in no waveform, so nothing is guessed
    text = CARD.bad.replace(
        "VGL gl 0 PULSE(0 12 9.8u 10n 10n 14.5u 25u)", "BGL gl 0 V = V(hin) < 2.5 ? 12 : 0"
    )
    assert lint(text) == []


def test_a_short_dead_time_is_a_warning_naming_the_edge() -> None:
    result = check_nominal(OWN / "c2_leg_short_dead.cir")
    (finding,) = [f for f in result.findings if f.rule == RULE]
    values = finding.values
    assert finding.severity is Severity.WARNING
    assert (finding.device, finding.span.line) == ("vpl", 13)
    assert values["dead_time"].value == pytest.approx(40e-9)
    assert values["dead_time_lead"].value == pytest.approx(190e-9)
    assert values["dead_time_needed"].value == pytest.approx(values["t_off"].value)
    assert "m_h's turn-off" in finding.message and "hard turn-off" in finding.message
    assert values["dead_time_shift"].value == pytest.approx(80e-9 - 40e-9)
    # a margin on top moves the suggestion
    assert [f for f in check_nominal(OWN / "c3_leg_clean.cir").findings if f.rule == RULE] == []


def _mower_with_driver(tmp_path: Path, extra: str) -> list[Finding]:
    text = (EXAMPLES / "parts.toml").read_text(encoding="utf-8")
    start = text.index("[part.HBDRV_100]")
    end = text.index("\n\n", start)
    entry = text[start:end] + "\n" + extra + "\n"
    parts = tmp_path / "driver.toml"
    parts.write_text(entry, encoding="utf-8")
    result = check_path(EXAMPLES / "mower48v_hbridge_wrapped_fets.cir", parts=(parts,))
    return [f for f in result.findings if f.rule == RULE]


def test_the_driver_mismatch_and_its_built_in_dead_time(tmp_path: Path) -> None:
    (plain,) = _mower_with_driver(tmp_path, "")
    assert plain.device == "vlia"
    (mismatched,) = _mower_with_driver(tmp_path, 't_prop_mismatch = "20 ns"')
    assert mismatched.values["dead_time_needed"].value == pytest.approx(
        plain.values["dead_time_needed"].value + 20e-9
    )
    # an interlock alone adds no dead time: the 100 ns edge stays short
    (interlocked,) = _mower_with_driver(tmp_path, 'dead_time_min = "0 ns"')
    assert interlocked.values["dead_time_min"].value == 0.0
    # a driver that holds its outputs 200 ns apart whatever its inputs do
    assert _mower_with_driver(tmp_path, 'dead_time_min = "200 ns"') == []


# -- what the bundled and outside decks yield -------------------------------------------------


def test_bundled_examples() -> None:
    found = {}
    for path in sorted(EXAMPLES.glob("*.cir")):
        for finding in check_path(path).findings:
            if finding.rule == RULE:
                found[(path.name, finding.device, finding.span.line)] = finding
    # Leg A of the mower: 100 ns of dead time at both edges against the hard turn-offs
    # through 15 Ω gate resistors of 44 nC switches (the high side's at the top of its
    # gate-charge spread); the buck examples' commands (PULSE with dead time, or a
    # modulator with a behavioural dead-time stage) and the driver-IC bridges stay quiet.
    assert set(found) == {("mower48v_hbridge_wrapped_fets.cir", "vlia", 39)}
    finding = found[("mower48v_hbridge_wrapped_fets.cir", "vlia", 39)]
    values = finding.values
    assert finding.severity is Severity.WARNING
    assert values["dead_time"].value == pytest.approx(100e-9)
    assert values["other_dead_time"].value == pytest.approx(100e-9)
    drive = values["v_drive"].value
    assert values["r_off"].value == pytest.approx(15 + drive / 4.6 + 1.8)
    assert values["c_iss"].value == pytest.approx((44e-9 - 12e-9) / 10 * 1.2)
    assert values["t_off_soft"].value < values["dead_time"].value
    assert "vhia's turn-on edge" in finding.fix and "vlia's turn-on edge" in finding.fix
    assert "Q_g +20 %" in finding.message


def test_outside_decks_stay_quiet() -> None:
    for path in sorted(OUTSIDE.glob("*.cir")):
        assert [f for f in check_path(path).findings if f.rule == RULE] == [], path.name


# -- ngspice -------------------------------------------------------------------------------


def _crossing(
    time: tuple[float, ...], values: tuple[float, ...], level: float, t0: float, falling: bool
) -> float:
    for i in range(1, len(time)):
        if time[i - 1] < t0:
            continue
        a, b = values[i - 1], values[i]
        if (a > level >= b) if falling else (a < level <= b):
            return time[i - 1] + (time[i] - time[i - 1]) * (a - level) / (a - b)
    raise AssertionError("no crossing")


def _simulated_edge(name: str, tmp_path: Path) -> tuple[float, float, float]:
    """(command edge, high side below V_th, low side above V_th) at the high side's
    turn-off in the fourth period, from ngspice."""
    text = (OWN / f"{name}.cir").read_text(encoding="utf-8")
    waves = run_transient(text, ["v(pwmh)", "v(gh,sw)", "v(gl)"], tmp_path / name)
    t0 = 3 * 20e-6 + 8.5e-6
    command = _crossing(waves.time, waves["v(pwmh)"], 2.5, t0, True)
    high_off = _crossing(waves.time, waves["v(gh,sw)"], 3.0, t0, True)
    low_on = _crossing(waves.time, waves["v(gl)"], 3.0, t0, False)
    return command, high_off, low_on


@pytest.mark.parametrize("name", ["c2_leg_short_dead", "c3_leg_clean"])
def test_turn_off_time_against_ngspice(name: str, tmp_path: Path) -> None:
    # The high side's turn-off from its command to V_GS at V_th (3 V), hard-switched into
    # the 5 A load: computed 74.7 ns; ngspice 67.5 ns (short dead time) and 69.7 ns
    # (clean), within ±20 %.
    command, high_off, low_on = _simulated_edge(name, tmp_path)
    result = check_nominal(OWN / "c2_leg_short_dead.cir")
    (finding,) = [f for f in result.findings if f.rule == RULE]
    computed = finding.values["t_off"].value
    assert high_off - command == pytest.approx(computed, rel=0.20)
    gap = low_on - high_off
    if name == "c3_leg_clean":
        assert gap > 0  # 200 ns of dead time: never both on
    else:
        # the warning's edge: both above threshold for a while, as the finding says
        assert gap < 0
        assert finding.values["dead_time"].value - computed == pytest.approx(gap, abs=20e-9)


def test_overlap_against_ngspice(tmp_path: Path) -> None:
    # 300 ns of commanded overlap; ngspice: both V_GS above 3 V for 332 ns (the high side's
    # discharge adds to it, the low side's rise to its threshold takes from it), ±20 %.
    result = check_nominal(OWN / "c1_leg_overlap.cir")
    (finding,) = [f for f in result.findings if f.rule == RULE]
    assert finding.severity is Severity.ERROR and finding.device == "vpl"
    text = (OWN / "c1_leg_overlap.cir").read_text(encoding="utf-8")
    waves = run_transient(text, ["v(pwmh)", "v(gh,sw)", "v(gl)", "i(vbus)"], tmp_path / "c1")
    t0 = 3 * 20e-6 + 8.5e-6
    low_on = _crossing(waves.time, waves["v(gl)"], 3.0, t0, False)
    high_off = _crossing(waves.time, waves["v(gh,sw)"], 3.0, t0, True)
    overlap = finding.values["command_overlap"].value
    assert overlap == pytest.approx(300e-9)
    assert high_off - low_on == pytest.approx(overlap, rel=0.20)
    # the bound holds: the bus delivers far less than V_bus/(R_hs + R_ls) in 300 ns
    peak = -min(waves.between("i(vbus)", t0, t0 + 1.5e-6))
    assert 50.0 < peak <= finding.values["shoot_through_bound"].value


def test_a_low_side_held_on_under_a_switching_high_side_overlaps_every_on_time() -> None:
    (finding,) = lint(CARD.bad.replace("PULSE(0 12 9.8u 10n 10n 14.5u 25u)", "DC 12"))
    assert finding.severity is Severity.ERROR
    assert finding.values["command_overlap"].value == pytest.approx(10.01e-6, rel=1e-3)


def test_an_inverting_level_shifter_is_read_through_its_inversion() -> None:
    # examples/README.md: the 48 V phase leg's high side is commanded active-low through
    # the NPN level shifter Q1; read as written (not inverted) its command would overlap
    # the low side's for most of the period.
    result = check_path(EXAMPLES / "lev48_phase_leg_npn_shifter.cir")
    (stage,) = [s for s in result.stages if s.floating]
    assert stage.control is not None and stage.control.inverting
    (partner,) = [r for r in stage.refresh if r.kind == "low-side switch"]
    assert partner.command is not None and stage.control.waveform is not None
    assert partner.command.waveform is not None
    timing = leg_timing(
        stage.control.waveform, True, partner.command.waveform, partner.command.inverting
    )
    assert isinstance(timing, LegTiming) and not timing.overlaps
    assert timing.lead == pytest.approx(500e-9) and timing.trail == pytest.approx(1e-6)
    wrong = leg_timing(
        stage.control.waveform, False, partner.command.waveform, partner.command.inverting
    )
    assert isinstance(wrong, LegTiming) and wrong.overlaps
    assert [f for f in result.findings if f.rule == RULE] == []


ACTIVE_LOW = """36 V half bridge whose driver's low-side input is active-low
VBUS bus 0 DC 36
VCC vcc 0 DC 12
VHIN hin 0 PULSE(0 5 0 10n 10n 10u 25u)
VLINB linb 0 PULSE(0 5 {td} 10n 10n {pw} 25u)
XU vcc boot hg sw hin linb 0 lg HBX
D1 vcc boot dfast
C1 boot sw 470n
RGH hg g 4.7
RGL lg gl 4.7
M1 bus g sw nfet
M2 sw gl 0 nfet
RL sw 0 20
.subckt HBX VCC VB HO VS HIN LINB COM LO
BH ho1 VS V = V(HIN,COM) > 2.5 ? V(VB,VS) : 0
RH ho1 HO 2
BL lo1 COM V = V(LINB,COM) < 2.5 ? V(VCC,COM) : 0
RL lo1 LO 2
.ends HBX
.model dfast D(IS=1n N=1.6 RS=0.2 BV=100 TT=20n)
.model nfet VDMOS(VTO=3.5 KP=20 Cgs=2n Cgdmax=1n)
.end
"""


def _with_driver(text: str, low_input: str) -> list[Finding]:
    from drivelint.ratings.parts import Part, PartsLibrary

    pins = {
        "vcc": "supply",
        "vb": "boot",
        "ho": "high_out",
        "vs": "switch",
        "hin": "high_in",
        "linb": low_input,
        "com": "ground",
        "lo": "low_out",
    }
    library = PartsLibrary({"hbx": Part("hbx", "driver", {"i_sink": 2.0}, pins, "test")})
    result = check_text(at_nominal(text), parts=library)
    assert not [d for d in result.diagnostics if d.severity.label == "error"], result.diagnostics
    return [f for f in result.findings if f.rule == RULE]


def test_an_active_low_driver_input_is_read_inverted() -> None:
    # The low-side input LINB commands the low side on while it is low: its pulse (high)
    # is the low side's off-window, from 24.7 us to 10.3 us into the next period: about
    # 300 ns around the high side's on-window (0 to 10 us), clean read as active-low ...
    clean = ACTIVE_LOW.replace("{td}", "24.7u").replace("{pw}", "10.59u")
    assert _with_driver(clean, "low_in_active_low") == []
    # ... and read as an active-high input its command would overlap the high side's.
    (wrong,) = _with_driver(clean, "low_in")
    assert wrong.severity is Severity.ERROR
    # An active-low command whose off-window is too short overlaps at the high side's
    # turn-off: LINB falls (the low side on) at 9.8 us, 210 ns before the high side's ends.
    early = ACTIVE_LOW.replace("{td}", "24.7u").replace("{pw}", "10.09u")
    (finding,) = _with_driver(early, "low_in_active_low")
    assert finding.severity is Severity.ERROR and finding.device == "vlinb"
    assert finding.values["command_overlap"].value == pytest.approx(210e-9, rel=1e-3)


def test_a_given_turn_off_time_is_used_as_given(tmp_path: Path) -> None:
    # parts key t_off (t_d(off) + t_f in this drive): 500 ns against the good card's
    # 290 ns dead time at the high side's turn-off
    text = CARD.good.replace("VBUS bus", "* drivelint: part M1 t_off=500n\nVBUS bus")
    (finding,) = lint(text)
    assert finding.severity is Severity.WARNING and finding.device == "vgl"
    assert finding.values["t_off"].value == pytest.approx(500e-9)
    assert finding.values["t_off"].origin.startswith("directive")
    assert finding.values["dead_time_shift"].value == pytest.approx(500e-9 - 290e-9)
    # the keys are validated like the rest
    from drivelint.ratings.parts import PartsError, load_parts

    bad = tmp_path / "parts.toml"
    bad.write_text('[part.DRV]\nkind = "driver"\ndead_time_min = "-5 ns"\n', encoding="utf-8")
    with pytest.raises(PartsError, match="dead_time_min"):
        load_parts(bad)
    bad.write_text('[part.Q]\nkind = "diode"\nt_off = "5 ns"\n', encoding="utf-8")
    with pytest.raises(PartsError, match="does not apply"):
        load_parts(bad)


def test_the_turn_off_path_is_the_drivers_not_a_resistor_beside_it() -> None:
    # R2 (10 kΩ gate to source) sorts before the driver XU1 among the gate's pull-downs;
    # taken as the turn-off path it gave a 51.8 µs turn-off and a false warning
    deck = OWN / "c4_driver_on_the_gate.cir"
    assert lint(deck.read_text(encoding="utf-8")) == []
    renamed = deck.read_text(encoding="utf-8").replace("R2 G1 SW 10k", "RZ G1 SW 10k")
    assert lint(renamed) == []
    # the driver's sink alone (no resistance given: 0 Ω) and the model's RG: a fast edge
    slow = renamed.replace("XU1 BST G1 SW", "RS G1 G1D 100k\nXU1 BST G1D SW")
    (finding,) = lint(slow)
    assert finding.values["r_off"].value == pytest.approx(100e3 + 1.0)
