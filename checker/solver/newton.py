"""Newton-Raphson on the modified nodal equations of a circuit with nonlinear devices.

The residual is F(x) = A x - b + f(x): the constant stamps plus the nonlinear
devices' currents; each step solves J dx = -F with J = A + df/dx (Newton-Raphson
as applied to circuits in Vlach & Singhal, "Computer Methods for Circuit Analysis
and Design", 1983 — from memory). Devices may shorten a step through `limit`.
"""

from __future__ import annotations

import numpy as np
import scipy.sparse as sp

from checker.errors import NoSolutionError
from checker.solver.assembly import System
from checker.solver.linear import Factor

VOLTAGE_ABSTOL = 1e-9  # V: smallest voltage step (and branch-equation residual) that still counts
CURRENT_ABSTOL = 1e-12  # A: smallest current step (and KCL residual) that still counts
RELTOL = 1e-9
"""Relative tolerance of both tests, against the size of the unknown (step test) or
against the sum of the magnitudes of the currents meeting at the net (residual test).
Converged means every net's voltage step and every net's KCL residual are within
ABSTOL + RELTOL * scale: the common practice of circuit solvers, set tight because
Newton-Raphson converges quadratically near the solution, so a tight test costs an
iteration or two while keeping margins to limits exact to many digits."""
MAX_ITERATIONS = 100


def newton(system: System, x0: np.ndarray | None = None) -> tuple[np.ndarray, int]:
    """The unknowns at the operating point and the number of Newton iterations taken."""
    x = np.zeros(system.size) if x0 is None else np.array(x0, dtype=float)
    for iteration in range(1, MAX_ITERATIONS + 1):
        residual, jacobian, scale = _linearise(system, x)
        x_new = _limit(system, x + Factor(jacobian, system.netlist).solve(-residual), x)
        if _converged(system, x_new - x, x_new, residual, scale):
            return x_new, iteration
        x = x_new
    raise _no_convergence(system, residual, scale)


def _linearise(system: System, x: np.ndarray) -> tuple[np.ndarray, sp.csc_matrix, np.ndarray]:
    """Residual F(x), Jacobian J(x), and the scale of each row for the residual test."""
    x_ext = np.append(x, 0.0)
    residual = system.matrix @ x - system.rhs
    scale = abs(system.matrix) @ np.abs(x) + np.abs(system.rhs)
    rows, cols, values = [], [], []
    for device in system.nonlinear_devices:
        stamp = device.evaluate(x_ext)
        keep = stamp.rows >= 0
        np.add.at(residual, stamp.rows[keep], stamp.currents[keep])
        np.add.at(scale, stamp.rows[keep], np.abs(stamp.currents[keep]))
        jac = stamp.jacobian
        keep = (jac.rows >= 0) & (jac.cols >= 0)
        rows.append(jac.rows[keep])
        cols.append(jac.cols[keep])
        values.append(jac.values[keep])
    derivative = sp.csc_matrix((np.concatenate(values), (np.concatenate(rows), np.concatenate(cols))),
                               shape=system.matrix.shape)
    return residual, (system.matrix + derivative).tocsc(), scale


def _limit(system: System, x_new: np.ndarray, x_old: np.ndarray) -> np.ndarray:
    new, old = np.append(x_new, 0.0), np.append(x_old, 0.0)
    for device in system.nonlinear_devices:
        new = device.limit(new, old)
    return new[:-1]


def _tolerances(system: System) -> tuple[np.ndarray, np.ndarray]:
    """Absolute tolerance per unknown: volts for net voltages, amps for branch currents."""
    nodes, size = system.n_nodes, system.size
    step = np.where(np.arange(size) < nodes, VOLTAGE_ABSTOL, CURRENT_ABSTOL)
    residual = np.where(np.arange(size) < nodes, CURRENT_ABSTOL, VOLTAGE_ABSTOL)
    return step, residual


def _converged(system: System, step: np.ndarray, x: np.ndarray, residual: np.ndarray, scale: np.ndarray) -> bool:
    step_tol, residual_tol = _tolerances(system)
    return bool(np.all(np.abs(step) <= step_tol + RELTOL * np.abs(x))
                and np.all(np.abs(residual) <= residual_tol + RELTOL * scale))


def _no_convergence(system: System, residual: np.ndarray, scale: np.ndarray) -> NoSolutionError:
    netlist = system.netlist
    _, residual_tol = _tolerances(system)
    worst = int(np.argmax(np.abs(residual) / (residual_tol + RELTOL * scale)))
    where = (f"the largest current imbalance is at net `{system.nets[worst + 1]}`" if worst < system.n_nodes
             else "the largest imbalance is in a device's branch equation")
    return NoSolutionError(
        f"circuit `{netlist.circuit}` did not converge to a DC operating point in case "
        f"`{netlist.case}` after {MAX_ITERATIONS} Newton iterations", netlist.case_location, (where,))
