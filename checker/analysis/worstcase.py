"""Worst-case analysis: each item's lowest margin over the tolerance box, per case, and how it was found.

Every check is split into its one-sided comparisons (`checker.limits.sides`); each
side is driven to its own extreme, and the check's margin is recombined by the
margin rules. Three methods, in order (docs/analysis.md says what each proves):

1. **vertices**: with at most `vertex_values` toleranced values in the case, every
   vertex of the box is solved (in batches). For a linear circuit and sides that are
   affine in voltages and currents this is a proof: such a side is monotone in each
   value, so its extreme is a vertex.
2. **corner-search**: beyond that bound, per side, start at the corner the
   one-at-a-time swings point to, re-linearise there and flip every value whose
   derivative changed sign, until the corner is stable.
3. **interior**: where a side can peak inside the box (a power, anything in a
   nonlinear circuit, an `or`), a bounded projected-gradient descent (Nocedal &
   Wright, "Numerical Optimization", 2nd ed., 2006, sec. 16.7 — from memory) from
   the worst point found and from nominal, with finite-difference slopes; all
   descents of a case move in step, so each round is one batch of solves.

Every reported point is confirmed by the ordinary solver, and the nominal point is
always a candidate, so a worst case is never better than nominal. A point without an
operating point is a failing outcome there, named by its corner.
"""

from __future__ import annotations

from dataclasses import dataclass, field, replace
from typing import Sequence

import numpy as np

from checker.analysis.boxpoints import BoxPoints, Solved
from checker.analysis.montecarlo import unsolved
from checker.analysis.sensitivity import RESOLUTION, Key, SideSwing, Target, outcomes_at, side_swings
from checker.analysis.stacked import stack_point
from checker.analysis.tolerances import Tolerance, corner_label, toleranced
from checker.design import Design, Netlist, OperatingPoint
from checker.errors import DesignError
from checker.findings import Outcome
from checker.limits.sides import Node, Split
from checker.solver import Cache

DEFAULT_VERTEX_VALUES = 16
MAX_TOLERANCED_PARTS = 200  # per case, beyond the vertex bound: each corner-search round solves k + 1 points
VERTEX_CHUNK = 8192  # vertices evaluated per batch
CORNER_ROUNDS = 8  # re-linearisations per side before the corner search stops
SEARCH_ROUNDS = 25  # rounds of the interior descent
MIN_STEP = 1e-3  # a descent whose step (a share of the tolerance) falls below this has stopped
LINEAR_SEARCH_SOLVES = 2_000_000  # per case: the interior search's budget of points (exact linear solves)
NONLINEAR_SEARCH_SOLVES = 5_000  # per case: the same, for Newton-Raphson solves
STEP = 1e-3  # finite-difference step, as a share of each value's tolerance
NOMINAL = "nominal"
METHOD_ORDER = {"vertices": 0, "corner-search": 1, "interior": 2}

Drivers = tuple[tuple[str, float], ...]


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

    @property
    def split(self) -> Split:
        return self.target.item.split


def worst_case(design: Design, points: Sequence[OperatingPoint], targets: Sequence[Target],
               vertex_values: int = DEFAULT_VERTEX_VALUES) -> dict[Key, list[tuple[Outcome, Drivers]]]:
    """Per target, its worst outcome and drivers in each case it applies to, in case order."""
    found: dict[Key, list] = {}
    cache = Cache()
    for netlist, point in zip(design.netlists, points):
        active = [t for t in targets if t.limit.applies_to(netlist.case)]
        for key, pair in case_worst(netlist, point, active, toleranced(netlist), cache, vertex_values).items():
            found.setdefault(key, []).append(pair)
    return found


def case_worst(netlist: Netlist, point: OperatingPoint, targets: Sequence[Target], tolerances: Sequence[Tolerance],
               cache: Cache | None = None, vertex_values: int = DEFAULT_VERTEX_VALUES
               ) -> dict[Key, tuple[Outcome, Drivers]]:
    """Each present target's worst outcome in one case over the tolerance box, with its drivers."""
    nominal = outcomes_at(targets, point)
    present = [t for t in targets if t.key in nominal]
    tolerances = tuple(tolerances)
    if not tolerances or not present:  # the box is one point: nominal is the worst, exactly
        return {key: (replace(o, corner=NOMINAL, method="vertices", proved=True), ()) for key, o in nominal.items()}
    if len(tolerances) > max(vertex_values, MAX_TOLERANCED_PARTS):
        raise DesignError(f"circuit `{netlist.circuit}` has {len(tolerances)} toleranced values in case "
                          f"`{netlist.case}`; worst-case analysis handles at most {MAX_TOLERANCED_PARTS}",
                          netlist.case_location, ("use `tolerances: monte-carlo` in nodegate.yaml for larger circuits",))
    box = BoxPoints(netlist, tolerances, point, cache or Cache())
    searches = [TargetSearch(t, nominal[t.key]) for t in present]
    swings = side_swings(box, present)
    if len(tolerances) <= vertex_values:
        _vertices(box, searches)
    else:
        _corner_search(box, searches, swings)
    _interior(box, searches)
    return {s.target.key: _confirmed(box, s, swings[s.target.key]) for s in searches}


# --- 1. every vertex -----------------------------------------------------------------------

def _vertex_rows(start: int, stop: int, fractions: np.ndarray) -> np.ndarray:
    index = np.arange(start, stop, dtype=np.int64)[:, None]
    bits = (index >> np.arange(fractions.size, dtype=np.int64)) & 1
    return (2.0 * bits - 1.0) * fractions


def _vertices(box: BoxPoints, searches: list[TargetSearch]) -> None:
    """Solve every vertex; keep each target's lowest vertex, each side's lowest, and prove where possible."""
    count = 1 << len(box.tolerances)
    best: dict[int, tuple[float, np.ndarray]] = {}
    for search in searches:
        search.side_low = np.full(len(search.split.sides), np.inf)
    side_best: dict[int, list] = {id(s): [None] * len(s.split.sides) for s in searches}
    for start in range(0, count, VERTEX_CHUNK):
        rows = _vertex_rows(start, min(start + VERTEX_CHUNK, count), box.fractions)
        batch = box.evaluate(rows)
        for search in searches:
            keys = batch.side_keys(search.split)
            combined = search.split.combine(keys)
            i = _first_lowest(combined)
            if combined[i] < best.get(id(search), (np.inf,))[0] - _noise(combined[i]):
                best[id(search)] = (float(combined[i]), rows[i])
            for s in range(len(search.split.sides)):
                j = _first_lowest(keys[s])
                if keys[s, j] < search.side_low[s] - _noise(keys[s, j]):
                    search.side_low[s] = keys[s, j]
                    side_best[id(search)][s] = rows[j]
    for search in searches:
        key, row = best[id(search)]
        search.best_key = key
        search.candidates.append(Candidate(row, "vertices"))
        search.candidates += [Candidate(r, "vertices") for r in side_best[id(search)] if r is not None]
        monotone = box.linear and all(side.monotone for side in search.split.sides)
        bound = search.split.lower_bound(search.side_low)
        search.proved = monotone and (search.split.conjunctive or bound >= key - _noise(key))


def _noise(key: float) -> float:
    return RESOLUTION * max(abs(key), 1e-300) if np.isfinite(key) else 0.0


def _first_lowest(keys: np.ndarray) -> int:
    """The first index whose key is the lowest within solver noise: ties between points that differ
    only in values that do not matter go to the same point whatever the rounding."""
    lowest = float(np.min(keys))
    return int(np.flatnonzero(keys <= lowest + _noise(lowest))[0])


# --- 2. corner search past the bound -------------------------------------------------------

def _corner_search(box: BoxPoints, searches: list[TargetSearch], swings: dict[Key, SideSwing]) -> None:
    """Per side: from the swings' corner, re-linearise and flip values until the corner is stable."""
    for search in searches:
        swing = swings[search.target.key]
        for side in range(len(search.split.sides)):
            signs = np.where(swing.up[side] < swing.down[side], 1.0, -1.0)
            row = _stable_corner(box, search.split, side, signs)
            search.candidates.append(Candidate(row, "corner-search"))
        keys = box.evaluate(np.array([c.deviations for c in search.candidates])).side_keys(search.split)
        search.best_key = float(search.split.combine(keys).min())


def _stable_corner(box: BoxPoints, split: Split, side: int, signs: np.ndarray) -> np.ndarray:
    """The corner where no single value's derivative asks to flip it (at most CORNER_ROUNDS rounds)."""
    for _ in range(CORNER_ROUNDS):
        corner = signs * box.fractions
        inward = corner - np.diag(signs * box.fractions * STEP)  # each value a step into the box
        keys = box.evaluate(np.vstack([corner, inward])).side_keys(split)[side]
        slope = (keys[1:] - keys[0]) * signs  # > 0: moving out along the sign raises the margin
        flip = np.isfinite(slope) & (slope > RESOLUTION * max(abs(keys[0]), 1e-300) * STEP)
        if not flip.any() or not np.isfinite(keys[0]):
            break
        signs = np.where(flip, -signs, signs)
    return signs * box.fractions


# --- 3. inside the box ---------------------------------------------------------------------

@dataclass
class Descent:
    """One local search: a formula of one target's sides, where it stands (u: each value over its
    tolerance, in [−1, 1]), the key there and its slope, and its step length."""

    search: TargetSearch
    formula: object
    u: np.ndarray
    key: float = np.inf
    slope: np.ndarray | None = None
    step: float = 0.5


def _conjuncts(tree) -> list:
    """The parts of a formula that are minimised on their own: the children of a top-level min."""
    if isinstance(tree, Node) and tree.op == "min":
        return [part for child in tree.children for part in _conjuncts(child)]
    return [tree]


def _formula_keys(split: Split, formula, side_keys: np.ndarray) -> np.ndarray:
    return Split(split.sides, formula, split.mixed_units).combine(side_keys)


def _interior(box: BoxPoints, searches: list[TargetSearch]) -> None:
    """Projected-gradient descents inside the box, all in step so that every round is one batch.

    Each formula of each unproved target starts at the worst point found so far and, budget
    permitting, at nominal; closest targets first. Slopes are forward differences.
    """
    pending = sorted((s for s in searches if not s.proved), key=lambda s: s.best_key)
    jobs = [(search, formula) for search in pending for formula in _conjuncts(search.split.tree)]
    if not jobs:
        return
    k = len(box.tolerances)
    budget = LINEAR_SEARCH_SOLVES if box.linear else NONLINEAR_SEARCH_SOLVES
    fits = max(1, budget // ((k + 1) * (SEARCH_ROUNDS + 1)))
    starts = _worst_starts(box, jobs[:fits])
    descents = [Descent(search, formula, start / box.fractions) for (search, formula), start in zip(jobs, starts)]
    descents += [Descent(search, formula, np.zeros(k)) for search, formula in jobs[:max(0, fits - len(jobs))]]
    descents = descents[:fits]
    _measure(box, descents, [d.u for d in descents])
    for _ in range(SEARCH_ROUNDS):
        for d in descents:
            if np.array_equal(_proposal(d), d.u):  # no descent direction left inside the box: a stationary point
                d.step = 0.0
        moving = [d for d in descents if d.step > MIN_STEP]
        if not moving:
            break
        proposals = [_proposal(d) for d in moving]
        before = [(d.u, d.key, d.slope) for d in moving]
        _measure(box, moving, proposals)
        for d, (u, key, slope) in zip(moving, before):
            if d.key < key:
                d.step = min(2.0 * d.step, 2.0)
            else:
                d.u, d.key, d.slope, d.step = u, key, slope, d.step / 4.0
    for d in descents:
        d.search.candidates.append(Candidate(d.u * box.fractions, "interior"))


def _proposal(d: Descent) -> np.ndarray:
    """One step down the slope (scaled so the steepest value moves `step`), projected onto the box."""
    largest = np.max(np.abs(d.slope), initial=0.0)
    if not largest > 0.0:
        return d.u
    return np.clip(d.u - d.step * d.slope / largest, -1.0, 1.0)


def _worst_starts(box: BoxPoints, jobs: list) -> list[np.ndarray]:
    """For each (target, formula): the candidate found so far with the lowest key of that formula."""
    rows = [c.deviations for search, _ in jobs for c in search.candidates]
    if not rows:
        return [np.zeros(len(box.tolerances)) for _ in jobs]
    batch = box.evaluate(np.array(rows))
    starts, offset = [], 0
    for search, formula in jobs:
        count = len(search.candidates)
        keys = _formula_keys(search.split, formula, batch.side_keys(search.split))[offset:offset + count]
        starts.append(search.candidates[int(np.argmin(keys))].deviations if count else np.zeros(len(box.tolerances)))
        offset += count
    return starts


def _measure(box: BoxPoints, descents: list[Descent], at: list[np.ndarray]) -> None:
    """Key and slope of every descent at its point `at` (in u), in one batch of (k + 1) rows each."""
    k = len(box.tolerances)
    rows = []
    for u in at:
        steps = np.where(u + STEP <= 1.0, STEP, -STEP)
        base = u * box.fractions
        rows += [base, *(base + np.diag(steps * box.fractions))]
    batch = box.evaluate(np.array(rows))
    for number, (d, u) in enumerate(zip(descents, at)):
        keys = _formula_keys(d.search.split, d.formula, batch.side_keys(d.search.split))
        keys = keys[number * (k + 1):(number + 1) * (k + 1)]
        keys = np.where(np.isfinite(keys), keys, -1e300)
        steps = np.where(u + STEP <= 1.0, STEP, -STEP)
        d.u, d.key, d.slope = u, float(keys[0]), (keys[1:] - keys[0]) / steps


# --- confirmation by the ordinary solver ---------------------------------------------------

def _rank(outcome: Outcome, split: Split) -> tuple[float, bool, int]:
    if outcome.error:
        return (-np.inf, False, 0)
    return (outcome.relative if split.mixed_units else outcome.margin, outcome.holds, 0)


def _confirmed(box: BoxPoints, search: TargetSearch, swing: SideSwing) -> tuple[Outcome, Drivers]:
    """The lowest margin among the candidates, each solved again by the ordinary solver; nominal included."""
    unique: dict[bytes, Candidate] = {}
    for candidate in sorted(search.candidates, key=lambda c: METHOD_ORDER[c.method]):
        unique.setdefault(np.round(candidate.deviations, 15).tobytes(), candidate)
    candidates = list(unique.values())
    solved = box.solve(np.array([c.deviations for c in candidates]))
    target, split = search.target, search.split
    best = replace(search.nominal, corner=NOMINAL, point=_point(box, np.zeros(len(box.tolerances))))
    best_rank, origin = _rank(best, split), None
    for candidate, result in zip(candidates, solved):
        outcome = _outcome_at(target, search.nominal, result)
        if outcome is None:
            continue
        rank = _rank(outcome, split)
        if rank[0] < best_rank[0] - RESOLUTION * _size(outcome) or (rank[:2] < best_rank[:2] and rank[0] == best_rank[0]):
            best, best_rank, origin = outcome, rank, (candidate, result)
    if origin is None:
        method = "vertices" if search.proved else "interior"
        return replace(best, method=method, proved=search.proved), swing.drivers(deciding_side(search.split, box.nominal))
    candidate, result = origin
    drivers = swing.drivers(deciding_side(search.split, result))
    order = [name for name, _ in drivers]
    label = corner_label(_ordered(box, candidate.deviations, order))
    proved = search.proved and candidate.method == "vertices"
    return replace(best, corner=label, method=candidate.method, proved=proved,
                   point=_point(box, candidate.deviations)), drivers


def _size(outcome: Outcome) -> float:
    """What a margin's solver noise is measured against: the larger of the compared values."""
    size = max(abs(outcome.value), abs(outcome.bound))
    return size if np.isfinite(size) else 0.0


def _outcome_at(target: Target, nominal: Outcome, result: Solved) -> Outcome | None:
    if isinstance(result, str):
        return unsolved({target.key: nominal}, result, "")[target.key]
    return outcomes_at([target], result).get(target.key)


def _point(box: BoxPoints, deviations: np.ndarray) -> tuple[tuple[str, float], ...]:
    return tuple((t.name, float(d)) for t, d in zip(box.tolerances, deviations))


def _ordered(box: BoxPoints, deviations: np.ndarray, order: list[str]) -> list[tuple[str, float]]:
    """(value name, deviation) of the moved values, the drivers first, the rest in netlist order."""
    rank = {name: i for i, name in enumerate(order)}
    moved = [(t.name, float(d)) for t, d in zip(box.tolerances, deviations) if d != 0.0]
    moved.sort(key=lambda entry: rank.get(entry[0], len(rank)))
    return moved


def deciding_side(split: Split, result: Solved) -> int:
    """The side whose key equals the check's at this point (the first side without a point)."""
    if isinstance(result, str) or len(split.sides) == 1:
        return 0
    values = stack_point(result)
    keys = split.keys(values, split.margins(values))[:, 0]
    combined = split.combine(keys[:, None])[0]
    return int(np.argmin(np.abs(keys - combined)))
