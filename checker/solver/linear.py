"""Sparse LU factorisation and solves, turning numerical failure into NoSolutionError."""

from __future__ import annotations

import numpy as np
import scipy.sparse as sp
from scipy.sparse.linalg import splu

from checker.design import Netlist
from checker.errors import NoSolutionError


class Factor:
    """The LU factors of one system matrix, reusable for any number of right-hand sides."""

    def __init__(self, matrix: sp.csc_matrix, netlist: Netlist):
        self.netlist = netlist
        self.size = matrix.shape[0]
        self._lu = None
        if self.size:
            try:
                self._lu = splu(matrix)
            except RuntimeError as failure:  # SuperLU: "Factor is exactly singular"
                raise singular(netlist) from failure

    def solve(self, rhs: np.ndarray) -> np.ndarray:
        """x with A x = rhs; `rhs` may hold one case per column."""
        if not self.size:
            return np.zeros_like(rhs)
        x = self._lu.solve(rhs)
        if not np.all(np.isfinite(x)):
            raise singular(self.netlist)
        return x


def singular(netlist: Netlist) -> NoSolutionError:
    """The guard for a singular matrix that slipped past the graph diagnosis."""
    return NoSolutionError(
        f"circuit `{netlist.circuit}` has no single DC operating point in case `{netlist.case}`: "
        f"its equations are singular (no floating net or source loop was found to blame)",
        netlist.case_location)
