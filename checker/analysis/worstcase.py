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
   point found and from nominal, with finite-difference slopes (`checker.analysis.interior`);
   all descents of a case move in step, so each round is one batch of solves.

Every reported point is confirmed by the ordinary solver, and the nominal point is
always a candidate, so a worst case is never better than nominal. A point without an
operating point is a failing outcome there, named by its corner.
"""

from __future__ import annotations

from dataclasses import replace
from typing import Sequence

import numpy as np

from checker.analysis.boxpoints import BoxPoints, Solved
from checker.analysis.interior import interior
from checker.analysis.montecarlo import unsolved
from checker.analysis.points import format_point
from checker.analysis.search import STEP, Candidate, TargetSearch, combined, noise
from checker.analysis.sensitivity import RESOLUTION, Key, SideSwing, Target, outcomes_at, side_swings
from checker.analysis.stacked import stack_point
from checker.analysis.tolerances import MAX_CORNER_PARTS, Tolerance, corner_label, toleranced
from checker.design import Design, Netlist, OperatingPoint
from checker.errors import DesignError, LimitError
from checker.findings import Outcome
from checker.limits.sides import Split
from checker.solver import Cache

DEFAULT_VERTEX_VALUES = 16
MAX_TOLERANCED_PARTS = 200  # per case, beyond the vertex bound: each corner-search round solves k + 1 points
VERTEX_CHUNK = 8192  # vertices evaluated per batch
CORNER_ROUNDS = 8  # re-linearisations per side before the corner search stops
NOMINAL = "nominal"
METHOD_ORDER = {"vertices": 0, "corner-search": 1, "interior": 2}

Drivers = tuple[tuple[str, float], ...]


def worst_case(design: Design, points: Sequence[OperatingPoint], targets: Sequence[Target],
               vertex_values: int = DEFAULT_VERTEX_VALUES) -> dict[Key, list[tuple[Outcome, Drivers]]]:
    """Per target, its worst outcome and drivers in each case it applies to, in the order of `points`:
    one per case, or one per stable state of a case with several, each searched from its own state
    (docs/analysis.md, "Several states")."""
    found: dict[Key, list] = {}
    cache = Cache()
    for point in points:
        netlist = point.netlist
        active = [t for t in targets if t.limit.applies_to(netlist.case)]
        for key, (outcome, drivers) in case_worst(netlist, point, active, toleranced(netlist), cache,
                                                  vertex_values).items():
            found.setdefault(key, []).append((replace(outcome, state=point.state), drivers))
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
    interior(box, searches)
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
            check_keys = combined(search, batch, keys)
            i = _first_lowest(check_keys)
            if check_keys[i] < best.get(id(search), (np.inf,))[0] - noise(check_keys[i]):
                best[id(search)] = (float(check_keys[i]), rows[i])
            for s in range(len(search.split.sides)):
                j = _first_lowest(keys[s])
                if keys[s, j] < search.side_low[s] - noise(keys[s, j]):
                    search.side_low[s] = keys[s, j]
                    side_best[id(search)][s] = rows[j]
    for search in searches:
        key, row = best[id(search)]
        search.best_key = key
        search.candidates.append(Candidate(row, "vertices"))
        search.candidates += [Candidate(r, "vertices") for r in side_best[id(search)] if r is not None]
        monotone = box.linear and not search.split.mixed_units and all(side.monotone for side in search.split.sides)
        bound = search.split.lower_bound(search.side_low)
        search.proved = monotone and (search.split.conjunctive or bound >= key - noise(key))


def _first_lowest(keys: np.ndarray) -> int:
    """The first index whose key is the lowest within solver noise: ties between points that differ
    only in values that do not matter go to the same point whatever the rounding."""
    lowest = float(np.min(keys))
    return int(np.flatnonzero(keys <= lowest + noise(lowest))[0])


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
        search.best_key = float(combined(search, batch, batch.side_keys(search.split)).min())


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
