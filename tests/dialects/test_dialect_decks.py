"""One small deck per dialect construct, each read against its expected reading.

Each ``NN_name.cir`` here states in its header what drivelint must read from it, and
``NN_name.expect.json`` holds the same as data: device kinds, values, pins, parameters,
behavioural readings (what an expression reads and its value at given voltages),
waveforms, rails, the diagnostics it must give and what is missing. The numbers are
worked out by hand from the deck (the header says how), not taken from drivelint.

``"ngspice": true`` marks the decks that ngspice 39 reads without a complaint
(``ngspice -b``); those also join the ngspice cross-check in
``tests/circuit/test_ngspice_crosscheck.py``. The others use a construct ngspice does not
have (PWL FILE=, .global_param, the limit/uramp/u functions, "TC a b", ...).
"""

from __future__ import annotations

import json
import math
import shutil
import subprocess
from pathlib import Path
from typing import Any

import pytest

from drivelint.circuit.model import Circuit
from drivelint.diagnostics import Severity
from drivelint.pipeline import LoadOptions, load_circuit

HERE = Path(__file__).resolve().parent
DECKS = sorted(HERE.glob("*.cir"))
NGSPICE = shutil.which("ngspice")


def expected(deck: Path) -> dict[str, Any]:
    data: dict[str, Any] = json.loads(deck.with_suffix(".expect.json").read_text())
    return data


def load(deck: Path) -> Circuit:
    return load_circuit(deck, LoadOptions(root=HERE))


def close(actual: float | None, wanted: float) -> bool:
    return actual is not None and math.isclose(actual, wanted, rel_tol=1e-9, abs_tol=1e-18)


def test_every_deck_has_its_expected_reading() -> None:
    assert len(DECKS) >= 19
    for deck in DECKS:
        assert deck.with_suffix(".expect.json").is_file(), deck.name


@pytest.mark.parametrize("deck", DECKS, ids=lambda p: p.stem)
def test_deck_reads_as_expected(deck: Path) -> None:
    want = expected(deck)
    circuit = load(deck)
    errors = [d.render() for d in circuit.diagnostics if d.severity is Severity.ERROR]
    assert errors == []
    warnings = [d.message for d in circuit.diagnostics if d.severity is Severity.WARNING]
    for text in want.get("warnings", ()):
        assert any(text in w for w in warnings), (text, warnings)
    if not want.get("warnings") and not want.get("partial"):
        assert warnings == []
    notes = [d.message for d in circuit.diagnostics if d.severity is Severity.NOTE]
    for text in want.get("notes", ()):
        assert any(text in n for n in notes), (text, notes)
    if "title" in want:
        assert circuit.title == want["title"]
    for name, fields in want.get("devices", {}).items():
        device = circuit.devices[name]
        if "kind" in fields:
            assert device.kind == fields["kind"], name
        if "value" in fields:
            assert close(device.value, fields["value"]), (name, device.value)
        if "model" in fields:
            assert device.model_name == fields["model"], name
        if "pins" in fields:
            assert dict(device.pins) == fields["pins"], name
        for key, value in fields.get("params", {}).items():
            assert close(device.params.get(key), value), (name, key, device.params)
    for name, fields in want.get("behaviour", {}).items():
        behaviour = circuit.devices[name].behaviour
        assert behaviour is not None, name
        if "reads" in fields:
            assert sorted(behaviour.reads) == fields["reads"], (name, behaviour.reads)
        if "currents" in fields:
            assert list(behaviour.reads_currents) == fields["currents"], name
        if "dynamic" in fields:
            assert behaviour.dynamic is fields["dynamic"], name
        if "value_at_0" in fields:
            assert close(behaviour.value_at_zero, fields["value_at_0"]), name
        for case in fields.get("at", ()):
            voltages, value = case[0], case[1]
            currents = case[2] if len(case) > 2 else {}
            time = case[3] if len(case) > 3 else 0.0
            assert close(behaviour.evaluate(voltages, currents, time), value), (name, case)
    for name, fields in want.get("waveforms", {}).items():
        waveform = circuit.devices[name].waveform
        assert waveform is not None, name
        record = waveform.to_json()
        for key, value in fields.items():
            if key == "points":
                assert [list(p) for p in waveform.points] == value, name
            elif isinstance(value, str):
                assert record[key] == value, (name, key)
            else:
                assert close(record[key], value), (name, key, record[key])
    for name, params in want.get("models", {}).items():
        model = circuit.devices[name].model
        assert model is not None
        for key, value in params.items():
            assert close(model.params[key], value), (name, key)
    for net, volts in want.get("rails", {}).items():
        assert close(circuit.rails[net], volts), net
    assert circuit.partial is bool(want.get("partial"))
    assert sorted([m.kind, m.name] for m in circuit.missing) == sorted(want.get("missing", []))
    for name, ports in want.get("opaque", {}).items():
        instance = circuit.instances[name]
        assert instance.opaque and dict(instance.ports) == ports


def test_a_library_checked_on_its_own_reads_its_first_card() -> None:
    # The first line of a model library is its .SUBCKT card, not a title: read as a card,
    # with a note saying so (ngspice would drop it as a title and the .ENDS with it).
    circuit = load(HERE / "inc" / "fet_library.lib")
    assert [d.severity for d in circuit.diagnostics] == [Severity.NOTE, Severity.NOTE]
    assert "first line is a '.subckt' card" in circuit.diagnostics[0].message
    assert circuit.diagnostics[1].code == "library"  # defined, none placed: nothing to check
    assert circuit.title == ""


def test_a_partial_deck_checks_what_does_not_depend_on_what_is_missing() -> None:
    from drivelint.pipeline import check_path
    from drivelint.report.status import file_status

    result = check_path(HERE / "19_partial.cir")
    assert file_status(result) == "partial"
    not_checked = [d for d in result.diagnostics if d.code == "not-checked"]
    # The high side is driven by the undefined driver block (and refreshed by the
    # low-side switch whose model is missing): not checked, and said why.
    (stage,) = not_checked
    assert "stage of m_hs not checked: needs" in stage.message
    assert "subckt 'gate_driver_a'" in stage.message and "model 'nfet_missing'" in stage.message
    assert result.findings == ()


def test_stages_away_from_what_is_missing_are_still_checked(tmp_path: Path) -> None:
    # A bundled example with an undefined block on nets of its own added: the drive
    # stage does not touch it, so it is checked as before and the file is partial.
    from drivelint.pipeline import check_text
    from drivelint.report.status import file_status

    example = HERE.parent.parent / "examples" / "tool36_leg_totem_pole.cir"
    text = example.read_text()
    whole = check_text(text, "tool36.cir")
    lines = text.splitlines()
    end = max(i for i, line in enumerate(lines) if line.strip().lower() == ".end")
    lines.insert(end, "X_FAN fan_a fan_b FAN_CONTROLLER_A")
    part = check_text("\n".join(lines) + "\n", "tool36.cir")
    assert file_status(part) == "partial" and file_status(whole) == "findings"
    assert [f.rule for f in part.findings] == [f.rule for f in whole.findings] != []
    assert not [d for d in part.diagnostics if d.code == "not-checked"]


@pytest.mark.skipif(NGSPICE is None, reason="ngspice is not installed; cannot confirm")
@pytest.mark.parametrize("deck", DECKS, ids=lambda p: p.stem)
def test_the_ngspice_mark_is_true(deck: Path, tmp_path: Path) -> None:
    # The "ngspice" flag of each expectation is checked against ngspice itself.
    shutil.copytree(HERE, tmp_path / "decks")
    assert NGSPICE is not None
    run = subprocess.run(
        [NGSPICE, "-b", deck.name],
        cwd=tmp_path / "decks",
        capture_output=True,
        text=True,
        timeout=30,
    )
    output = (run.stdout + run.stderr).lower()
    complained = any(word in output for word in ("error", "warning", "undefined parameter"))
    assert (not complained) is expected(deck)["ngspice"], output
