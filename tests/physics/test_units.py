"""The float/quantity helpers, and the rule that physics modules never import pint."""

# Physics functions are typed with float aliases but are called here with pint quantities
# on purpose, so attribute and argument checks on those calls are switched off.
# mypy: disable-error-code="attr-defined, arg-type, type-arg"

from __future__ import annotations

import ast
import math
from pathlib import Path

import pint
import pytest

from drivelint.physics._units import _coerce, _infinite, _ratio, _unit_of, _zero_like

PHYSICS = Path(__file__).resolve().parents[2] / "drivelint" / "physics"


def test_ratio_of_floats_and_of_quantities(ureg: pint.UnitRegistry) -> None:
    assert _ratio(3.0, 4.0) == 0.75
    # 1 µs over 2 ms is 5e-4 whatever prefixes the quantities carry.
    value = _ratio(1 * ureg.us, 2 * ureg.ms)
    assert isinstance(value, float)
    assert value == pytest.approx(5e-4, rel=1e-12)


def test_ratio_refuses_mixed_dimensions(ureg: pint.UnitRegistry) -> None:
    # This is what catches a formula that hands a dimensioned value to exp() or log().
    with pytest.raises(pint.DimensionalityError):
        _ratio(1 * ureg.V, 1 * ureg.A)


def test_unit_zero_and_infinity_keep_dimensions(ureg: pint.UnitRegistry) -> None:
    assert _unit_of(5.0) == 1.0
    assert _unit_of(5 * ureg.mV) == 1 * ureg.mV
    assert _zero_like(3 * ureg.nC).check("[charge]")
    assert _zero_like(3 * ureg.nC).magnitude == 0
    forever = _infinite(2 * ureg.uC, 0 * ureg.A)
    assert forever.check("[time]") and math.isinf(forever.magnitude)
    assert _infinite(2.0, 0.0) == math.inf


def test_coerce_attaches_or_converts(ureg: pint.UnitRegistry) -> None:
    assert _coerce(None, 300.15, "K", 1.0) == 300.15
    attached = _coerce(None, 300.15, "K", 1 * ureg.A)
    assert attached.check("[temperature]") and attached.to("K").magnitude == pytest.approx(300.15)
    # 25 °C is 298.15 K (SI definition of the Celsius scale).
    converted = _coerce(ureg.Quantity(25, "degC"), 0.0, "K", 1.0)
    assert converted.to("K").magnitude == pytest.approx(298.15)


@pytest.mark.parametrize("module", sorted(PHYSICS.glob("*.py")), ids=lambda p: p.name)
def test_physics_modules_do_not_import_pint(module: Path) -> None:
    # The command line calls these with floats; importing pint there would slow start-up.
    tree = ast.parse(module.read_text(), filename=str(module))
    imported: set[str] = set()
    for node in ast.walk(tree):
        if isinstance(node, ast.Import):
            imported.update(alias.name.split(".")[0] for alias in node.names)
        elif isinstance(node, ast.ImportFrom) and node.module:
            imported.add(node.module.split(".")[0])
    assert "pint" not in imported
    assert imported <= {
        "__future__",
        "math",
        "dataclasses",
        "typing",
        "collections",
        "types",
        "functools",  # a cache of pure results (lru_cache), no third-party import
        "drivelint",
    }
