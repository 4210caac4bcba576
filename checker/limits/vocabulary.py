"""What names in a limit may reach: part kinds and their properties (from `checker.kinds`), measures, functions.

A limit reads nothing but these: no attribute of any Python object is reachable
from a rule file. Part properties are stored by the elaborator as SI floats without
a dimension, so their dimensions come from the kind table.
"""

from __future__ import annotations

from checker.kinds import COMMON_PROPS, KINDS as _TABLE
from checker.units import Dim

KINDS = tuple(_TABLE)
PROPERTIES = tuple(sorted({name for kind in _TABLE.values() for name in kind.props} | set(COMMON_PROPS)))
PRIMARY = "value"  # `R1.value`: the part's primary value, in the unit its `value_unit` names

MEASURES = ("voltage", "current", "power", "junction_temp")
FUNCTIONS = ("abs", "min", "max", "sqrt", "preferred", "declared")
# Functions a check's split into sides (checker.limits.sides) takes whole, as it takes a measure:
# `preferred(X, TOL)` snaps X to the IEC 60063 series of tolerance TOL (checker.remedies.series), a step
# function; `declared(X)` is X at the declared values (no case override, no tolerance): a constant.
WHOLE_FUNCTIONS = ("preferred", "declared")


def property_type(kind: str, name: str) -> tuple[Dim, bool] | None:
    """Dimension and absolute-temperature flag of property `name` on a part of `kind`; None if it has none."""
    table = _TABLE.get(kind)
    prop = table.prop(name) if table is not None else COMMON_PROPS.get(name)
    return None if prop is None else (prop.dim, prop.temperature)
