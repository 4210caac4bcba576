"""Solve every circuit and evaluate every limit under the configured tolerance analysis.

`analyse` is the evaluation step of a check run for all three modes of docs/analysis.md:
nominal, worst-case and Monte Carlo. It returns the same
Findings the reports render, with each outcome's corner, each finding's drivers and,
for Monte Carlo, its failure fraction. Operating points kept for the reports are
always the nominal ones: every stable state of each case (`checker.solver.solve_states`),
and every limit is evaluated in each state.
"""

from __future__ import annotations

import contextlib
import datetime
from dataclasses import dataclass
from typing import Callable, Iterator, Sequence

from checker.analysis.montecarlo import monte_carlo, outcomes_in_order, state_key
from checker.analysis.boxpoints import BoxPoints
from checker.analysis.sensitivity import Key, Target, outcomes_at, side_swings
from checker.analysis.tolerances import toleranced
from checker.analysis.worstcase import DEFAULT_VERTEX_VALUES, MAX_TOLERANCED_PARTS, deciding_side, worst_case
from checker.design import Design, OperatingPoint
from checker.errors import NodegateError
from checker.findings import Analysis, CircuitResult, Finding, Findings, Outcome
from checker.limits.engine import LimitSet, names_used
from checker.lints import lint_circuit
from checker.limits.waivers import apply_waivers
from checker.solver import Cache, solve_states

Drivers = tuple[tuple[str, float], ...]


@dataclass(frozen=True)
class Result:
    """What one target found: its outcome per case, drivers and (Monte Carlo) failure fraction."""

    outcomes: tuple[Outcome, ...]
    drivers: Drivers = ()
    fail_fraction: float | None = None


@contextlib.contextmanager
def located_at(design: Design) -> Iterator[None]:
    """Give an error from solving `design` that carries no location (the `default` case of a file
    without cases has none) the place of the circuit's name, so it still prints `path:line:col`."""
    try:
        yield
    except NodegateError as error:
        if error.location is not None or design.location is None:
            raise
        raise type(error)(error.message, design.location, error.notes) from None


def targets_of(limit_set: LimitSet, circuit: str) -> list[Target]:
    """Every item of every limit compiled for `circuit`."""
    return [Target((index, number), compiled, item)
            for index, compiled in enumerate(limit_set.limits) if compiled.circuit == circuit
            for number, item in enumerate(compiled.items)]


def _nominal(points: Sequence[OperatingPoint], targets: Sequence[Target]) -> dict[Key, Result]:
    found: dict[Key, list[Outcome]] = {}
    for point in points:
        active = [t for t in targets if t.limit.applies_to(point.case)]
        for key, outcome in outcomes_at(active, point).items():
            found.setdefault(key, []).append(outcome)
    return {key: Result(tuple(outcomes)) for key, outcomes in found.items()}


def _worst_case(design: Design, points: Sequence[OperatingPoint], targets: Sequence[Target],
                analysis: Analysis) -> dict[Key, Result]:
    results = {}
    vertex_values = DEFAULT_VERTEX_VALUES if analysis.vertex_values is None else analysis.vertex_values
    for key, pairs in worst_case(design, points, targets, vertex_values).items():
        worst = min(pairs, key=lambda pair: pair[0].margin)
        results[key] = Result(tuple(outcome for outcome, _ in pairs), worst[1])
    return results


def _local_drivers(points: Sequence[OperatingPoint], targets: Sequence[Target],
                   worst_case_of: dict[Key, tuple[str, str]]) -> dict[Key, Drivers]:
    """Drivers at the nominal point of each target's worst case (and state): the side deciding there
    (one batch per case)."""
    drivers: dict[Key, Drivers] = {}
    cache = Cache()
    for point in points:
        netlist = point.netlist
        group = [t for t in targets if worst_case_of.get(t.key) == state_key(point)]
        tolerances = toleranced(netlist)
        if group and tolerances and len(tolerances) <= MAX_TOLERANCED_PARTS:
            box = BoxPoints(netlist, tolerances, point, cache)
            for key, swing in side_swings(box, group).items():
                target = next(t for t in group if t.key == key)
                drivers[key] = swing.drivers(deciding_side(target.item.split, point))
    return drivers


def _monte_carlo(design: Design, points: Sequence[OperatingPoint], targets: Sequence[Target],
                 analysis: Analysis, report: Callable[[str], None]) -> dict[Key, Result]:
    tally, drawn = monte_carlo(design, points, targets, analysis.samples or 1, analysis.seed or 0, report,
                               analysis.scheduler)
    order = [state_key(point) for point in points]
    outcomes = {key: outcomes_in_order(tally, key, order) for key in tally.worst}
    worst_case_of = {}
    for key, found in outcomes.items():
        worst = min(found, key=lambda o: o.margin)
        worst_case_of[key] = (worst.case, worst.state)
    drivers = _local_drivers(points, targets, worst_case_of)
    return {key: Result(tuple(found), drivers.get(key, ()), tally.failed.get(key, 0) / drawn)
            for key, found in outcomes.items()}


def _findings(limit_set: LimitSet, results: dict[Key, Result]) -> list[Finding]:
    """One Finding per target with outcomes, in the order of the limit set (as the engine does)."""
    findings = []
    for index, compiled in enumerate(limit_set.limits):
        for number, item in enumerate(compiled.items):
            result = results.get((index, number))
            if result is not None and result.outcomes:
                findings.append(Finding(compiled.limit, compiled.circuit, item.part, result.outcomes, "pass",
                                        item_location=item.location, drivers=result.drivers,
                                        fail_fraction=result.fail_fraction))
    return findings


def analyse(limit_set: LimitSet, designs: Sequence[Design], today: datetime.date,
            analysis: Analysis = Analysis(), progress: Callable[[str], None] | None = None) -> Findings:
    """Solve every design, evaluate every compiled limit under `analysis`, lint every design
    (`checker.lints`, on the nominal operating points), apply waivers."""
    report = progress or (lambda message: None)
    circuits, results, lints = [], {}, []
    for design in designs:
        report(f"solving {design.name}: {len(design.netlists)} case(s), {len(design.parts)} part(s)")
        with located_at(design):
            points = tuple(point for states in solve_states(design.netlists) for point in states.points)
            circuits.append(CircuitResult(design.name, design.title, design.path, points))
            targets = targets_of(limit_set, design.name)
            if analysis.mode == "worst-case":
                report(f"{design.name}: worst-case corners")
                results.update(_worst_case(design, points, targets, analysis))
            elif analysis.mode == "monte-carlo":
                results.update(_monte_carlo(design, points, targets, analysis, report))
            else:
                results.update(_nominal(points, targets))
            lints.extend(lint_circuit(design, points, names_used(limit_set, design.name)))
    report(f"evaluated {len(limit_set.limits)} limit(s)")
    findings, notes = apply_waivers(_findings(limit_set, results) + lints, limit_set.waivers, today)
    return Findings(findings=findings, circuits=tuple(circuits), waiver_notes=notes, analysis=analysis)
