"""Resistors, capacitors, inductors and switches at DC."""

from __future__ import annotations

import numpy as np

from checker.design import Part
from checker.devices.base import LinearTwoTerminal, Role, prop_array, reject, value_array
from checker.errors import DesignError
from checker.units import format_value

T_REFERENCE = 298.15  # K: 25 degC, the temperature device parameters are specified at (docs/models.md)


def _conductance_or_short(resistance: np.ndarray) -> tuple[np.ndarray, np.ndarray]:
    """A resistance of 0 is an exact short (a 0 V branch), anything above a conductance."""
    short = resistance == 0.0
    role = np.where(short, Role.VOLTAGE, Role.CONDUCTANCE)
    value = np.where(short, 0.0, 1.0 / np.where(short, 1.0, resistance))
    return role, value


class Resistor(LinearTwoTerminal):
    """A resistor with a linear temperature coefficient about 25 degC.

    R(T) = R25 * (1 + tempco * (T - 298.15 K)), the common definition of the
    temperature coefficient of resistance (IEC 60115-1, fixed resistors for use in
    electronic equipment; clause not seen). `tempco` is a fraction per kelvin.
    """

    kind = "resistor"

    def elements(self) -> tuple[np.ndarray, np.ndarray]:
        nominal = value_array(self.parts)
        reject(np.isnan(nominal), self.parts, lambda p: f"resistor {p.name} has no resistance")
        reject(~(nominal > 0), self.parts,
               lambda p: f"resistor {p.name} is {format_value(p.value, 'Ω')}: a resistance must be above zero")
        resistance = nominal * (1.0 + prop_array(self.parts, "tempco", 0.0) * (self.ambient - T_REFERENCE))
        reject(~(resistance > 0), self.parts,
               lambda p: f"resistor {p.name}: its tempco makes the resistance zero or negative "
                         f"at the ambient of {self.ambient - 273.15:.1f} °C")
        return np.full(len(self.parts), Role.CONDUCTANCE), 1.0 / resistance


class Capacitor(LinearTwoTerminal):
    """Open at DC: no current flows once charged."""

    kind = "capacitor"

    def elements(self) -> tuple[np.ndarray, np.ndarray]:
        return np.full(len(self.parts), Role.OPEN), np.zeros(len(self.parts))


class Inductor(LinearTwoTerminal):
    """A short at DC, or its winding resistance `dcr` (Ω) when given."""

    kind = "inductor"

    @classmethod
    def describe(cls, part: Part) -> str:
        if part.props.get("dcr", 0.0) == 0.0:
            return f"the inductor {part.name} (a short at DC)"
        return f"the inductor {part.name}"

    def elements(self) -> tuple[np.ndarray, np.ndarray]:
        dcr = prop_array(self.parts, "dcr", 0.0)
        reject(~(dcr >= 0), self.parts, lambda p: f"inductor {p.name} has a negative dcr")
        return _conductance_or_short(dcr)


class Switch(LinearTwoTerminal):
    """`open`: no current; `closed`: its on-resistance `ron` (Ω), by default an exact short."""

    kind = "switch"

    @classmethod
    def describe(cls, part: Part) -> str:
        if "open" in part.flags:
            return f"the open switch {part.name}"
        if part.props.get("ron", 0.0) == 0.0:
            return f"the closed switch {part.name} (a short)"
        return f"the closed switch {part.name}"

    def elements(self) -> tuple[np.ndarray, np.ndarray]:
        for part in self.parts:
            if ("open" in part.flags) == ("closed" in part.flags):
                raise DesignError(f"switch {part.name} must be marked either `open` or `closed`", part.location)
        is_open = np.array(["open" in part.flags for part in self.parts], dtype=bool)
        ron = prop_array(self.parts, "ron", 0.0)
        reject(~(ron >= 0), self.parts, lambda p: f"switch {p.name} has a negative ron")
        role, value = _conductance_or_short(ron)
        return np.where(is_open, Role.OPEN, role), np.where(is_open, 0.0, value)
