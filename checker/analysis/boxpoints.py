"""Solving one case at many points of its tolerance box, and the limits' sides there.

A point is a row of deviations, one per toleranced value (`Tolerance`), each within
±tol. `BoxPoints.evaluate` gives the values the limits' side functions read at a
batch of points: exactly and without Python per point for a linear circuit
(`LinearBox`), by Newton-Raphson from the nominal point otherwise (a warm start). A
point where the circuit has no operating point is not an error of the whole check:
it is reported as failing every limit of the case there (`errors`).
"""

from __future__ import annotations

from dataclasses import dataclass
from typing import Sequence

import numpy as np

from checker.analysis.linearbox import LinearBox
from checker.analysis.blocks import JointSolver, solve_each
from checker.analysis.stacked import PointView, Stacked, stack_points
from checker.analysis.tolerances import Tolerance, perturbed
from checker.design import Netlist, OperatingPoint
from checker.errors import NodegateError
from checker.limits.engine import CompiledItem
from checker.limits.sides import Split
from checker.solver import Cache

Solved = OperatingPoint | str  # an operating point, or why there is none
BLOCKS = 64  # variants of a nonlinear case solved as one joint circuit (checker.analysis.blocks)


@dataclass
class Batch:
    """The values at a batch of points: `values` covers the points where `ok`; `errors` the rest."""

    values: Stacked | None
    ok: np.ndarray
    errors: dict[int, str]

    def side_keys(self, split: Split) -> np.ndarray:
        """(sides, points) ranking keys of every side; −inf where there is no operating point."""
        keys = np.full((len(split.sides), self.ok.size), -np.inf)
        if self.values is not None:
            margins = split.margins(self.values)
            keys[:, self.ok] = split.keys(self.values, margins)
        return keys

    def check_keys(self, item: CompiledItem) -> np.ndarray:
        """The rules' own ranking key of the whole check at every point (its relative margin; the
        check mixes units), one scalar evaluation per point; −inf where there is no operating point
        or the check has no value (a division by zero, say)."""
        keys = np.full(self.ok.size, -np.inf)
        rows = np.flatnonzero(self.ok)
        for position, row in enumerate(rows):
            try:
                keys[row] = item.check(PointView(self.values, position)).relative
            except (NodegateError, ArithmeticError, ValueError):
                keys[row] = -np.inf
        return np.where(np.isnan(keys), -np.inf, keys)

    def side_margins(self, split: Split) -> np.ndarray:
        margins = np.full((len(split.sides), self.ok.size), -np.inf)
        if self.values is not None:
            margins[:, self.ok] = split.margins(self.values)
        return margins


class BoxPoints:
    """One case of a circuit, solved at any points of its tolerance box; counts its solves."""

    def __init__(self, netlist: Netlist, tolerances: Sequence[Tolerance], nominal: OperatingPoint, cache: Cache):
        self.netlist, self.tolerances, self.nominal, self.cache = netlist, tuple(tolerances), nominal, cache
        self.fractions = np.array([t.fraction for t in self.tolerances])
        self.box = LinearBox.of(netlist, self.tolerances, cache) if self.tolerances else None
        self.joint = JointSolver(netlist, nominal, cache)
        self.solves = 0

    @property
    def linear(self) -> bool:
        return self.box is not None

    def netlist_at(self, deviations: np.ndarray) -> Netlist:
        return perturbed(self.netlist, {t.part: float(d) for t, d in zip(self.tolerances, deviations) if d != 0.0})

    def evaluate(self, deviations: np.ndarray, fallback: bool = True) -> Batch:
        """The values at every row of `deviations` (points, values). Without `fallback`, a nonlinear
        point Newton-Raphson cannot reach from nominal counts as unsolved at once (for a search's trial
        points: the search confirms its result with the full solver)."""
        deviations = np.atleast_2d(deviations)
        self.solves += len(deviations)
        if self.box is not None:
            return Batch(self.box.stacked(deviations), np.ones(len(deviations), bool), {})
        netlists = [self.netlist_at(row) for row in deviations]
        solved = []
        for start in range(0, len(netlists), BLOCKS):
            solved += self.joint.solve(netlists[start:start + BLOCKS], fallback)
        ok = np.array([not isinstance(s, str) for s in solved], bool)
        errors = {i: s for i, s in enumerate(solved) if isinstance(s, str)}
        good = [(s, n) for s, n in zip(solved, netlists) if not isinstance(s, str)]
        values = stack_points([s for s, _ in good], [n for _, n in good]) if good else None
        return Batch(values, ok, errors)

    def solve(self, deviations: np.ndarray) -> list[Solved]:
        """The ordinary solver at every row (what confirms a reported point), started at nominal."""
        netlists = [self.netlist_at(row) for row in np.atleast_2d(deviations)]
        return solve_each(netlists, self.cache, [self.nominal] * len(netlists))
