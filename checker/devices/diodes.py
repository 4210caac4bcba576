"""Diodes, LEDs and zener diodes: Shockley junctions with series resistance.

Forward branch: I = Is(T) (exp(Vj/(n Vt)) - 1) through a series resistance `rseries`,
solved exactly (see `checker.devices.junction.current`). Is is given as `isat`, or
derived from `vf = V at I` at 25 degC (accounting for `rseries`), or defaults to
1e-14 A for a diode (common practice for a small-signal silicon diode) and to the
value that gives 2.0 V at 10 mA for an LED (common practice for a red LED). Is
follows the ambient by the silicon temperature law, Vt = k T / q; for an LED the
band gap of that law is set so that its forward voltage falls by 2 mV/K.

A zener adds a breakdown branch in antiparallel: a second junction with ideality 1
in series with `rz`, whose saturation current is set so that it carries the test
current at `vz = V at I` at the case's ambient (the breakdown voltage is taken as
independent of temperature). Both branches are smooth, so the whole law is.
Every part also has SHUNT (1e-12 S) in parallel, as is usual in circuit solvers.
"""

from __future__ import annotations

from dataclasses import dataclass
from typing import Sequence

import numpy as np

from checker.design import Part
from checker.devices import junction
from checker.devices.base import Device, EdgeKind, Edges, NonlinearStamp, prop_array, reject
from checker.devices.smooth import two_terminal_stamp
from checker.errors import DesignError
from checker.units import format_value

BREAKDOWN_IDEALITY = 1.0  # of the zener's breakdown branch; `rz` sets its slope beyond the knee
GUESS_CURRENT = 10e-3  # A: forward current at which diodes and LEDs are linearised for Newton's first guess


@dataclass(frozen=True)
class Branch:
    """One junction per part: `sign` +1 conducts from -> to (forward), -1 to -> from (breakdown)."""

    sign: float
    log_is: np.ndarray  # ln(A) at the case's ambient
    nvt: np.ndarray  # V: ideality x thermal voltage
    rseries: np.ndarray  # Ω


class Diode(Device):
    """`diode`: pins from (anode), to (cathode)."""

    kind = "diode"
    nonlinear = True
    default_ideality = 1.0
    default_point: tuple[float, float] | None = None  # (V, A) that sets Is when neither isat nor vf is given
    default_isat = 1e-14  # A

    def __init__(self, parts: Sequence[Part], nodes: np.ndarray, first_branch: int, ambient: float):
        super().__init__(parts, nodes, first_branch, ambient)
        ideality = prop_array(self.parts, "ideality", self.default_ideality)
        reject(~(ideality > 0), self.parts, lambda p: f"{self.kind} {p.name} needs an ideality above zero")
        rseries = prop_array(self.parts, "rseries", 0.0)
        reject(~(rseries >= 0), self.parts, lambda p: f"{self.kind} {p.name} has a negative rseries")
        log_is_ref = self._log_isat_refs(ideality, rseries)
        log_is = junction.log_isat_at(log_is_ref, ideality, ambient, self.band_gap(log_is_ref, ideality))
        self.branches = [Branch(1.0, log_is, ideality * junction.thermal_voltage(ambient), rseries)]

    def band_gap(self, log_is_ref: np.ndarray, ideality: np.ndarray) -> float | np.ndarray:
        """Eg (eV) of the temperature law: silicon's."""
        return junction.EG_SILICON

    @classmethod
    def describe(cls, part: Part) -> str:
        return f"the diode {part.name}"

    def _log_isat_refs(self, ideality: np.ndarray, rseries: np.ndarray) -> np.ndarray:
        """ln Is (A) at 25 degC of every part, as `_log_isat_ref` gives it part by part, with the parts
        that take the kind's default point (no isat, no vf: most of a big panel) in one numpy pass.

        The pass applies the same float64 operations elementwise, so each value is the one the
        part-by-part function gives (tests/unit/solver/test_solver_devices.py checks this exactly).
        """
        if self.default_point is None:
            return np.array([self._log_isat_ref(p, n, r) for p, n, r in zip(self.parts, ideality, rseries)])
        given = np.array([bool(part.props) and ("isat" in part.props or "vf" in part.props) for part in self.parts],
                         dtype=bool)
        result = np.empty(len(self.parts))
        volts, amps = self.default_point
        bare = ~given
        result[bare] = junction.log_isat_from_point(
            np.full(int(bare.sum()), volts), np.full(int(bare.sum()), amps),
            ideality[bare] * junction.thermal_voltage(junction.T_REFERENCE), rseries[bare])
        for k in np.flatnonzero(given).tolist():
            result[k] = self._log_isat_ref(self.parts[k], ideality[k], rseries[k])
        return result

    def _log_isat_ref(self, part: Part, ideality: float, rseries: float) -> float:
        """ln Is (A) at 25 degC from isat, from vf = V at I, or from the kind's default."""
        if "isat" in part.props:
            if not part.props["isat"] > 0:
                raise DesignError(f"{self.kind} {part.name} needs an isat above zero", part.location)
            return float(np.log(part.props["isat"]))
        if "vf" in part.props:
            return self._log_isat_at_point(part, "vf", ideality, rseries)
        if self.default_point is None:
            return float(np.log(self.default_isat))
        volts, amps = self.default_point
        return float(junction.log_isat_from_point(np.array(volts), np.array(amps),
                                                  ideality * junction.thermal_voltage(junction.T_REFERENCE),
                                                  np.array(rseries)))

    def _log_isat_at_point(self, part: Part, name: str, ideality: float, rseries: float,
                           temperature: float = junction.T_REFERENCE) -> float:
        """ln Is from `name = V at I`, checked: a positive test current and room left for the junction."""
        volts, amps = part.props[name], part.at.get(name)
        if amps is None or not amps > 0:
            raise DesignError(f"{self.kind} {part.name}: `{name}` needs a test current above zero "
                              f"(`{name} = V at I`)", part.location)
        if not volts - amps * rseries > 0:
            raise DesignError(f"{self.kind} {part.name}: `{name}` = {format_value(volts, 'V')} at "
                              f"{format_value(amps, 'A')} leaves no voltage for the junction once its series "
                              f"resistance has dropped {format_value(amps * rseries, 'V')}", part.location)
        nvt = ideality * junction.thermal_voltage(temperature)
        return float(junction.log_isat_from_point(np.array(volts), np.array(amps), nvt, np.array(rseries)))

    def edges(self) -> Edges:
        rows = np.arange(len(self.parts))
        return Edges(self.nodes[:, 0], self.nodes[:, 1], np.full(rows.size, EdgeKind.CONDUCTIVE), rows)

    def _voltage(self, x: np.ndarray) -> np.ndarray:
        return x[self.nodes[:, 0]] - x[self.nodes[:, 1]]

    def _law(self, v: np.ndarray) -> tuple[np.ndarray, np.ndarray]:
        """Current from -> to (A) and its slope (S) at `v` (V), all branches and SHUNT."""
        i, g = junction.SHUNT * v, np.full_like(v, junction.SHUNT)
        for b in self.branches:
            ib, gb = junction.current(b.sign * v, b.log_is, b.nvt, b.rseries)
            i, g = i + b.sign * ib, g + gb
        return i, g

    def evaluate(self, x: np.ndarray) -> NonlinearStamp:
        i, g = self._law(self._voltage(x))
        return two_terminal_stamp(self.nodes[:, 0], self.nodes[:, 1], i, g)

    def first_guess(self, x: np.ndarray) -> NonlinearStamp:
        """The forward junction's tangent at GUESS_CURRENT: a small battery with its slope resistance
        and rseries. Open at 0 V, a diode feeding a load would leave that load's net at any voltage;
        on the tangent, the junction's current at the first guess stays near GUESS_CURRENT."""
        forward = self.branches[0]
        isat = np.exp(forward.log_is)
        v0 = forward.nvt * np.log1p(GUESS_CURRENT / isat) + GUESS_CURRENT * forward.rseries
        g0 = 1.0 / (forward.nvt / (GUESS_CURRENT + isat) + forward.rseries)
        v = self._voltage(x)
        i, g = GUESS_CURRENT + g0 * (v - v0), g0 + junction.SHUNT
        for b in self.branches[1:]:
            ib, gb = junction.current(b.sign * v, b.log_is, b.nvt, b.rseries)
            i, g = i + b.sign * ib, g + gb
        return two_terminal_stamp(self.nodes[:, 0], self.nodes[:, 1], i, g)

    def pin_currents(self, x: np.ndarray) -> np.ndarray:
        i, _ = self._law(self._voltage(x))
        return np.column_stack([i, -i])

    def limit(self, x_new: np.ndarray, x_old: np.ndarray) -> np.ndarray:
        v_new, v_old = self._voltage(x_new), self._voltage(x_old)
        fraction = min(junction.step_fraction(
            b.sign * v_new, b.sign * v_old,
            junction.limit(b.sign * v_new, b.sign * v_old, b.log_is, b.nvt, b.rseries)) for b in self.branches)
        return x_old + fraction * (x_new - x_old)

    def trouble(self, x: np.ndarray) -> list[tuple[Part, str]]:
        v = self._voltage(x)
        hot = np.zeros(v.size, dtype=bool)
        for b in self.branches:
            hot |= junction.overdriven(b.sign * v, b.log_is, b.nvt, b.rseries)
        i, _ = self._law(v)
        return [(self.parts[k], f"{self.describe(self.parts[k])} would carry {format_value(abs(i[k]), 'A')} "
                                f"with {format_value(v[k], 'V')} across it: nothing in the circuit limits its "
                                f"current (is it straight across a voltage source?)") for k in np.flatnonzero(hot)]


class Led(Diode):
    """`led`: a diode with ideality 2 by default and Is set by 2.0 V at 10 mA unless given."""

    kind = "led"
    default_ideality = 2.0
    default_point = (2.0, 10e-3)
    TEMPCO = -2e-3  # V/K of the forward voltage at 10 mA (common practice for indicator LEDs; from memory)

    def band_gap(self, log_is_ref: np.ndarray, ideality: np.ndarray) -> np.ndarray:
        """The Eg (eV) that makes the junction voltage at 10 mA drift by TEMPCO at 25 degC.

        Silicon's 1.11 eV would make a 2 V junction's voltage rise with temperature.
        From the law in `log_isat_at`, at fixed current dV/dT = (V0 - m Vt0 - Eg) / T0,
        so Eg = V0 - m Vt0 - TEMPCO T0.
        """
        vt0 = junction.thermal_voltage(junction.T_REFERENCE)
        v0 = ideality * vt0 * np.log1p(10e-3 / np.exp(log_is_ref))
        return v0 - junction.IS_TEMPERATURE_EXPONENT * vt0 - self.TEMPCO * junction.T_REFERENCE

    @classmethod
    def describe(cls, part: Part) -> str:
        return f"the LED {part.name}"


class Zener(Diode):
    """`zener`: a diode plus a breakdown branch at `vz = V at I` with slope resistance `rz` (default 0)."""

    kind = "zener"

    def __init__(self, parts: Sequence[Part], nodes: np.ndarray, first_branch: int, ambient: float):
        super().__init__(parts, nodes, first_branch, ambient)
        rz = prop_array(self.parts, "rz", 0.0)
        reject(~(rz >= 0), self.parts, lambda p: f"zener {p.name} has a negative rz")
        for part in self.parts:
            if "vz" not in part.props:
                raise DesignError(f"zener {part.name} needs its breakdown voltage `vz = V at I`", part.location)
        ideality = np.full(len(self.parts), BREAKDOWN_IDEALITY)
        log_ib = np.array([self._log_isat_at_point(p, "vz", BREAKDOWN_IDEALITY, r, ambient)
                           for p, r in zip(self.parts, rz)])
        self.branches.append(Branch(-1.0, log_ib, ideality * junction.thermal_voltage(ambient), rz))

    @classmethod
    def describe(cls, part: Part) -> str:
        return f"the zener diode {part.name}"

    def first_guess(self, x: np.ndarray) -> NonlinearStamp:
        """Open, as at 0 V: a zener mostly works in breakdown, which a forward tangent would hide."""
        return self.evaluate(x)
