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
   nonlinear circuit, an `or`), a bounded trust-region minimax descent from the worst
   point found and from nominal, with finite-difference slopes (see `_interior`); all
   descents of a case move in step, so each round is one batch of solves.

Every reported point is confirmed by the ordinary solver, and the nominal point is
always a candidate, so a worst case is never better than nominal. A point without an
operating point is a failing outcome there, named by its corner.
"""

from __future__ import annotations

from dataclasses import dataclass, field, replace
from typing import Sequence

import numpy as np
from scipy.optimize import linprog

from checker.analysis.boxpoints import BoxPoints, Solved
from checker.analysis.montecarlo import unsolved
from checker.analysis.points import format_point
from checker.analysis.sensitivity import RESOLUTION, Key, SideSwing, Target, outcomes_at, side_swings
from checker.analysis.stacked import stack_point
from checker.analysis.tolerances import MAX_CORNER_PARTS, Tolerance, corner_label, toleranced
from checker.design import Design, Netlist, OperatingPoint
from checker.errors import DesignError, LimitError
from checker.findings import Outcome
from checker.limits.sides import Node, Split
from checker.solver import Cache

DEFAULT_VERTEX_VALUES = 16
MAX_TOLERANCED_PARTS = 200  # per case, beyond the vertex bound: each corner-search round solves k + 1 points
VERTEX_CHUNK = 8192  # vertices evaluated per batch
CORNER_ROUNDS = 8  # re-linearisations per side before the corner search stops
SEARCH_ROUNDS = 40  # rounds of the interior descent
MIN_RADIUS = 1e-9  # a descent whose trust region (a share of each tolerance) falls below this has stopped
MIN_RADIUS_NONLINEAR = 1e-6  # the same where solver noise (1e-9 relative) would swamp smaller steps
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
    phase: str = "vertices"  # how the box's corners were searched: "vertices" or "corner-search"
    searched_inside: bool = False  # an interior descent ran for this target

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
        for search in searches:
            search.phase = "corner-search"
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
            combined = _combined(search, batch, keys)
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
        monotone = box.linear and not search.split.mixed_units and all(side.monotone for side in search.split.sides)
        bound = search.split.lower_bound(search.side_low)
        search.proved = monotone and (search.split.conjunctive or bound >= key - _noise(key))


def _combined(search: TargetSearch, batch, side_keys: np.ndarray) -> np.ndarray:
    """The check's ranking key at every point of a batch: the side formula, or where the check mixes
    units (whose rules rank by relative margin at each comparison's nearer end) the rules themselves."""
    if search.split.mixed_units:
        return batch.check_keys(search.target.item)
    return search.split.combine(side_keys)


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
        batch = box.evaluate(np.array([c.deviations for c in search.candidates]))
        search.best_key = float(_combined(search, batch, batch.side_keys(search.split)).min())


def _stable_corner(box: BoxPoints, split: Split, side: int, signs: np.ndarray) -> np.ndarray:
    """The corner where no single value's derivative asks to flip it (at most CORNER_ROUNDS rounds)."""
    for _ in range(CORNER_ROUNDS):
        corner = signs * box.fractions
        inward = corner - np.diag(signs * box.fractions * STEP)  # each value a step into the box
        keys = box.evaluate(np.vstack([corner, inward])).side_keys(split)[side]
        drop = keys[0] - keys[1:]  # > 0: a step inward lowers the side, so the other end is lower
        flip = np.isfinite(drop) & (drop > RESOLUTION * max(abs(keys[0]), 1e-300) * STEP)
        if not flip.any() or not np.isfinite(keys[0]):
            break
        signs = np.where(flip, -signs, signs)
    return signs * box.fractions


# --- 3. inside the box ---------------------------------------------------------------------

@dataclass
class Descent:
    """One local search on one formula of one target's sides. `u` is the point with each value
    over its tolerance (in [−1, 1]); `values` and `slopes` are the sides' keys there and their
    derivatives in u; `radius` is the trust region (a share of each tolerance)."""

    search: TargetSearch
    formula: object
    u: np.ndarray
    key: float = np.inf
    values: np.ndarray | None = None
    slopes: np.ndarray | None = None
    radius: float = 0.5


def _conjuncts(tree) -> list:
    """The parts of a formula that are minimised on their own: the children of a top-level min."""
    if isinstance(tree, Node) and tree.op == "min":
        return [part for child in tree.children for part in _conjuncts(child)]
    return [tree]


def _formula_keys(split: Split, formula, side_keys: np.ndarray) -> np.ndarray:
    return Split(split.sides, formula, split.mixed_units).combine(side_keys)


def _interior(box: BoxPoints, searches: list[TargetSearch]) -> None:
    """Trust-region descents inside the box, all in step so that every round is one batch of solves.

    Each round linearises the sides that decide the formula near the current point and takes the
    step that minimises their maximum within the trust region, a small linear programme (the
    minimax method of Madsen, Schjær-Jacobsen & Voldby, "Automated minimax design of networks",
    IEEE Trans. Circuits and Systems 22(10), 1975 — from memory): this walks along the kinks of
    `abs`, `or` and `not` where a plain gradient stalls, and down smooth peaks of a power.
    Each unproved formula starts at the worst point found so far and, budget permitting, at
    nominal; the closest targets first.
    """
    pending = sorted((s for s in searches if not s.proved), key=lambda s: s.best_key)
    jobs = [(search, formula) for search in pending
            for formula in ([search.split.tree] if search.split.mixed_units else _conjuncts(search.split.tree))]
    if not jobs:
        return
    k = len(box.tolerances)
    budget = LINEAR_SEARCH_SOLVES if box.linear else NONLINEAR_SEARCH_SOLVES
    fits = max(1, budget // ((k + 1) * (SEARCH_ROUNDS + 1)))
    starts = _worst_starts(box, jobs[:fits])
    descents = [Descent(search, formula, start / box.fractions) for (search, formula), start in zip(jobs, starts)]
    descents += [Descent(search, formula, np.zeros(k)) for search, formula in jobs[:max(0, fits - len(jobs))]]
    descents = descents[:fits]
    smallest = MIN_RADIUS if box.linear else MIN_RADIUS_NONLINEAR
    _measure(box, descents, [d.u for d in descents], smallest)
    for _ in range(SEARCH_ROUNDS):
        moving = [d for d in descents if d.radius >= smallest]
        if not moving:
            break
        steps = [_step(d) for d in moving]
        before = [(d.u, d.key, d.values, d.slopes) for d in moving]
        _measure(box, moving, [np.clip(d.u + p, -1.0, 1.0) for d, (p, _) in zip(moving, steps)], smallest)
        for d, (p, predicted), (u, key, values, slopes) in zip(moving, steps, before):
            gain = key - d.key
            if not gain > 0.0:
                d.u, d.key, d.values, d.slopes = u, key, values, slopes
                d.radius /= 4.0
            elif gain < 0.25 * predicted:
                d.radius /= 4.0
            elif gain > 0.75 * predicted and np.max(np.abs(p)) >= 0.99 * d.radius:
                d.radius = min(2.0 * d.radius, 2.0)
    for d in descents:
        d.search.candidates.append(Candidate(d.u * box.fractions, "interior"))
        d.search.searched_inside = True


def _active(formula, values: np.ndarray, reach: float) -> list[int]:
    """The sides that decide `formula` near here: the lowest child of a min, and every child of a
    max that could reach its value within `reach` (the most a side can change in the trust region)."""
    if not isinstance(formula, Node):
        return [formula]
    levels = [float(_value(child, values)) for child in formula.children]
    if formula.op == "min":
        return _active(formula.children[int(np.argmin(levels))], values, reach)
    top = max(levels)
    return sorted({s for child, level in zip(formula.children, levels) if level >= top - reach
                   for s in _active(child, values, reach)})


def _value(formula, values: np.ndarray) -> float:
    if not isinstance(formula, Node):
        return values[formula]
    levels = [_value(child, values) for child in formula.children]
    return min(levels) if formula.op == "min" else max(levels)


def _step(d: Descent) -> tuple[np.ndarray, float]:
    """The step within the trust region and the box that minimises the linearised maximum of the
    deciding sides, and the decrease of the formula that linearisation predicts."""
    reach = 2.0 * d.radius * float(np.max(np.sum(np.abs(d.slopes), axis=1)))
    active = _active(d.formula, d.values, reach)
    low = np.maximum(-1.0 - d.u, -d.radius)
    high = np.minimum(1.0 - d.u, d.radius)
    values, slopes = d.values[active], d.slopes[active]
    if len(active) == 1:  # one smooth side: each value to the end of the region that lowers it
        p = np.where(slopes[0] > 0.0, low, np.where(slopes[0] < 0.0, high, 0.0))
        return p, d.key - float(values[0] + slopes[0] @ p)
    count = low.size
    cost = np.zeros(count + 1)
    cost[-1] = 1.0  # minimise t subject to value_s + slope_s . p <= t
    result = linprog(cost, A_ub=np.column_stack([slopes, -np.ones(len(active))]), b_ub=-values,
                     bounds=list(zip(low, high)) + [(None, None)], method="highs")
    if not result.success:
        return np.zeros(count), 0.0
    return result.x[:count], d.key - float(result.x[-1])


def _worst_starts(box: BoxPoints, jobs: list) -> list[np.ndarray]:
    """For each (target, formula): the candidate found so far with the lowest key of that formula."""
    rows = [c.deviations for search, _ in jobs for c in search.candidates]
    if not rows:
        return [np.zeros(len(box.tolerances)) for _ in jobs]
    batch = box.evaluate(np.array(rows), fallback=False)
    starts, offset = [], 0
    for search, formula in jobs:
        count = len(search.candidates)
        keys = _job_keys(search, formula, batch)[offset:offset + count]
        starts.append(search.candidates[int(np.argmin(keys))].deviations if count else np.zeros(len(box.tolerances)))
        offset += count
    return starts


def _job_keys(search: TargetSearch, formula, batch, rows: slice = slice(None)) -> np.ndarray:
    """A descent's objective at the batch's points: its formula of the sides, or for a check that
    mixes units the rules' own ranking of the whole check."""
    if search.split.mixed_units:
        return _combined(search, batch, np.empty(0))[rows]
    key = _formula_keys(search.split, formula, batch.side_keys(search.split)[:, rows])
    return np.where(np.isfinite(key), key, -1e300)


def _measure(box: BoxPoints, descents: list[Descent], at: list[np.ndarray], smallest: float) -> None:
    """Keys and slopes of every descent's sides at its point `at` (in u): one batch of (k + 1) rows
    each, forward differences with a step below the trust region (but not below `smallest`)."""
    k = len(box.tolerances)
    rows, steps = [], []
    for d, u in zip(descents, at):
        h = min(STEP, max(d.radius / 8.0, smallest))
        step = np.where(u + h <= 1.0, h, -h)
        base = u * box.fractions
        rows += [base, *(base + np.diag(step * box.fractions))]
        steps.append(step)
    batch = box.evaluate(np.array(rows), fallback=False)
    for number, (d, u, step) in enumerate(zip(descents, at, steps)):
        rows = slice(number * (k + 1), (number + 1) * (k + 1))
        keys = batch.side_keys(d.search.split)[:, rows]
        keys = np.where(np.isfinite(keys), keys, -1e300)
        d.u, d.values = u, keys[:, 0]
        with np.errstate(all="ignore"):  # a trial point without a solution (key −1e300) gives a huge slope
            d.slopes = np.nan_to_num((keys[:, 1:] - keys[:, :1]) / step, nan=0.0, posinf=1e300, neginf=-1e300)
        d.key = float(_job_keys(d.search, d.formula, batch, rows)[0])


# --- confirmation by the ordinary solver ---------------------------------------------------

def _rank(outcome: Outcome, split: Split) -> tuple[float, bool]:
    """Lower is worse: the margin (relative where the check mixes units), then failing before holding."""
    if outcome.error:
        return (-np.inf, False)
    return (outcome.relative if split.mixed_units else outcome.margin, outcome.holds)


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
        try:
            outcome = _outcome_at(target, search.nominal, result)
        except LimitError as error:  # e.g. a division by zero that only this point of the box meets
            point = format_point(_point(box, candidate.deviations))
            raise LimitError(error.message, error.location,
                             error.notes + (f"at the worst-case point `--at {point}` ({candidate.method})",)) from None
        if outcome is None:
            continue
        rank = _rank(outcome, split)
        noise = RESOLUTION * (1.0 if split.mixed_units else _size(outcome))  # relative margins are already scaled
        lower = rank[0] < best_rank[0] - noise or (rank[0] == best_rank[0] and rank < best_rank)
        if lower or (best.holds and not outcome.holds):  # a failing point always wins over a holding one
            best, best_rank, origin = outcome, rank, (candidate, result)
    if origin is None:  # nominal itself is the lowest: an interior point, if the interior was searched
        method = "interior" if search.searched_inside else search.phase
        return replace(best, method=method, proved=search.proved), swing.drivers(deciding_side(search.split, box.nominal))
    candidate, result = origin
    drivers = swing.drivers(deciding_side(search.split, result))
    label = _label(box, candidate.deviations, [name for name, _ in drivers])
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


def _label(box: BoxPoints, deviations: np.ndarray, drivers: list[str]) -> str:
    """The point in a few words: the moved values that drive the deciding side, largest first, and a
    count of the rest (which move it less, or not at all); in netlist order when none drives it."""
    moved = {t.name: float(d) for t, d in zip(box.tolerances, deviations) if d != 0.0}
    leading = [(name, moved[name]) for name in drivers if name in moved][:MAX_CORNER_PARTS]
    if not leading:
        return corner_label(list(moved.items()))
    rest = len(moved) - len(leading)
    return corner_label(leading) + (f" and {rest} more" if rest > 0 else "")


def deciding_side(split: Split, result: Solved) -> int:
    """The side whose key equals the check's at this point (the first side without a point)."""
    if isinstance(result, str) or len(split.sides) == 1:
        return 0
    values = stack_point(result)
    keys = split.keys(values, split.margins(values))[:, 0]
    combined = split.combine(keys[:, None])[0]
    return int(np.argmin(np.abs(keys - combined)))
