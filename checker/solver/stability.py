"""Whether an operating point is stable for small disturbances (docs/models.md, "Stability").

A DC operating point solves F(x) = 0, but a board only rests where the circuit, given
its parasitics, returns after a small disturbance. Model the parasitics as a positive
capacitance from every net to ground and a positive inductance in series with every
voltage-defined branch (sources, shorts, the outputs of regulators, converters and
op-amps): M dx/dt = -D F(x), with M a positive diagonal and D flipping the branch rows
whose stamp is symmetric (a source's incidence appears alike in its column and its row;
an output pushed into its net appears with opposite signs), so that every inductor
equation reads L di/dt = (voltage across it). Linearised: dx/dt = -M^-1 D J x.

**The determinant test (a proof).** If every eigenvalue of -M^-1 D J has a negative real
part, their product has the sign (-1)^n, so det(D J) > 0 (det M > 0). Hence a point with
det(D J) < 0 is unstable whatever the positive capacitances and inductances are. A
circuit of positive resistors and sources has det(D J) > 0, so the test says a point is
unstable when its Jacobian's determinant has the sign opposite to a passive circuit's
(Green & Willson, "How to identify unstable DC operating points", IEEE Transactions on
Circuits and Systems I, 39(10), 1992 — from memory). It proves instability; it cannot
prove stability, since an even number of growing modes leaves the sign alone.

**The eigenvalue test (in practice).** The remaining points are judged with unit
capacitances on the nets and the branch inductances vanishing (real sources, regulators
and op-amps answer much faster than their nets charge): the finite eigenvalues of the
pencil (-D J, diag(1 per net, 0 per branch)) are the modes of the nets' charge, on the
constraints the branches keep. A point with such an eigenvalue whose real part is above
zero (beyond rounding) is unstable for these parasitics. Systems above DENSE_LIMIT
unknowns are judged by the determinant only.
"""

from __future__ import annotations

from dataclasses import dataclass
from typing import Callable

import numpy as np
import scipy.linalg
import scipy.sparse as sp
from scipy.sparse.linalg import splu

from checker.solver.assembly import System

DENSE_LIMIT = 600  # unknowns: up to here every eigenvalue is computed (dense, O(n^3))
GROWTH = 1e-9  # an eigenvalue's real part above this share of the largest magnitude grows
FOLD = 1e-6  # a mode slower than this share of the fastest makes the Jacobian singular within rounding
FOLD_STEP = 1e-3  # of the largest net voltage (at least 1 V): how far the fold test looks to each side


@dataclass(frozen=True)
class Stability:
    """`stable`: the point may be reported. `proved` says how sure: True when the determinant
    test proves an unstable point unstable; the eigenvalue test is not a proof. `reason` says
    why a point is unstable, and `direction` is the growing mode (unknowns), to step off it."""

    stable: bool
    proved: bool = False
    reason: str = ""
    direction: np.ndarray | None = None


def branch_flips(system: System) -> np.ndarray:
    """+1 or -1 per unknown: -1 on the branch rows whose constant stamp is symmetric (the branch
    current enters its column as its voltage enters its row), so D J has a positive mass matrix."""
    n, size = system.n_nodes, system.size
    flips = np.ones(size)
    if size == n:
        return flips
    matrix = system.matrix.tocsc()
    column = matrix[:n, n:].toarray()  # each branch current in the KCL rows
    row = matrix[n:, :n].toarray().T  # each branch row's net voltages
    flips[n:] = np.where(np.einsum("ij,ij->j", column, row) > 0, -1.0, 1.0)
    return flips


def charge_masses(system: System) -> np.ndarray:
    """The parasitic per unknown for the eigenvalue test: unit capacitance per net, none per branch."""
    return (np.arange(system.size) < system.n_nodes).astype(float)


def determinant_sign(matrix: sp.spmatrix) -> int:
    """The sign of det(matrix) from its sparse LU factors: the signs of U's diagonal times the
    parities of both permutations (L has a unit diagonal). 0 for a singular matrix."""
    if matrix.shape[0] == 0:
        return 1
    try:
        lu = splu(sp.csc_matrix(matrix))
    except RuntimeError:  # exactly singular
        return 0
    diagonal = lu.U.diagonal()
    if np.any(diagonal == 0) or not np.all(np.isfinite(diagonal)):
        return 0
    negatives = int(np.count_nonzero(diagonal < 0))
    return -1 if (negatives + _parity(lu.perm_r) + _parity(lu.perm_c)) % 2 else 1


def _parity(permutation: np.ndarray) -> int:
    """0 for an even permutation, 1 for an odd one: n minus its number of cycles, mod 2."""
    seen = np.zeros(permutation.size, bool)
    cycles = 0
    for start in range(permutation.size):
        if not seen[start]:
            cycles += 1
            k = start
            while not seen[k]:
                seen[k] = True
                k = permutation[k]
    return (permutation.size - cycles) % 2


def assess(system: System, jacobian: sp.spmatrix, x: np.ndarray | None = None,
           residual: Callable[[np.ndarray], np.ndarray] | None = None) -> Stability:
    """The stability of the point `x` whose Jacobian (at sources 1, no shunt) is `jacobian`;
    with `residual` (F at any x), a point where the Jacobian is singular within rounding is
    also checked for a fold (see `_fold`)."""
    passive = sp.diags(branch_flips(system)) @ jacobian
    small = system.size <= DENSE_LIMIT
    if determinant_sign(passive) < 0:
        return Stability(False, True, "the determinant of its Jacobian has the sign opposite to a passive "
                                      "circuit's, so it is unstable whatever the parasitic capacitances and "
                                      "inductances are", _modes(system, passive).growing if small else None)
    if not small:
        return Stability(True)
    modes = _modes(system, passive)
    if modes.growth > 0.0:
        return Stability(False, False, "a small disturbance grows (its equations linearised with a unit "
                                       "capacitance on every net have a mode with positive real part)",
                         modes.growing)
    if x is not None and residual is not None and _fold(system, modes, x, residual):
        return Stability(False, False, "it sits on a fold, where two operating points meet (a constant-power "
                                       "load at its maximum power, for example): its Jacobian is singular and "
                                       "a disturbance to one side does not come back", modes.slowest)
    return Stability(True)


@dataclass(frozen=True)
class Modes:
    """The finite modes of the nets' charge at a point: the fastest growth rate (0: none grows beyond
    rounding) and its mode, the slowest mode with its left vector and rate, and the largest rate (at
    least the largest conductance at a net, with unit capacitances a rate too)."""

    growth: float
    growing: np.ndarray
    slowest: np.ndarray
    slowest_left: np.ndarray
    slowest_rate: float
    largest: float


def _modes(system: System, passive: sp.spmatrix) -> Modes:
    masses = np.diag(charge_masses(system))
    values, left, right = scipy.linalg.eig(-passive.toarray(), masses, left=True, right=True)
    finite = np.isfinite(values)
    if not np.any(finite):
        none = np.zeros(system.size)
        return Modes(0.0, none, none, none, np.inf, 0.0)
    real = np.where(finite, values.real, -np.inf)
    k = int(np.argmax(real))
    conductances = np.abs(passive.diagonal()[:system.n_nodes])  # the scale when one mode is all there is
    largest = max(float(np.max(np.abs(values[finite]))), float(np.max(conductances, initial=0.0)))
    growth = float(real[k]) if real[k] > GROWTH * max(largest, 1e-300) else 0.0
    slow = int(np.argmin(np.where(finite, np.abs(values), np.inf)))
    return Modes(growth, np.real(right[:, k]), np.real(right[:, slow]), np.real(left[:, slow]),
                 float(abs(values[slow])), largest)


def _fold(system: System, modes: Modes, x: np.ndarray, residual: Callable[[np.ndarray], np.ndarray]) -> bool:
    """Whether the point is a fold: its slowest mode is zero within rounding (below FOLD of the
    fastest), and along it the residual pushes the same way on both sides, so a disturbance to one
    side runs away (a saddle-node: the residual is quadratic, not linear, along that mode)."""
    if modes.largest == 0.0 or modes.slowest_rate > FOLD * modes.largest:
        return False
    nodes = system.n_nodes
    direction = modes.slowest / max(float(np.max(np.abs(modes.slowest[:nodes]), initial=0.0)), 1e-300)
    step = FOLD_STEP * max(1.0, float(np.max(np.abs(x[:nodes]), initial=0.0)))
    flips, masses = branch_flips(system), charge_masses(system)
    weight = float(modes.slowest_left @ (masses * direction))
    if weight == 0.0:
        return False
    pushes = [float(modes.slowest_left @ (flips * residual(x + side * step * direction))) / weight
              for side in (1.0, -1.0)]
    return not (pushes[0] > 0.0 > pushes[1])
