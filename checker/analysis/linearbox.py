"""Exact operating points of a linear circuit at many points of its tolerance box at once.

A linear circuit's MNA matrix is a sum of per-part stamps, and a tolerance moves one
part's conductance (a rank-one update u g uᵀ, u = e_from − e_to) or one source value
(the right-hand side). With the nominal matrix A₀ factorised once, the solution at
any point follows from the Sherman-Morrison-Woodbury identity (Woodbury, "Inverting
modified matrices", Memorandum Report 42, Princeton, 1950; Golub & Van Loan, "Matrix
Computations", 4th ed., 2013, sec. 2.1.4 — section from memory):

    (A₀ + U D Uᵀ)⁻¹ = A₀⁻¹ − A₀⁻¹ U (I + D Uᵀ A₀⁻¹ U)⁻¹ D Uᵀ A₀⁻¹

so each point costs one k×k solve (k = toleranced conductances, at most a few dozen),
stacked over thousands of points in one numpy call: no Python per point. Only
circuits whose every device is a linear two-terminal part qualify (`LinearBox.of`
returns None otherwise); the answer is exact up to rounding, and each reported point
is still confirmed by the ordinary solver.
"""

from __future__ import annotations

from typing import Sequence

import numpy as np
import scipy.sparse as sp
from scipy.sparse.linalg import splu

from checker.analysis.stacked import LazyMap, PartArrays, PartValues, Stacked
from checker.analysis.tolerances import Tolerance, perturbed
from checker.design import Netlist
from checker.devices.base import GROUND, LinearTwoTerminal, Role
from checker.solver import Cache
from checker.solver.assembly import assemble
from checker.solver.selfcheck import KCL_RELATIVE, KCL_RELATIVE_FLOOR

CHUNK_ENTRIES = 4_000_000  # points x unknowns held at once (32 MB of float64)
DENSE_RATIO = 1.0  # solve each point's whole matrix when k^3 > this x n^3 (k toleranced conductances)
DENSE_ENTRIES = 4_000_000  # points x n x n held at once by the stacked dense solve (32 MB)


class LinearBox:
    """One case of a linear circuit, ready to be solved at any deviations of its toleranced values."""

    def __init__(self, netlist: Netlist, tolerances: Sequence[Tolerance], system, lu):
        self.netlist, self.tolerances = netlist, tuple(tolerances)
        self.system = system
        n = system.size
        topology = system.topology
        positions = {part.name: m for m, part in enumerate(netlist.parts)}
        self._where = {name: (int(topology.group_of[m]), int(topology.row_of[m])) for name, m in positions.items()}
        self._inverse = np.array([_law(netlist.parts[positions[t.part]]) for t in self.tolerances], dtype=bool)
        self._nominal = np.array([self._device_row(t.part)[0].value[self._device_row(t.part)[1]]
                                  for t in self.tolerances])
        roles = np.array([self._device_row(t.part)[0].role[self._device_row(t.part)[1]] for t in self.tolerances])
        self._conductance = np.flatnonzero(roles == Role.CONDUCTANCE)
        self._source = np.flatnonzero((roles == Role.VOLTAGE) | (roles == Role.CURRENT))
        U = np.zeros((n, self._conductance.size))
        for column, j in enumerate(self._conductance):
            device, row = self._device_row(self.tolerances[j].part)
            a, b = device.nodes[row]
            if a != GROUND:
                U[a, column] += 1.0
            if b != GROUND:
                U[b, column] -= 1.0
        S = np.zeros((n, self._source.size))  # right-hand side per unit of each source's value
        for column, j in enumerate(self._source):
            device, row = self._device_row(self.tolerances[j].part)
            if device.role[row] == Role.VOLTAGE:
                S[device.branch[row], column] = 1.0
            else:
                a, b = device.nodes[row]
                if a != GROUND:
                    S[a, column] -= 1.0
                if b != GROUND:
                    S[b, column] += 1.0
        self._U, self._S = U, S
        solve = (lambda m: lu.solve(m)) if n else (lambda m: m)
        self._y0 = solve(system.rhs.copy()) if n else np.zeros(0)
        self._Z = solve(U) if U.size else np.zeros((n, 0))
        self._R = solve(S) if S.size else np.zeros((n, 0))
        self._W = U.T @ self._Z
        self._Uy0, self._UR = U.T @ self._y0, U.T @ self._R

    @classmethod
    def of(cls, netlist: Netlist, tolerances: Sequence[Tolerance], cache: Cache | None = None) -> "LinearBox | None":
        """The box of a case whose devices are all linear two-terminal parts and whose values move as
        `value` says (checked against the devices at +tol); None otherwise (the general path applies)."""
        system = assemble(netlist, (cache or Cache()).topology(netlist))
        if not all(isinstance(d, LinearTwoTerminal) and not d.nonlinear for d in system.devices):
            return None
        try:
            lu = splu(system.matrix.tocsc()) if system.size else None
        except RuntimeError:
            return None
        box = cls(netlist, tolerances, system, lu)
        return box if box._laws_hold(cache) else None

    def _device_row(self, part: str):
        group, row = self._where[part]
        return self.system.devices[group], row

    def _laws_hold(self, cache: Cache | None) -> bool:
        """Each toleranced value moves its device value as `value` assumes (1/(1+d) or 1+d)."""
        if not self.tolerances:
            return True
        moved = perturbed(self.netlist, {t.part: t.fraction for t in self.tolerances})
        system = assemble(moved, (cache or Cache()).topology(moved))
        expected = self.device_values(np.array([[t.fraction for t in self.tolerances]]))[0]
        for j, t in enumerate(self.tolerances):
            group, row = self._where[t.part]
            device = system.devices[group]
            if device.role[row] != self._device_row(t.part)[0].role[row]:
                return False
            if not np.isclose(device.value[row], expected[j], rtol=1e-12, atol=0.0):
                return False
        return True

    def device_values(self, deviations: np.ndarray) -> np.ndarray:
        """(points, k) deviations -> each toleranced part's device value (S, V or A) at each point."""
        factor = np.where(self._inverse, 1.0 / (1.0 + deviations), 1.0 + deviations)
        return self._nominal * factor

    def solve(self, deviations: np.ndarray) -> np.ndarray:
        """(points, k) deviations -> (points, unknowns) solutions, in chunks that bound memory."""
        deviations = np.atleast_2d(np.asarray(deviations, float))
        n = self.system.size
        chunk = max(1, CHUNK_ENTRIES // max(n, 1))
        return np.concatenate([self._solve(deviations[start:start + chunk])
                               for start in range(0, len(deviations), chunk)] or [np.zeros((0, n))])

    def _solve(self, deviations: np.ndarray) -> np.ndarray:
        n, k = self.system.size, self._conductance.size
        if k ** 3 > DENSE_RATIO * n ** 3:  # Woodbury's k x k solve costs more than the whole system's
            chunk = max(1, DENSE_ENTRIES // (n * n))
            return np.concatenate([self._solve_dense(deviations[start:start + chunk])
                                   for start in range(0, len(deviations), chunk)] or [np.zeros((0, n))])
        values = self.device_values(deviations)
        delta = values - self._nominal
        ds, dg = delta[:, self._source], delta[:, self._conductance]
        y = self._y0 + ds @ self._R.T
        if not self._conductance.size:
            return y
        uy = self._Uy0 + ds @ self._UR.T
        k = self._conductance.size
        K = np.eye(k) + dg[:, :, None] * self._W[None, :, :]
        rhs = dg * uy
        try:
            t = np.linalg.solve(K, rhs[:, :, None])[:, :, 0]
        except np.linalg.LinAlgError:  # some point has no single solution: find it, one point at a time
            t = np.array([_solve_or_nan(K[i], rhs[i]) for i in range(len(K))])
        return y - t @ self._Z.T

    def _solve_dense(self, deviations: np.ndarray) -> np.ndarray:
        """Each point's own perturbed matrix, dense, all points in one stacked LAPACK solve (for a
        small circuit with many toleranced conductances, where that beats Woodbury)."""
        delta = self.device_values(deviations) - self._nominal
        ds, dg = delta[:, self._source], delta[:, self._conductance]
        n = self.system.size
        matrices = np.broadcast_to(self._dense(), (len(deviations), n, n)).copy()
        if dg.size:  # each conductance's four entries, u uᵀ per column of U, as one sparse product
            positions, stamps = self._stamps()
            matrices.reshape(len(deviations), n * n)[:, positions] += (stamps @ dg.T).T
        rhs = self.system.rhs + ds @ self._S.T
        try:
            return np.linalg.solve(matrices, rhs[:, :, None])[:, :, 0]
        except np.linalg.LinAlgError:
            return np.array([_solve_or_nan(matrices[i], rhs[i]) for i in range(len(rhs))])

    def _stamps(self) -> tuple[np.ndarray, sp.csr_matrix]:
        """The flat positions in the n x n matrix that toleranced conductances touch, and the sparse
        (positions, k) matrix whose column j is u_j u_jᵀ there (u_j the incidence of conductance j)."""
        if not hasattr(self, "_stamp_matrix"):
            n = self.system.size
            entries = [(a * n + b, j, self._U[a, j] * self._U[b, j]) for j in range(self._U.shape[1])
                       for a in np.flatnonzero(self._U[:, j]) for b in np.flatnonzero(self._U[:, j])]
            flat, cols, values = (np.array(c) for c in zip(*entries)) if entries else (np.zeros(0, int),) * 3
            positions, rows = np.unique(flat, return_inverse=True)
            self._stamp_matrix = positions, sp.csr_matrix((values, (rows, cols)), shape=(positions.size, self._U.shape[1]))
        return self._stamp_matrix

    def _dense(self) -> np.ndarray:
        if not hasattr(self, "_dense_matrix"):
            self._dense_matrix = self.system.matrix.toarray()
        return self._dense_matrix

    def balanced(self, deviations: np.ndarray, x: np.ndarray) -> np.ndarray:
        """Per point: whether its solution satisfies its own equations A(d) x = b(d) to the self-check's
        tolerance (`checker.solver.selfcheck`: KCL_RELATIVE of each row's terms, KCL_RELATIVE_FLOOR of
        the largest), every point at once; False where the solution is not finite."""
        delta = self.device_values(deviations) - self._nominal
        ds, dg = delta[:, self._source], delta[:, self._conductance]
        matrix, rhs = self.system.matrix, self.system.rhs
        with np.errstate(all="ignore"):
            ux = x @ self._U
            residual = (matrix @ x.T).T + (dg * ux) @ self._U.T - rhs - ds @ self._S.T
            terms = ((abs(matrix) @ np.abs(x).T).T + (np.abs(dg * ux)) @ np.abs(self._U).T + np.abs(rhs)
                     + np.abs(ds) @ np.abs(self._S).T)
            tolerance = KCL_RELATIVE * terms + KCL_RELATIVE_FLOOR * np.max(terms, axis=1, initial=0.0)[:, None]
            return np.all(np.isfinite(x), axis=1) & np.all(np.abs(residual) <= tolerance, axis=1)

    def checked(self, deviations: np.ndarray) -> tuple[Stacked | None, np.ndarray]:
        """The values the limits read at the points whose solution passes `balanced`, and which those are."""
        deviations = np.atleast_2d(np.asarray(deviations, float))
        x = self.solve(deviations)
        ok = self.balanced(deviations, x)
        rows = np.flatnonzero(ok)
        return (self.stacked(deviations[rows], x[rows]) if rows.size else None), ok

    def stacked(self, deviations: np.ndarray, x: np.ndarray | None = None) -> Stacked:
        """The values the limits read at every point (`x`: their solutions, when already solved)."""
        deviations = np.atleast_2d(np.asarray(deviations, float))
        x = self.solve(deviations) if x is None else x
        points = len(deviations)
        x_ext = np.concatenate([x, np.zeros((points, 1))], axis=1)  # column -1 is ground, 0 V
        values = self.device_values(deviations)
        index = {t.part: j for j, t in enumerate(self.tolerances)}
        nets = {name: number for number, name in enumerate(self.system.nets[1:])}
        ground = self.system.nets[0]

        def net(name: str) -> np.ndarray:
            return np.zeros(points) if name == ground else x_ext[:, nets[name]]

        def value_of(part: str, device, row) -> np.ndarray:
            j = index.get(part)
            return np.full(points, device.value[row]) if j is None else values[:, j]

        def result(name: str) -> PartArrays:
            device, row = self._device_row(name)
            a, b = device.nodes[row]
            voltage = x_ext[:, a] - x_ext[:, b]
            role = device.role[row]
            if role == Role.CONDUCTANCE:
                current = value_of(name, device, row) * voltage
            elif role == Role.VOLTAGE:
                current = x_ext[:, device.branch[row]]
            elif role == Role.CURRENT:
                current = value_of(name, device, row)
            else:
                current = np.zeros(points)
            return PartArrays(voltage * current, {"from": current, "to": -current}, voltage, current)

        parts = {part.name: part for part in self.netlist.parts}

        def part(name: str) -> PartValues:
            declared = parts[name]
            j = index.get(name)
            value = declared.value if j is None or declared.value is None else declared.value * (1 + deviations[:, j])
            return PartValues(value, dict(declared.props))

        known_nets = set(self.system.nets)
        return Stacked(self.netlist.case, self.netlist.ambient, points, LazyMap(net, known_nets.__contains__),
                       LazyMap(result, self._where.__contains__), LazyMap(part, parts.__contains__))


def _law(part) -> bool:
    """True where the device value is the inverse of the toleranced value (a conductance of a resistance)."""
    return part.value_unit == "ohm"


def _solve_or_nan(matrix: np.ndarray, rhs: np.ndarray) -> np.ndarray:
    """The solution, or NaN where the matrix is singular: the analysis ranks NaN lowest, and the
    ordinary solver then says why that point has no operating point."""
    try:
        return np.linalg.solve(matrix, rhs)
    except np.linalg.LinAlgError:
        return np.full_like(rhs, np.nan)
