"""Independent sources and loads.

Sign convention (LANGUAGE.md): a voltage source fixes v(from) - v(to); a current
(source or load) is the current through the part from `from` to `to`.
"""

from __future__ import annotations

import numpy as np

from checker.design import Part
from checker.devices.base import LinearTwoTerminal, Role
from checker.errors import DesignError
from checker.units import format_value


class Source(LinearTwoTerminal):
    """A voltage source (value in V) or a current source (value in A)."""

    kind = "source"

    @classmethod
    def describe(cls, part: Part) -> str:
        what = "current source" if part.value_unit == "A" else "voltage source"
        return f"the {what} {part.name}"

    def elements(self) -> tuple[np.ndarray, np.ndarray]:
        roles = {"V": Role.VOLTAGE, "A": Role.CURRENT}
        for part in self.parts:
            if part.value is None or part.value_unit not in roles:
                raise DesignError(f"source {part.name} needs a value in V (a voltage source) "
                                  f"or in A (a current source)", part.location)
        role = np.array([roles[part.value_unit] for part in self.parts])
        return role, np.array([part.value for part in self.parts], dtype=float)


class Load(LinearTwoTerminal):
    """A consumer drawing a fixed current (A) or behaving as a resistance (Ω).

    Constant-power loads (W) are nonlinear and not handled here yet.
    """

    kind = "load"

    @classmethod
    def describe(cls, part: Part) -> str:
        what = "current load" if part.value_unit == "A" else "load"
        return f"the {what} {part.name}"

    def elements(self) -> tuple[np.ndarray, np.ndarray]:
        roles, values = zip(*(self._element(part) for part in self.parts))
        return np.array(roles), np.array(values, dtype=float)

    @staticmethod
    def _element(part: Part) -> tuple[Role, float]:
        if part.value_unit == "W":
            raise DesignError(f"part kind `load` with a power in W (load {part.name}) "
                              f"is not yet supported by the solver", part.location)
        if part.value is None or part.value_unit not in ("A", "ohm"):
            raise DesignError(f"load {part.name} needs a current (A), a power (W) or a resistance (Ω)",
                              part.location)
        if part.value_unit == "A":
            return Role.CURRENT, part.value
        if not part.value > 0:
            raise DesignError(f"load {part.name} is {format_value(part.value, 'Ω')}: "
                              f"a resistance must be above zero", part.location)
        return Role.CONDUCTANCE, 1.0 / part.value
