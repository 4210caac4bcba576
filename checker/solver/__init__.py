"""DC operating points by modified nodal analysis.

`solve` handles one netlist; `solve_cases` handles many and shares work between them;
`solve_states` gives every stable operating point of each (`states`, `stability`).
`solve_cases` shares:
- netlists that differ only in source values (same parts, part values and ambient;
  see `sharing`) share one assembled system: one set of devices, one diagnosis and,
  when linear, one sparse LU factorisation solved for all their right-hand sides;
  when nonlinear, Newton-Raphson runs per netlist on the shared devices;
- netlists with the same parts' kinds and pins (a topology) share the numbering of
  nets, the kind groups, passed diagnoses and Jacobian sparsity patterns (see
  `topology`); pass one `Cache` to many calls (as Monte Carlo does) to keep these;
- a nonlinear netlist given a guess (an operating point of a netlist like it, such
  as the nominal point of a tolerance perturbation) starts Newton-Raphson there, and
  falls back to the usual first guess and continuation when that does not converge
  (a warm start, see `newton` and `results.warm_start`).
Every circuit is diagnosed from its graph before factorising (see `diagnosis`).
"""

from __future__ import annotations

import warnings
from contextlib import contextmanager
from dataclasses import dataclass, replace
from typing import Iterator, Sequence

import numpy as np

from checker.design import Netlist, OperatingPoint
from checker.errors import NoSolutionError
from checker.solver.assembly import System, assemble, with_sources
from checker.solver.diagnosis import diagnose
from checker.solver.linear import Factor
from checker.solver.newton import check_models, newton
from checker.solver.results import operating_point, warm_start
from checker.solver.sharing import Group, signature
from checker.solver.newton import Equations
from checker.solver.states import Point, Search, may_have_several, search, seeded, settled
from checker.solver.topology import Cache
from checker.units import format_value


def solve(netlist: Netlist, cache: Cache | None = None) -> OperatingPoint:
    """The operating point of one netlist; NoSolutionError or DesignError when there is none."""
    return solve_cases([netlist], cache)[0]


def solve_cases(netlists: Sequence[Netlist], cache: Cache | None = None,
                guesses: Sequence[OperatingPoint | None] | None = None, fallback: bool = True) -> list[OperatingPoint]:
    """Operating points in the order given (results as if each netlist were solved alone).

    Every netlist is assembled and diagnosed, in order, before any is solved, so input
    errors come first. `cache` keeps topologies across calls; by default one per call.
    `guesses`, one per netlist (None for none), are where Newton-Raphson starts on the
    nonlinear ones; linear netlists are solved directly and ignore them. With `fallback` false,
    a netlist whose Newton-Raphson from its guess does not converge is not retried from the first
    guess with continuation: NoSolutionError at once (for a search's trial points, which the
    search confirms with the full solver before it reports them).
    """
    cache = Cache() if cache is None else cache
    guesses = [None] * len(netlists) if guesses is None else list(guesses)
    if len(guesses) != len(netlists):
        raise ValueError(f"{len(guesses)} guesses for {len(netlists)} netlists")
    groups, systems = _grouped(netlists, cache)
    points: list[OperatingPoint | None] = [None] * len(systems)
    for position, (system, guess) in enumerate(zip(systems, guesses)):
        if system.nonlinear_devices:
            start = None if guess is None else warm_start(system, guess)
            with _watched(system.netlist, strict=False):
                x, iterations, strategy = newton(system, start, fallback or guess is None)
                check_models(system, x)
            with _watched(system.netlist):
                points[position] = operating_point(system, x, iterations, strategy)
    for group in groups:
        if not group.system.nonlinear_devices:
            with _watched(group.netlist):
                factor = Factor(group.system.matrix, group.netlist, group.system.topology.orderings)
                solutions = factor.solve_cases(np.column_stack([systems[m].rhs for m in group.members]))
            for column, position in enumerate(group.members):
                with _watched(netlists[position]):
                    points[position] = operating_point(systems[position], solutions[:, column], 1, "linear")
    return points  # type: ignore[return-value]


@dataclass(frozen=True)
class CaseStates:
    """The stable operating points of one case (labelled `1 of 2`, ... when there are several; only the
    one its `starts` pick when it has them), how many distinct points and how many stable ones the
    search found, and why each unstable one was rejected."""

    points: tuple[OperatingPoint, ...]
    found: int = 1
    rejected: tuple[str, ...] = ()
    stable: int = 1


def solve_states(netlists: Sequence[Netlist], cache: Cache | None = None) -> list[CaseStates]:
    """Every stable operating point of each netlist (docs/models.md, "Stability and several states").

    Linear circuits have one point, always stable. A nonlinear one is solved as `solve_cases` does,
    then searched for more points (`states.search`), each judged stable or not (`stability`); a
    case's `starts` keep the stable state nearest them. NoSolutionError for a case whose points
    are all unstable, naming the parts of the growing mode.
    """
    cache = Cache() if cache is None else cache
    result = []
    for netlist, point in zip(netlists, solve_cases(netlists, cache)):
        if point.strategy == "linear":
            result.append(CaseStates((point,)))
            continue
        system = assemble(netlist, cache.topology(netlist))
        x = warm_start(system, point)
        seeds = [seeded(system, x, dict(netlist.starts))] if netlist.starts else []
        with _watched(netlist):
            found = search(system, x, seeds)
        result.append(_case_states(system, found, point))
    return result


def stable_near(point: OperatingPoint, guess: OperatingPoint | None, cache: Cache | None = None) -> OperatingPoint:
    """`point`, solved from `guess` (a stable state of a netlist like it: a tolerance corner or sample
    started at its case's state), when its circuit cannot have several operating points or it is
    stable; otherwise the stable point it settles to from there, the one nearest the guess. A state
    can vanish at a corner (a hysteresis band moved past the input), and Newton then may stop on the
    unstable balance point, where no board rests. NoSolutionError when no stable point is reached."""
    netlist = point.netlist
    if not may_have_several(netlist):
        return point
    system = assemble(netlist, (cache or Cache()).topology(netlist))
    x = warm_start(system, point)
    equations = Equations(system)
    with _watched(netlist):
        stability, found = settled(equations, x)
    if not found:
        raise _no_stable_point(system, Search(equations, [Point(x, stability)]))
    if found[0] is x:
        return point
    near = warm_start(system, guess or point)
    best = min(found, key=lambda y: float(np.linalg.norm(y[:system.n_nodes] - near[:system.n_nodes])))
    check_models(system, best)
    with _watched(netlist):
        _factorised_at(system, best)
        return replace(operating_point(system, best, point.iterations, "state search"), state=point.state)


def _case_states(system: System, found: Search, first: OperatingPoint) -> CaseStates:
    netlist = system.netlist
    stable = sorted(found.stable, key=lambda p: tuple(-np.round(p.x[:system.n_nodes], 6)))
    rejected = tuple(_rejection(system, p) for p in found.points if not p.stability.stable)
    if not stable:
        raise _no_stable_point(system, found)
    if netlist.starts:
        stable = [min(stable, key=lambda p: _distance(system, p.x, netlist.starts))]
    points = []
    for number, state in enumerate(stable, 1):
        check_models(system, state.x)
        label = f"{number} of {len(stable)}" if len(stable) > 1 else ""
        newton_found = state is found.points[0]
        with _watched(netlist):
            _factorised_at(system, state.x)  # the factorisation the self-check's digits-lost estimate reads
            solved = operating_point(system, state.x, first.iterations,
                                     first.strategy if newton_found else "state search")
        points.append(replace(solved, state=label))
    return CaseStates(tuple(points), len(found.points), rejected, len(found.stable))


def _factorised_at(system: System, x: np.ndarray) -> None:
    """Factorise the Jacobian at `x`, so that the operating point read next from `x` estimates its
    digits lost on its own Jacobian (`linear.latest`), not on the last one a search happened to make."""
    Factor(Equations(system).linearise(x)[1], system.netlist)


def _distance(system: System, x: np.ndarray, starts: Sequence[tuple[str, float]]) -> float:
    index = {net: k for k, net in enumerate(system.nets[1:])}
    return sum((x[index[net]] - volts) ** 2 for net, volts in starts)


def _rejection(system: System, point: Point) -> str:
    """`an unstable point (q 1.58 V, qn 1.58 V): WHY`, naming the nets that move most along its growing mode."""
    nets = _moving_nets(system, point)
    shown = ", ".join(f"{net} {format_value(point.x[k], 'V')}" for net, k in nets)
    return f"an unstable operating point ({shown}): {point.stability.reason}"


def _moving_nets(system: System, point: Point, most: int = 4) -> list[tuple[str, int]]:
    """The nets that move most along the point's growing mode (all nets when it is unknown), as (net, index)."""
    nodes = system.n_nodes
    direction = point.stability.direction
    weights = np.ones(nodes) if direction is None else np.abs(direction[:nodes])
    order = [int(k) for k in np.argsort(-weights, kind="stable")[:most] if weights[k] > 0]
    return [(system.nets[k + 1], k) for k in order]


def _no_stable_point(system: System, found: Search) -> NoSolutionError:
    """A case whose every operating point is unstable: the board oscillates or latches up in no state
    this DC model can show; the parts on the nets of the growing mode are named."""
    netlist = system.netlist
    nets = {net for point in found.points for net, _ in _moving_nets(system, point)}
    parts = [part.name for part in netlist.parts if set(part.nets) & nets]
    named = ", ".join(parts[:8]) + (f" and {len(parts) - 8} more" if len(parts) > 8 else "")
    count = len(found.points)
    message = (f"circuit `{netlist.circuit}` has no stable operating point in case `{netlist.case}`: "
               f"{'the one' if count == 1 else f'each of the {count}'} operating point{'s' if count > 1 else ''} "
               "found is unstable, so the board would oscillate or run away rather than settle")
    notes = (f"the parts involved: {named}",) + tuple(_rejection(system, p) for p in found.points[:3])
    return NoSolutionError(message, netlist.case_location, notes)


@contextmanager
def _watched(netlist: Netlist, strict: bool = True) -> Iterator[None]:
    """Floating-point overflow and invalid results met while solving `netlist`, kept off the terminal.

    numpy would print them as warnings naming nodegate's own source files, which tell a board
    designer nothing. They become located messages instead: a NoSolutionError notes them, and a
    `strict` stage (assembling the equations, a direct solve, the results) that meets one is
    itself a NoSolutionError, since its numbers would be infinite or undefined. Newton-Raphson's
    iterations are not strict: a step whose residual is not finite is halved and retried.
    """
    met: set[str] = set()
    with np.errstate(over="call", invalid="call", divide="call", under="ignore",
                     call=lambda kind, _flag: met.add(kind)), warnings.catch_warnings():
        warnings.simplefilter("ignore")  # scipy's and numpy's warnings outside the floating-point flags
        try:
            yield
        except NoSolutionError as error:
            if not met:
                raise
            raise type(error)(error.message, error.location, (*error.notes, _arithmetic_note(met))) from None
    if strict and met:
        raise NoSolutionError(f"circuit `{netlist.circuit}` cannot be solved in floating point in case "
                              f"`{netlist.case}`", netlist.case_location, (_arithmetic_note(met),))


def _arithmetic_note(met: set[str]) -> str:
    return (f"the arithmetic met {' and '.join(sorted(met))} while solving this case: "
            "a value far out of range (such as 1e300 or 1e-300) is the likely cause")


def _grouped(netlists: Sequence[Netlist], cache: Cache) -> tuple[list[Group], list[System]]:
    """Each netlist's system, assembled once per group of netlists that can share it."""
    groups: list[Group] = []
    systems: list[System] = []
    for position, netlist in enumerate(netlists):
        group = groups[-1] if groups and groups[-1].shares_parts(netlist) else None
        if group is None:
            topology = cache.topology(netlist)
            candidates = [group for group in groups if group.system.topology is topology]
            mark = signature(netlist, topology) if candidates else None
            group = next((g for g in candidates if g.admits(netlist, mark)), None)
        with _watched(netlist):
            if group is None:
                system = assemble(netlist, topology)
                diagnose(system)
                group = Group(system, _signature=mark)
                groups.append(group)
            else:
                system = with_sources(group.system, netlist)
        group.members.append(position)
        systems.append(system)
    return groups, systems


__all__ = ["CaseStates", "Cache", "solve", "solve_cases", "solve_states"]
