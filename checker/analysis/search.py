"""What a worst-case search knows about one limit item in one case, shared by its methods.

A `TargetSearch` collects `Candidate` points (each with the method that found it) for
the confirmation step; `combined` ranks points the way the margin rules rank them.
"""

from __future__ import annotations

from dataclasses import dataclass, field

import numpy as np

from checker.analysis.boxpoints import Batch
from checker.analysis.sensitivity import RESOLUTION, Target
from checker.findings import Outcome
from checker.limits.sides import Split

STEP = 1e-3  # finite-difference step, as a share of each value's tolerance


@dataclass
class Candidate:
    """A point of the box worth confirming for one target, and the method that found it."""

    deviations: np.ndarray
    method: str


@dataclass
class TargetSearch:
    """What the search knows about one target in one case."""

    target: Target
    nominal: Outcome
    candidates: list[Candidate] = field(default_factory=list)
    side_low: np.ndarray | None = None  # each side's lowest key over all vertices
    best_key: float = np.inf  # the check's lowest key seen at a vertex or corner
    proved: bool = False
    phase: str = "vertices"  # how the box's corners were searched: "vertices" or "corner-search"
    searched_inside: bool = False  # an interior descent ran for this target

    @property
    def split(self) -> Split:
        return self.target.item.split


def combined(search: TargetSearch, batch: Batch, side_keys: np.ndarray) -> np.ndarray:
    """The check's ranking key at every point of a batch: the side formula, or where the check mixes
    units (whose rules rank by relative margin at each comparison's nearer end) the rules themselves."""
    if search.split.mixed_units:
        return batch.check_keys(search.target.item)
    return search.split.combine(side_keys)


def noise(key: float) -> float:
    return RESOLUTION * max(abs(key), 1e-300) if np.isfinite(key) else 0.0
