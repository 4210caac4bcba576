"""The interior method of worst-case analysis: trust-region minimax descents inside the box.

Where a side can peak inside the tolerance box (a power, anything in a nonlinear
circuit, an `or`), no vertex holds the worst; see `interior` for the method.
"""

from __future__ import annotations

from dataclasses import dataclass

import numpy as np

from checker.analysis.boxpoints import BoxPoints
from checker.analysis.search import STEP, Candidate, TargetSearch, combined
from checker.limits.sides import Node, Split

SEARCH_ROUNDS = 40  # rounds of the interior descent
MIN_RADIUS = 1e-9  # a descent whose trust region (a share of each tolerance) falls below this has stopped
MIN_RADIUS_NONLINEAR = 1e-6  # the same where solver noise (1e-9 relative) would swamp smaller steps
LINEAR_SEARCH_SOLVES = 2_000_000  # per case: the interior search's budget of points (exact linear solves)
NONLINEAR_SEARCH_SOLVES = 5_000  # per case: the same, for Newton-Raphson solves


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


def interior(box: BoxPoints, searches: list[TargetSearch]) -> None:
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
    from scipy.optimize import linprog  # here: importing scipy.optimize costs every run a fifth of a second
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
        return combined(search, batch, np.empty(0))[rows]
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
