"""Independent sources and loads.

Sign convention (docs/models.md): a voltage source fixes v(from) - v(to); a current
(source or load) is the current through the part from `from` to `to`.
"""

from __future__ import annotations

from typing import Sequence

import numpy as np

from checker.design import Part
from checker.devices.base import Edges, EdgeKind, LinearTwoTerminal, NonlinearStamp, Role
from checker.devices.power import V_MIN, constant_power
from checker.devices.smooth import two_terminal_stamp
from checker.errors import DesignError
from checker.units import format_value


class Source(LinearTwoTerminal):
    """A voltage source (value in V) or a current source (value in A)."""

    kind = "source"
    rhs_units = frozenset({"V", "A"})

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
    """A consumer drawing a fixed current (A), behaving as a resistance (Ω), or drawing a
    constant power (W).

    A constant-power load draws I = P / V from `from` to `to`; below V_MIN (0.1 V) it
    continues along the tangent of P / V (see `checker.devices.power.constant_power`),
    and an operating point found there is reported as a supply that cannot deliver
    the power. Such loads make the netlist nonlinear; they stand aside (draw nothing)
    in the linear solve that gives Newton-Raphson its first guess, so that it finds
    the high-voltage root of P = V I, the one a real supply settles at.
    """

    kind = "load"
    rhs_units = frozenset({"A"})

    def __init__(self, parts: Sequence[Part], nodes: np.ndarray, first_branch: int, ambient: float):
        super().__init__(parts, nodes, first_branch, ambient)
        self.constant = np.array([part.value_unit == "W" for part in self.parts], dtype=bool)
        self.power = np.where(self.constant, self.value, 0.0)[self.constant]
        self.nonlinear = bool(self.constant.any())

    @classmethod
    def describe(cls, part: Part) -> str:
        what = {"A": "current load", "W": "constant-power load"}.get(part.value_unit or "", "load")
        return f"the {what} {part.name}"

    def elements(self) -> tuple[np.ndarray, np.ndarray]:
        roles, values = zip(*(self._element(part) for part in self.parts))
        return np.array(roles), np.array(values, dtype=float)

    @staticmethod
    def _element(part: Part) -> tuple[Role, float]:
        if part.value is None or part.value_unit not in ("A", "ohm", "W"):
            raise DesignError(f"load {part.name} needs a current (A), a power (W) or a resistance (Ω)",
                              part.location)
        if part.value_unit == "A":
            return Role.CURRENT, part.value
        if part.value_unit == "W":
            if not part.value >= 0:
                raise DesignError(f"load {part.name} is {format_value(part.value, 'W')}: a load's power must "
                                  f"not be negative (a part that delivers power is a source)", part.location)
            return Role.OPEN, part.value  # the nonlinear law below carries it
        if not part.value > 0:
            raise DesignError(f"load {part.name} is {format_value(part.value, 'Ω')}: "
                              f"a resistance must be above zero", part.location)
        return Role.CONDUCTANCE, 1.0 / part.value

    def edges(self) -> Edges:
        """A constant-power load needs its current from somewhere, like a current source."""
        linear = super().edges()
        rows = np.flatnonzero(self.constant)
        return Edges(np.concatenate([linear.a, self.nodes[rows, 0]]), np.concatenate([linear.b, self.nodes[rows, 1]]),
                     np.concatenate([linear.kind, np.full(rows.size, EdgeKind.CURRENT)]),
                     np.concatenate([linear.part, rows]))

    def _law(self, x: np.ndarray) -> tuple[np.ndarray, np.ndarray, np.ndarray]:
        """Voltage (V), current from -> to (A) and slope (S) of each constant-power part."""
        a, b = self.nodes[self.constant, 0], self.nodes[self.constant, 1]
        v = x[a] - x[b]
        i, g, _ = constant_power(self.scale ** 2 * self.power, v, self.scale * V_MIN)
        return v, i, g

    def evaluate(self, x: np.ndarray) -> NonlinearStamp:
        _, i, g = self._law(x)
        return two_terminal_stamp(self.nodes[self.constant, 0], self.nodes[self.constant, 1], i, g)

    def first_guess(self, x: np.ndarray) -> NonlinearStamp:
        _, i, _ = self._law(x)
        zero = np.zeros_like(i)
        return two_terminal_stamp(self.nodes[self.constant, 0], self.nodes[self.constant, 1], zero, zero)

    def pin_currents(self, x: np.ndarray) -> np.ndarray:
        currents = super().pin_currents(x)
        if self.nonlinear:
            _, i, _ = self._law(x)
            currents[self.constant] = np.column_stack([i, -i])
        return currents

    def trouble(self, x: np.ndarray) -> list[tuple[Part, str]]:
        v, _, _ = self._law(x)
        rows = np.flatnonzero(self.constant)
        return [(self.parts[rows[k]], f"{self.describe(self.parts[rows[k]])} cannot draw its "
                                      f"{format_value(self.power[k], 'W')}: the voltage across it would collapse "
                                      f"to {format_value(v[k], 'V')}, so the supply cannot deliver that power")
                for k in np.flatnonzero((v < V_MIN) & (self.power > 0))]
