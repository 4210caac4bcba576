"""The nodal equations of a circuit at its operating point, as a reviewer writes them on paper.

One row per unknown net (ground left out): Kirchhoff's current law at that net, the
currents leaving it through its parts on the left (each net's coefficient in siemens,
each branch current's ±1) and the currents injected by fixed sources on the right. Then
one row per voltage-defined branch (a source, a zero-ohm short, the output of a
regulator, converter or op-amp): the part's voltage equation in volts. These are the
modified nodal equations the solver factorises (Ho, Ruehli & Brennan, "The modified nodal
approach to network analysis", IEEE Trans. Circuits and Systems, 1975 — from memory).

A nonlinear circuit is shown linearised at its solution x*: each device replaced by its
tangent there (the Newton-Raphson companion model), J x = J x* − F(x*), with J the
Jacobian and F the residual at x*. The right-hand side then includes each linearised
device's equivalent current, and the equations' solution is the operating point itself
(exactly, up to the residual the solver left, which the self-check bounds).

For a circuit of resistors and independent sources only, the conductance matrix written
by inspection (the net rows and net columns) is symmetric, with a positive diagonal (the
sum of the conductances at the net) and off-diagonal entries that are minus the
conductance between two nets, never positive (e.g. Alexander & Sadiku, "Fundamentals of
Electric Circuits", 5th ed., 2013, sec. 3.6, "Nodal and mesh analyses by inspection" —
edition and section from memory). `Inspection` says whether that holds and names the
first entry that breaks it; controlled elements and linearised devices break it
legitimately, and the statement then says so.
"""

from __future__ import annotations

import io
from dataclasses import dataclass

import numpy as np
import scipy.io
import scipy.sparse as sp

from checker.solver.assembly import System
from checker.solver.newton import Equations

SYMMETRY_TOLERANCE = 1e-12  # relative to the largest entry: rounding in a sum of stamps


@dataclass(frozen=True)
class Unknown:
    """One unknown: `v(NET)` in V, or `i(PART)` in A (the current through PART from `from` to `to`,
    or into the output pin of a regulator, converter or op-amp's output equation)."""

    label: str
    unit: str
    about: str


@dataclass(frozen=True)
class Inspection:
    """Whether the conductance matrix is as nodal analysis by inspection writes it."""

    applies: bool  # only resistors and independent sources: the properties must hold
    holds: bool
    breach: str  # the first entry that breaks them, in words ("" when they hold)

    def statement(self) -> str:
        if self.holds:
            return ("the conductance matrix (net rows, net columns) is symmetric with a positive diagonal and "
                    "no positive entry off it, as writing it by inspection requires")
        if self.applies:
            return (f"the conductance matrix is NOT as writing it by inspection requires: {self.breach}; "
                    f"for a circuit of resistors and independent sources this is a fault in nodegate")
        return (f"the matrix is not as nodal analysis by inspection writes it: {self.breach}; expected here, "
                f"since the circuit has controlled or linearised parts")


@dataclass(frozen=True)
class Linearised:
    """J x = rhs at the solution: J sparse (rows and columns in unknown order), `rows` naming each
    row's equation (`net NAME` or the part), `unknowns` each column, `x` the solution."""

    matrix: sp.csc_matrix
    rhs: np.ndarray
    x: np.ndarray
    rows: tuple[str, ...]
    unknowns: tuple[Unknown, ...]
    n_nodes: int
    linearised: bool  # whether nonlinear devices were replaced by their tangents
    inspection: Inspection


def linearise(system: System, x: np.ndarray) -> Linearised:
    """The equations of `system` as solved at `x` (see the module docstring)."""
    n = system.n_nodes
    if system.nonlinear_devices:
        residual, jacobian, _ = Equations(system).linearise(x)
        matrix = sp.csc_matrix(jacobian)
        rhs = matrix @ x - residual
    else:
        matrix, rhs = sp.csc_matrix(system.matrix), system.rhs.copy()
    matrix.eliminate_zeros()
    unknowns = [Unknown(f"v({net})", "V", f"the voltage of net {net}") for net in system.nets[1:]]
    rows = [f"net {net}" for net in system.nets[1:]]
    owners = _branch_owners(system)
    for row in range(n, system.size):
        kind, name, pins = owners.get(row, ("device", "?", ()))
        unknowns.append(Unknown(f"i({name})", "A", _current_about(kind, name, pins)))
        rows.append(name)
    return Linearised(matrix, rhs, np.asarray(x, float), tuple(rows), tuple(unknowns), n,
                      bool(system.nonlinear_devices), inspect(system, matrix))


def _branch_owners(system: System) -> dict[int, tuple[str, str, tuple]]:
    owners = {}
    for device in system.devices:
        branch = getattr(device, "branch", None)
        if branch is None:
            continue
        for part, row in zip(device.parts, np.asarray(branch).tolist()):
            if row >= 0:
                owners[row] = (part.kind, part.name, part.pins)
    return owners


def _current_about(kind: str, name: str, pins: tuple) -> str:
    if tuple(pin for pin, _ in pins) == ("from", "to"):
        return f"the current through {name} from {pins[0][1]} to {pins[1][1]}"
    return f"the current {name}'s output equation delivers into its out pin's net"


def inspect(system: System, matrix: sp.spmatrix) -> Inspection:
    """Symmetry, positive diagonal and non-positive off-diagonal entries of the conductance block;
    symmetry of the whole matrix (the branch incidences of independent sources are symmetric too)."""
    n = system.n_nodes
    applies = not system.nonlinear_devices and all(hasattr(d, "role") for d in system.devices)
    dense_scale = float(abs(matrix).max()) if matrix.nnz else 1.0
    tolerance = SYMMETRY_TOLERANCE * dense_scale
    labels = [f"v({net})" for net in system.nets[1:]] + [f"i({name})" for name in _branch_names(system)]
    row_names = [f"net {net}" for net in system.nets[1:]] + list(_branch_names(system))
    conductance = sp.csr_matrix(matrix)[:n, :n]
    diagonal = conductance.diagonal()
    touched = np.diff(conductance.indptr) > 0  # a net held only by voltage-defined parts has an empty row
    low = np.flatnonzero(~(diagonal > 0) & touched)
    if low.size:
        k = int(low[0])
        return Inspection(applies, False, f"the diagonal entry of {row_names[k]} is {diagonal[k]:.4g} S, not above zero")
    coo = conductance.tocoo()
    positive = (coo.row != coo.col) & (coo.data > tolerance)
    if np.any(positive):
        k = int(np.flatnonzero(positive)[0])
        return Inspection(applies, False, f"row {row_names[coo.row[k]]}, column {labels[coo.col[k]]} is "
                                          f"{coo.data[k]:.4g} S, above zero")
    asymmetry = sp.coo_matrix(matrix - matrix.T)
    off = np.abs(asymmetry.data) > tolerance
    if np.any(off):
        order = np.lexsort((asymmetry.col[off], asymmetry.row[off]))
        r, c = int(asymmetry.row[off][order[0]]), int(asymmetry.col[off][order[0]])
        dense = sp.csr_matrix(matrix)
        return Inspection(applies, False, f"it is not symmetric: row {row_names[r]}, column {labels[c]} is "
                                          f"{dense[r, c]:.4g} but row {row_names[c]}, column {labels[r]} is "
                                          f"{dense[c, r]:.4g}")
    return Inspection(applies, True, "")


def _branch_names(system: System) -> list[str]:
    owners = _branch_owners(system)
    return [owners.get(row, ("device", "?", ()))[1] for row in range(system.n_nodes, system.size)]


def matrix_market(equations: Linearised, title: str) -> str:
    """The augmented matrix [J | rhs] in Matrix Market coordinate form (scipy.io.mmwrite): n rows and
    n + 1 columns, the last column the right-hand side; comments name every row and column."""
    augmented = sp.hstack([equations.matrix, sp.csc_matrix(equations.rhs.reshape(-1, 1))], format="coo")
    lines = [title, "columns 1..n are the unknowns, column n+1 the right-hand side:",
             *(f"column {k + 1}: {u.label} in {u.unit}, {u.about}" for k, u in enumerate(equations.unknowns)),
             f"column {len(equations.unknowns) + 1}: the right-hand side (A in net rows, V in branch rows)",
             *(f"row {k + 1}: {row}" for k, row in enumerate(equations.rows))]
    buffer = io.BytesIO()
    scipy.io.mmwrite(buffer, augmented, comment="\n".join(" " + line for line in lines), precision=17)
    return buffer.getvalue().decode("utf-8")
