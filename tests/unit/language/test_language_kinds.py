"""The kind table against the spec and against an independent dimension system (sympy)."""

import pytest
from sympy.physics.units import ampere, farad, henry, kelvin, ohm, volt, watt
from sympy.physics.units.systems.si import SI, dimsys_SI

from checker.errors import nearest
from checker.kinds import COMMON_PROPS, KINDS, VALUE_UNITS
from checker.units import Dim

# Base dimensions in the order of checker.units.Dim: kg, m, s, A, K.
_BASES = ("mass", "length", "time", "current", "temperature")
VALUE_DIMS = {name: dim for dim, name in VALUE_UNITS.items()}


def sympy_dim(expression) -> Dim:
    """Exponents of a sympy unit expression over the SI base dimensions, from sympy's own tables."""
    found = dimsys_SI.get_dimensional_dependencies(SI.get_dimensional_expr(expression))
    named = {str(dim.name): exponent for dim, exponent in found.items()}
    return tuple(int(named.get(base, 0)) for base in _BASES)


@pytest.mark.parametrize("unit_name, sympy_unit", [
    ("ohm", ohm), ("V", volt), ("A", ampere), ("W", watt), ("F", farad), ("H", henry)])
def test_language_value_units_match_sympy_dimensions(unit_name, sympy_unit):
    assert VALUE_DIMS[unit_name] == sympy_dim(sympy_unit)


@pytest.mark.parametrize("kind, prop, sympy_expression", [
    ("resistor", "tempco", 1 / kelvin), ("resistor", "rating", watt), ("resistor", "vmax", volt),
    ("inductor", "dcr", ohm), ("mosfet", "k", ampere / volt ** 2), ("mosfet", "lambda", 1 / volt),
    ("mosfet", "vth", volt), ("diode", "isat", ampere), ("regulator", "iq", ampere),
    ("switch", "ron", ohm), ("zener", "rz", ohm), ("opamp", "swing", volt), ("bjt", "pmax", watt),
])
def test_language_property_dimensions_match_sympy(kind, prop, sympy_expression):
    assert KINDS[kind].prop(prop).dim == sympy_dim(sympy_expression)


def test_language_common_properties():
    assert COMMON_PROPS["theta_ja"].dim == sympy_dim(kelvin / watt)
    assert COMMON_PROPS["tj_max"].temperature
    assert all(KINDS[k].prop("theta_ja") is not None for k in KINDS)


def test_language_table_covers_the_spec_kinds():
    # LANGUAGE.md, "Part kinds (core)".
    assert set(KINDS) == {"resistor", "capacitor", "inductor", "source", "load", "switch", "diode", "led",
                          "zener", "bjt", "mosfet", "regulator", "converter", "opamp"}
    assert KINDS["switch"].flags == ("open", "closed")
    assert KINDS["bjt"].flags == ("npn", "pnp") and KINDS["mosfet"].flags == ("nmos", "pmos")
    assert KINDS["led"].prop("vf").at == KINDS["zener"].prop("vz").at == VALUE_DIMS["A"]



def test_language_nearest_name():
    assert nearest("resistr", KINDS) == "resistor"
    assert nearest("zzz", KINDS) is None
