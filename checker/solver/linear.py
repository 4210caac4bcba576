"""Sparse LU factorisation and solves, turning numerical failure into NoSolutionError.

**Ordering.** Modified nodal matrices are structurally symmetric but for controlled sources, so
the columns are ordered by minimum degree on the pattern of AᵀA + A (SuperLU's
`MMD_AT_PLUS_A`) rather than scipy's default COLAMD, which orders for AᵀA and fills in about
twice as much on a resistor grid (docs/models.md, "Performance"). Systems of at least
REUSE_SIZE unknowns keep that ordering per sparsity pattern (`Orderings`, one per topology):
a later matrix of the same pattern (the next Newton-Raphson Jacobian, another sample of a
linear board) is put into that order by one index map and factorised with SuperLU's
`NATURAL` ordering, so the minimum-degree search runs once per pattern, not once per
factorisation.

**Threads.** Under load, BLAS running two threads made SuperLU's solves with many right-hand
sides several times slower on the 2-core development machine; systems of at least
SINGLE_THREAD_SIZE unknowns are factorised and solved with BLAS held to one thread
(`one_thread`, through threadpoolctl when it is installed).

The most recent factorisation stays reachable through `latest` until the next one is made:
the self-check (`checker.solver.selfcheck`) estimates the condition of the system an
operating point was solved from with the LU factors already made (the linear solve's, or
Newton-Raphson's last Jacobian), so that estimating costs a few triangular solves, never
another factorisation.
"""

from __future__ import annotations

import contextlib
from typing import Iterator

import numpy as np
import scipy.sparse as sp
from scipy.sparse.linalg import splu

from checker.design import Netlist
from checker.errors import NoSolutionError

ORDERING = "MMD_AT_PLUS_A"  # SuperLU's column ordering: minimum degree on the pattern of AᵀA + A
DENSE_ORDERING = "COLAMD"  # for matrices with a dense row or column (see `ordering_for`)
DENSE_FACTOR, DENSE_FLOOR = 10.0, 16  # a column with more than max(DENSE_FLOOR, DENSE_FACTOR·√n) entries is dense
REUSE_SIZE = 200  # unknowns from which an ordering is kept per sparsity pattern and reused
SINGLE_THREAD_SIZE = 2000  # unknowns from which BLAS is held to one thread while factorising and solving
MAX_ORDERINGS = 8  # kept per topology


class Ordering:
    """A symmetric permutation `order` of one sparsity pattern (row and column k of the ordered
    matrix are row and column order[k] of the original), with the map that puts the data of any
    CSC matrix of that pattern into the ordered matrix's CSC data."""

    def __init__(self, matrix: sp.csc_matrix, perm_c: np.ndarray):
        self.indptr, self.indices = matrix.indptr, matrix.indices
        self.order = np.argsort(perm_c).astype(np.intp)
        size = matrix.shape[0]
        numbered = sp.csc_matrix((np.arange(1.0, matrix.nnz + 1.0), matrix.indices, matrix.indptr), shape=(size, size))
        ordered = numbered[self.order][:, self.order].tocsc()
        ordered.sort_indices()
        self.map = ordered.data.astype(np.intp) - 1
        self.ordered_indices = ordered.indices.astype(np.intc)
        self.ordered_indptr = ordered.indptr.astype(np.intc)

    def fits(self, matrix: sp.csc_matrix) -> bool:
        return ((matrix.indptr is self.indptr or np.array_equal(matrix.indptr, self.indptr))
                and (matrix.indices is self.indices or np.array_equal(matrix.indices, self.indices)))

    def ordered(self, matrix: sp.csc_matrix) -> sp.csc_matrix:
        size = matrix.shape[0]
        return sp.csc_matrix((matrix.data[self.map], self.ordered_indices, self.ordered_indptr), shape=(size, size))


class Orderings:
    """The orderings made for the sparsity patterns of one topology (at most MAX_ORDERINGS)."""

    def __init__(self) -> None:
        self._kept: list[Ordering] = []

    def find(self, matrix: sp.csc_matrix) -> Ordering | None:
        return next((ordering for ordering in self._kept if ordering.fits(matrix)), None)

    def keep(self, ordering: Ordering) -> None:
        self._kept = (self._kept + [ordering])[-MAX_ORDERINGS:]


class _Ordered:
    """SuperLU's factors of the ordered matrix B = A[order][:, order], solving with A (or Aᵀ)."""

    def __init__(self, lu, order: np.ndarray):
        self._lu, self._order = lu, order

    def solve(self, rhs: np.ndarray, trans: str = "N") -> np.ndarray:
        y = self._lu.solve(np.ascontiguousarray(rhs[self._order]), trans=trans)
        x = np.empty_like(y)
        x[self._order] = y
        return x


class Factor:
    """The LU factors of one system matrix, reusable for any number of right-hand sides.

    With `orderings` (those of the matrix's topology), a system of at least REUSE_SIZE unknowns
    reuses the ordering made for an earlier matrix of the same sparsity pattern, or makes and keeps one.
    """

    def __init__(self, matrix: sp.csc_matrix, netlist: Netlist, orderings: Orderings | None = None):
        global _latest
        self.netlist = netlist
        self.matrix = matrix
        self.size = matrix.shape[0]
        self._lu = None
        self.digits_lost: float | None = None  # the self-check's estimate, made once per factorisation
        if self.size:
            try:
                with one_thread(self.size):
                    self._lu = self._factorise(matrix, orderings if self.size >= REUSE_SIZE else None)
            except RuntimeError as failure:  # SuperLU: "Factor is exactly singular"
                raise singular(netlist) from failure
        _latest = self

    @staticmethod
    def _factorise(matrix: sp.csc_matrix, orderings: Orderings | None):
        ordering = None if orderings is None else orderings.find(matrix)
        if ordering is not None:
            return _Ordered(splu(ordering.ordered(matrix), permc_spec="NATURAL"), ordering.order)
        spec = ordering_for(matrix)
        lu = splu(matrix, permc_spec=spec)
        if orderings is not None and spec == ORDERING:
            orderings.keep(Ordering(matrix, lu.perm_c))
        return lu

    def solve(self, rhs: np.ndarray) -> np.ndarray:
        """x with A x = rhs; `rhs` may hold one case per column."""
        if not self.size:
            return np.zeros_like(rhs)
        with one_thread(self.size):
            x = self._lu.solve(rhs)
        if not np.all(np.isfinite(x)):
            raise singular(self.netlist)
        return x

    def solve_cases(self, rhs: np.ndarray) -> np.ndarray:
        """`solve` of one case per column, through the columns' span when that is narrower.

        Cases that differ only in source values have right-hand sides that are nonzero in the same
        few rows (the sources' rows). With fewer such rows than cases, A⁻¹ is applied to one unit
        column per row and each case's solution is that basis times its values there: a few
        triangular solves and one matrix product instead of one solve per case.
        """
        if rhs.ndim != 2 or not self.size:
            return self.solve(rhs)
        rows = np.flatnonzero(np.any(rhs != 0.0, axis=1))
        if rows.size >= rhs.shape[1]:
            return self.solve(rhs)
        if not rows.size:  # every source at zero
            return np.zeros_like(rhs)
        units = np.zeros((self.size, rows.size))
        units[rows, np.arange(rows.size)] = 1.0
        basis = self.solve(units)
        with one_thread(self.size):
            x = basis @ rhs[rows]
        if not np.all(np.isfinite(x)):
            raise singular(self.netlist)
        return x

    @property
    def lu(self):
        """The factors (None for an empty system): `solve(b, trans="T")` solves with Aᵀ."""
        return self._lu


def ordering_for(matrix: sp.csc_matrix) -> str:
    """ORDERING, or DENSE_ORDERING when a column holds more than max(DENSE_FLOOR, DENSE_FACTOR·√n)
    entries (a supply rail feeding thousands of parts): SuperLU's minimum degree slows down
    quadratically on such a column (120 ms against COLAMD's 5 ms for a 10,000-string LED panel,
    at the same fill), while COLAMD sets dense columns aside, as AMD does (Amestoy, Davis & Duff,
    SIAM J. Matrix Anal. Appl. 17, 1996; from memory)."""
    size = matrix.shape[0]
    if size <= DENSE_FLOOR:
        return ORDERING
    longest = int(np.max(np.diff(matrix.indptr), initial=0))
    return DENSE_ORDERING if longest > max(DENSE_FLOOR, DENSE_FACTOR * np.sqrt(size)) else ORDERING


@contextlib.contextmanager
def one_thread(size: int) -> Iterator[None]:
    """BLAS held to one thread for a system of at least SINGLE_THREAD_SIZE unknowns (when threadpoolctl
    is installed; otherwise nothing changes)."""
    controller = _controller() if size >= SINGLE_THREAD_SIZE else None
    if controller is None:
        yield
        return
    with controller.limit(limits=1, user_api="blas"):
        yield


_CONTROLLER: list = []


def _controller():
    if not _CONTROLLER:
        try:
            from threadpoolctl import ThreadpoolController
            _CONTROLLER.append(ThreadpoolController())
        except Exception:  # not installed, or it cannot read the loaded libraries: threads stay as they are
            _CONTROLLER.append(None)
    return _CONTROLLER[0]


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
