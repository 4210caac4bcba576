"""Margins of many limit items at once, and how each tolerance moves them.

A `Target` is one item of one compiled limit (the unit a Finding reports on). The
sensitivity of a margin to a tolerance is measured by central finite differences
over the whole band: the part alone at +tol, then alone at −tol, every other part
nominal (a one-at-a-time sensitivity study; Saltelli et al., "Global Sensitivity
Analysis: The Primer", Wiley 2008, ch. 1). All the perturbed netlists of one case
go through `solve_cases` together.
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

    @property
    def change(self) -> np.ndarray:
        """|margin(+tol) − margin(−tol)|: how far the part's full band moves the margin."""
        return np.abs(self.up - self.down)

    def lowering_signs(self) -> np.ndarray:
        """+1 where +tol gives the lower margin, −1 where −tol does, 0 where the part does not matter."""
        return np.sign(self.down - self.up)

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


def margins_at(targets: Sequence[Target], points: Sequence[OperatingPoint]) -> np.ndarray:
    """Margins (SI) of every target at every point: shape (points, targets).

    Targets must be present at every point (the points differ only in part values).
    """
    margins = np.empty((len(points), len(targets)))
    for row, point in enumerate(points):
        outcomes = outcomes_at(targets, point)
        margins[row] = [outcomes[target.key].margin for target in targets]
    return margins


def swings(netlist: Netlist, targets: Sequence[Target], tolerances: Sequence[Tolerance],
           cache: Cache | None = None) -> dict[Key, Swing]:
    """Every target's Swing over every tolerance: 2 x len(tolerances) solves, in one batch."""
    tolerances = tuple(tolerances)
    moved = [perturbed(netlist, {t.part: sign * t.fraction}) for sign in (1.0, -1.0) for t in tolerances]
    margins = margins_at(targets, solve_cases(moved, cache))
    count = len(tolerances)
    return {target.key: Swing(tolerances, margins[:count, column], margins[count:, column])
            for column, target in enumerate(targets)}
