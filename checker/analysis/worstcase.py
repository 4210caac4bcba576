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
   nonlinear circuit, an `or`), a bounded L-BFGS-B search from the nominal point and
   the worst corner found (Byrd, Lu, Nocedal & Zhu, "A limited memory algorithm for
   bound constrained optimization", SIAM J. Sci. Comput. 16(5), 1995, as in
   scipy.optimize), with finite-difference gradients from batched solves.

Every reported point is confirmed by the ordinary solver, and the nominal point is
always a candidate, so a worst case is never better than nominal. A point without an
operating point is a failing outcome there, named by its corner.
"""

from __future__ import annotations

from dataclasses import dataclass, field, replace
from typing import Sequence

import numpy as np
from scipy.optimize import minimize

from checker.analysis.boxpoints import BoxPoints, Solved
from checker.analysis.sensitivity import MAX_DRIVERS, RESOLUTION, Key, Target, outcomes_at
from checker.analysis.stacked import stack_points
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
SEARCH_ITERATIONS = 30  # L-BFGS-B iterations per start
NONLINEAR_SEARCH_SOLVES = 3000  # per case: the interior search's budget of Newton solves
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
    swings = _swings(box, searches)
    if len(tolerances) <= vertex_values:
        _vertices(box, searches)
    else:
        _corner_search(box, searches, swings)
    _interior(box, searches)
    return {s.target.key: _confirmed(box, s, swings[s.target.key]) for s in searches}


# --- one-at-a-time swings: drivers and first corners ---------------------------------------

def _swings(box: BoxPoints, searches: list[TargetSearch]) -> dict[Key, tuple[np.ndarray, np.ndarray]]:
    """Per target, each side's margin with each value alone at +tol and at −tol: (sides, values) twice."""
    k = len(box.tolerances)
    rows = np.concatenate([np.diag(box.fractions), -np.diag(box.fractions)])
    batch = box.evaluate(rows)
    found = {}
    for search in searches:
        margins = batch.side_margins(search.split)
        found[search.target.key] = (margins[:, :k], margins[:, k:])
    return found


def side_changes(up: np.ndarray, down: np.ndarray, scale: np.ndarray) -> np.ndarray:
    """|side(+tol) − side(−tol)| per side and value, 0 within solver noise (RESOLUTION of the scale)."""
    with np.errstate(invalid="ignore"):
        change = np.abs(up - down)
    return np.where(np.isfinite(change) & (change > RESOLUTION * scale), change, 0.0)


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
            i = int(np.argmin(combined))
            if combined[i] < best.get(id(search), (np.inf,))[0]:
                best[id(search)] = (float(combined[i]), rows[i])
            lows = keys.min(axis=1)
            for s in np.flatnonzero(lows < search.side_low):
                search.side_low[s] = lows[s]
                side_best[id(search)][s] = rows[int(np.argmin(keys[s]))]
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


# --- 2. corner search past the bound -------------------------------------------------------

def _corner_search(box: BoxPoints, searches: list[TargetSearch],
                   swings: dict[Key, tuple[np.ndarray, np.ndarray]]) -> None:
    """Per side: from the swings' corner, re-linearise and flip values until the corner is stable."""
    for search in searches:
        up, down = swings[search.target.key]
        for side in range(len(search.split.sides)):
            signs = np.where(up[side] < down[side], 1.0, -1.0)
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

def _conjuncts(tree) -> list:
    """The parts of a formula that are minimised on their own: the children of a top-level min."""
    if isinstance(tree, Node) and tree.op == "min":
        return [part for child in tree.children for part in _conjuncts(child)]
    return [tree]


def _interior(box: BoxPoints, searches: list[TargetSearch]) -> None:
    """A bounded local search inside the box from nominal and the worst corner, closest targets first."""
    order = sorted((s for s in searches if not s.proved), key=lambda s: s.best_key)
    for search in order:
        if not box.linear and box.solves > NONLINEAR_SEARCH_SOLVES:
            break
        split = search.split
        for formula in _conjuncts(split.tree):
            worst = min(search.candidates, key=lambda c: _key_at(box, split, formula, c.deviations))
            for start in (np.zeros(len(box.tolerances)), worst.deviations):
                row = _descend(box, split, formula, start)
                if row is not None:
                    search.candidates.append(Candidate(row, "interior"))


def _key_at(box: BoxPoints, split: Split, formula, row: np.ndarray) -> float:
    return float(_formula_keys(split, formula, box.evaluate(row[None, :]).side_keys(split))[0])


def _formula_keys(split: Split, formula, side_keys: np.ndarray) -> np.ndarray:
    return Split(split.sides, formula, split.mixed_units).combine(side_keys)


def _descend(box: BoxPoints, split: Split, formula, start: np.ndarray) -> np.ndarray | None:
    """L-BFGS-B on one formula's key within the box, scaled so every value spans [−1, 1]."""
    fractions = box.fractions
    h = STEP

    def key_and_slope(u: np.ndarray) -> tuple[float, np.ndarray]:
        base = u * fractions
        steps = np.where(u + h <= 1.0, h, -h)
        rows = np.vstack([base, base + np.diag(steps * fractions)])
        keys = _formula_keys(split, formula, box.evaluate(rows).side_keys(split))
        if not np.all(np.isfinite(keys)):
            keys = np.where(np.isfinite(keys), keys, -1e300)
        return float(keys[0]), (keys[1:] - keys[0]) / steps

    try:
        result = minimize(key_and_slope, start / fractions, jac=True, method="L-BFGS-B",
                          bounds=[(-1.0, 1.0)] * fractions.size, options={"maxiter": SEARCH_ITERATIONS})
    except (ValueError, FloatingPointError):
        return None
    return np.clip(result.x, -1.0, 1.0) * fractions


# --- confirmation by the ordinary solver ---------------------------------------------------

def _rank(outcome: Outcome, split: Split) -> tuple[float, bool, int]:
    if outcome.error:
        return (-np.inf, False, 0)
    return (outcome.relative if split.mixed_units else outcome.margin, outcome.holds, 0)


def _confirmed(box: BoxPoints, search: TargetSearch, swing: tuple[np.ndarray, np.ndarray]) -> tuple[Outcome, Drivers]:
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
        if rank[:2] < best_rank[:2]:
            best, best_rank, origin = outcome, rank, (candidate, result)
    if origin is None:
        method = "vertices" if search.proved else "interior"
        return replace(best, method=method, proved=search.proved), _drivers(box, search, swing, box.nominal)
    candidate, result = origin
    drivers = _drivers(box, search, swing, result)
    order = [name for name, _ in drivers]
    label = corner_label(_ordered(box, candidate.deviations, order))
    proved = search.proved and candidate.method == "vertices"
    return replace(best, corner=label, method=candidate.method, proved=proved,
                   point=_point(box, candidate.deviations)), drivers


def _outcome_at(target: Target, nominal: Outcome, result: Solved) -> Outcome | None:
    if isinstance(result, str):
        return Outcome(nominal.case, float("nan"), float("nan"), -np.inf, -np.inf, nominal.unit, nominal.absolute,
                       holds=False, error=result)
    return outcomes_at([target], result).get(target.key)


def _point(box: BoxPoints, deviations: np.ndarray) -> tuple[tuple[str, float], ...]:
    return tuple((t.name, float(d)) for t, d in zip(box.tolerances, deviations))


def _ordered(box: BoxPoints, deviations: np.ndarray, order: list[str]) -> list[tuple[str, float]]:
    """(value name, deviation) of the moved values, the drivers first, the rest in netlist order."""
    rank = {name: i for i, name in enumerate(order)}
    moved = [(t.name, float(d), t.part) for t, d in zip(box.tolerances, deviations) if d != 0.0]
    moved.sort(key=lambda entry: rank.get(entry[2], len(rank)))
    return [(name, d) for name, d, _ in moved]


def _drivers(box: BoxPoints, search: TargetSearch, swing: tuple[np.ndarray, np.ndarray],
             result: Solved) -> Drivers:
    """The values that move the deciding side most over their bands (one at a time, at nominal)."""
    side = _deciding_side(search.split, result)
    up, down = swing
    size = search.split.sides[side].size(stack_points([box.nominal]))[0]
    change = side_changes(up[side], down[side], size)
    order = np.argsort(-change, kind="stable")
    return tuple((box.tolerances[i].part, float(change[i])) for i in order[:MAX_DRIVERS] if change[i] > 0)


def _deciding_side(split: Split, result: Solved) -> int:
    """The side whose key equals the check's at this point (the first side without a point)."""
    if isinstance(result, str) or len(split.sides) == 1:
        return 0
    values = stack_points([result])
    keys = split.keys(values, split.margins(values))[:, 0]
    combined = split.combine(keys[:, None])[0]
    return int(np.argmin(np.abs(keys - combined)))
