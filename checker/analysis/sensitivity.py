"""Margins of many limit items at once, and how each tolerance moves them.

A `Target` is one item of one compiled limit (the unit a Finding reports on). The
sensitivity of a margin to a tolerance is measured by central finite differences
over the whole band: the part alone at +tol, then alone at −tol, every other part
nominal (a one-at-a-time sensitivity study; Saltelli et al., "Global Sensitivity
Analysis: The Primer", Wiley 2008, ch. 1). All the perturbed netlists of one case
go through `solve_cases` together, starting from the case's nominal point when given.
"""

from __future__ import annotations

from dataclasses import dataclass
from typing import Sequence

import numpy as np

from checker.analysis.tolerances import Tolerance, perturbed
from checker.design import Netlist, OperatingPoint
from checker.findings import Outcome
from checker.limits.compiler import CaseValues
from checker.limits.engine import CompiledItem, CompiledLimit
from checker.solver import Cache, solve_cases

MAX_DRIVERS = 5
RESOLUTION = 1e-9
"""A margin change below this share of the values compared is solver noise, not sensitivity: the
solver converges to RELTOL = 1e-9 (checker.solver.newton), so two solves from different starts
may differ by that much. Counting such changes would let rounding pick corners and drivers."""

Key = tuple[int, int]  # (index of the compiled limit in the LimitSet, index of the item)


@dataclass(frozen=True)
class Target:
    """One item of one compiled limit: what one Finding reports on."""

    key: Key
    limit: CompiledLimit
    item: CompiledItem


@dataclass(frozen=True)
class Swing:
    """A target's margin with one part alone at each end of its band (SI, arrays over the tolerances)."""

    tolerances: tuple[Tolerance, ...]
    up: np.ndarray  # margin with the part at +tol
    down: np.ndarray  # margin with the part at −tol
    noise: np.ndarray | float = 0.0  # margin changes up to this are solver noise (see RESOLUTION)

    @property
    def change(self) -> np.ndarray:
        """|margin(+tol) − margin(−tol)|: how far the part's full band moves the margin (0 within the noise)."""
        change = np.abs(self.up - self.down)
        return np.where(change > self.noise, change, 0.0)

    def lowering_signs(self) -> np.ndarray:
        """+1 where +tol gives the lower margin, −1 where −tol does, 0 where the part does not matter."""
        return np.sign(self.down - self.up) * (self.change > 0.0)

    def drivers(self, limit: int = MAX_DRIVERS) -> tuple[tuple[str, float], ...]:
        """(part, change over its band), largest first, parts that move nothing left out."""
        change = self.change
        order = sorted(range(len(change)), key=lambda i: -change[i])
        return tuple((self.tolerances[i].part, float(change[i])) for i in order[:limit] if change[i] > 0)


def outcomes_at(targets: Sequence[Target], point: OperatingPoint, corner: str = "") -> dict[Key, Outcome]:
    """Each target's outcome at one operating point; targets whose parts are absent are left out."""
    values = CaseValues(point)
    found = {}
    for target in targets:
        outcome = target.item.outcome(values, corner)
        if outcome is not None:
            found[target.key] = outcome
    return found


def margins_at(targets: Sequence[Target], points: Sequence[OperatingPoint]) -> tuple[np.ndarray, np.ndarray]:
    """Margins (SI) of every target at every point, and the larger of |value| and |bound| of each
    (the size of what the margin compares): two arrays of shape (points, targets).

    Targets must be present at every point (the points differ only in part values).
    """
    margins, sizes = np.empty((len(points), len(targets))), np.empty((len(points), len(targets)))
    for row, point in enumerate(points):
        found = outcomes_at(targets, point)
        outcomes = [found[target.key] for target in targets]
        margins[row] = [o.margin for o in outcomes]
        sizes[row] = [max(abs(o.value), abs(o.bound)) for o in outcomes]
    return margins, sizes


def swings(netlist: Netlist, targets: Sequence[Target], tolerances: Sequence[Tolerance],
           cache: Cache | None = None, nominal: OperatingPoint | None = None) -> dict[Key, Swing]:
    """Every target's Swing over every tolerance: 2 x len(tolerances) solves, in one batch, each
    started at `nominal` (the netlist's own operating point) when given."""
    tolerances = tuple(tolerances)
    moved = [perturbed(netlist, {t.part: sign * t.fraction}) for sign in (1.0, -1.0) for t in tolerances]
    margins, sizes = margins_at(targets, solve_cases(moved, cache, [nominal] * len(moved)))
    count = len(tolerances)
    noise = RESOLUTION * np.maximum(sizes[:count], sizes[count:])
    return {target.key: Swing(tolerances, margins[:count, column], margins[count:, column], noise[:, column])
            for column, target in enumerate(targets)}
