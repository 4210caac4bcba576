"""Bipolar transistors (Ebers-Moll) and MOSFETs (Shichman-Hodges square law).

Both work in "n-type coordinates": for pnp and pmos parts every voltage and
current is negated (polarity p = -1), so one set of equations serves both.
"""

from __future__ import annotations

from typing import Sequence

import numpy as np

from checker.design import Part
from checker.devices import junction
from checker.devices.base import Device, EdgeKind, Edges, NonlinearStamp, prop_array, reject
from checker.devices.smooth import stamp
from checker.errors import DesignError
from checker.units import format_value


def polarity(parts: Sequence[Part], positive: str, negative: str) -> np.ndarray:
    """+1 for the `positive` flag word, -1 for the `negative` one; exactly one must be given."""
    for part in parts:
        if (positive in part.flags) == (negative in part.flags):
            raise DesignError(f"{part.kind} {part.name} must be marked either `{positive}` or `{negative}`",
                              part.location)
    return np.array([1.0 if positive in part.flags else -1.0 for part in parts])


class _Transistor(Device):
    """A three-pin device whose pin currents and their slopes come from one law `_law(x)`."""

    nonlinear = True

    def _law(self, x: np.ndarray) -> tuple[np.ndarray, np.ndarray]:
        """Current into each pin, shape (parts, 3), and its slopes against the pins' voltages."""
        raise NotImplementedError

    def evaluate(self, x: np.ndarray) -> NonlinearStamp:
        currents, slopes = self._law(x)
        return stamp(self.nodes, currents, self.nodes, slopes)

    def pin_currents(self, x: np.ndarray) -> np.ndarray:
        return self._law(x)[0]


class Bjt(_Transistor):
    """`bjt` (pins c, b, e): the Ebers-Moll transport model (Ebers & Moll, "Large-signal
    behavior of junction transistors", Proc. IRE, 1954).

    With If = Is (exp(Vbe/Vt) - 1) and Ir = Is (exp(Vbc/Vt) - 1):
    Ic = If - Ir - Ir/beta_r,  Ib = If/beta_f + Ir/beta_r,  Ie = -(Ic + Ib) (into the pins).
    `beta` is beta_f (default 100); beta_r is 1; `isat` defaults to 1e-14 A (common
    practice for a small-signal silicon transistor). Is follows the ambient by the
    silicon temperature law with ideality 1; beta is taken as temperature-independent.
    SHUNT (1e-12 S) is across each junction.
    """

    kind = "bjt"
    pins = ("c", "b", "e")
    BETA_F = 100.0
    BETA_R = 1.0
    ISAT = 1e-14  # A

    def __init__(self, parts: Sequence[Part], nodes: np.ndarray, first_branch: int, ambient: float):
        super().__init__(parts, nodes, first_branch, ambient)
        self.p = polarity(self.parts, "npn", "pnp")
        self.beta = prop_array(self.parts, "beta", self.BETA_F)
        reject(~(self.beta > 0), self.parts, lambda q: f"bjt {q.name} needs a beta above zero")
        isat = prop_array(self.parts, "isat", self.ISAT)
        reject(~(isat > 0), self.parts, lambda q: f"bjt {q.name} needs an isat above zero")
        ones = np.ones(len(self.parts))
        self.log_is = junction.log_isat_at(np.log(isat), ones, ambient)
        self.vt = junction.thermal_voltage(ambient) * ones
        self.no_rs = np.zeros(len(self.parts))

    @classmethod
    def describe(cls, part: Part) -> str:
        return f"the transistor {part.name}"

    def edges(self) -> Edges:
        rows = np.arange(len(self.parts))
        c, b, e = self.nodes.T
        return Edges(np.concatenate([b, b]), np.concatenate([e, c]),
                     np.full(2 * rows.size, EdgeKind.CONDUCTIVE), np.concatenate([rows, rows]))

    def _junctions(self, x: np.ndarray) -> tuple[np.ndarray, np.ndarray]:
        """Vbe and Vbc in n-type coordinates (V)."""
        c, b, e = (x[self.nodes[:, k]] for k in range(3))
        return self.p * (b - e), self.p * (b - c)

    def _law(self, x: np.ndarray) -> tuple[np.ndarray, np.ndarray]:
        """Pin currents (parts, 3) into c, b, e, and their slopes (parts, 3, 3) against v(c), v(b), v(e)."""
        vbe, vbc = self._junctions(x)
        i_f, g_f = junction.current(vbe, self.log_is, self.vt, self.no_rs)
        i_r, g_r = junction.current(vbc, self.log_is, self.vt, self.no_rs)
        shunt = junction.SHUNT
        ic = i_f - i_r * (1.0 + 1.0 / self.BETA_R) - shunt * vbc
        ib = i_f / self.beta + i_r / self.BETA_R + shunt * (vbe + vbc)
        # d/dVbe and d/dVbc of Ic and Ib; Vbe = p(vb - ve), Vbc = p(vb - vc), and p^2 = 1.
        dic = np.column_stack([g_f, -g_r * (1.0 + 1.0 / self.BETA_R) - shunt])
        dib = np.column_stack([g_f / self.beta + shunt, g_r / self.BETA_R + shunt])
        to_nodes = np.array([[0.0, 1.0, -1.0], [-1.0, 1.0, 0.0]])  # rows Vbe, Vbc; columns vc, vb, ve
        slopes_c, slopes_b = dic @ to_nodes, dib @ to_nodes
        slopes = np.stack([slopes_c, slopes_b, -(slopes_c + slopes_b)], axis=1)
        currents = self.p[:, None] * np.column_stack([ic, ib, -(ic + ib)])
        return currents, slopes


    def limit(self, x_new: np.ndarray, x_old: np.ndarray) -> np.ndarray:
        fraction = 1.0
        for v_new, v_old in zip(self._junctions(x_new), self._junctions(x_old)):
            limited = junction.limit(v_new, v_old, self.log_is, self.vt, self.no_rs)
            fraction = min(fraction, junction.step_fraction(v_new, v_old, limited))
        return x_old + fraction * (x_new - x_old)

    def trouble(self, x: np.ndarray) -> list[tuple[Part, str]]:
        vbe, vbc = self._junctions(x)
        hot = (junction.overdriven(vbe, self.log_is, self.vt, self.no_rs)
               | junction.overdriven(vbc, self.log_is, self.vt, self.no_rs))
        return [(self.parts[k], f"{self.describe(self.parts[k])} would have a junction forward-biased to "
                                f"{format_value(max(vbe[k], vbc[k]), 'V')}: nothing in the circuit limits its "
                                f"base or emitter current") for k in np.flatnonzero(hot)]


class Mosfet(_Transistor):
    """`mosfet` (pins d, g, s): the Shichman-Hodges square law (Shichman & Hodges, "Modeling
    and simulation of insulated-gate field-effect transistor switching circuits", IEEE
    J. Solid-State Circuits, 1968).

    With Vov = Vgs - vth: cutoff (Vov <= 0) Id = 0; triode (Vds < Vov)
    Id = k (Vov Vds - Vds^2/2)(1 + lambda Vds); saturation Id = k/2 Vov^2 (1 + lambda Vds).
    Applying (1 + lambda Vds) in both regions keeps Id and its slopes continuous at
    Vds = Vov. For Vds < 0 drain and source swap roles, so the law is symmetric. The
    gate draws no current. Defaults: vth 1 V (nmos) or -1 V (pmos), k 0.1 A/V^2,
    lambda 0 (our choice: a small logic-level switch). Parameters do not move with
    temperature. SHUNT (1e-12 S) is across drain and source.
    """

    kind = "mosfet"
    pins = ("d", "g", "s")
    VTH = 1.0  # V, magnitude; pmos thresholds are negative
    K = 0.1  # A/V^2

    def __init__(self, parts: Sequence[Part], nodes: np.ndarray, first_branch: int, ambient: float):
        super().__init__(parts, nodes, first_branch, ambient)
        self.p = polarity(self.parts, "nmos", "pmos")
        self.vth = self.p * prop_array(self.parts, "vth", np.nan)  # n-type coordinates
        self.vth[np.isnan(self.vth)] = self.VTH
        self.k = prop_array(self.parts, "k", self.K)
        reject(~(self.k > 0), self.parts, lambda q: f"mosfet {q.name} needs a k above zero")
        self.lam = prop_array(self.parts, "lambda", 0.0)
        reject(~(self.lam >= 0), self.parts, lambda q: f"mosfet {q.name} has a negative lambda")

    @classmethod
    def describe(cls, part: Part) -> str:
        return f"the MOSFET {part.name}"

    def edges(self) -> Edges:
        rows = np.arange(len(self.parts))
        return Edges(self.nodes[:, 0], self.nodes[:, 2], np.full(rows.size, EdgeKind.CONDUCTIVE), rows)

    def _channel(self, vgs: np.ndarray, vds: np.ndarray) -> tuple[np.ndarray, np.ndarray, np.ndarray]:
        """Id (A) for Vds >= 0 and its slopes gm = dId/dVgs, gds = dId/dVds (S)."""
        vov = np.maximum(vgs - self.vth, 0.0)
        clm = 1.0 + self.lam * vds
        triode = vds < vov
        core = np.where(triode, vov * vds - 0.5 * vds ** 2, 0.5 * vov ** 2)
        i = self.k * core * clm
        gm = self.k * np.where(triode, vds, vov) * clm
        gds = self.k * (np.where(triode, vov - vds, 0.0) * clm + core * self.lam)
        return i, gm, gds

    def _law(self, x: np.ndarray) -> tuple[np.ndarray, np.ndarray]:
        """Pin currents (parts, 3) into d, g, s and their slopes (parts, 3, 3) against v(d), v(g), v(s)."""
        d, g, s = (x[self.nodes[:, k]] for k in range(3))
        vgs, vds = self.p * (g - s), self.p * (d - s)
        swapped = vds < 0.0  # source and drain trade places: Id(vgs, vds) = -Id(vgs - vds, -vds)
        i, gm, gds = self._channel(np.where(swapped, vgs - vds, vgs), np.abs(vds))
        di_dvgs = np.where(swapped, -gm, gm)
        di_dvds = np.where(swapped, gm + gds, gds) + junction.SHUNT
        i = np.where(swapped, -i, i) + junction.SHUNT * vds
        row = np.column_stack([di_dvds, di_dvgs, -(di_dvds + di_dvgs)])  # against vd, vg, vs (p^2 = 1)
        slopes = np.stack([row, np.zeros_like(row), -row], axis=1)
        currents = self.p[:, None] * np.column_stack([i, np.zeros_like(i), -i])
        return currents, slopes

