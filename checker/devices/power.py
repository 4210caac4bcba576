"""Linear regulators, switching converters (averaged) and the constant-power law they share.

Both kinds hold their output with a controlled voltage between `out` and `gnd`;
the extra unknown `j` of each part is the current it pushes out of its `out` pin
into the output net. Pin currents into the part (in, out, gnd):
- regulator: (j + iq, -j, -iq); power (Vin - Vout) j + Vin iq;
- converter: (Iin, -j, j - Iin) with Iin = Pin / Vin + iq; power Pin + Vin iq - Pout.
Voltages are against the `gnd` pin; power is the sum of pin voltage x pin current,
so Tellegen's theorem holds part by part.
"""

from __future__ import annotations

from typing import Sequence

import numpy as np

from checker.design import Part
from checker.devices.base import (
    Device, EdgeKind, Edges, Injection, NonlinearStamp, Triplets, prop_array, reject,
)
from checker.devices.smooth import smooth_max, smooth_min, stamp
from checker.units import format_value

SMOOTH_V = 5e-3  # V: width of the regulator's smooth corner between regulation and dropout
V_MIN = 0.1  # V: below this a constant-power input continues along its tangent instead of P/V


def constant_power(power: np.ndarray, v: np.ndarray, v_min: float | np.ndarray) -> tuple[np.ndarray, np.ndarray, np.ndarray]:
    """Current (A) drawn at `v` (V) by a constant `power` (W): P/V, and its slopes dI/dV, dI/dP.

    Below `v_min` the hyperbola is continued along its tangent at `v_min`,
    I = P/Vmin (2 - V/Vmin): finite, with a continuous slope, and still rising as V
    falls, so a supply too weak for the load has no operating point at all rather
    than a spurious one near 0 V.
    """
    low = v < v_min
    safe = np.where(low, 1.0, v)
    per_watt = np.where(low, (2.0 - v / v_min) / v_min, 1.0 / safe)
    slope = np.where(low, -1.0 / v_min ** 2, -1.0 / safe ** 2)
    return power * per_watt, power * slope, per_watt


class _Held(Device):
    """Shared by regulators and converters: the output branch and the graph edges."""

    pins = ("in", "out", "gnd")
    nonlinear = True

    def __init__(self, parts: Sequence[Part], nodes: np.ndarray, first_branch: int, ambient: float):
        super().__init__(parts, nodes, first_branch, ambient)
        self.n_branches = len(self.parts)
        self.branch = first_branch + np.arange(self.n_branches)
        self.vout = prop_array(self.parts, "vout", np.nan)
        reject(~(self.vout > 0), self.parts, lambda p: f"{p.kind} {p.name} needs a vout above zero")
        self.iq = prop_array(self.parts, "iq", 0.0)
        reject(~(self.iq >= 0), self.parts, lambda p: f"{p.kind} {p.name} has a negative iq")

    def edges(self) -> Edges:
        rows = np.arange(len(self.parts))
        i, o, g = self.nodes.T
        kinds = np.concatenate([np.full(rows.size, EdgeKind.VOLTAGE), np.full(rows.size, EdgeKind.CURRENT)])
        return Edges(np.concatenate([o, i]), np.concatenate([g, g]), kinds, np.concatenate([rows, rows]))

    return_pin: int  # the pin (0 in, 2 gnd) where the output current j comes back into the part

    def matrix(self) -> Triplets:
        """The output current j leaves at `out` and comes back at `return_pin`; the branch row
        starts v(out) - v(gnd)."""
        back, o, g = self.nodes[:, self.return_pin], self.nodes[:, 1], self.nodes[:, 2]
        j, ones = self.branch, np.ones(len(self.parts))
        return Triplets(np.concatenate([o, back, j, j]), np.concatenate([j, j, o, g]),
                        np.concatenate([-ones, ones, ones, -ones]))

    def sources(self) -> Injection:
        """iq flows in at `in` and out at `gnd` (scaled with the sources in source stepping)."""
        i, _, g = self.nodes.T
        return Injection(np.concatenate([i, g]), np.concatenate([-self.iq, self.iq]))

    def _volts(self, x: np.ndarray) -> tuple[np.ndarray, np.ndarray]:
        i, o, g = (x[self.nodes[:, k]] for k in range(3))
        return i - g, o - g


class Regulator(_Held):
    """`regulator`: a linear regulator whose output is the smaller of `vout` and Vin - `dropout`.

    Vout = smax(0, smin(vout, Vin - dropout)) with smooth corners of width 5 mV (see
    `checker.devices.smooth`): monotone and smooth, equal to vout within 1e-6 of it
    (for vout of 1 V or more) once the input is 50 mV or more above vout + dropout,
    and never below the gnd pin.
    The output sources or sinks any current; the input carries it plus `iq`.
    Defaults: dropout 0 V, iq 0 A. `tol` is for tolerance analysis, not used here.
    """

    kind = "regulator"
    return_pin = 0  # the load current passes from `in` to `out`

    def __init__(self, parts: Sequence[Part], nodes: np.ndarray, first_branch: int, ambient: float):
        super().__init__(parts, nodes, first_branch, ambient)
        self.dropout = prop_array(self.parts, "dropout", 0.0)
        reject(~(self.dropout >= 0), self.parts, lambda p: f"regulator {p.name} has a negative dropout")

    @classmethod
    def describe(cls, part: Part) -> str:
        return f"the regulator {part.name}"

    def evaluate(self, x: np.ndarray) -> NonlinearStamp:
        """The branch row's -Vset(Vin), so that the whole row reads v(out) - v(gnd) - Vset = 0."""
        vin, _ = self._volts(x)
        held, w_vout = smooth_min(self.scale * self.vout, vin - self.scale * self.dropout, SMOOTH_V)
        vset, w_zero = smooth_max(np.zeros_like(held), held, SMOOTH_V)
        dvset = (1.0 - w_zero) * (1.0 - w_vout)  # dVset/dVin
        i, _, g = self.nodes.T
        slopes = np.column_stack([-dvset, dvset])[:, None, :]
        return stamp(self.branch[:, None], -vset[:, None], np.column_stack([i, g]), slopes)

    def pin_currents(self, x: np.ndarray) -> np.ndarray:
        j = x[self.branch]
        return np.column_stack([j + self.iq, -j, -self.iq])


class Converter(_Held):
    """`converter`: an averaged switching converter holding its output at `vout`.

    Pout = Vout j; the input draws Pin = Pout / efficiency (Pin = Pout x efficiency
    when power flows back from the output), as a constant-power load below which
    V_MIN applies (see `constant_power`), plus `iq`. Defaults: efficiency 1, iq 0 A.
    """

    kind = "converter"
    return_pin = 2  # the output current returns at `gnd`; the input draws its own

    def __init__(self, parts: Sequence[Part], nodes: np.ndarray, first_branch: int, ambient: float):
        super().__init__(parts, nodes, first_branch, ambient)
        self.efficiency = prop_array(self.parts, "efficiency", 1.0)
        reject(~((self.efficiency > 0) & (self.efficiency <= 1)), self.parts,
               lambda p: f"converter {p.name} needs an efficiency above 0 and at most 100%")

    @classmethod
    def describe(cls, part: Part) -> str:
        return f"the converter {part.name}"

    def sources(self) -> Injection:
        """The output setpoint on the branch row, then iq as for every held output."""
        held = super().sources()
        return Injection(np.concatenate([self.branch, held.rows]), np.concatenate([self.vout, held.values]))

    def _input(self, x: np.ndarray):
        """Input current without iq (A) and its slopes against Vin, Vout and j."""
        vin, vout = self._volts(x)
        j = x[self.branch]
        pout = vout * j
        factor = np.where(pout >= 0.0, 1.0 / self.efficiency, self.efficiency)
        current, d_vin, per_watt = constant_power(factor * pout, vin, self.scale * V_MIN)
        return current, d_vin, factor * j * per_watt, factor * vout * per_watt

    def evaluate(self, x: np.ndarray) -> NonlinearStamp:
        current, d_vin, d_vout, d_j = self._input(x)
        i, o, g = self.nodes.T
        row = np.column_stack([d_vin, d_vout, -(d_vin + d_vout), d_j])  # against v(in), v(out), v(gnd), j
        slopes = np.stack([row, -row], axis=1)
        return stamp(np.column_stack([i, g]), np.column_stack([current, -current]),
                     np.column_stack([i, o, g, self.branch]), slopes)

    def pin_currents(self, x: np.ndarray) -> np.ndarray:
        current = self._input(x)[0] + self.iq
        j = x[self.branch]
        return np.column_stack([current, -j, j - current])

    def trouble(self, x: np.ndarray) -> list[tuple[Part, str]]:
        vin, vout = self._volts(x)
        starved = (vin < V_MIN) & (vout * x[self.branch] > 0)
        return [(self.parts[k], f"{self.describe(self.parts[k])} cannot draw the input power its output needs: "
                                f"its input sits at {format_value(vin[k], 'V')}, so the supply cannot deliver it")
                for k in np.flatnonzero(starved)]
