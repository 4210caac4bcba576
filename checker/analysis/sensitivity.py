"""Limit items as analysis targets, their outcomes at an operating point, and how each tolerance
moves each of their sides.

A `Target` is one item of one compiled limit (the unit a Finding reports on). The
sensitivity of a side (a one-sided comparison, `checker.limits.sides`) to a tolerance
is measured over the whole band: the value alone at +tol, then alone at −tol, every
other value nominal (a one-at-a-time sensitivity study; Saltelli et al., "Global
Sensitivity Analysis: The Primer", Wiley 2008, ch. 1). Sides, not the whole margin:
at the centre of a range or the kink of `abs` the margin has no first-order change,
while each side does. All the points of one case are solved as one batch.
"""

from __future__ import annotations

from dataclasses import dataclass, replace
from typing import Sequence

import numpy as np

from checker.analysis.boxpoints import BoxPoints
from checker.analysis.stacked import stack_point
from checker.design import OperatingPoint
from checker.findings import Outcome
from checker.limits.compiler import CaseValues
from checker.limits.engine import MIN_GROUP, CompiledItem, CompiledLimit, bulk

MAX_DRIVERS = 5
RESOLUTION = 1e-9
"""A change below this share of the values compared is solver noise, not sensitivity: Newton-Raphson
converges to a relative tolerance of 1e-9 (checker.solver.newton), so two solves from different
starts may differ by that much. Counting such changes would let rounding pick corners and drivers."""

Key = tuple[int, int]  # (index of the compiled limit in the LimitSet, index of the item)


@dataclass(frozen=True)
class Target:
    """One item of one compiled limit: what one Finding reports on."""

    key: Key
    limit: CompiledLimit
    item: CompiledItem


@dataclass(frozen=True)
class SideSwing:
    """Each side's margin with each value alone at either end of its band: arrays (sides, values)."""

    names: tuple[str, ...]  # the values (`R1`, `U1.vout`), in the box's order
    up: np.ndarray  # margin with the value at +tol
    down: np.ndarray  # margin with the value at −tol
    size: np.ndarray  # per side: max(|value|, |bound|) at nominal, what noise is measured against

    def change(self, side: int) -> np.ndarray:
        """|margin(+tol) − margin(−tol)| of one side per value; 0 within solver noise or where unsolved."""
        with np.errstate(invalid="ignore"):
            change = np.abs(self.up[side] - self.down[side])
        return np.where(np.isfinite(change) & (change > RESOLUTION * self.size[side]), change, 0.0)

    def drivers(self, side: int, limit: int = MAX_DRIVERS) -> tuple[tuple[str, float], ...]:
        """(value, change of the side over its band), largest first, values that move nothing left out."""
        change = self.change(side)
        order = np.argsort(-change, kind="stable")
        return tuple((self.names[i], float(change[i])) for i in order[:limit] if change[i] > 0)


def outcomes_at(targets: Sequence[Target], point: OperatingPoint, corner: str = "") -> dict[Key, Outcome]:
    """Each target's outcome at one operating point, labelled with its stable state; targets whose
    parts are absent are left out."""
    with bulk():
        return _outcomes_at(targets, CaseValues(point), point.state, corner)


def _outcomes_at(targets: Sequence[Target], values: CaseValues, state: str, corner: str) -> dict[Key, Outcome]:
    by_limit: dict[int, list[Target]] = {}
    for target in targets:
        by_limit.setdefault(target.key[0], []).append(target)
    found = {}
    for group in by_limit.values():
        compiled = group[0].limit
        if compiled.groups and len(group) >= MIN_GROUP:  # the items as arrays (checker.limits.vector)
            every = compiled.outcomes(values, corner, state)
            found.update((target.key, every[target.key[1]]) for target in group if every[target.key[1]] is not None)
            continue
        for target in group:
            outcome = target.item.outcome(values, corner)
            if outcome is not None:
                found[target.key] = replace(outcome, state=state) if state else outcome
    return found


def side_swings(box: BoxPoints, targets: Sequence[Target]) -> dict[Key, SideSwing]:
    """Every target's SideSwing over every toleranced value of the box: 2k points in one batch."""
    k = len(box.tolerances)
    rows = np.concatenate([np.diag(box.fractions), -np.diag(box.fractions)])
    batch = box.evaluate(rows)
    nominal = stack_point(box.nominal)
    names = tuple(t.name for t in box.tolerances)
    found = {}
    for target in targets:
        split = target.item.split
        margins = batch.side_margins(split)
        size = np.array([float(side.size(nominal)[0]) for side in split.sides])
        found[target.key] = SideSwing(names, margins[:, :k], margins[:, k:], size)
    return found
