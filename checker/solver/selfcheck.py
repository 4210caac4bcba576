"""Every operating point checks its own answer before anyone reads it (docs/models.md,
"Checking its own answers").

Three checks, all vectorised over the whole circuit, made on the very numbers the reports
show (the currents into every pin, read off the solution vector):

1. **Kirchhoff's current law at every net, ground included.** The currents flowing from a
   net into the pins on it must add up to zero. Net k passes when
   |sum| <= KCL_RELATIVE * m_k + KCL_RELATIVE_FLOOR * max(m), where m_k is the size of the
   terms that meet in that net's equation: sum over the matrix row of |a_kj|·|x_j|, plus the
   fixed current injected there, plus the magnitudes of the nonlinear devices' currents there
   (a 1 mΩ shunt carrying 1 µA between two nets at 3 V has terms of 3 kA that must cancel to
   1 µA: rounding in the voltages is measured against those, not against the 1 µA). max(m)
   is the circuit's own current scale, so a net carrying only leakage is not held to a
   precision the rest of the board cannot give. Ground's sum is what the other nets' sums
   leave, so its tolerance is theirs added up (plus its own share).
2. **The branch equations** (a source's voltage, a short, a regulator's output): each
   row's residual in volts against KCL_RELATIVE times the size of its terms plus
   KCL_RELATIVE_FLOOR times the largest net voltage. Without it a solution scaled as a
   whole (every voltage and current 1 % high) would balance every net.
3. **The power balance (Tellegen's theorem).** The parts' powers add up to zero: the sum of
   v·i over every pin of every part equals sum over nets of V_net times that net's current
   sum, which (1) bounds. It passes within KCL_RELATIVE times the sum of |v·i| over every pin
   plus sum over nets of |V_net| times that net's KCL tolerance. It also proves that every
   model's pin currents add up to zero, since ground's sum and the power use them.

A solution that fails any of these is not returned: `NoSolutionError` names the net (and its
parts) or the part's equation, at the case. The tolerances are a thousand times the
solver's own convergence test (1e-9 relative), which Newton-Raphson meets before its last
step and beats after it, so a failure means a wrong answer, not a strict test.

**Digits lost.** The relative error of a solution of A x = b computed in floating point
is bounded by about κ(A)·u, u = 2^-53 ≈ 1.1e-16 (Higham, "Accuracy and Stability of
Numerical Algorithms", 2nd ed., 2002, ch. 7 — chapter from memory), so log10 κ decimal
digits of the 16 that double precision carries are lost. κ is the 1-norm condition number
of the system after scaling every row and then every column to a largest entry of 1: a
badly scaled system (a 1 pS junction shunt beside 1 kΩ resistors, volts beside amps) is
not an inaccurate one, and equilibrating first removes that spurious part (van der Sluis,
Numerische Mathematik 14, 1969 — from memory). ‖B⁻¹‖₁ is estimated with scipy's
`onenormest` (Higham & Tisseur's block 1-norm estimator) through the LU factors the
solve already made, at a few triangular solves; up to DENSE_LIMIT unknowns it is computed
exactly from one multi-column solve, which is cheaper still. For a nonlinear circuit the
factors are those of Newton-Raphson's last Jacobian, within the convergence tolerance of
the Jacobian at the solution.

**The conditioning warning.** A value shown to DISPLAYED_DIGITS significant figures needs
that many correct digits plus GUARD_DIGITS (the estimate is an order of magnitude at best,
and near comparisons show more figures), so the warning fires when 16 − digits lost falls
below their sum. It names the parts whose values lie furthest apart (the largest and
smallest resistances), since their ratio is the usual cause.
"""

from __future__ import annotations

import math
from dataclasses import dataclass
from typing import Sequence

import numpy as np
import scipy.sparse as sp
from scipy.sparse.linalg import LinearOperator, onenormest

from checker.design import Netlist, OperatingPoint
from checker.errors import NoSolutionError

KCL_RELATIVE = 1e-6  # of the size of the terms meeting in a net's (or branch's) equation
KCL_RELATIVE_FLOOR = 1e-9  # of the circuit's largest net current scale (A) or net voltage (V)
DENSE_LIMIT = 64  # unknowns up to which ‖B⁻¹‖₁ is computed exactly
UNIT_ROUNDOFF = 2.0 ** -53
DOUBLE_DIGITS = -math.log10(UNIT_ROUNDOFF)  # 15.95 decimal digits carried by a float64
DISPLAYED_DIGITS = 4  # significant figures of the solve table and the reports' operating points
GUARD_DIGITS = 2


@dataclass(frozen=True)
class SelfCheck:
    """What an operating point's own checks found (all passed, or there would be no point).

    `kcl` is the largest current imbalance of any net (A), at `kcl_net`; `power` the magnitude
    of the sum of all parts' powers (W); `branch` the largest residual of a branch equation (V);
    `digits_lost` the decimal digits the system's conditioning may cost (None where it was not
    estimated).
    """

    kcl: float
    kcl_net: str
    power: float
    branch: float
    digits_lost: float | None

    @property
    def digits_left(self) -> float | None:
        return None if self.digits_lost is None else DOUBLE_DIGITS - self.digits_lost

    @property
    def ill_conditioned(self) -> bool:
        """Whether the digits left are fewer than the reports display (plus a guard)."""
        left = self.digits_left
        return left is not None and left < DISPLAYED_DIGITS + GUARD_DIGITS

    def as_json(self) -> dict:
        return {"kcl": self.kcl, "power": self.power,
                "digits_lost": None if self.digits_lost is None else round(self.digits_lost, 2)}


def solution_seen(system, x: np.ndarray) -> np.ndarray:
    """The solution vector as the self-check and the reports receive it: `x` itself.

    The one seam between the solver and what it reports, kept as a module-level function so
    that a test can replace it with one that corrupts the solution and prove the check fires.
    """
    return x


def check(system, x: np.ndarray, pin_currents: Sequence[np.ndarray], power: Sequence[np.ndarray],
          digits_lost: float | None) -> SelfCheck:
    """The self-check of solution `x` of `system` (a `checker.solver.assembly.System`), given each
    device's currents into its pins (parts, pins) and powers (parts) as the reports will show them.
    Raises NoSolutionError naming the first thing that does not balance."""
    n = system.n_nodes
    x_ext = np.append(x, 0.0)
    devices = system.devices
    where, grounded = _pin_rows(devices, n)
    currents = np.concatenate([c.ravel() for c in pin_currents] or [np.empty(0)])
    sums = np.bincount(where, currents, n + 1)

    linear_terms = magnitude(system.matrix) @ np.abs(x) + np.abs(system.rhs) if system.size else np.zeros(0)
    size = np.zeros(n + 1)
    size[:n] = linear_terms[:n]
    nonlinear = [k for k, d in enumerate(devices) if d.nonlinear]
    if nonlinear:
        size += np.bincount(np.concatenate([where_of(devices[k], n) for k in nonlinear]),
                            np.abs(np.concatenate([pin_currents[k].ravel() for k in nonlinear])), n + 1)
    size[n] = np.abs(currents[grounded]).sum()
    floor = KCL_RELATIVE_FLOOR * float(np.max(size, initial=0.0))
    tolerance = KCL_RELATIVE * size + floor
    tolerance[n] += tolerance[:n].sum()
    bad = np.abs(sums) > tolerance
    bad |= ~np.isfinite(sums)
    if np.any(bad):  # the net furthest out of balance against its own tolerance
        row = int(np.argmax(np.where(bad, _ratio(sums, tolerance), -1.0)))
        raise _unbalanced_net(system, row, float(sums[row]), float(tolerance[row]))

    branch = _branch_residual(system, x, x_ext, linear_terms)
    total = float(np.sum([p.sum() for p in power])) if power else 0.0
    scale = float(np.abs(x_ext[where] * currents).sum())
    power_tolerance = KCL_RELATIVE * scale + float(np.abs(x[:n]) @ tolerance[:n])
    if not abs(total) <= power_tolerance:
        raise _failed(system, f"the parts' powers add up to {total:.3g} W instead of zero (tolerance "
                              f"{power_tolerance:.3g} W): a model's pin currents do not add up to zero")
    worst = int(np.argmax(np.abs(sums))) if sums.size else n
    return SelfCheck(float(np.abs(sums[worst])) if sums.size else 0.0,
                     system.nets[0] if worst == n else system.nets[worst + 1], abs(total), branch, digits_lost)


_PIN_ROWS: list = [((), None)]  # (the last devices' node arrays, their pin rows): shared by a group's cases


def _pin_rows(devices, n: int) -> tuple[np.ndarray, np.ndarray]:
    """The row of every pin of every device (ground as row n, last) and where ground's pins are; the same
    node arrays (a topology's) give the same rows, so cases that share them share the work."""
    key = tuple(d.nodes for d in devices)
    kept, rows = _PIN_ROWS[0]  # one read of one tuple: another thread may replace it, never half of it
    if rows is None or len(kept) != len(key) or not all(a is b for a, b in zip(kept, key)) or rows[2] != n:
        where = np.concatenate([d.nodes.ravel() for d in devices] or [np.empty(0, int)])
        where = np.where(where < 0, n, where)
        rows = (where, np.flatnonzero(where == n), n)
        _PIN_ROWS[0] = (key, rows)
    return rows[0], rows[1]


_MAGNITUDE: list = [(None, None)]  # (the last matrix, |matrix|): the cases of one group share their matrix


def magnitude(matrix: sp.spmatrix) -> sp.spmatrix:
    """|matrix| entrywise, made once for the matrix that many cases in a row share."""
    kept = _MAGNITUDE[0]  # one read of one tuple, as in `_pin_rows`
    if kept[0] is not matrix:
        kept = (matrix, abs(matrix))
        _MAGNITUDE[0] = kept
    return kept[1]


def _ratio(residual: np.ndarray, tolerance: np.ndarray) -> np.ndarray:
    """|residual| / tolerance without a floating-point warning: infinite where either is not finite."""
    ratio = np.full(residual.shape, np.inf)
    np.divide(np.abs(residual), np.maximum(tolerance, np.finfo(float).tiny), out=ratio,
              where=np.isfinite(residual) & np.isfinite(tolerance))
    return ratio


def where_of(device, n: int) -> np.ndarray:
    nodes = device.nodes.ravel()
    return np.where(nodes < 0, n, nodes)


def _branch_residual(system, x: np.ndarray, x_ext: np.ndarray, linear_terms: np.ndarray) -> float:
    """The largest branch-equation residual (V); NoSolutionError naming the part beyond tolerance."""
    n, size = system.n_nodes, system.size
    if size == n:
        return 0.0
    residual = system.matrix @ x - system.rhs
    terms = linear_terms.copy()
    for device in system.devices:
        if device.nonlinear and device.n_branches:
            stamp = device.evaluate(x_ext)
            keep = stamp.rows >= n
            np.add.at(residual, stamp.rows[keep], stamp.currents[keep])
            np.add.at(terms, stamp.rows[keep], np.abs(stamp.currents[keep]))
    residual, terms = residual[n:], terms[n:]
    floor = KCL_RELATIVE_FLOOR * float(np.max(np.abs(x[:n]), initial=0.0))
    tolerance = KCL_RELATIVE * terms + floor
    bad = ~(np.abs(residual) <= tolerance)
    if np.any(bad):
        row = n + int(np.argmax(np.where(bad, _ratio(residual, tolerance), -1.0)))
        part = branch_owner(system, row)
        raise _failed(system, f"the equation of {part} is off by {float(residual[row - n]):.3g} V "
                              f"(tolerance {float(tolerance[row - n]):.3g} V)")
    return float(np.max(np.abs(residual), initial=0.0))


def branch_owner(system, row: int) -> str:
    """`the source V1`: the part whose branch equation or current is unknown `row`."""
    for device in system.devices:
        branch = getattr(device, "branch", None)
        if branch is not None and np.any(branch == row):
            part = device.parts[int(np.flatnonzero(branch == row)[0])]
            return f"the {part.kind} {part.name}"
    return "a device"


def parts_at(system, row: int) -> list[str]:
    """Names of the parts with a pin on unknown `row` (-1: ground), in netlist order."""
    found: list[tuple[int, str]] = []
    for device, positions in zip(system.devices, system.positions):
        hits = np.flatnonzero(np.any(device.nodes == row, axis=1))
        found += [(int(positions[h]), device.parts[h].name) for h in hits]
    return [name for _, name in sorted(found)]


def _unbalanced_net(system, row: int, imbalance: float, tolerance: float) -> NoSolutionError:
    n = system.n_nodes
    net = system.nets[0] if row == n else system.nets[row + 1]
    parts = parts_at(system, -1 if row == n else row)
    named = ", ".join(parts[:6]) + (f" and {len(parts) - 6} more" if len(parts) > 6 else "")
    return _failed(system, f"the currents into net `{net}` add up to {imbalance:.3g} A instead of zero "
                           f"(tolerance {tolerance:.3g} A)", (f"net `{net}` connects {named}",))


def _failed(system, what: str, notes: tuple[str, ...] = ()) -> NoSolutionError:
    netlist: Netlist = system.netlist
    return NoSolutionError(
        f"circuit `{netlist.circuit}` fails its own check in case `{netlist.case}`: {what}",
        netlist.case_location,
        notes + ("the solution was not reported; a solution that fails this check is a fault in nodegate, "
                 "please report it",))


def digits_lost(factor) -> float | None:
    """log10 of the equilibrated 1-norm condition number of `factor`'s matrix (see the module
    docstring), made once per factorisation; None for an empty system."""
    if factor is None or factor.lu is None:
        return None
    if factor.digits_lost is None:
        factor.digits_lost = _estimate(factor.matrix, factor.lu)
    return factor.digits_lost


def _estimate(matrix: sp.spmatrix, lu) -> float:
    """log10 κ₁(R A C), R and C the row and column equilibration, ‖(R A C)⁻¹‖₁ through `lu` (of A)."""
    size = matrix.shape[0]
    if size <= DENSE_LIMIT:  # numpy on a small dense copy: a tenth of the cost of sparse calls
        magnitude = np.abs(matrix.toarray())
        r = 1.0 / _nonzero(magnitude.max(axis=1))
        c = 1.0 / _nonzero((magnitude * r[:, None]).max(axis=0))
        norm = float(np.max((magnitude * r[:, None] * c).sum(axis=0)))
        inverse = lu.solve(np.diag(1.0 / r)) / c[:, None]  # (R A C)⁻¹ = C⁻¹ A⁻¹ R⁻¹
        inverse_norm = float(np.max(np.abs(inverse).sum(axis=0)))
    else:
        magnitude = abs(sp.csr_matrix(matrix))
        r = 1.0 / _nonzero(magnitude.max(axis=1).toarray().ravel())
        scaled = sp.diags(r) @ magnitude
        c = 1.0 / _nonzero(scaled.max(axis=0).toarray().ravel())
        norm = float(np.max(np.abs(scaled @ sp.diags(c)).sum(axis=0)))
        operator = LinearOperator(
            (size, size), dtype=float,
            matvec=lambda v: lu.solve(np.asarray(v, float).ravel() / r) / c,
            rmatvec=lambda v: lu.solve(np.asarray(v, float).ravel() / c, trans="T") / r,
            matmat=lambda m: lu.solve(np.asarray(m, float) / r[:, None]) / c[:, None],
            rmatmat=lambda m: lu.solve(np.asarray(m, float) / c[:, None], trans="T") / r[:, None])
        inverse_norm = float(onenormest(operator))
    condition = norm * inverse_norm
    if not math.isfinite(condition):
        return DOUBLE_DIGITS
    return max(0.0, math.log10(max(condition, 1.0)))


def _nonzero(values: np.ndarray) -> np.ndarray:
    return np.where(values > 0, values, 1.0)


def extremes(netlist: Netlist) -> tuple[tuple[str, float], tuple[str, float]] | None:
    """The parts with the smallest and the largest resistance (name, Ω), None with fewer than two."""
    resistors = [(p.name, p.value) for p in netlist.parts
                 if p.value_unit == "ohm" and p.value is not None and p.value > 0]
    if len(resistors) < 2:
        return None
    return min(resistors, key=lambda item: item[1]), max(resistors, key=lambda item: item[1])


def conditioning_warning(point: OperatingPoint) -> str | None:
    """`circuit X, case Y: …` in words when the point's digits left are fewer than those shown."""
    found = point.self_check
    if found is None or not found.ill_conditioned:
        return None
    text = (f"circuit `{point.netlist.circuit}`, case `{point.case}`: the equations are ill-conditioned: about "
            f"{found.digits_lost:.0f} of {DOUBLE_DIGITS:.0f} digits may be lost, so values shown to "
            f"{DISPLAYED_DIGITS} significant figures may be wrong in the last ones")
    pair = extremes(point.netlist)
    if pair is not None:
        (small, low), (large, high) = pair
        text += (f"; the resistances span {math.log10(high / low):.0f} decades, from {small} ({low:.3g} Ω) "
                 f"to {large} ({high:.3g} Ω)")
    return text


def conditioning_warnings(points: Sequence[OperatingPoint]) -> list[str]:
    """One warning per ill-conditioned point, in order."""
    return [text for text in map(conditioning_warning, points) if text is not None]
