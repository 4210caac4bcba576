"""What names in a limit may reach: part kinds, part properties with their dimensions, functions.

A limit reads nothing but these: no attribute of any Python object is reachable
from a rule file. Part properties are stored by the elaborator as SI floats without
a dimension, so their dimensions are listed here (LANGUAGE.md, "Part kinds").
"""

from __future__ import annotations

from checker.units import AMPERE, DIMENSIONLESS, KELVIN, OHM, VOLT, WATT, Dim, dim_div, dim_pow

PER_KELVIN: Dim = dim_div(DIMENSIONLESS, KELVIN)
PER_VOLT: Dim = dim_div(DIMENSIONLESS, VOLT)
KELVIN_PER_WATT: Dim = dim_div(KELVIN, WATT)
AMPERE_PER_VOLT2: Dim = dim_div(AMPERE, dim_pow(VOLT, 2))

KINDS = ("resistor", "capacitor", "inductor", "source", "load", "switch", "diode", "led", "zener",
         "bjt", "mosfet", "regulator", "converter", "opamp")

# property -> (dimension, absolute temperature?)
PROPERTIES: dict[str, tuple[Dim, bool]] = {
    "tol": (DIMENSIONLESS, False), "tempco": (PER_KELVIN, False), "rating": (WATT, False),
    "vmax": (VOLT, False), "imax": (AMPERE, False), "pmax": (WATT, False), "dcr": (OHM, False),
    "ron": (OHM, False), "isat": (AMPERE, False), "ideality": (DIMENSIONLESS, False),
    "rseries": (OHM, False), "vf": (VOLT, False), "vz": (VOLT, False), "rz": (OHM, False),
    "beta": (DIMENSIONLESS, False), "vth": (VOLT, False), "k": (AMPERE_PER_VOLT2, False),
    "lambda": (PER_VOLT, False), "vout": (VOLT, False), "dropout": (VOLT, False),
    "iq": (AMPERE, False), "efficiency": (DIMENSIONLESS, False), "gain": (DIMENSIONLESS, False),
    "swing": (VOLT, False), "theta_ja": (KELVIN_PER_WATT, False), "tj_max": (KELVIN, True),
}
PRIMARY = "value"  # `R1.value`: the part's primary value, in the unit its `value_unit` names

MEASURES = ("voltage", "current", "power", "junction_temp")
FUNCTIONS = ("abs", "min", "max", "sqrt")
