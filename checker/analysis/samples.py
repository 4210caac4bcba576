"""One (case, state) of a Monte Carlo run at a run of samples: solved as one batch, tallied with numpy.

A linear case is solved exactly at every sample at once (`LinearBox`, with a batched
residual check of every sample); a nonlinear one by Newton-Raphson over the whole batch
(`checker.analysis.batch`). A sample either path leaves (not converged, failing its
self-check, not surely stable, or a case the batch cannot move in place) goes to the
ordinary solver (`blocks.solve_each`: full fallback, `stable_near`, the solver's message
when the board has no operating point there), and its outcomes are those of the scalar
path. Per target, the margin of every batched sample comes from the check's sides
(`checker.limits.sides`: the same min/max formula as the margin rules) in one numpy pass;
the worst sample's Outcome and any sample whose margin is exactly 0 (where `<` and `<=`
differ) are read by the compiled check itself, one point at a time, as are all samples of
a check that mixes units (ranked by relative margin).
"""

from __future__ import annotations

import math
from dataclasses import replace
from typing import Sequence

import numpy as np

from checker.analysis.batch import Tiled, start_of
from checker.analysis.blocks import solve_each
from checker.analysis.linearbox import LinearBox
from checker.analysis.montecarlo import ChunkTally, state_key, unsolved
from checker.analysis.sensitivity import Key, Target, outcomes_at
from checker.analysis.stacked import PointView, Stacked
from checker.analysis.tolerances import perturbed, toleranced
from checker.design import OperatingPoint
from checker.errors import NodegateError
from checker.findings import Outcome
from checker.solver import Cache


ALONE = 8  # samples handed to the ordinary solver together (it compares each netlist with the others)
BATCH_ENTRIES = 20_000_000  # samples x unknowns² of one batch's dense blocks (160 MB of float64)


class Work:
    """One (case, state) of a circuit with its targets and every sample's draws of its toleranced
    parts (samples, k), ready to be evaluated at any run of samples; keeps its solvers between runs
    (not pickled: a worker builds its own)."""

    def __init__(self, point: OperatingPoint, targets: Sequence[Target], draws: np.ndarray):
        self.point, self.targets, self.draws = point, tuple(targets), draws
        self.tolerances = toleranced(point.netlist)
        self.fractions = np.array([t.fraction for t in self.tolerances])
        self._state: dict = {}

    def __getstate__(self) -> dict:
        return {**self.__dict__, "_state": {}}

    def cache(self) -> Cache:
        return self._state.setdefault("cache", Cache())

    def nominal(self) -> dict[Key, Outcome]:
        if "nominal" not in self._state:
            self._state["nominal"] = outcomes_at(self.targets, self.point)
        return self._state["nominal"]

    def box(self) -> LinearBox | None:
        if "box" not in self._state:
            self._state["box"] = LinearBox.of(self.point.netlist, self.tolerances, self.cache())
        return self._state["box"]

    def tiled(self, count: int) -> Tiled | None:
        key = ("tiled", count)
        if key not in self._state:
            self._state[key] = Tiled.of(self.point.netlist, self.tolerances, self.cache(), count)
        return self._state[key]


def evaluate(work: Work, first: int, last: int) -> ChunkTally:
    """Samples first+1 .. last (1-based) of one (case, state), in batches whose dense blocks stay
    within BATCH_ENTRIES numbers."""
    size = len(work.point.nets) + len(work.point.parts)  # bounds the unknowns (nets and branches)
    per = last - first if work.box() is not None else max(1, BATCH_ENTRIES // (size * size))  # LinearBox chunks itself
    tallies = [_evaluate(work, start, min(start + per, last)) for start in range(first, last, per)]
    return tallies[0] if len(tallies) == 1 else merged(tallies)


def merged(tallies: Sequence[ChunkTally]) -> ChunkTally:
    """Consecutive runs of one (case, state) as one: the first lowest margin, the fails in order."""
    worst: dict[Key, Outcome] = {}
    for tally in tallies:
        for key, outcome in tally.worst.items():
            if key not in worst or outcome.margin < worst[key].margin:
                worst[key] = outcome
    keys = dict.fromkeys(key for tally in tallies for key in tally.fails)
    return ChunkTally(tallies[0].case, worst, {key: np.concatenate([t.fails[key] for t in tallies]) for key in keys})


def _evaluate(work: Work, first: int, last: int) -> ChunkTally:
    point, count = work.point, last - first
    nominal = work.nominal()
    corner = [f"sample {first + 1 + i}" for i in range(count)]
    if not work.tolerances:  # every board is the nominal one in this case
        worst = {key: replace(o, corner=corner[0]) for key, o in nominal.items()}
        return ChunkTally(state_key(point), worst, {key: np.full(count, not o.holds) for key, o in nominal.items()})
    deviations = work.draws[first:last] * work.fractions
    values, ok = _batch(work, deviations)
    rows = np.flatnonzero(ok)
    position = np.full(count, -1)
    position[rows] = np.arange(rows.size)
    left = np.flatnonzero(~ok)
    netlists = [perturbed(point.netlist, {t.part: float(d) for t, d in zip(work.tolerances, deviations[i])})
                for i in left]
    alone = dict(zip(left.tolist(), _alone(work, netlists)))
    read = {i: solved if isinstance(solved, str) else outcomes_at(work.targets, replace(solved, state=point.state),
                                                                   corner[i])
            for i, solved in alone.items()}  # each sample the ordinary solver solved, read once for every target
    worst: dict[Key, Outcome] = {}
    fails: dict[Key, np.ndarray] = {}
    for target in work.targets:
        key = target.key
        if key not in nominal:
            continue
        margins = np.full(count, math.inf)
        failing = np.zeros(count, bool)
        found: dict[int, Outcome | None] = {}
        if rows.size:
            batch_margins = _margins(target, values)
            if batch_margins is None:  # read every sample by the compiled check
                for i in rows:
                    found[int(i)] = _at(target, values, int(position[i]), corner[i], point.state)
            else:
                margins[rows] = batch_margins
                failing[rows] = batch_margins < 0
                for i in rows[batch_margins == 0]:
                    found[int(i)] = _at(target, values, int(position[i]), corner[i], point.state)
        for i, solved in read.items():
            if isinstance(solved, str):
                found[i] = unsolved({key: nominal[key]}, solved, corner[i])[key]
            else:
                found[i] = solved.get(key)
        for i, outcome in found.items():
            margins[i] = math.inf if outcome is None else outcome.margin
            failing[i] = outcome is not None and not outcome.holds
        fails[key] = failing
        if np.all(np.isposinf(margins)) and not found:
            continue
        i = int(np.argmin(np.where(np.isnan(margins), math.inf, margins)))
        outcome = found[i] if i in found else _at(target, values, int(position[i]), corner[i], point.state)
        if outcome is not None:
            worst[key] = outcome
    return ChunkTally(state_key(point), worst, fails)


def _alone(work: Work, netlists: list) -> list:
    """The ordinary solver at each netlist, ALONE at a time (`solve_cases` compares each netlist of a
    call with the others, to share work, which costs the square of their number when none can)."""
    found = []
    for start in range(0, len(netlists), ALONE):
        some = netlists[start:start + ALONE]
        found += solve_each(some, work.cache(), [work.point] * len(some))
    return found


def _batch(work: Work, deviations: np.ndarray) -> tuple[Stacked | None, np.ndarray]:
    """The limits' values at the samples the batch solved and checked, and which those are."""
    box = work.box()
    if box is not None:
        return box.checked(deviations)
    tiled = work.tiled(len(deviations))
    if tiled is None:
        return None, np.zeros(len(deviations), bool)
    solved = tiled.solve(deviations, start_of(tiled, work.point))
    rows = np.flatnonzero(solved.ok)
    return (tiled.stacked(solved, deviations, rows) if rows.size else None), solved.ok


def _margins(target: Target, values: Stacked) -> np.ndarray | None:
    """The check's margin at every point from its sides, or None where only the compiled check can
    rank them (mixed units) or a side cannot be read as arrays."""
    split = target.item.split
    if split.mixed_units:
        return None
    try:
        return np.asarray(split.combine(split.margins(values)), float).reshape(values.size)
    except (NodegateError, ArithmeticError, ValueError, KeyError, TypeError):
        return None


def _at(target: Target, values: Stacked, position: int, corner: str, state: str) -> Outcome | None:
    """The target's outcome at one point of a batch, by the compiled check (as at any operating point)."""
    outcome = target.item.outcome(PointView(values, position), corner)
    if outcome is None:
        return None
    return replace(outcome, state=state) if state else outcome
