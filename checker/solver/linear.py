"""Sparse LU factorisation and solves, turning numerical failure into NoSolutionError.

The most recent factorisation stays reachable through `latest` until the next one is made:
the self-check (`checker.solver.selfcheck`) estimates the condition of the system an
operating point was solved from with the LU factors already made (the linear solve's, or
Newton-Raphson's last Jacobian), so that estimating costs a few triangular solves, never
another factorisation.
"""

from __future__ import annotations

import numpy as np
import scipy.sparse as sp
from scipy.sparse.linalg import splu

from checker.design import Netlist
from checker.errors import NoSolutionError


class Factor:
    """The LU factors of one system matrix, reusable for any number of right-hand sides."""

    def __init__(self, matrix: sp.csc_matrix, netlist: Netlist):
        global _latest
        self.netlist = netlist
        self.matrix = matrix
        self.size = matrix.shape[0]
        self._lu = None
        self.digits_lost: float | None = None  # the self-check's estimate, made once per factorisation
        if self.size:
            try:
                self._lu = splu(matrix)
            except RuntimeError as failure:  # SuperLU: "Factor is exactly singular"
                raise singular(netlist) from failure
        _latest = self

    def solve(self, rhs: np.ndarray) -> np.ndarray:
        """x with A x = rhs; `rhs` may hold one case per column."""
        if not self.size:
            return np.zeros_like(rhs)
        x = self._lu.solve(rhs)
        if not np.all(np.isfinite(x)):
            raise singular(self.netlist)
        return x

    @property
    def lu(self):
        """scipy's SuperLU object (None for an empty system): `solve(b, trans="T")` solves with Aᵀ."""
        return self._lu


_latest: Factor | None = None


def latest(matrix: sp.spmatrix | None = None, netlist: Netlist | None = None, size: int = -1) -> Factor | None:
    """The most recent factorisation if it is of `matrix` (the same object), or else of a matrix of
    `size` unknowns made for `netlist` (the same object: Newton-Raphson's last Jacobian); None otherwise."""
    factor = _latest
    if factor is None:
        return None
    if matrix is not None and factor.matrix is matrix:
        return factor
    if netlist is not None and factor.netlist is netlist and factor.size == size:
        return factor
    return None


def forget() -> None:
    """Let the most recent factorisation go (its memory), once nothing will ask for it."""
    global _latest
    _latest = None


def singular(netlist: Netlist) -> NoSolutionError:
    """The guard for a singular matrix that slipped past the graph diagnosis."""
    return NoSolutionError(
        f"circuit `{netlist.circuit}` has no single DC operating point in case `{netlist.case}`: "
        f"its equations are singular (no floating net or source loop was found to blame)",
        netlist.case_location)
