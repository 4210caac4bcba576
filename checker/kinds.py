"""The table of part kinds: pins, primary value, flag words and properties of each.

The language validates every part against this table; devices, limits and reports
look kinds up here too, so a new kind is one row here plus one device class.
Dimensions are exponents over SI base units (see `checker.units`); temperatures
are kelvin. The table is documented in docs/language.md, "Part kinds".
"""

from __future__ import annotations

from dataclasses import dataclass, field
from typing import Callable, Mapping

from checker.errors import DesignError, Location
from checker.units import (
    AMPERE, DIMENSIONLESS, FARAD, HENRY, KELVIN, OHM, VOLT, WATT, Dim, dim_div, dim_pow,
)

TWO_TERMINAL = ("from", "to")
PER_KELVIN: Dim = dim_pow(KELVIN, -1)
KELVIN_PER_WATT: Dim = dim_div(KELVIN, WATT)
PER_VOLT: Dim = dim_pow(VOLT, -1)
AMPERE_PER_VOLT_SQUARED: Dim = dim_div(AMPERE, dim_pow(VOLT, 2))

# The unit name a primary value is reported in (Part.value_unit), by its dimension.
VALUE_UNITS: dict[Dim, str] = {
    OHM: "ohm", VOLT: "V", AMPERE: "A", WATT: "W", FARAD: "F", HENRY: "H",
}


@dataclass(frozen=True)
class Prop:
    """A property: its dimension and, for `vf = 2.0 V at 10 mA`, the test condition's.

    `temperature` marks absolute temperatures (written in degC or K, stored in K).
    `allowed` tells the values (SI) the property may take, and `rule` says which in words:
    a value outside them would not fail a model but silently flatter a limit.
    """

    dim: Dim
    at: Dim | None = None
    temperature: bool = False
    allowed: Callable[[float], bool] | None = None
    rule: str = ""
    hint: str = ""  # a note beside the error of a value outside `allowed`


@dataclass(frozen=True)
class Kind:
    """One row of the table.

    `values`: the dimensions the primary value may have (empty: the kind takes none).
    `flags`: words of which exactly one must be given (empty: none allowed).
    `required`: properties that must be given; `exclusive`: pairs not given together.
    """

    name: str
    pins: tuple[str, ...]
    values: tuple[Dim, ...] = ()
    props: Mapping[str, Prop] = field(default_factory=dict)
    flags: tuple[str, ...] = ()
    required: tuple[str, ...] = ()
    exclusive: tuple[tuple[str, str], ...] = ()

    @property
    def two_terminal(self) -> bool:
        return self.pins == TWO_TERMINAL

    def prop(self, name: str) -> Prop | None:
        """The property `name` of this kind, or one every part may carry."""
        return self.props.get(name) or COMMON_PROPS.get(name)

    def prop_names(self) -> tuple[str, ...]:
        return tuple(self.props) + tuple(COMMON_PROPS) + ("tag",)


# Every part may carry these (docs/language.md); `tag = WORD` is handled apart, as a word.
COMMON_PROPS: dict[str, Prop] = {
    "theta_ja": Prop(KELVIN_PER_WATT, allowed=lambda value: value > 0.0,
                     rule="is above 0 K/W: a junction is never colder than the air around it"),
    "tj_max": Prop(KELVIN, temperature=True),
}

# Checked in every mode, not only when tolerance analysis reads it: a band reaching 100 % would let
# the value reach zero (a resistor into a short), which no part's tolerance means.
_TOL = Prop(DIMENSIONLESS, allowed=lambda value: 0.0 <= value < 1.0,
            rule="is from 0 % to below 100 %: a tolerance is the half-width of a band around the value",
            hint="a bare number is a fraction (`tol = 5` is 500 %); write a percentage with `%`: `tol = 5%`")
_DIODE_PROPS = {
    "isat": Prop(AMPERE), "ideality": Prop(DIMENSIONLESS), "rseries": Prop(OHM),
    "vf": Prop(VOLT, at=AMPERE), "vmax": Prop(VOLT), "imax": Prop(AMPERE),
}

# Transistor ratings: `imax` is the collector (bjt) or drain (mosfet) current rating, as `imax`
# is the current rating of every kind; voltage ratings between two pins are named after the
# pair as `tj_max` is after its quantity (`vce_max`, `vds_max`, `vgs_max`), magnitudes in V.
KINDS: dict[str, Kind] = {k.name: k for k in (
    Kind("resistor", TWO_TERMINAL, (OHM,),
         {"tol": _TOL, "tempco": Prop(PER_KELVIN), "rating": Prop(WATT), "vmax": Prop(VOLT)}),
    Kind("capacitor", TWO_TERMINAL, (FARAD,), {"tol": _TOL, "vmax": Prop(VOLT)}),
    Kind("inductor", TWO_TERMINAL, (HENRY,), {"dcr": Prop(OHM), "imax": Prop(AMPERE)}),
    Kind("source", TWO_TERMINAL, (VOLT, AMPERE), {"tol": _TOL}),
    Kind("load", TWO_TERMINAL, (AMPERE, WATT, OHM), {"tol": _TOL}),
    Kind("switch", TWO_TERMINAL, (), {"ron": Prop(OHM)}, flags=("open", "closed")),
    Kind("diode", TWO_TERMINAL, (), _DIODE_PROPS, exclusive=(("isat", "vf"),)),
    Kind("led", TWO_TERMINAL, (), _DIODE_PROPS, exclusive=(("isat", "vf"),)),
    Kind("zener", TWO_TERMINAL, (),
         {**_DIODE_PROPS, "vz": Prop(VOLT, at=AMPERE), "rz": Prop(OHM)},
         required=("vz",), exclusive=(("isat", "vf"),)),
    Kind("bjt", ("c", "b", "e"), (),
         {"beta": Prop(DIMENSIONLESS), "isat": Prop(AMPERE), "imax": Prop(AMPERE), "pmax": Prop(WATT),
          "vce_max": Prop(VOLT)},
         flags=("npn", "pnp")),
    Kind("mosfet", ("d", "g", "s"), (),
         {"vth": Prop(VOLT), "k": Prop(AMPERE_PER_VOLT_SQUARED), "lambda": Prop(PER_VOLT),
          "imax": Prop(AMPERE), "pmax": Prop(WATT), "vds_max": Prop(VOLT), "vgs_max": Prop(VOLT)},
         flags=("nmos", "pmos")),
    Kind("regulator", ("in", "out", "gnd"), (),
         {"vout": Prop(VOLT), "dropout": Prop(VOLT), "iq": Prop(AMPERE), "tol": _TOL},
         required=("vout",)),
    Kind("converter", ("in", "out", "gnd"), (),
         {"vout": Prop(VOLT), "efficiency": Prop(DIMENSIONLESS), "iq": Prop(AMPERE)},
         required=("vout",)),
    Kind("opamp", ("plus", "minus", "out", "rail_hi", "rail_lo"), (),
         {"gain": Prop(DIMENSIONLESS), "swing": Prop(VOLT)}),
)}



def check_range(kind: Kind, name: str, value: float, location: Location | None) -> None:
    """DesignError at `location` when `value` (SI) lies outside what property `name` of `kind` allows."""
    spec = kind.prop(name)
    if spec is not None and spec.allowed is not None and not spec.allowed(value):
        raise DesignError(f"`{name}` {spec.rule}", location, (spec.hint,) if spec.hint else ())
