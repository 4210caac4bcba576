"""Worst-case analysis: each item's lowest margin over the tolerance box, per case.

Method (extreme-value analysis guided by sensitivities): from each part's Swing, put
every toleranced part at the end of its band that lowers the margin (+tol or −tol),
solve at that corner to confirm, and also at its mirror corner, because the margin
of a range check (`x in lo .. hi`) may be decided by the other end of the range.
A margin that is monotone in each value takes its extremes at corners of the box,
so for linear circuits with small tolerances the corner found is the worst one.
For nonlinear circuits monotonicity can fail; the reported margin is then the lowest
of nominal, corner and mirror, never better than nominal. Every perturbed netlist is
solved starting at the case's nominal operating point (a warm start).
"""

from __future__ import annotations

from dataclasses import replace
from typing import Sequence

import numpy as np

from checker.analysis.sensitivity import Key, Swing, Target, outcomes_at, swings
from checker.analysis.tolerances import Tolerance, corner_label, perturbed, toleranced
from checker.design import Design, Netlist, OperatingPoint
from checker.errors import DesignError
from checker.findings import Outcome
from checker.solver import Cache, solve_cases

MAX_TOLERANCED_PARTS = 200  # per case: 2 solves each, plus two corners per limit item
NOMINAL = "nominal"

Signs = tuple[int, ...]


def _bounded(design: Design, netlist: Netlist, tolerances: Sequence[Tolerance]) -> None:
    if len(tolerances) > MAX_TOLERANCED_PARTS:
        raise DesignError(f"circuit `{design.name}` has {len(tolerances)} toleranced parts in case "
                          f"`{netlist.case}`; worst-case analysis handles at most {MAX_TOLERANCED_PARTS}",
                          design.location, ("use `tolerances: monte-carlo` in nodegate.yaml for larger circuits",))


def _corner(signs: Signs, swing: Swing) -> list[tuple[str, float]]:
    """(part, deviation) of a corner, parts that move the margin most first."""
    order = np.argsort(-swing.change, kind="stable")
    return [(swing.tolerances[i].part, signs[i] * swing.tolerances[i].fraction) for i in order if signs[i]]


def _solve_corners(netlist: Netlist, tolerances: Sequence[Tolerance], wanted: set[Signs],
                   cache: Cache | None, nominal: OperatingPoint) -> dict[Signs, OperatingPoint]:
    """Operating points at every wanted corner, in one batch started at the nominal point."""
    corners = sorted(wanted)
    moved = [perturbed(netlist, {t.part: s * t.fraction for t, s in zip(tolerances, signs) if s})
             for signs in corners]
    return dict(zip(corners, solve_cases(moved, cache, [nominal] * len(moved))))


def case_worst(netlist: Netlist, point: OperatingPoint, targets: Sequence[Target], tolerances: Sequence[Tolerance],
               cache: Cache | None = None) -> dict[Key, tuple[Outcome, tuple[tuple[str, float], ...]]]:
    """Each present target's worst outcome in one case over the tolerance box, with its drivers;
    `cache` keeps the solver's per-topology work across the batches."""
    nominal = outcomes_at(targets, point)
    present = [t for t in targets if t.key in nominal]
    if not tolerances or not present:
        return {key: (outcome, ()) for key, outcome in nominal.items()}
    swing = swings(netlist, present, tolerances, cache, point)
    signs = {t.key: tuple(int(s) for s in swing[t.key].lowering_signs()) for t in present}
    wanted = {s for key in signs for s in (signs[key], tuple(-x for x in signs[key])) if any(s)}
    points = _solve_corners(netlist, tolerances, wanted, cache, point)
    result = {}
    for target in present:
        key = target.key
        best = replace(nominal[key], corner=NOMINAL)
        for corner_signs in (signs[key], tuple(-x for x in signs[key])):
            if not any(corner_signs):
                continue
            label = corner_label(_corner(corner_signs, swing[key]))
            found = outcomes_at([target], points[corner_signs], label)[key]
            if found.margin < best.margin:
                best = found
        result[key] = (best, swing[key].drivers())
    return result


def worst_case(design: Design, points: Sequence[OperatingPoint],
               targets: Sequence[Target]) -> dict[Key, list[tuple[Outcome, tuple[tuple[str, float], ...]]]]:
    """Per target, its worst outcome and drivers in each case it applies to, in case order."""
    found: dict[Key, list] = {}
    cache = Cache()
    for netlist, point in zip(design.netlists, points):
        active = [t for t in targets if t.limit.applies_to(netlist.case)]
        tolerances = toleranced(netlist)
        _bounded(design, netlist, tolerances)
        for key, pair in case_worst(netlist, point, active, tolerances, cache).items():
            found.setdefault(key, []).append(pair)
    return found
