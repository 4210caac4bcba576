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
from checker.analysis.batch import Tiled, start_of
from checker.analysis.stacked import PointView, Stacked, joined, stack_points
from checker.analysis.tolerances import Tolerance, perturbed
from checker.design import Netlist, OperatingPoint
from checker.errors import NodegateError
from checker.limits.engine import CompiledItem
from checker.limits.sides import Split
from checker.solver import Cache

Solved = OperatingPoint | str  # an operating point, or why there is none
BLOCKS = 64  # variants of a nonlinear case solved as one joint circuit (checker.analysis.blocks)
BATCH_ENTRIES = 20_000_000  # points x unknowns² of one batched Newton-Raphson's dense blocks (160 MB)


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
        self._tilings: dict[int, Tiled | None] = {}

    @property
    def linear(self) -> bool:
        return self.box is not None

    def netlist_at(self, deviations: np.ndarray) -> Netlist:
        return perturbed(self.netlist, {t.part: float(d) for t, d in zip(self.tolerances, deviations) if d != 0.0})

    def evaluate(self, deviations: np.ndarray, fallback: bool = True) -> Batch:
        """The values at every row of `deviations` (points, values). Without `fallback`, a nonlinear
        point Newton-Raphson cannot reach from nominal counts as unsolved at once (for a search's trial
        points: the search confirms its result with the full solver).

        A linear case: `LinearBox`, every point checked against its own equations; a nonlinear one:
        Newton-Raphson over the whole batch (`checker.analysis.batch`), with its self-check and
        stability screen. A point either leaves is solved with the others it leaves as one joint
        circuit (`JointSolver`), one netlist at a time where that fails."""
        deviations = np.atleast_2d(deviations)
        self.solves += len(deviations)
        pieces: list[tuple[np.ndarray, Stacked]] = []
        ok = np.zeros(len(deviations), bool)
        if self.box is not None:
            values, ok = self.box.checked(deviations)
            if values is not None:
                pieces.append((np.flatnonzero(ok), values))
        elif self.tolerances:
            per = max(1, BATCH_ENTRIES // max(len(self.nominal.nets) + len(self.nominal.parts), 1) ** 2)
            for start in range(0, len(deviations), per):
                part = deviations[start:start + per]
                tiled = self._tiled(len(part))
                if tiled is None:
                    break
                solved = tiled.solve(part, start_of(tiled, self.nominal))
                rows = np.flatnonzero(solved.ok)
                if rows.size:
                    pieces.append((start + rows, tiled.stacked(solved, part, rows)))
                    ok[start + rows] = True
        left = np.flatnonzero(~ok)
        netlists = [self.netlist_at(deviations[i]) for i in left]
        solved = []
        for start in range(0, len(netlists), BLOCKS):
            solved += self.joint.solve(netlists[start:start + BLOCKS], fallback)
        errors = {int(i): s for i, s in zip(left, solved) if isinstance(s, str)}
        good = [(int(i), s, n) for i, s, n in zip(left, solved, netlists) if not isinstance(s, str)]
        if good:
            pieces.append((np.array([i for i, _, _ in good]), stack_points([s for _, s, _ in good],
                                                                           [n for _, _, n in good])))
            ok[[i for i, _, _ in good]] = True
        return Batch(joined(pieces) if pieces else None, ok, errors)

    def _tiled(self, count: int) -> Tiled | None:
        if count not in self._tilings:
            self._tilings[count] = Tiled.of(self.netlist, self.tolerances, self.cache, count)
        return self._tilings[count]

    def solve(self, deviations: np.ndarray) -> list[Solved]:
        """The ordinary solver at every row (what confirms a reported point), started at nominal."""
        netlists = [self.netlist_at(row) for row in np.atleast_2d(deviations)]
        return solve_each(netlists, self.cache, [self.nominal] * len(netlists))
