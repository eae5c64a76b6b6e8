"""Sums and differences in findings' derivations add up as they are printed.

A reviewer checks a derivation by hand: ``ΔV_allowed = 11.53 V − 10 V = 1.53 V`` must read
right, never ``12 V − 10 V = 1.98 V``. Every chain of quantities joined by + and − and ending
in ``= result`` in a derivation of a bundled example or an outside deck is summed as printed
and compared with the printed result (rounded to the result's own last digit).
"""

from __future__ import annotations

import re
from decimal import Decimal
from pathlib import Path

import pytest

from drivelint.checks.printed import at, resolution, sum_line
from drivelint.pipeline import check_path

ROOT = Path(__file__).resolve().parents[2]
DECKS = sorted((ROOT / "examples").glob("*.cir")) + sorted(
    (ROOT / "tests" / "checks" / "outside").glob("*.cir")
)
_PREFIX = {"f": -15, "p": -12, "n": -9, "u": -6, "µ": -6, "m": -3, "": 0, "k": 3, "M": 6, "G": 9}
_QUANTITY = r"\(?[−-]?\d+(?:\.\d+)? [fpnuµmkMG]?(?:V|C|A|Ω|F|s)\)?"
_CHAIN = re.compile(rf"({_QUANTITY}(?: [+−] {_QUANTITY})+) = ({_QUANTITY})")
_PARTS = re.compile(r"\(?([−-]?)(\d+(?:\.\d+)?) ([fpnuµmkMG]?)(V|C|A|Ω|F|s)\)?")


def _quantity(text: str) -> tuple[Decimal, str, int]:
    """(value in SI, unit, exponent of its last printed digit in SI)."""
    match = _PARTS.fullmatch(text.strip())
    assert match, text
    sign, digits, prefix, unit = match.groups()
    value = Decimal(digits).scaleb(_PREFIX[prefix])
    places = len(digits.split(".")[1]) if "." in digits else 0
    return (-value if sign else value), unit, _PREFIX[prefix] - places


def _chains(line: str) -> list[tuple[list[tuple[int, str]], str]]:
    out = []
    for match in _CHAIN.finditer(line):
        body, result = match.group(1), match.group(2)
        pieces = re.split(r" ([+−]) ", body)
        terms = [(1, pieces[0])]
        for sign, term in zip(pieces[1::2], pieces[2::2], strict=True):
            terms.append((1 if sign == "+" else -1, term))
        out.append((terms, result))
    return out


def _derivation_lines() -> list[tuple[str, str]]:
    lines = []
    for deck in DECKS:
        for finding in check_path(deck).findings:
            for line in finding.derivation:
                if _chains(line):
                    lines.append((f"{deck.name}:{finding.rule}:{finding.device}", line))
    return lines


LINES = _derivation_lines()


def test_there_are_sums_to_check() -> None:
    assert len(LINES) >= 20


@pytest.mark.parametrize(("where", "line"), LINES, ids=[w for w, _ in LINES])
def test_a_derivation_adds_up_as_printed(where: str, line: str) -> None:
    for terms, result in _chains(line):
        values = [(sign, _quantity(term)) for sign, term in terms]
        units = {unit for _, (_, unit, _) in values}
        total, unit, exponent = _quantity(result)
        if units != {unit}:
            continue  # not one quantity's sum
        summed = sum((Decimal(sign) * value for sign, (value, _, _) in values), Decimal(0))
        assert summed.quantize(Decimal(1).scaleb(exponent)) == total, (where, line)


def test_the_reported_mistake_reads_right_now() -> None:
    # 11.98 V − 10 V is 1.98 V: printed to three digits, 12 V − 10 V = 1.98 V did not add up
    assert sum_line([(1, 11.98), (-1, 10.0)], "V") == "11.98 V − 10 V = 1.98 V"
    assert sum_line([(1, 12.0), (-1, 0.0204), (-1, 0.0)], "V", 0.01) == (
        "12 V − 20.4 mV − 0 V = 11.98 V"
    )
    assert sum_line([(1, 45.0), (1, 11.3), (-1, -33.0)], "V") == "45 V + 11.3 V − (−33 V) = 89.3 V"
    assert at(11.5312, "V", resolution([(1, 11.5312), (-1, 10.0)])) == "11.53 V"
